//! Flat-slice raster helpers for the displacement field: window sums, smoothing, pyramids,
//! sampling and the base plane. Row-major `Vec<f32>` with a [`Dims`]; NaN marks nodata.
//!
//! Window sums use running sums held in f64, so the result does not depend on where a window sits
//! and the long rows of a 1024-cell grid add no drift.

use rayon::prelude::*;

/// Shape of a flat row-major raster.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Dims {
    /// Number of rows (north to south).
    pub rows: usize,
    /// Number of columns (west to east).
    pub cols: usize,
}

impl Dims {
    /// Number of cells.
    pub fn len(self) -> usize {
        self.rows * self.cols
    }
}

/// Grids smaller than this are summed on one thread (splitting them costs more than it saves).
const PARALLEL_MIN_CELLS: usize = 1 << 16;

/// Sum of `src` over the (2h+1)x(2h+1) window around every cell, clipped at the edges.
/// `tmp` and `out` must have `d.len()` cells.
pub(crate) fn box_sum(src: &[f32], d: Dims, h: usize, tmp: &mut [f32], out: &mut [f32]) {
    let (rows, cols) = (d.rows, d.cols);
    assert!(src.len() == d.len() && tmp.len() == d.len() && out.len() == d.len());
    if d.len() == 0 {
        return;
    }
    // Horizontal pass: running sum along each row, rows side by side (each row's sum is the same
    // as on one thread). The vertical pass below runs down the rows in order.
    let horizontal = |(srow, trow): (&[f32], &mut [f32])| {
        let mut s = 0.0f64;
        for &v in &srow[..h.min(cols)] {
            s += v as f64;
        }
        for c in 0..cols {
            if c + h < cols {
                s += srow[c + h] as f64;
            }
            if c > h {
                s -= srow[c - h - 1] as f64;
            }
            trow[c] = s as f32;
        }
    };
    if d.len() >= PARALLEL_MIN_CELLS {
        src.par_chunks_exact(cols)
            .zip(tmp.par_chunks_exact_mut(cols))
            .for_each(horizontal);
    } else {
        src.chunks_exact(cols)
            .zip(tmp.chunks_exact_mut(cols))
            .for_each(horizontal);
    }
    // Vertical pass, row by row with one accumulator per column (cache friendly).
    let mut acc = vec![0.0f64; cols];
    for r in 0..h.min(rows) {
        for (a, &v) in acc.iter_mut().zip(&tmp[r * cols..(r + 1) * cols]) {
            *a += v as f64;
        }
    }
    for r in 0..rows {
        if r + h < rows {
            let add = &tmp[(r + h) * cols..(r + h + 1) * cols];
            for (a, &v) in acc.iter_mut().zip(add) {
                *a += v as f64;
            }
        }
        if r > h {
            let sub = &tmp[(r - h - 1) * cols..(r - h) * cols];
            for (a, &v) in acc.iter_mut().zip(sub) {
                *a -= v as f64;
            }
        }
        for (o, &a) in out[r * cols..(r + 1) * cols].iter_mut().zip(&acc) {
            *o = a as f32;
        }
    }
}

/// Number of window cells inside the grid along one axis for index `i` of `n`.
fn span(i: usize, n: usize, h: usize) -> usize {
    (i + h).min(n - 1) + 1 - i.saturating_sub(h)
}

/// Three passes of a clipped box mean of half-width `h` (close to a Gaussian of sigma ~ h),
/// in place on `buf`. `tmp` and `tmp2` are scratch of `d.len()` cells.
pub(crate) fn blur3(buf: &mut [f32], d: Dims, h: usize, tmp: &mut [f32], tmp2: &mut [f32]) {
    if d.len() == 0 {
        return;
    }
    let col_span: Vec<f32> = (0..d.cols).map(|c| span(c, d.cols, h) as f32).collect();
    for _ in 0..3 {
        box_sum(buf, d, h, tmp, tmp2);
        for r in 0..d.rows {
            let nr = span(r, d.rows, h) as f32;
            let row = &tmp2[r * d.cols..(r + 1) * d.cols];
            for ((o, &s), &nc) in buf[r * d.cols..(r + 1) * d.cols]
                .iter_mut()
                .zip(row)
                .zip(&col_span)
            {
                *o = s / (nr * nc);
            }
        }
    }
}

/// Halves a raster: each coarse cell is the mean of the finite cells of its 2x2 block (NaN if none).
pub(crate) fn halve(src: &[f32], d: Dims) -> (Vec<f32>, Dims) {
    let h = Dims {
        rows: d.rows.div_ceil(2),
        cols: d.cols.div_ceil(2),
    };
    let mut out = vec![f32::NAN; h.len()];
    for r in 0..h.rows {
        for c in 0..h.cols {
            let mut s = 0.0f32;
            let mut n = 0u32;
            for rr in 2 * r..(2 * r + 2).min(d.rows) {
                for cc in 2 * c..(2 * c + 2).min(d.cols) {
                    let v = src[rr * d.cols + cc];
                    if v.is_finite() {
                        s += v;
                        n += 1;
                    }
                }
            }
            if n > 0 {
                out[r * h.cols + c] = s / n as f32;
            }
        }
    }
    (out, h)
}

/// Bilinear sample at continuous (row, col), cell centres at whole numbers. Points more than half a
/// cell outside the grid give NaN; a NaN neighbour with non-zero weight gives NaN.
#[inline]
pub(crate) fn sample_or_nan(z: &[f32], d: Dims, r: f32, c: f32) -> f32 {
    if !(r >= -0.5 && c >= -0.5 && r <= d.rows as f32 - 0.5 && c <= d.cols as f32 - 0.5) {
        return f32::NAN;
    }
    sample_clamped(z, d, r, c)
}

/// Bilinear sample at continuous (row, col); points outside the grid take the nearest edge value.
/// A NaN neighbour with non-zero weight gives NaN; a NaN coordinate gives NaN.
#[inline(always)]
pub(crate) fn sample_clamped(z: &[f32], d: Dims, r: f32, c: f32) -> f32 {
    if r.is_nan() || c.is_nan() {
        return f32::NAN;
    }
    let r = r.clamp(0.0, (d.rows - 1) as f32);
    let c = c.clamp(0.0, (d.cols - 1) as f32);
    let r0 = r as usize;
    let c0 = c as usize;
    let r1 = (r0 + 1).min(d.rows - 1);
    let c1 = (c0 + 1).min(d.cols - 1);
    let fr = r - r0 as f32;
    let fc = c - c0 as f32;
    let pick = |i: usize, w: f32| if w == 0.0 { 0.0 } else { z[i] * w };
    pick(r0 * d.cols + c0, (1.0 - fr) * (1.0 - fc))
        + pick(r0 * d.cols + c1, (1.0 - fr) * fc)
        + pick(r1 * d.cols + c0, fr * (1.0 - fc))
        + pick(r1 * d.cols + c1, fr * fc)
}

/// Doubles a coarse displacement component onto the finer grid `fine` (values times 2, because a
/// coarse cell is two fine cells).
pub(crate) fn double_field(coarse: &[f32], dc: Dims, fine: Dims) -> Vec<f32> {
    let mut out = vec![0.0; fine.len()];
    for r in 0..fine.rows {
        let rc = (r as f32 - 0.5) * 0.5;
        for c in 0..fine.cols {
            let cc = (c as f32 - 0.5) * 0.5;
            out[r * fine.cols + c] = 2.0 * sample_clamped(coarse, dc, rc, cc);
        }
    }
    out
}

/// Base plane `z = p0 + p1*col + p2*row` under the landform, from the mean of `a` and `b` over the
/// cells where both have data: a least-squares plane through all of them, then refitted twice
/// through the cells on or below the previous plane only. The refits let the plane settle on the
/// ground around the landform instead of tilting towards wherever the dunes stand, which matters
/// because any tilt left in the relief turns into a height offset when the relief is shifted.
pub(crate) fn base_plane(a: &[f32], b: &[f32], d: Dims) -> [f64; 3] {
    base_plane_outside(a, b, None, d)
}

/// [`base_plane`] over the cells not marked in `skip` (all cells when None), read in place: no
/// grid-sized copy is made, so at 4096² it costs two passes, not 150 MB.
pub(crate) fn base_plane_outside(a: &[f32], b: &[f32], skip: Option<&[bool]>, d: Dims) -> [f64; 3] {
    let n = a.len().min(b.len());
    let mean = |i: usize| -> Option<f64> {
        let (x, y) = (a[i], b[i]);
        (x.is_finite() && y.is_finite() && !skip.is_some_and(|s| s[i]))
            .then_some(0.5 * (x as f64 + y as f64))
    };
    let (mut p, total) = fit_plane(n, |i, _, _| mean(i), d);
    for _ in 0..2 {
        let q = p;
        let below = |i: usize, r: usize, c: usize| {
            mean(i).filter(|&z| z <= q[0] + q[1] * c as f64 + q[2] * r as f64)
        };
        // The refit counts its cells as it goes: too few below the plane, and the plane stays.
        let (next, count) = fit_plane(n, below, d);
        if count < (total / 10).max(3) {
            break;
        }
        p = next;
    }
    p
}

/// Calls `f(index, row, column)` for the cells `0..n` of a grid `cols` wide, in order.
#[inline]
fn for_cells(n: usize, cols: usize, f: &mut impl FnMut(usize, usize, usize)) {
    let cols = cols.max(1);
    for r in 0..n.div_ceil(cols) {
        for c in 0..cols.min(n - r * cols) {
            f(r * cols + c, r, c);
        }
    }
}

/// Least-squares plane through the cells `0..n` (row-major, `d.cols` wide) for which
/// `z(index, row, column)` gives a value, and the number of those cells; level when they are
/// collinear. Cells are visited in index order, by plain loops over rows and columns.
fn fit_plane(
    n: usize,
    z: impl Fn(usize, usize, usize) -> Option<f64>,
    d: Dims,
) -> ([f64; 3], usize) {
    let (mut count, mut sx, mut sy, mut sz) = (0usize, 0.0f64, 0.0f64, 0.0f64);
    for_cells(n, d.cols, &mut |i, r, c| {
        if let Some(v) = z(i, r, c) {
            count += 1;
            sx += c as f64;
            sy += r as f64;
            sz += v;
        }
    });
    if count == 0 {
        return ([0.0; 3], 0);
    }
    let k = count as f64;
    let (mx, my, mz) = (sx / k, sy / k, sz / k);
    let (mut xx, mut xy, mut yy, mut xz, mut yz) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for_cells(n, d.cols, &mut |i, r, c| {
        let Some(v) = z(i, r, c) else { return };
        let x = c as f64 - mx;
        let y = r as f64 - my;
        let zz = v - mz;
        xx += x * x;
        xy += x * y;
        yy += y * y;
        xz += x * zz;
        yz += y * zz;
    });
    let det = xx * yy - xy * xy;
    if det.abs() <= 1e-9 * (xx * yy).max(1.0) {
        return ([mz, 0.0, 0.0], count);
    }
    let p1 = (xz * yy - yz * xy) / det;
    let p2 = (yz * xx - xz * xy) / det;
    ([mz - p1 * mx - p2 * my, p1, p2], count)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn box_sum_matches_brute_force() {
        let d = Dims { rows: 7, cols: 9 };
        let src: Vec<f32> = (0..d.len()).map(|i| ((i * 37) % 11) as f32 - 3.0).collect();
        let mut tmp = vec![0.0; d.len()];
        let mut out = vec![0.0; d.len()];
        for h in [0, 1, 2, 5] {
            box_sum(&src, d, h, &mut tmp, &mut out);
            for r in 0..d.rows {
                for c in 0..d.cols {
                    let mut s = 0.0;
                    for rr in r.saturating_sub(h)..(r + h + 1).min(d.rows) {
                        for cc in c.saturating_sub(h)..(c + h + 1).min(d.cols) {
                            s += src[rr * d.cols + cc];
                        }
                    }
                    // Check: analytic — a window sum equals the brute-force sum; abs diff < 1e-4
                    assert!((out[r * d.cols + c] - s).abs() < 1e-4, "h={h} r={r} c={c}");
                }
            }
        }
    }

    #[test]
    fn plane_is_recovered_and_blur_keeps_constants() {
        let d = Dims { rows: 20, cols: 30 };
        let a: Vec<f32> = (0..d.len())
            .map(|i| 3.0 + 0.5 * (i % 30) as f32 - 0.25 * (i / 30) as f32)
            .collect();
        let p = base_plane(&a, &a, d);
        // Check: analytic — least squares on an exact plane returns its coefficients; abs diff < 1e-6
        assert!(
            (p[0] - 3.0).abs() < 1e-6 && (p[1] - 0.5).abs() < 1e-6 && (p[2] + 0.25).abs() < 1e-6
        );
        let mut c = vec![2.5f32; d.len()];
        let (mut t1, mut t2) = (vec![0.0; d.len()], vec![0.0; d.len()]);
        blur3(&mut c, d, 4, &mut t1, &mut t2);
        // Check: analytic — a normalised blur leaves a constant unchanged; abs diff < 1e-5
        assert!(c.iter().all(|v| (v - 2.5).abs() < 1e-5));
    }
}
