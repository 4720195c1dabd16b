//! Full-resolution heights -> a reduced level of detail sized to the screen.
//!
//! Level L averages blocks of 2^L × 2^L cells (nodata cells skipped; a block with no data stays
//! nodata; blocks wider than 4 cells average a 4 × 4 evenly spaced subset), in one pass straight
//! from the full grid, so the cost per frame is at most one read of the grid
//! plus work proportional to the reduced level. The level is chosen once per job from the projected
//! size of a cell at the target: the smallest L whose cells cover at least `min_cell_px` pixels.
//! A block mean (rather than picking one cell in 2^L²) keeps the reduced surface free of aliasing
//! when the camera orbits; common practice, no source.

use rayon::prelude::*;

/// The coarsest level allowed: the reduced grid keeps at least 2 cells along each side.
pub fn max_level(rows: usize, cols: usize) -> u32 {
    let mut l = 0;
    while (rows.min(cols) >> (l + 1)) >= 2 && l < 12 {
        l += 1;
    }
    l
}

/// Smallest level whose cells project to at least `min_cell_px` pixels, given the size in pixels of
/// one full-resolution cell at the target.
pub fn choose_level(cell_px: f64, min_cell_px: f64, rows: usize, cols: usize) -> u32 {
    let mut l = 0;
    let top = max_level(rows, cols);
    while l < top && cell_px * f64::from(1u32 << l) < min_cell_px {
        l += 1;
    }
    l
}

/// Shape (rows, cols) of level `level` of a rows × cols grid.
pub fn level_shape(rows: usize, cols: usize, level: u32) -> (usize, usize) {
    let b = 1usize << level;
    (rows.div_ceil(b), cols.div_ceil(b))
}

/// Most samples averaged along each side of a block: larger blocks average an evenly spaced
/// 4 × 4 subset (the centres of its 4 × 4 sub-blocks), so a frame reads a bounded share of a huge
/// grid; 16 samples per block still suppress aliasing well (the subset's centre sits half a
/// full-resolution cell off the block's centre, negligible at those levels). Common practice, no source.
pub const MAX_SAMPLES_PER_SIDE: usize = 4;

/// Writes level `level` of row-major `z` (rows × cols), multiplied by `scale`, into `out`.
/// Nodata cells are skipped; a block without data is NaN.
pub fn reduce_into(z: &[f32], rows: usize, cols: usize, level: u32, scale: f32, out: &mut [f32]) {
    let (lr, lc) = level_shape(rows, cols, level);
    assert!(z.len() == rows * cols && out.len() == lr * lc);
    let b = 1usize << level;
    if b == 1 {
        out.par_chunks_mut(cols)
            .zip(z.par_chunks(cols))
            .for_each(|(o, src)| {
                o.iter_mut().zip(src).for_each(|(v, &h)| *v = h * scale);
            });
        return;
    }
    let step = (b / MAX_SAMPLES_PER_SIDE).max(1);
    let off = step / 2;
    out.par_chunks_mut(lc)
        .with_min_len(4)
        .enumerate()
        .for_each(|(orow, o)| {
            let r0 = orow * b;
            let r1 = (r0 + b).min(rows);
            let first = if r0 + off < r1 { r0 + off } else { r0 };
            for (ocol, v) in o.iter_mut().enumerate() {
                let c0 = ocol * b;
                let c1 = (c0 + b).min(cols);
                let cfirst = if c0 + off < c1 { c0 + off } else { c0 };
                *v = block_mean(
                    (first..r1)
                        .step_by(step)
                        .flat_map(|r| z[r * cols + cfirst..r * cols + c1].iter().step_by(step)),
                    scale,
                );
            }
        });
}

/// The mean of a block's finite values in the order given, times `scale`; NaN when none is
/// finite. Both reductions call it, so they agree bit for bit when given the same values in the
/// same order.
#[inline(always)]
fn block_mean<'a>(values: impl Iterator<Item = &'a f32>, scale: f32) -> f32 {
    let mut sum = 0.0f32;
    let mut n = 0u32;
    for &h in values {
        let ok = h.is_finite();
        sum += if ok { h } else { 0.0 };
        n += u32::from(ok);
    }
    if n == 0 {
        f32::NAN
    } else {
        sum / n as f32 * scale
    }
}

/// The full-resolution cells a level reads, and which of them each reduced cell averages.
///
/// Rows and columns are chosen separately (a block reads every sampled row × every sampled column
/// inside it), so the samples form a grid of their own: `rows.len() × cols.len()` values. At level
/// 4 of a 4096² grid that is 1024² of the 16.7 M cells, which is what lets an in-between surface
/// be computed at the samples only ([`reduce_samples_into`] then gives the reduced level bit for
/// bit as [`reduce_into`] does from the whole grid).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SamplePlan {
    /// The level, as in [`reduce_into`].
    pub level: u32,
    /// (rows, cols) of the full grid.
    pub grid: (usize, usize),
    /// Full-resolution rows read, ascending.
    pub rows: Vec<usize>,
    /// Full-resolution columns read, ascending.
    pub cols: Vec<usize>,
    /// For each reduced row: the range of `rows` (indices into it) its blocks read.
    pub row_spans: Vec<(usize, usize)>,
    /// For each reduced column: the range of `cols` its blocks read.
    pub col_spans: Vec<(usize, usize)>,
}

impl SamplePlan {
    /// The samples level `level` of a rows × cols grid reads (the same cells as [`reduce_into`]).
    pub fn new(rows: usize, cols: usize, level: u32) -> SamplePlan {
        let (rows_read, row_spans) = axis_samples(rows, level);
        let (cols_read, col_spans) = axis_samples(cols, level);
        SamplePlan {
            level,
            grid: (rows, cols),
            rows: rows_read,
            cols: cols_read,
            row_spans,
            col_spans,
        }
    }

    /// Number of samples: (rows, cols) of the sample grid.
    pub fn shape(&self) -> (usize, usize) {
        (self.rows.len(), self.cols.len())
    }

    /// Copies the samples of row-major `z` (the full grid) into `out`, row-major.
    pub fn gather_into(&self, z: &[f32], out: &mut [f32]) {
        let (rows, cols) = self.grid;
        assert!(z.len() == rows * cols && out.len() == self.rows.len() * self.cols.len());
        let nc = self.cols.len().max(1);
        out.par_chunks_mut(nc)
            .zip(self.rows.par_iter())
            .for_each(|(o, &r)| {
                let row = &z[r * cols..(r + 1) * cols];
                for (v, &c) in o.iter_mut().zip(&self.cols) {
                    *v = row[c];
                }
            });
    }
}

/// One axis of a [`SamplePlan`]: the indices read and, per block, its range of them. The same
/// choice as the loops of [`reduce_into`].
fn axis_samples(n: usize, level: u32) -> (Vec<usize>, Vec<(usize, usize)>) {
    let b = 1usize << level;
    let step = if b == 1 {
        1
    } else {
        (b / MAX_SAMPLES_PER_SIDE).max(1)
    };
    let off = step / 2;
    let (mut read, mut spans) = (Vec::new(), Vec::with_capacity(n.div_ceil(b)));
    for block in 0..n.div_ceil(b) {
        let (r0, r1) = (block * b, ((block + 1) * b).min(n));
        let first = if r0 + off < r1 { r0 + off } else { r0 };
        let start = read.len();
        read.extend((first..r1).step_by(step));
        spans.push((start, read.len()));
    }
    (read, spans)
}

/// [`reduce_into`] from the samples alone: `samples` holds the values of `plan`'s sample grid
/// (row-major, as [`SamplePlan::gather_into`] makes them). Every block sums the same values in
/// the same order, so the result is identical bit for bit.
pub fn reduce_samples_into(plan: &SamplePlan, samples: &[f32], scale: f32, out: &mut [f32]) {
    let (rows, cols) = plan.grid;
    let (lr, lc) = level_shape(rows, cols, plan.level);
    let nc = plan.cols.len();
    assert!(samples.len() == plan.rows.len() * nc && out.len() == lr * lc);
    if plan.level == 0 {
        out.par_chunks_mut(cols.max(1))
            .zip(samples.par_chunks(cols.max(1)))
            .for_each(|(o, src)| {
                o.iter_mut().zip(src).for_each(|(v, &h)| *v = h * scale);
            });
        return;
    }
    out.par_chunks_mut(lc.max(1))
        .with_min_len(4)
        .zip(plan.row_spans.par_iter())
        .for_each(|(o, &(ra, rb))| {
            for (v, &(ca, cb)) in o.iter_mut().zip(&plan.col_spans) {
                *v = block_mean(
                    (ra..rb).flat_map(|i| &samples[i * nc + ca..i * nc + cb]),
                    scale,
                );
            }
        });
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn levels_follow_projected_cell_size() {
        assert_eq!(choose_level(3.0, 2.0, 1024, 1024), 0);
        assert_eq!(choose_level(0.5, 2.0, 1024, 1024), 2);
        assert_eq!(choose_level(0.125, 2.0, 4096, 4096), 4);
        // A tiny grid never drops below 2×2.
        assert_eq!(choose_level(0.001, 2.0, 8, 8), 2);
        assert_eq!(level_shape(10, 7, 2), (3, 2));
    }

    #[test]
    fn the_samples_alone_give_the_same_level_bit_for_bit() {
        // Check: common practice, no source — a block mean taken from a gathered copy of the
        // cells it reads, in the same order, equals the mean taken from the whole grid bit for bit.
        for (rows, cols) in [(37, 53), (64, 64), (130, 97), (8, 5)] {
            let mut z: Vec<f32> = (0..rows * cols)
                .map(|i| ((i * 7919) % 1013) as f32 * 0.0137 + (i % cols) as f32 * 0.3)
                .collect();
            for i in (0..z.len()).step_by(11) {
                z[i] = f32::NAN;
            }
            for level in 0..=max_level(rows, cols) {
                let plan = SamplePlan::new(rows, cols, level);
                let (lr, lc) = level_shape(rows, cols, level);
                assert_eq!(plan.row_spans.len(), lr);
                assert_eq!(plan.col_spans.len(), lc);
                let mut samples = vec![0.0; plan.rows.len() * plan.cols.len()];
                plan.gather_into(&z, &mut samples);
                let (mut whole, mut from_samples) = (vec![0.0; lr * lc], vec![0.0; lr * lc]);
                reduce_into(&z, rows, cols, level, 1.7, &mut whole);
                reduce_samples_into(&plan, &samples, 1.7, &mut from_samples);
                assert!(
                    whole
                        .iter()
                        .zip(&from_samples)
                        .all(|(a, b)| a.to_bits() == b.to_bits()),
                    "{rows}x{cols} level {level}"
                );
            }
        }
        // Level 4 of a 4096-wide axis reads 4 of every 16 cells.
        let plan = SamplePlan::new(4096, 4096, 4);
        assert_eq!(plan.shape(), (1024, 1024));
        assert_eq!(&plan.cols[..5], &[2, 6, 10, 14, 18]);
    }

    #[test]
    fn block_mean_keeps_planes_and_skips_nodata() {
        let (rows, cols) = (8, 6);
        let mut z: Vec<f32> = (0..rows * cols)
            .map(|i| (i % cols) as f32 + 10.0 * (i / cols) as f32)
            .collect();
        let mut out = vec![0.0; 4 * 3];
        reduce_into(&z, rows, cols, 1, 2.0, &mut out);
        // Check: analytic — the mean of a plane over a 2×2 block is the plane at the block centre
        // (col 0.5, row 0.5) = 0.5 + 5 = 5.5, times the scale 2 → 11.
        assert_eq!(out[0], 11.0);
        z[0] = f32::NAN;
        z[1] = f32::NAN;
        z[cols] = f32::NAN;
        z[cols + 1] = f32::NAN;
        z[2] = f32::NAN;
        reduce_into(&z, rows, cols, 1, 1.0, &mut out);
        assert!(out[0].is_nan());
        // Check: analytic — block (rows 0-1, cols 2-3) with one nodata cell: mean of 3, 12, 13.
        assert!((out[1] - 28.0 / 3.0).abs() < 1e-5);
        // Large blocks: the 4×4 subset mean of a plane is the plane at the subset's centre.
        let (rows, cols) = (64, 64);
        let z: Vec<f32> = (0..rows * cols)
            .map(|i| (i % cols) as f32 + 100.0 * (i / cols) as f32)
            .collect();
        let mut out = vec![0.0; 4];
        reduce_into(&z, rows, cols, 5, 1.0, &mut out);
        // Check: analytic — block 32×32, samples at 4, 12, 20, 28 → mean 16 along each axis.
        assert_eq!(out[0], 16.0 + 1600.0);
    }
}
