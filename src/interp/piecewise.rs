//! An in-between surface computed only where it is asked for.
//!
//! A frame draws a few cells per output pixel (the renderer's level of detail), but its figures,
//! the highest cell and the crest, are those of the surface at full resolution. Both sit at the top
//! of the surface. So the surface is cut into tiles; every tile gets an upper bound of its values
//! from the two surveys' block maxima (for the morph, over the area the field can move a sample
//! from); and tiles are computed from the highest bound down, until no bound left can beat the best
//! value found (branch and bound; common practice, no source). The answer is the one a scan of the
//! whole surface gives; on a dune field only a few tiles near the top are ever computed.
//!
//! A bound only has to be at least every value: where the data make it loose (a flat plain, say)
//! more tiles are computed, up to the whole grid, and the answer is still the same.

use std::ops::Range;

use ndarray::{ArrayRef2, ArrayView2};
use rayon::prelude::*;

use super::flow::FlowField;
use super::{linear, morph};

/// A surface that can be computed over any window, with an upper bound of its values there.
pub trait Piecewise: Sync {
    /// (rows, cols) of the full grid.
    fn dim(&self) -> (usize, usize);
    /// The values of `rows` × `cols` into `out`, row-major (NaN = nodata).
    fn fill(&self, rows: Range<usize>, cols: Range<usize>, out: &mut [f32]);
    /// A number at least as high as every finite value in `rows` × `cols`; −∞ when none can be
    /// finite.
    fn upper_bound(&self, rows: Range<usize>, cols: Range<usize>) -> f64;
}

/// Cells along each side of the blocks whose maxima bound a survey.
const MAX_BLOCK: usize = 16;

/// The highest finite value of every 16 × 16 block of a grid (−∞ for a block without data).
#[derive(Debug, Clone)]
pub struct BlockMax {
    dim: (usize, usize),
    cols: usize,
    max: Vec<f32>,
}

impl BlockMax {
    /// The block maxima of `z`.
    pub fn new(z: &ArrayRef2<f32>) -> BlockMax {
        let dim = z.dim();
        let (brows, bcols) = (dim.0.div_ceil(MAX_BLOCK), dim.1.div_ceil(MAX_BLOCK));
        let mut max = vec![f32::NEG_INFINITY; brows * bcols];
        max.par_chunks_mut(bcols.max(1))
            .enumerate()
            .for_each(|(br, out)| {
                for r in br * MAX_BLOCK..((br + 1) * MAX_BLOCK).min(dim.0) {
                    let row = z.row(r);
                    for (c, &v) in row.iter().enumerate() {
                        let m = &mut out[c / MAX_BLOCK];
                        if v.is_finite() && v > *m {
                            *m = v;
                        }
                    }
                }
            });
        BlockMax {
            dim,
            cols: bcols,
            max,
        }
    }

    /// The highest finite value in the blocks that `rows` × `cols` touches (≥ the window's own
    /// highest value); −∞ when none has data or the window is empty.
    pub fn over(&self, rows: Range<usize>, cols: Range<usize>) -> f32 {
        let rows = rows.start..rows.end.min(self.dim.0);
        let cols = cols.start..cols.end.min(self.dim.1);
        if rows.is_empty() || cols.is_empty() {
            return f32::NEG_INFINITY;
        }
        let mut m = f32::NEG_INFINITY;
        for br in rows.start / MAX_BLOCK..=(rows.end - 1) / MAX_BLOCK {
            let row = &self.max[br * self.cols..(br + 1) * self.cols];
            for &v in &row[cols.start / MAX_BLOCK..=(cols.end - 1) / MAX_BLOCK] {
                m = m.max(v);
            }
        }
        m
    }
}

/// `Σ weight × bound` over the terms with weight above 0, plus room for the rounding of the f32
/// arithmetic that makes the values (a few ulps of the magnitudes involved): −∞ as soon as one
/// such term has no data, since every value then is nodata.
fn combine(terms: &[(f32, f32)]) -> f64 {
    let (mut sum, mut size) = (0.0f64, 0.0f64);
    for &(w, m) in terms {
        if w > 0.0 {
            if m == f32::NEG_INFINITY {
                return f64::NEG_INFINITY;
            }
            sum += f64::from(w) * f64::from(m);
            size += f64::from(m).abs();
        }
    }
    sum + 1e-6 * size + 1e-9
}

/// A grid as it is, piece by piece: for checking the search against a whole-grid scan, and for
/// survey frames.
pub struct Whole<'a> {
    z: ArrayView2<'a, f32>,
    max: BlockMax,
}

impl<'a> Whole<'a> {
    /// `z` with its block maxima.
    pub fn new(z: ArrayView2<'a, f32>) -> Whole<'a> {
        let max = BlockMax::new(&z);
        Whole { z, max }
    }
}

impl Piecewise for Whole<'_> {
    fn dim(&self) -> (usize, usize) {
        self.z.dim()
    }
    fn fill(&self, rows: Range<usize>, cols: Range<usize>, out: &mut [f32]) {
        let width = cols.len();
        for (o, r) in out.chunks_exact_mut(width.max(1)).zip(rows) {
            for (v, c) in o.iter_mut().zip(cols.clone()) {
                *v = self.z[[r, c]];
            }
        }
    }
    fn upper_bound(&self, rows: Range<usize>, cols: Range<usize>) -> f64 {
        combine(&[(1.0, self.max.over(rows, cols))])
    }
}

/// How far a field moves samples, per 16 × 16 block of grid cells: the least and greatest column
/// and row offsets (in cells, columns east and rows south) of its finite vectors.
#[derive(Debug, Clone)]
pub struct FieldReach {
    cols: usize,
    /// Per block: (least du, greatest du, least dv, greatest dv); NaN when no vector is finite.
    reach: Vec<[f32; 4]>,
}

impl FieldReach {
    /// The reach of `field`. A field at grid resolution is read cell by cell; one kept at blocks
    /// (`step` > 1) is read at the blocks whose values a cell's bilinear blend can take in, since
    /// the blend lies between them (the bound's margin of a cell covers the blend's rounding).
    pub fn new(field: &FlowField) -> FieldReach {
        if field.step > 1 {
            return FieldReach::from_blocks(field);
        }
        let dim = field.grid_dim;
        let inv_cell = morph::cells_per_metre(field);
        let (brows, bcols) = (dim.0.div_ceil(MAX_BLOCK), dim.1.div_ceil(MAX_BLOCK));
        let empty = [
            f32::INFINITY,
            f32::NEG_INFINITY,
            f32::INFINITY,
            f32::NEG_INFINITY,
        ];
        let mut reach = vec![empty; brows * bcols];
        let columns = field.column_weights();
        reach
            .par_chunks_mut(bcols.max(1))
            .enumerate()
            .for_each(|(br, out)| {
                let (mut east, mut north) = (Vec::new(), Vec::new());
                for r in br * MAX_BLOCK..((br + 1) * MAX_BLOCK).min(dim.0) {
                    field.row_at_with(r, &columns, &mut east, &mut north);
                    for (c, (&e, &n)) in east.iter().zip(&north).enumerate() {
                        // As the morph turns metres into cells.
                        let (du, dv) = (e * inv_cell, -n * inv_cell);
                        if du.is_finite() && dv.is_finite() {
                            let m = &mut out[c / MAX_BLOCK];
                            *m = [m[0].min(du), m[1].max(du), m[2].min(dv), m[3].max(dv)];
                        }
                    }
                }
            });
        for m in &mut reach {
            if m[0] > m[1] {
                *m = [f32::NAN; 4];
            }
        }
        FieldReach { cols: bcols, reach }
    }

    /// [`FieldReach::new`] of a field kept at blocks of `step` cells.
    fn from_blocks(field: &FlowField) -> FieldReach {
        let dim = field.grid_dim;
        let inv_cell = morph::cells_per_metre(field);
        let (brows, bcols) = (dim.0.div_ceil(MAX_BLOCK), dim.1.div_ceil(MAX_BLOCK));
        let (frows, fcols) = field.east_m.dim();
        let k = field.step as f64;
        // The field blocks a run of grid cells blends: from the block below the first cell's
        // centre to the one above the last's (as `FlowField::row_at_with` places them).
        let blocks = |first: usize, last: usize, n: usize| {
            let at = |x: usize| {
                ((x as f64 + 0.5) / k - 0.5)
                    .clamp(0.0, (n - 1) as f64)
                    .floor()
            };
            at(first) as usize..=((at(last) as usize) + 1).min(n - 1)
        };
        let mut reach = vec![[f32::NAN; 4]; brows * bcols];
        if frows == 0 || fcols == 0 {
            return FieldReach { cols: bcols, reach };
        }
        reach
            .par_chunks_mut(bcols.max(1))
            .enumerate()
            .for_each(|(br, out)| {
                let r0 = br * MAX_BLOCK;
                let rs = blocks(r0, (r0 + MAX_BLOCK).min(dim.0) - 1, frows);
                for (bc, m) in out.iter_mut().enumerate() {
                    let c0 = bc * MAX_BLOCK;
                    let cs = blocks(c0, (c0 + MAX_BLOCK).min(dim.1) - 1, fcols);
                    let mut acc = [
                        f32::INFINITY,
                        f32::NEG_INFINITY,
                        f32::INFINITY,
                        f32::NEG_INFINITY,
                    ];
                    for fr in rs.clone() {
                        for fc in cs.clone() {
                            let (du, dv) = (
                                field.east_m[[fr, fc]] * inv_cell,
                                -field.north_m[[fr, fc]] * inv_cell,
                            );
                            if du.is_finite() && dv.is_finite() {
                                acc = [
                                    acc[0].min(du),
                                    acc[1].max(du),
                                    acc[2].min(dv),
                                    acc[3].max(dv),
                                ];
                            }
                        }
                    }
                    if acc[0] <= acc[1] {
                        *m = acc;
                    }
                }
            });
        FieldReach { cols: bcols, reach }
    }

    /// The reach over the blocks `rows` × `cols` touches; None when no vector there is finite.
    fn over(&self, rows: &Range<usize>, cols: &Range<usize>) -> Option<[f32; 4]> {
        let mut out: Option<[f32; 4]> = None;
        for br in rows.start / MAX_BLOCK..=(rows.end - 1) / MAX_BLOCK {
            for bc in cols.start / MAX_BLOCK..=(cols.end - 1) / MAX_BLOCK {
                let m = self.reach[br * self.cols + bc];
                if m[0].is_nan() {
                    continue;
                }
                out = Some(match out {
                    None => m,
                    Some(o) => [
                        o[0].min(m[0]),
                        o[1].max(m[1]),
                        o[2].min(m[2]),
                        o[3].max(m[3]),
                    ],
                });
            }
        }
        out
    }
}

/// How an in-between surface is made.
pub enum Between<'a> {
    /// The linear blend (`linear::blend_into`).
    Blend,
    /// The morph along `field` (`morph::morph_into`), with its reach.
    Morph {
        /// The interval's displacement field.
        field: &'a FlowField,
        /// Where it moves samples.
        reach: &'a FieldReach,
    },
}

/// The in-between surface of two surveys at fraction `w`, piece by piece: every value is the one
/// the whole-grid blend or morph gives that cell, bit for bit.
pub struct InBetween<'a> {
    /// The earlier survey.
    pub a: ArrayView2<'a, f32>,
    /// The later survey.
    pub b: ArrayView2<'a, f32>,
    /// Block maxima of `a`.
    pub max_a: &'a BlockMax,
    /// Block maxima of `b`.
    pub max_b: &'a BlockMax,
    /// Fraction from `a` (0) to `b` (1).
    pub w: f32,
    /// Blend or morph.
    pub how: Between<'a>,
}

impl Piecewise for InBetween<'_> {
    fn dim(&self) -> (usize, usize) {
        self.a.dim()
    }

    fn fill(&self, rows: Range<usize>, cols: Range<usize>, out: &mut [f32]) {
        let rs: Vec<usize> = rows.collect();
        let cs: Vec<usize> = cols.collect();
        match self.how {
            Between::Blend => linear::blend_at_into(out, &self.a, &self.b, self.w, &rs, &cs),
            Between::Morph { field, .. } => {
                morph::morph_at_into(out, &self.a, &self.b, field, self.w, &rs, &cs)
            }
        }
    }

    fn upper_bound(&self, rows: Range<usize>, cols: Range<usize>) -> f64 {
        let (nr, nc) = self.dim();
        let rows = rows.start..rows.end.min(nr);
        let cols = cols.start..cols.end.min(nc);
        if rows.is_empty() || cols.is_empty() {
            return f64::NEG_INFINITY;
        }
        let w = if self.w.is_nan() {
            0.0
        } else {
            self.w.clamp(0.0, 1.0)
        };
        let (wa, wb) = (1.0 - w, w);
        match self.how {
            // A blend cell is a mix of the two surveys at that very cell (at w = 0 or 1, one of
            // them, where the other has data).
            Between::Blend => combine(&[
                (wa, self.max_a.over(rows.clone(), cols.clone())),
                (wb, self.max_b.over(rows, cols)),
            ]),
            // The morph's ends are the surveys themselves.
            Between::Morph { .. } if w == 0.0 => combine(&[(1.0, self.max_a.over(rows, cols))]),
            Between::Morph { .. } if w == 1.0 => combine(&[(1.0, self.max_b.over(rows, cols))]),
            Between::Morph { reach, .. } => {
                let Some([du0, du1, dv0, dv1]) = reach.over(&rows, &cols) else {
                    // No finite vector: every sample is nodata.
                    return f64::NEG_INFINITY;
                };
                // A samples at (r − w·dv, c − w·du), B at (r + (1 − w)·dv, c + (1 − w)·du),
                // clamped to the grid; bilinear sampling reads the cell below and the next one.
                // One more cell each way covers the rounding of the f32 positions.
                let span = |lo: usize, hi: usize, d0: f32, d1: f32, n: usize| {
                    let a = (lo as f64 + f64::from(d0)).floor() - 1.0;
                    let b = (hi as f64 - 1.0 + f64::from(d1)).floor() + 2.0;
                    let clamp = |x: f64| x.clamp(0.0, (n - 1) as f64) as usize;
                    clamp(a)..clamp(b) + 1
                };
                let a_rows = span(rows.start, rows.end, -w * dv1, -w * dv0, nr);
                let a_cols = span(cols.start, cols.end, -w * du1, -w * du0, nc);
                let b_rows = span(rows.start, rows.end, (1.0 - w) * dv0, (1.0 - w) * dv1, nr);
                let b_cols = span(cols.start, cols.end, (1.0 - w) * du0, (1.0 - w) * du1, nc);
                combine(&[
                    (wa, self.max_a.over(a_rows, a_cols)),
                    (wb, self.max_b.over(b_rows, b_cols)),
                ])
            }
        }
    }
}

/// Cells along each side of the tiles the search computes.
pub const TILE: usize = 64;
/// Tiles computed side by side in one round of the search.
const ROUND: usize = 8;

/// The best (score, row, col) over the grid of `src`: `score(tile, values)` scores the cells of
/// one tile, computed with a margin of `halo` cells around it (clipped to the grid); the bound of
/// a tile is `src.upper_bound` over that margin, and every score must lie at or below the values
/// it reads. The highest score wins, then the first cell in row order, as in a scan of the whole
/// grid. None when no cell scores.
pub fn search<F>(src: &dyn Piecewise, halo: usize, score: F) -> Option<(f64, usize, usize)>
where
    F: Fn(&Tile, &[f32]) -> Option<(f64, usize, usize)> + Sync,
{
    let (rows, cols) = src.dim();
    let grown = |r0: usize, c0: usize| {
        (
            r0.saturating_sub(halo)..(r0 + TILE + halo).min(rows),
            c0.saturating_sub(halo)..(c0 + TILE + halo).min(cols),
        )
    };
    let mut tiles: Vec<(f64, usize, usize)> = (0..rows)
        .step_by(TILE)
        .flat_map(|r0| (0..cols).step_by(TILE).map(move |c0| (r0, c0)))
        .collect::<Vec<_>>()
        .into_par_iter()
        .map(|(r0, c0)| {
            let (rr, cc) = grown(r0, c0);
            (src.upper_bound(rr, cc), r0, c0)
        })
        .filter(|t| t.0 > f64::NEG_INFINITY)
        .collect();
    // Highest bound first; among equal bounds, row order.
    tiles.sort_by(|x, y| y.0.total_cmp(&x.0).then((x.1, x.2).cmp(&(y.1, y.2))));
    let better = |x: &(f64, usize, usize), y: &Option<(f64, usize, usize)>| match y {
        None => true,
        Some(y) => x.0 > y.0 || (x.0 == y.0 && (x.1, x.2) < (y.1, y.2)),
    };
    let mut best: Option<(f64, usize, usize)> = None;
    let mut next = 0;
    while next < tiles.len() {
        // A tile whose bound is below the best score cannot hold a better cell (at an equal
        // bound it may hold a tie earlier in row order).
        if best.is_some_and(|b| tiles[next].0 < b.0) {
            break;
        }
        let round = &tiles[next..(next + ROUND).min(tiles.len())];
        next += round.len();
        let found: Vec<Option<(f64, usize, usize)>> = round
            .par_iter()
            .map(|&(_, r0, c0)| {
                let (rr, cc) = grown(r0, c0);
                let tile = Tile {
                    rows: r0..(r0 + TILE).min(rows),
                    cols: c0..(c0 + TILE).min(cols),
                    grown_rows: rr.clone(),
                    grown_cols: cc.clone(),
                    grid: (rows, cols),
                };
                let mut values = vec![0.0f32; rr.len() * cc.len()];
                src.fill(rr, cc, &mut values);
                score(&tile, &values)
            })
            .collect();
        for f in found.into_iter().flatten() {
            if better(&f, &best) {
                best = Some(f);
            }
        }
    }
    best
}

/// One tile of [`search`]: the cells it scores and the grown window whose values it is given.
#[derive(Debug, Clone)]
pub struct Tile {
    /// Rows scored.
    pub rows: Range<usize>,
    /// Columns scored.
    pub cols: Range<usize>,
    /// Rows of the values given (the tile and its margin, clipped to the grid).
    pub grown_rows: Range<usize>,
    /// Columns of the values given.
    pub grown_cols: Range<usize>,
    /// (rows, cols) of the whole grid.
    pub grid: (usize, usize),
}

impl Tile {
    /// The given value at grid cell (r, c), which must lie in the grown window.
    #[inline]
    pub fn at(&self, values: &[f32], r: usize, c: usize) -> f32 {
        values[(r - self.grown_rows.start) * self.grown_cols.len() + (c - self.grown_cols.start)]
    }
}

/// The highest finite cell of `src`: (elevation, row, col), the first in row order on ties, as
/// `change::crest::highest_cell` finds it on the whole grid.
pub fn highest_cell(src: &dyn Piecewise) -> Option<(f32, usize, usize)> {
    search(src, 0, |tile, values| {
        let mut best: Option<(f32, usize, usize)> = None;
        for r in tile.rows.clone() {
            for c in tile.cols.clone() {
                let v = tile.at(values, r, c);
                if v.is_finite() && best.is_none_or(|(b, _, _)| v > b) {
                    best = Some((v, r, c));
                }
            }
        }
        best.map(|(v, r, c)| (f64::from(v), r, c))
    })
    .map(|(v, r, c)| (v as f32, r, c))
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    /// A bumpy surface with a few nodata cells and a flat top (ties) in one corner.
    fn bumpy(rows: usize, cols: usize, seed: u32) -> Array2<f32> {
        let mut z = Array2::from_shape_fn((rows, cols), |(r, c)| {
            let (x, y) = (c as f32 / 9.0, r as f32 / 7.0);
            let h = ((r as u32 * 7919 + c as u32 * 104_729 + seed * 31) % 1000) as f32 / 1000.0;
            4.0 * (x.sin() * y.cos()) + 0.3 * h + 0.01 * seed as f32
        });
        for i in (0..rows * cols).step_by(97) {
            z[[i / cols, i % cols]] = f32::NAN;
        }
        z
    }

    #[test]
    fn the_search_finds_the_cell_a_whole_scan_finds() {
        for (rows, cols) in [(150, 170), (64, 64), (5, 300), (200, 90)] {
            let a = bumpy(rows, cols, 1);
            let b = bumpy(rows, cols, 2).mapv(|v| v * 0.9 + 0.5);
            let (ma, mb) = (BlockMax::new(&a), BlockMax::new(&b));
            let field = FlowField::full(
                Array2::from_shape_fn((rows, cols), |(r, c)| {
                    3.0 + 0.02 * c as f32 - 0.01 * r as f32
                }),
                Array2::from_shape_fn((rows, cols), |(r, _)| -2.0 + 0.03 * r as f32),
                Array2::ones((rows, cols)),
                0.5,
            );
            let reach = FieldReach::new(&field);
            // The same field kept at blocks of 4 cells, as large grids keep it.
            let (fr, fc) = (rows.div_ceil(4), cols.div_ceil(4));
            let blocky = FlowField {
                east_m: Array2::from_shape_fn((fr, fc), |(r, c)| {
                    3.0 + 0.08 * c as f32 - 0.04 * r as f32
                }),
                north_m: Array2::from_shape_fn((fr, fc), |(r, _)| -2.0 + 0.12 * r as f32),
                quality: Array2::ones((fr, fc)),
                cell_size_m: 0.5,
                step: 4,
                grid_dim: (rows, cols),
            };
            let blocky_reach = FieldReach::new(&blocky);
            // Check: the whole-grid scan — the branch-and-bound search gives the same cell and
            // value (common practice, no source).
            let whole = Whole::new(a.view());
            assert_eq!(highest_cell(&whole), crate::change::crest::highest_cell(&a));
            for w in [0.0, 0.27, 0.5, 0.93, 1.0] {
                for how in [
                    Between::Blend,
                    Between::Morph {
                        field: &field,
                        reach: &reach,
                    },
                    Between::Morph {
                        field: &blocky,
                        reach: &blocky_reach,
                    },
                ] {
                    let morphing = matches!(how, Between::Morph { .. });
                    let field = match how {
                        Between::Morph { field, .. } => field,
                        Between::Blend => &field,
                    };
                    let src = InBetween {
                        a: a.view(),
                        b: b.view(),
                        max_a: &ma,
                        max_b: &mb,
                        w,
                        how,
                    };
                    let mut z = Array2::zeros((rows, cols));
                    if morphing {
                        morph::morph_into(&mut z, &a, &b, field, w);
                    } else {
                        linear::blend_into(&mut z, &a, &b, w);
                    }
                    assert_eq!(
                        highest_cell(&src),
                        crate::change::crest::highest_cell(&z),
                        "{rows}x{cols} w {w} morph {morphing}"
                    );
                    // Every bound holds.
                    for r0 in (0..rows).step_by(23) {
                        for c0 in (0..cols).step_by(29) {
                            let (rr, cc) = (r0..(r0 + 23).min(rows), c0..(c0 + 29).min(cols));
                            let ub = src.upper_bound(rr.clone(), cc.clone());
                            let top = z
                                .slice(ndarray::s![rr, cc])
                                .iter()
                                .filter(|v| v.is_finite())
                                .fold(f64::NEG_INFINITY, |m, &v| m.max(f64::from(v)));
                            assert!(ub >= top, "bound {ub} below {top}");
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn ties_go_to_the_first_cell_in_row_order() {
        // Check: common practice, no source — equal highest values in two tiles: the first in row
        // order wins, as in a scan.
        let mut z = Array2::from_elem((200, 200), 1.0f32);
        z[[150, 20]] = 5.0;
        z[[30, 190]] = 5.0;
        z[[30, 191]] = 5.0;
        let whole = Whole::new(z.view());
        assert_eq!(highest_cell(&whole), Some((5.0, 30, 190)));
        // All nodata: none.
        let z = Array2::from_elem((70, 70), f32::NAN);
        assert_eq!(highest_cell(&Whole::new(z.view())), None);
    }
}
