//! Two surveys + their displacement field + a fraction w -> the in-between surface by
//! warp-and-blend (after Beier & Neely 1992; REFERENCES.md §5):
//!
//! `Z_w(x) = (1 - w) * A(x - w*d(x)) + w * B(x + (1 - w)*d(x))`
//!
//! where `d` is the field from `interp::flow` (sand at x in A is at x + d in B). What moved, moves;
//! what grew or eroded in place fades in or out. Evaluating `d` at x rather than following it is an
//! approximation, exact for a uniform field.
//!
//! Invariants:
//! - `w = 0` returns A and `w = 1` returns B bit for bit (copied, not computed).
//! - Sampling is bilinear. Points outside the grid take the nearest edge value (the terrain is
//!   assumed to continue), so the frame's edges do not fray as the dune moves.
//! - Nodata: a cell is NaN when a sample with non-zero weight touches NaN (also at the cell of a
//!   survey whose weight is not 0), so an interpolated frame shows data only where both surveys
//!   support it.
//! - Row bands run in parallel with rayon; every cell is computed alone, so the output is the same
//!   bit for bit on any number of threads.

use ndarray::{Array2, ArrayRef2};
use rayon::prelude::*;

use super::flow::{sample_clamped, FlowField, RasterDims};

/// Bilinear sample with edge clamping; the common case (four finite neighbours) in plain
/// arithmetic, falling back to the careful sampler, which ignores NaN neighbours of zero weight,
/// only when the quick result is NaN. NaN coordinates give NaN.
#[inline(always)]
fn sample(z: &[f32], d: RasterDims, r: f32, c: f32) -> f32 {
    let rc = r.clamp(0.0, (d.rows - 1) as f32);
    let cc = c.clamp(0.0, (d.cols - 1) as f32);
    // Through i32: the coordinates are clamped to the grid already, and the 32-bit conversion is
    // a few instructions shorter than the saturating one to usize.
    let (r0, c0) = (rc as i32 as usize, cc as i32 as usize);
    let (fr, fc) = (rc - r0 as f32, cc - c0 as f32);
    let i = r0 * d.cols + c0;
    let dc = usize::from(c0 + 1 < d.cols);
    let dr = if r0 + 1 < d.rows { d.cols } else { 0 };
    let (z00, z01, z10, z11) = (z[i], z[i + dc], z[i + dr], z[i + dr + dc]);
    let top = z00 + fc * (z01 - z00);
    let bot = z10 + fc * (z11 - z10);
    let v = top + fr * (bot - top);
    if v.is_nan() {
        sample_clamped(z, d, r, c)
    } else {
        v
    }
}

/// One cell (r, c) of the warp-and-blend surface, the field there being (`e`, `n`) metres east and
/// north and `inv_cell` cells per metre. The whole-grid and the sampled morph share it, so a cell
/// has the same value bit for bit whichever computes it.
#[inline(always)]
#[allow(clippy::too_many_arguments)]
fn warp_blend(
    a: &[f32],
    b: &[f32],
    d: RasterDims,
    r: usize,
    c: usize,
    e: f32,
    n: f32,
    w: f32,
    inv_cell: f32,
) -> f32 {
    // Field in cells: columns east, rows south.
    let du = e * inv_cell;
    let dv = -n * inv_cell;
    let (rf, cf) = (r as f32, c as f32);
    let za = sample(a, d, rf - w * dv, cf - w * du);
    let zb = sample(b, d, rf + (1.0 - w) * dv, cf + (1.0 - w) * du);
    (1.0 - w) * za + w * zb
}

/// Cells one pass of [`warp_blend_row`] works on together.
const LANES: usize = 16;

/// [`warp_blend`] along row `r` at the columns `cols`, the field there being `east` and `north`,
/// into `out`: the same value bit for bit for every cell. The work is split into passes over
/// [`LANES`] cells (coordinates and fractions, the four reads of each sample, the interpolation,
/// the rare NaN fallback, the blend), so that the compiler can run the arithmetic passes on
/// vector registers; each cell still goes through the same operations in the same order.
#[allow(clippy::too_many_arguments)]
fn warp_blend_row(
    a: &[f32],
    b: &[f32],
    d: RasterDims,
    r: usize,
    cols: &[usize],
    east: &[f32],
    north: &[f32],
    w: f32,
    inv_cell: f32,
    out: &mut [f32],
) {
    let rf = r as f32;
    let (rmax, cmax) = ((d.rows - 1) as f32, (d.cols - 1) as f32);
    let mut outs = out.chunks_exact_mut(LANES);
    let mut colss = cols.chunks_exact(LANES);
    let mut easts = east.chunks_exact(LANES);
    let mut norths = north.chunks_exact(LANES);
    for (((o, c), e), n) in (&mut outs).zip(&mut colss).zip(&mut easts).zip(&mut norths) {
        let (o, c, e, n): (
            &mut [f32; LANES],
            &[usize; LANES],
            &[f32; LANES],
            &[f32; LANES],
        ) = (
            o.try_into().expect("lanes"),
            c.try_into().expect("lanes"),
            e.try_into().expect("lanes"),
            n.try_into().expect("lanes"),
        );
        // Clamped sample coordinates of A (back along the field) and B (on along it), as in
        // `warp_blend` and `sample`.
        let mut ra = [0.0f32; LANES];
        let mut ca = [0.0f32; LANES];
        let mut rb = [0.0f32; LANES];
        let mut cb = [0.0f32; LANES];
        for j in 0..LANES {
            let du = e[j] * inv_cell;
            let dv = -n[j] * inv_cell;
            let cf = c[j] as f32;
            ra[j] = (rf - w * dv).clamp(0.0, rmax);
            ca[j] = (cf - w * du).clamp(0.0, cmax);
            rb[j] = (rf + (1.0 - w) * dv).clamp(0.0, rmax);
            cb[j] = (cf + (1.0 - w) * du).clamp(0.0, cmax);
        }
        let za = bilinear_lanes(a, d, &ra, &ca);
        let zb = bilinear_lanes(b, d, &rb, &cb);
        for j in 0..LANES {
            o[j] = (1.0 - w) * za[j] + w * zb[j];
        }
    }
    let rest = outs.into_remainder();
    for (((o, &c), &e), &n) in rest
        .iter_mut()
        .zip(colss.remainder())
        .zip(easts.remainder())
        .zip(norths.remainder())
    {
        *o = warp_blend(a, b, d, r, c, e, n, w, inv_cell);
    }
}

/// [`sample`] at [`LANES`] clamped coordinates (`r`, `c`).
#[inline(always)]
fn bilinear_lanes(z: &[f32], d: RasterDims, r: &[f32; LANES], c: &[f32; LANES]) -> [f32; LANES] {
    let mut fr = [0.0f32; LANES];
    let mut fc = [0.0f32; LANES];
    let mut r0 = [0i32; LANES];
    let mut c0 = [0i32; LANES];
    for j in 0..LANES {
        r0[j] = r[j] as i32;
        c0[j] = c[j] as i32;
        fr[j] = r[j] - r0[j] as f32;
        fc[j] = c[j] - c0[j] as f32;
    }
    let mut q = [[0.0f32; LANES]; 4];
    for j in 0..LANES {
        let (r0, c0) = (r0[j] as usize, c0[j] as usize);
        let i = r0 * d.cols + c0;
        let dc = usize::from(c0 + 1 < d.cols);
        let dr = if r0 + 1 < d.rows { d.cols } else { 0 };
        q[0][j] = z[i];
        q[1][j] = z[i + dc];
        q[2][j] = z[i + dr];
        q[3][j] = z[i + dr + dc];
    }
    let mut v = [0.0f32; LANES];
    for j in 0..LANES {
        let top = q[0][j] + fc[j] * (q[1][j] - q[0][j]);
        let bot = q[2][j] + fc[j] * (q[3][j] - q[2][j]);
        v[j] = top + fr[j] * (bot - top);
    }
    for j in 0..LANES {
        if v[j].is_nan() {
            // Clamping is idempotent and keeps NaN, so the careful sampler sees what `sample`
            // would have given it.
            v[j] = sample_clamped(z, d, r[j], c[j]);
        }
    }
    v
}

/// Cells per metre of `field`, as the morph turns its vectors into cells; 0 (no warping) when its
/// cell size is unusable. The field's reach (`piecewise::FieldReach`) converts with it too.
pub(crate) fn cells_per_metre(field: &FlowField) -> f32 {
    if field.cell_size_m.is_finite() && field.cell_size_m > 0.0 {
        (1.0 / field.cell_size_m) as f32
    } else {
        0.0
    }
}

/// [`cells_per_metre`], warning when the field cannot be placed.
fn cells_per_metre_warned(field: &FlowField) -> f32 {
    let k = cells_per_metre(field);
    if k == 0.0 {
        // A field without a usable cell size cannot be placed: blend without moving anything.
        log::warn!(
            "morph: displacement field has cell size {} m; blending without warping",
            field.cell_size_m
        );
    }
    k
}

/// Rows per parallel task: 16 rows of a 1024-wide grid is 64 KiB of output, a few dozen tasks per frame.
const BAND_ROWS: usize = 16;

/// Writes the warp-and-blend surface at fraction `w` (clamped to [0, 1]) into `out`.
///
/// # Panics
/// When `out`, `a`, `b` and the field's arrays differ in shape: `align` and `flow::estimate`
/// guarantee one shape, so that would be a bug in the program, not bad input.
///
/// # Allocations
/// None when every array is in standard (row-major) layout, as those built by this crate are.
pub fn morph_into(
    out: &mut Array2<f32>,
    a: &ArrayRef2<f32>,
    b: &ArrayRef2<f32>,
    field: &FlowField,
    w: f32,
) {
    let dim = a.dim();
    assert!(
        b.dim() == dim
            && out.dim() == dim
            && field.grid_dim == dim
            && (field.step > 1 || (field.east_m.dim() == dim && field.north_m.dim() == dim)),
        "morph_into: arrays differ in shape"
    );
    let w = if w.is_nan() { 0.0 } else { w.clamp(0.0, 1.0) };
    if w == 0.0 {
        out.assign(a);
        return;
    }
    if w == 1.0 {
        out.assign(b);
        return;
    }
    let (rows, cols) = dim;
    if rows == 0 || cols == 0 {
        return;
    }
    let a = a.as_standard_layout();
    let b = b.as_standard_layout();
    let east = field.east_m.as_standard_layout();
    let north = field.north_m.as_standard_layout();
    let (a, b, east, north) = (
        a.as_slice().expect("standard layout"),
        b.as_slice().expect("standard layout"),
        east.as_slice().expect("standard layout"),
        north.as_slice().expect("standard layout"),
    );
    let inv_cell = cells_per_metre_warned(field);
    let d = RasterDims { rows, cols };
    let columns = field.column_weights();
    let all_cols: Vec<usize> = (0..cols).collect();
    let write = |dst: &mut [f32]| {
        dst.par_chunks_mut(cols * BAND_ROWS)
            .enumerate()
            .for_each(|(band, chunk)| {
                let r0 = band * BAND_ROWS;
                let (mut east_row, mut north_row) = (Vec::new(), Vec::new());
                for (k, orow) in chunk.chunks_exact_mut(cols).enumerate() {
                    let r = r0 + k;
                    let base = r * cols;
                    let (er, nr) = if field.step > 1 {
                        // A field kept at block resolution, interpolated row by row.
                        field.row_at_with(r, &columns, &mut east_row, &mut north_row);
                        (&east_row[..], &north_row[..])
                    } else {
                        (&east[base..base + cols], &north[base..base + cols])
                    };
                    warp_blend_row(a, b, d, r, &all_cols, er, nr, w, inv_cell, orow);
                }
            });
    };
    match out.as_slice_mut() {
        Some(dst) => write(dst),
        None => {
            let mut tmp = vec![0.0f32; rows * cols];
            write(&mut tmp);
            out.assign(&Array2::from_shape_vec(dim, tmp).expect("shape"));
        }
    }
}

/// The warp-and-blend surface at fraction `w` at the cells `rows` × `cols` only, into `out`
/// (row-major, `rows.len() × cols.len()`): each value is the one [`morph_into`] gives that cell,
/// bit for bit. A frame needs only the cells its level of detail reads
/// ([`crate::render::lod::SamplePlan`]), and the frame's figures only a few tiles near the top
/// (`interp::piecewise`).
///
/// # Panics
/// As [`morph_into`]; also when `out` has the wrong length or an index is outside the grid.
pub fn morph_at_into(
    out: &mut [f32],
    a: &ArrayRef2<f32>,
    b: &ArrayRef2<f32>,
    field: &FlowField,
    w: f32,
    rows: &[usize],
    cols: &[usize],
) {
    let dim = a.dim();
    assert!(
        field.grid_dim == dim
            && (field.step > 1 || (field.east_m.dim() == dim && field.north_m.dim() == dim)),
        "morph_at_into: arrays differ in shape"
    );
    let at = FieldAt::new(field, rows, cols);
    morph_at_with(out, a, b, &at, w, rows, cols);
}

/// A displacement field at the cells `rows` × `cols` (row-major, metres east and north), as
/// [`morph_at_into`] reads it: made once, it serves every frame of an interval.
#[derive(Debug, Clone)]
pub struct FieldAt {
    east: Vec<f32>,
    north: Vec<f32>,
    inv_cell: f32,
}

impl FieldAt {
    /// `field` at the cells `rows` × `cols`.
    pub fn new(field: &FlowField, rows: &[usize], cols: &[usize]) -> FieldAt {
        let n = rows.len() * cols.len();
        let (mut east, mut north) = (vec![0.0f32; n], vec![0.0f32; n]);
        let all = field.column_weights();
        let weights: Vec<(u32, u32, f32)> = if all.is_empty() {
            Vec::new()
        } else {
            cols.iter().map(|&c| all[c]).collect()
        };
        if n > 0 {
            east.par_chunks_mut(cols.len())
                .zip(north.par_chunks_mut(cols.len()))
                .zip(rows.par_iter())
                .for_each_init(
                    || (Vec::new(), Vec::new()),
                    |(e, nn), ((eo, no), &r)| {
                        field.row_at_columns(r, cols, &weights, e, nn);
                        eo.copy_from_slice(e);
                        no.copy_from_slice(nn);
                    },
                );
        }
        FieldAt {
            east,
            north,
            inv_cell: cells_per_metre_warned(field),
        }
    }
}

/// [`morph_at_into`] with the field already at the cells (`FieldAt::new` with the same `rows`
/// and `cols`); the values are the same bit for bit.
///
/// # Panics
/// When `a` and `b` differ in shape, or `out` or `field` have the wrong length.
pub fn morph_at_with(
    out: &mut [f32],
    a: &ArrayRef2<f32>,
    b: &ArrayRef2<f32>,
    field: &FieldAt,
    w: f32,
    rows: &[usize],
    cols: &[usize],
) {
    let dim = a.dim();
    let n = rows.len() * cols.len();
    assert!(
        b.dim() == dim && out.len() == n && field.east.len() == n && field.north.len() == n,
        "morph_at_with: arrays differ in shape"
    );
    let w = if w.is_nan() { 0.0 } else { w.clamp(0.0, 1.0) };
    if w == 0.0 || w == 1.0 {
        let src = if w == 0.0 { a } else { b };
        for (orow, &r) in out.chunks_exact_mut(cols.len().max(1)).zip(rows) {
            for (o, &c) in orow.iter_mut().zip(cols) {
                *o = src[[r, c]];
            }
        }
        return;
    }
    if n == 0 {
        return;
    }
    let a = a.as_standard_layout();
    let b = b.as_standard_layout();
    let (a, b) = (
        a.as_slice().expect("standard layout"),
        b.as_slice().expect("standard layout"),
    );
    let inv_cell = field.inv_cell;
    let d = RasterDims {
        rows: dim.0,
        cols: dim.1,
    };
    let nc = cols.len();
    let band = (BAND_ROWS * dim.1).div_ceil(nc).max(1);
    out.par_chunks_mut(nc * band)
        .zip(field.east.par_chunks(nc * band))
        .zip(field.north.par_chunks(nc * band))
        .zip(rows.par_chunks(band))
        .for_each(|(((chunk, east), north), band_rows)| {
            for (((orow, er), nr), &r) in chunk
                .chunks_exact_mut(nc)
                .zip(east.chunks_exact(nc))
                .zip(north.chunks_exact(nc))
                .zip(band_rows)
            {
                warp_blend_row(a, b, d, r, cols, er, nr, w, inv_cell, orow);
            }
        });
}

#[cfg(test)]
mod tests {
    use super::*;

    fn uniform_field(rows: usize, cols: usize, east_m: f32, north_m: f32, cell: f64) -> FlowField {
        FlowField::full(
            Array2::from_elem((rows, cols), east_m),
            Array2::from_elem((rows, cols), north_m),
            Array2::ones((rows, cols)),
            cell,
        )
    }

    /// Gaussian of amplitude 2 and sigma 2 cells centred at column `x0`, constant along rows.
    fn gauss_rows(rows: usize, cols: usize, x0: f32) -> Array2<f32> {
        Array2::from_shape_fn((rows, cols), |(_, c)| {
            let x = c as f32 - x0;
            2.0 * (-x * x / 8.0).exp()
        })
    }

    #[test]
    fn gaussian_check_morph_keeps_peak_linear_halves_it() {
        // Columns -20..=40 mapped to 0..=60: x=0 at column 20.
        let (rows, cols) = (3, 61);
        let a = gauss_rows(rows, cols, 20.0);
        let b = gauss_rows(rows, cols, 40.0);
        let f = uniform_field(rows, cols, 20.0, 0.0, 1.0);
        let mut out = Array2::zeros((rows, cols));
        morph_into(&mut out, &a, &b, &f, 0.5);
        // Check: Beier & Neely (1992) warp-and-blend, Gaussian A=2 sigma=2 moved 20 cells — morph at
        // w=0.5 gives one peak of 2.000 at x=10; REFERENCES.md §5, abs diff < 1e-5
        assert!((out[[1, 30]] - 2.0).abs() < 1e-5, "peak {}", out[[1, 30]]);
        let lin = |c: usize| 0.5 * a[[1, c]] + 0.5 * b[[1, c]];
        // Check: REFERENCES.md §5 — the linear blend gives 1.000 at x=0 and x=20 and 7.45e-6 at x=10;
        // analytic, abs diff < 1e-3 and relative 1e-2 for the small value
        assert!((lin(20) - 1.0).abs() < 1e-3 && (lin(40) - 1.0).abs() < 1e-3);
        assert!((lin(30) - 7.45e-6).abs() < 7.45e-8);
        // Check: REFERENCES.md §5 — both conserve volume; cell sums equal within 1e-4 relative
        let vol = |z: &ArrayRef2<f32>| z.row(1).iter().map(|&v| v as f64).sum::<f64>();
        assert!((vol(&out) - vol(&a)).abs() < 1e-4 * vol(&a));
    }

    #[test]
    fn sampled_cells_equal_the_whole_grid_bit_for_bit() {
        let (rows, cols) = (45, 38);
        let a = Array2::from_shape_fn((rows, cols), |(r, c)| {
            ((r * 31 + c * 17) % 23) as f32 * 0.37 + (r as f32 * 0.2).sin()
        });
        let mut b = Array2::from_shape_fn((rows, cols), |(r, c)| {
            ((r * 13 + c * 7) % 19) as f32 * 0.53 + (c as f32 * 0.3).cos()
        });
        b[[7, 9]] = f32::NAN;
        // A field at grid resolution and one kept at blocks of 4 cells.
        let full = FlowField::full(
            Array2::from_shape_fn((rows, cols), |(r, c)| {
                2.5 + 0.05 * c as f32 - 0.03 * r as f32
            }),
            Array2::from_shape_fn((rows, cols), |(r, _)| -1.2 + 0.04 * r as f32),
            Array2::ones((rows, cols)),
            0.5,
        );
        let blocks = FlowField {
            east_m: Array2::from_shape_fn((12, 10), |(r, c)| 1.5 + 0.2 * c as f32 - 0.1 * r as f32),
            north_m: Array2::from_shape_fn((12, 10), |(r, c)| {
                0.7 - 0.15 * r as f32 + 0.05 * c as f32
            }),
            quality: Array2::ones((12, 10)),
            cell_size_m: 0.5,
            step: 4,
            grid_dim: (rows, cols),
        };
        let rs = [0, 3, 7, 8, 20, 44];
        let cs = [1, 2, 9, 30, 37];
        for field in [&full, &blocks] {
            for w in [0.0, 0.31, 0.5, 1.0] {
                let mut whole = Array2::zeros((rows, cols));
                morph_into(&mut whole, &a, &b, field, w);
                let mut some = vec![0.0; rs.len() * cs.len()];
                morph_at_into(&mut some, &a, &b, field, w, &rs, &cs);
                // Check: common practice, no source — the same cell computed by either path has
                // the same bits.
                for (i, &r) in rs.iter().enumerate() {
                    for (j, &c) in cs.iter().enumerate() {
                        let (x, y) = (whole[[r, c]], some[i * cs.len() + j]);
                        assert!(x.to_bits() == y.to_bits(), "w {w} ({r}, {c}): {x} vs {y}");
                    }
                }
            }
        }
    }

    #[test]
    fn row_passes_equal_the_cell_by_cell_warp_bit_for_bit() {
        // Rows of 16 lanes plus a remainder; the field pushes samples past every edge, into NaN
        // cells and onto exact cell centres; one field value is NaN.
        let (rows, cols) = (23, 53);
        let mut a = Array2::from_shape_fn((rows, cols), |(r, c)| {
            ((r * 29 + c * 11) % 17) as f32 * 0.41 + (c as f32 * 0.7).sin()
        });
        let mut b = Array2::from_shape_fn((rows, cols), |(r, c)| {
            ((r * 5 + c * 19) % 13) as f32 * 0.29 - (r as f32 * 0.4).cos()
        });
        a[[0, 0]] = f32::NAN;
        a[[11, 20]] = f32::NAN;
        b[[22, 52]] = f32::NAN;
        b[[4, 30]] = f32::NAN;
        let d = RasterDims { rows, cols };
        let (a, b) = (a.as_slice().unwrap(), b.as_slice().unwrap());
        let mut seed = 0x2545_f491_u32;
        let mut next = || {
            seed ^= seed << 13;
            seed ^= seed >> 17;
            seed ^= seed << 5;
            (seed as f32 / u32::MAX as f32) * 2.0 - 1.0
        };
        for &w in &[0.013f32, 0.25, 0.5, 0.77, 0.999] {
            for r in [0, 1, 11, 21, 22] {
                let cols_at: Vec<usize> = (0..cols).rev().collect();
                let east: Vec<f32> = (0..cols)
                    .map(|k| match k % 7 {
                        0 => 0.0,
                        1 => 90.0 * next(),
                        _ => 6.0 * next(),
                    })
                    .collect();
                let mut north: Vec<f32> = (0..cols).map(|_| 8.0 * next()).collect();
                north[17] = f32::NAN;
                let inv_cell = 0.5;
                let mut row = vec![0.0f32; cols];
                warp_blend_row(a, b, d, r, &cols_at, &east, &north, w, inv_cell, &mut row);
                // Check: common practice, no source — the passes over lanes do the cell's
                // arithmetic in the same order, so every value has the same bits.
                for (k, &c) in cols_at.iter().enumerate() {
                    let one = warp_blend(a, b, d, r, c, east[k], north[k], w, inv_cell);
                    assert!(
                        one.to_bits() == row[k].to_bits(),
                        "w {w} row {r} col {c}: {} vs {one}",
                        row[k]
                    );
                }
            }
        }
    }

    #[test]
    fn ends_are_bit_exact_and_threads_do_not_matter() {
        let (rows, cols) = (40, 37);
        let a = Array2::from_shape_fn((rows, cols), |(r, c)| {
            ((r * 31 + c * 17) % 23) as f32 * 0.37
        });
        let mut b =
            Array2::from_shape_fn((rows, cols), |(r, c)| ((r * 13 + c * 7) % 19) as f32 * 0.53);
        b[[5, 5]] = f32::NAN;
        let f = uniform_field(rows, cols, 3.3, -1.7, 0.5);
        let mut out = Array2::zeros((rows, cols));
        // Check: REFERENCES.md §5 — w=0 and w=1 reproduce the inputs bit for bit
        morph_into(&mut out, &a, &b, &f, 0.0);
        assert!(out.iter().zip(&a).all(|(x, y)| x.to_bits() == y.to_bits()));
        morph_into(&mut out, &a, &b, &f, 1.0);
        assert!(out.iter().zip(&b).all(|(x, y)| x.to_bits() == y.to_bits()));
        // Check: common practice, no source — 1 thread and 4 threads give identical bits
        let one = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap();
        let four = rayon::ThreadPoolBuilder::new()
            .num_threads(4)
            .build()
            .unwrap();
        let mut o1 = Array2::zeros((rows, cols));
        let mut o4 = Array2::zeros((rows, cols));
        one.install(|| morph_into(&mut o1, &a, &b, &f, 0.37));
        four.install(|| morph_into(&mut o4, &a, &b, &f, 0.37));
        assert!(o1.iter().zip(&o4).all(|(x, y)| x.to_bits() == y.to_bits()));
        // Nodata in b shows up in the in-between frame where its sample has weight.
        assert!(o1.iter().any(|v| v.is_nan()));
        assert!(o1.iter().filter(|v| v.is_nan()).count() <= 4);
    }
}
