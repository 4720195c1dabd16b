//! Full-resolution heights -> a reduced level of detail sized to the screen.
//!
//! Level L averages blocks of 2^L × 2^L cells (nodata cells skipped; a block with no data stays
//! nodata), in one pass straight from the full grid, so the cost per frame is one read of the grid
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

/// Writes level `level` of row-major `z` (rows × cols), multiplied by `scale`, into `out`.
pub fn reduce_into(z: &[f32], rows: usize, cols: usize, level: u32, scale: f32, out: &mut [f32]) {
    let (lr, lc) = level_shape(rows, cols, level);
    assert!(z.len() == rows * cols && out.len() == lr * lc);
    let b = 1usize << level;
    out.par_chunks_mut(lc)
        .with_min_len(4)
        .enumerate()
        .for_each(|(orow, o)| {
            let r0 = orow * b;
            let r1 = (r0 + b).min(rows);
            if b == 1 {
                for (v, &src) in o.iter_mut().zip(&z[r0 * cols..r0 * cols + cols]) {
                    *v = src * scale;
                }
                return;
            }
            for (ocol, v) in o.iter_mut().enumerate() {
                let c0 = ocol * b;
                let c1 = (c0 + b).min(cols);
                let mut sum = 0.0f32;
                let mut n = 0u32;
                for r in r0..r1 {
                    for &h in &z[r * cols + c0..r * cols + c1] {
                        if h.is_finite() {
                            sum += h;
                            n += 1;
                        }
                    }
                }
                *v = if n == 0 {
                    f32::NAN
                } else {
                    sum / n as f32 * scale
                };
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
    }
}
