//! Dense displacement on one pyramid level: iterative windowed Lucas–Kanade with warping, a
//! per-cell quality score (local NCC after warping), the normalised median outlier test, and
//! quality-weighted smoothing that also fills weak cells.
//!
//! Field convention on this level: `u` = displacement in columns (east positive), `v` = in rows
//! (south positive), so that `a(r, c) ≈ b(r + v, c + u)`.

use rayon::prelude::*;

use super::raster::{blur3, box_sum, sample_or_nan, Dims};

/// Working buffers for one level, allocated once per level.
pub(crate) struct Scratch {
    bw: Vec<f32>,
    prod: [Vec<f32>; 6],
    sums: [Vec<f32>; 6],
    tmp: Vec<f32>,
    tmp2: Vec<f32>,
}

impl Scratch {
    /// Buffers for a level of `d` cells.
    pub fn new(d: Dims) -> Self {
        let z = || vec![0.0f32; d.len()];
        Scratch {
            bw: z(),
            prod: [z(), z(), z(), z(), z(), z()],
            sums: [z(), z(), z(), z(), z(), z()],
            tmp: z(),
            tmp2: z(),
        }
    }
}

/// `bw(r, c) = b(r + v, c + u)`, NaN outside the grid or on nodata. Parallel over rows.
fn warp(b: &[f32], d: Dims, u: &[f32], v: &[f32], bw: &mut [f32]) {
    bw.par_chunks_mut(d.cols).enumerate().for_each(|(r, row)| {
        let base = r * d.cols;
        for (c, o) in row.iter_mut().enumerate() {
            let i = base + c;
            *o = sample_or_nan(b, d, r as f32 + v[i], c as f32 + u[i]);
        }
    });
}

/// Eigenvalues (small, large) of the symmetric 2x2 matrix [[xx, xy], [xy, yy]].
#[inline]
fn eig2(xx: f32, xy: f32, yy: f32) -> (f32, f32) {
    let m = 0.5 * (xx + yy);
    let r = (0.25 * (xx - yy) * (xx - yy) + xy * xy).sqrt();
    (m - r, m + r)
}

/// Runs `iters` Gauss–Newton steps of windowed Lucas–Kanade (Lucas & Kanade 1981; warping as in
/// Bergen et al. 1992), window (2h+1)^2, updating `u`, `v` in place. Gradients are the mean of
/// both surfaces' central differences, which converges faster than either alone. A step is taken
/// only where the window's structure matrix is well conditioned, and is capped at one cell.
pub(crate) fn refine(
    a: &[f32],
    b: &[f32],
    d: Dims,
    (u, v): (&mut [f32], &mut [f32]),
    h: usize,
    iters: usize,
    s: &mut Scratch,
) {
    let (rows, cols) = (d.rows, d.cols);
    if rows < 3 || cols < 3 {
        return;
    }
    for _ in 0..iters {
        warp(b, d, u, v, &mut s.bw);
        let bw = &s.bw;
        let [p0, p1, p2, p3, p4, _] = &mut s.prod;
        for p in [&mut *p0, &mut *p1, &mut *p2, &mut *p3, &mut *p4] {
            p.fill(0.0);
        }
        for r in 1..rows - 1 {
            for c in 1..cols - 1 {
                let i = r * cols + c;
                let gx = 0.25 * ((a[i + 1] - a[i - 1]) + (bw[i + 1] - bw[i - 1]));
                let gy = 0.25 * ((a[i + cols] - a[i - cols]) + (bw[i + cols] - bw[i - cols]));
                let et = bw[i] - a[i];
                if gx.is_finite() && gy.is_finite() && et.is_finite() {
                    p0[i] = gx * gx;
                    p1[i] = gx * gy;
                    p2[i] = gy * gy;
                    p3[i] = gx * et;
                    p4[i] = gy * et;
                }
            }
        }
        // Triangular window (two box passes of half-width h/2): its transfer function is never
        // negative, so errors that vary from cell to cell are damped by the iteration rather than
        // amplified, as a plain box window would (measured: with a box, 10 iterations gave a worse
        // field than 4).
        let h2 = (h / 2).max(1);
        for k in 0..5 {
            box_sum(&s.prod[k], d, h2, &mut s.tmp, &mut s.tmp2);
            box_sum(&s.tmp2, d, h2, &mut s.tmp, &mut s.sums[k]);
        }
        let [sxx, sxy, syy, sxt, syt, _] = &s.sums;
        u.par_iter_mut()
            .zip(v.par_iter_mut())
            .enumerate()
            .for_each(|(i, (ui, vi))| {
                let (xx, xy, yy, xt, yt) = (sxx[i], sxy[i], syy[i], sxt[i], syt[i]);
                let (lmin, lmax) = eig2(xx, xy, yy);
                if !(lmin > 1e-12 && lmin >= 1e-3 * lmax) {
                    return;
                }
                let det = xx * yy - xy * xy;
                let mut du = -(yy * xt - xy * yt) / det;
                let mut dv = -(xx * yt - xy * xt) / det;
                let m2 = du * du + dv * dv;
                if !m2.is_finite() {
                    return;
                }
                if m2 > 1.0 {
                    let k = m2.sqrt().recip();
                    du *= k;
                    dv *= k;
                }
                *ui += du;
                *vi += dv;
            });
    }
}

/// What counts as a trustworthy match in [`quality`].
#[derive(Debug, Clone, Copy)]
pub(crate) struct QualityRule {
    /// Window half-width in cells.
    pub h: usize,
    /// Smallest local standard deviation (m) for a window to count as textured.
    pub min_std_m: f32,
    /// Smallest ratio of the structure matrix's eigenvalues (aperture test: a pure ramp gives 0).
    pub min_aperture: f32,
}

/// Per-cell quality in [0, 1]: the NCC, over the window, between `a` and `b` warped by the field;
/// 0 where the window is flat, a pure ramp (aperture problem), mostly nodata, or anti-correlated.
pub(crate) fn quality(
    a: &[f32],
    b: &[f32],
    d: Dims,
    u: &[f32],
    v: &[f32],
    rule: QualityRule,
    s: &mut Scratch,
) -> Vec<f32> {
    let (rows, cols) = (d.rows, d.cols);
    let h = rule.h;
    warp(b, d, u, v, &mut s.bw);
    {
        let [m, sa, sb, saa, sbb, sab] = &mut s.prod;
        for i in 0..d.len() {
            let (x, y) = (a[i], s.bw[i]);
            if x.is_finite() && y.is_finite() {
                m[i] = 1.0;
                sa[i] = x;
                sb[i] = y;
                saa[i] = x * x;
                sbb[i] = y * y;
                sab[i] = x * y;
            } else {
                for p in [
                    &mut m[i],
                    &mut sa[i],
                    &mut sb[i],
                    &mut saa[i],
                    &mut sbb[i],
                    &mut sab[i],
                ] {
                    *p = 0.0;
                }
            }
        }
    }
    for k in 0..6 {
        box_sum(&s.prod[k], d, h, &mut s.tmp, &mut s.sums[k]);
    }
    let full = ((2 * h + 1) * (2 * h + 1)) as f32;
    let mut q = vec![0.0f32; d.len()];
    {
        let [n, sa, sb, saa, sbb, sab] = &s.sums;
        let min_var = rule.min_std_m * rule.min_std_m;
        for i in 0..d.len() {
            let nn = n[i];
            // Windows clipped by the grid edge count from the cells they hold.
            if nn < 0.25 * full || nn < 4.0 {
                continue;
            }
            let ma = sa[i] / nn;
            let mb = sb[i] / nn;
            let va = saa[i] / nn - ma * ma;
            let vb = sbb[i] / nn - mb * mb;
            if va < min_var || vb < min_var {
                continue;
            }
            let cov = sab[i] / nn - ma * mb;
            q[i] = (cov / (va * vb).sqrt()).clamp(0.0, 1.0);
        }
    }
    // Aperture test on the earlier surface's gradients.
    {
        let [p0, p1, p2, ..] = &mut s.prod;
        for p in [&mut *p0, &mut *p1, &mut *p2] {
            p.fill(0.0);
        }
        if rows >= 3 && cols >= 3 {
            for r in 1..rows - 1 {
                for c in 1..cols - 1 {
                    let i = r * cols + c;
                    let gx = 0.5 * (a[i + 1] - a[i - 1]);
                    let gy = 0.5 * (a[i + cols] - a[i - cols]);
                    if gx.is_finite() && gy.is_finite() {
                        p0[i] = gx * gx;
                        p1[i] = gx * gy;
                        p2[i] = gy * gy;
                    }
                }
            }
        }
    }
    for k in 0..3 {
        box_sum(&s.prod[k], d, h, &mut s.tmp, &mut s.sums[k]);
    }
    let [sxx, sxy, syy, ..] = &s.sums;
    for (i, qi) in q.iter_mut().enumerate() {
        let (lmin, lmax) = eig2(sxx[i], sxy[i], syy[i]);
        if !(lmax > 0.0 && lmin >= rule.min_aperture * lmax) {
            *qi = 0.0;
        }
    }
    q
}

/// Median of a short list (sorted in place); the mean of the middle two for even lengths.
fn median(xs: &mut [f32]) -> f32 {
    xs.sort_unstable_by(f32::total_cmp);
    let n = xs.len();
    if n % 2 == 1 {
        xs[n / 2]
    } else {
        0.5 * (xs[n / 2 - 1] + xs[n / 2])
    }
}

/// Normalised median test (Westerweel & Scarano 2005; from memory: threshold 2, noise level 0.1
/// cell): a vector is rejected (its quality set to 0) when it departs from the median of its eight
/// neighbours `spacing` cells away by more than twice their own median departure. Only cells with
/// quality >= `min_q` take part. Decisions are made on the input, so cell order does not matter.
pub(crate) fn reject_outliers(
    u: &[f32],
    v: &[f32],
    q: &mut [f32],
    d: Dims,
    spacing: usize,
    min_q: f32,
) -> usize {
    const THRESHOLD: f32 = 2.0;
    const NOISE_CELLS: f32 = 0.1;
    let s = spacing.max(1) as i64;
    let (rows, cols) = (d.rows as i64, d.cols as i64);
    let keep: Vec<bool> = (0..d.len())
        .into_par_iter()
        .map(|i| {
            if q[i] < min_q {
                return true;
            }
            let (r, c) = ((i as i64) / cols, (i as i64) % cols);
            let mut nu = [0.0f32; 8];
            let mut nv = [0.0f32; 8];
            let mut n = 0;
            for dr in [-s, 0, s] {
                for dc in [-s, 0, s] {
                    let (rr, cc) = (r + dr, c + dc);
                    if (dr == 0 && dc == 0) || rr < 0 || cc < 0 || rr >= rows || cc >= cols {
                        continue;
                    }
                    let j = (rr * cols + cc) as usize;
                    if q[j] >= min_q {
                        nu[n] = u[j];
                        nv[n] = v[j];
                        n += 1;
                    }
                }
            }
            if n < 3 {
                return true;
            }
            let test = |vals: &mut [f32], x: f32| {
                let m = median(vals);
                let mut dev: [f32; 8] = [0.0; 8];
                for (k, &y) in vals.iter().enumerate() {
                    dev[k] = (y - m).abs();
                }
                let rm = median(&mut dev[..vals.len()]);
                (x - m).abs() / (rm + NOISE_CELLS)
            };
            test(&mut nu[..n], u[i]) <= THRESHOLD && test(&mut nv[..n], v[i]) <= THRESHOLD
        })
        .collect();
    let mut rejected = 0;
    for (qi, k) in q.iter_mut().zip(keep) {
        if !k {
            *qi = 0.0;
            rejected += 1;
        }
    }
    rejected
}

/// How [`smooth_fill`] spreads good vectors.
#[derive(Debug, Clone, Copy)]
pub(crate) struct FillRule {
    /// Vectors with quality below this do not count.
    pub min_q: f32,
    /// Half-width of the light smoothing over well-measured cells.
    pub h_small: usize,
    /// Half-width of the wide smoothing that fills weak cells.
    pub h_large: usize,
    /// Vector (u, v) assumed where nothing was measured within reach.
    pub prior: (f32, f32),
}

/// Normalised convolution (weights = quality): a light quality-weighted smoothing where vectors
/// are well measured, blending into a wide one that fills weak cells, and a faint pull towards
/// `prior` that only matters where no good vector lies within reach. Writes `u`, `v` in place.
pub(crate) fn smooth_fill(
    u: &mut [f32],
    v: &mut [f32],
    q: &[f32],
    d: Dims,
    rule: FillRule,
    s: &mut Scratch,
) {
    // Weight of the prior relative to a neighbourhood of full quality.
    const PRIOR_WEIGHT: f32 = 1e-3;
    // Neighbourhood mean quality at which the light smoothing alone is used.
    const FULL_SUPPORT: f32 = 0.25;
    let n = d.len();
    let [w_s, wu_s, wv_s, w_l, wu_l, wv_l] = &mut s.prod;
    for i in 0..n {
        let ok = q[i] >= rule.min_q && u[i].is_finite() && v[i].is_finite();
        let w = if ok { q[i] } else { 0.0 };
        w_s[i] = w;
        wu_s[i] = if ok { w * u[i] } else { 0.0 };
        wv_s[i] = if ok { w * v[i] } else { 0.0 };
    }
    w_l.copy_from_slice(w_s);
    wu_l.copy_from_slice(wu_s);
    wv_l.copy_from_slice(wv_s);
    for buf in [&mut *w_s, &mut *wu_s, &mut *wv_s] {
        blur3(buf, d, rule.h_small, &mut s.tmp, &mut s.tmp2);
    }
    for buf in [&mut *w_l, &mut *wu_l, &mut *wv_l] {
        blur3(buf, d, rule.h_large, &mut s.tmp, &mut s.tmp2);
    }
    let (pu, pv) = rule.prior;
    for i in 0..n {
        let wl = w_l[i] + PRIOR_WEIGHT;
        let fu = (wu_l[i] + PRIOR_WEIGHT * pu) / wl;
        let fv = (wv_l[i] + PRIOR_WEIGHT * pv) / wl;
        let alpha = (w_s[i] / FULL_SUPPORT).clamp(0.0, 1.0);
        if alpha > 0.0 {
            let su = wu_s[i] / w_s[i];
            let sv = wv_s[i] / w_s[i];
            u[i] = alpha * su + (1.0 - alpha) * fu;
            v[i] = alpha * sv + (1.0 - alpha) * fv;
        } else {
            u[i] = fu;
            v[i] = fv;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_pure_ramp_scores_zero_and_a_mound_scores_one() {
        let d = Dims { rows: 40, cols: 40 };
        let ramp: Vec<f32> = (0..d.len()).map(|i| 0.3 * (i % 40) as f32).collect();
        let zero = vec![0.0f32; d.len()];
        let rule = QualityRule {
            h: 5,
            min_std_m: 0.01,
            min_aperture: 0.01,
        };
        let mut s = Scratch::new(d);
        let q = quality(&ramp, &ramp, d, &zero, &zero, rule, &mut s);
        // Check: REFERENCES.md §4 aperture problem — a pure ramp must be flagged (smaller eigenvalue 0)
        assert!(q.iter().all(|&v| v == 0.0));
        let mound: Vec<f32> = (0..d.len())
            .map(|i| {
                let (r, c) = ((i / 40) as f32 - 20.0, (i % 40) as f32 - 20.0);
                (-(r * r + c * c) / 60.0).exp()
            })
            .collect();
        let q = quality(&mound, &mound, d, &zero, &zero, rule, &mut s);
        // Check: Lewis (1995) NCC — a surface against itself scores 1; abs diff < 1e-4 at the centre
        assert!((q[20 * 40 + 20] - 1.0).abs() < 1e-4);
    }

    #[test]
    fn median_test_rejects_a_lone_wild_vector() {
        let d = Dims { rows: 9, cols: 9 };
        let mut u: Vec<f32> = (0..d.len()).map(|i| 3.0 + 0.01 * (i % 9) as f32).collect();
        let v = vec![-1.0f32; d.len()];
        u[4 * 9 + 4] = 7.0;
        let mut q = vec![1.0f32; d.len()];
        let n = reject_outliers(&u, &v, &mut q, d, 1, 0.5);
        // Check: from memory — Westerweel & Scarano (2005) normalised median test, threshold 2,
        // noise 0.1 cell: a 4-cell spike in a smooth field is the only vector rejected
        assert_eq!(n, 1);
        assert_eq!(q[4 * 9 + 4], 0.0);
    }
}
