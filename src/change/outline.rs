//! Two surveys -> the outline of the landform at each date, for the DoD map.
//!
//! A dune on a sloping plain has no single elevation for its foot, so the outline is drawn on the
//! relief above a local base rather than on elevation. Own rule (no source; the idea of a
//! residual relief above a regional trend is common practice):
//! 1. both surveys are sampled every `step` cells (the map's pixel size) and smoothed with a 5 × 5
//!    mean, so survey noise does not fray the line;
//! 2. the local base is the lower of the two surveys, opened (running minimum, then running maximum)
//!    over a square window of half the grid's shorter side and softened by a short running mean: a
//!    floor that follows a plain or a slope exactly and ignores anything narrower than the window;
//! 3. the outline is the contour of (smoothed survey − base) at a fifth of the largest relief, and
//!    at least 2 LoD, so noise on flat ground never draws an outline. Both dates use the same base
//!    and the same level, so their outlines compare.

use ndarray::{Array2, ArrayRef2};

/// The relief above the local base of both surveys (sampled every `step` cells) and the outline
/// level; None when nothing stands 2 LoD above the base.
#[derive(Debug, Clone, PartialEq)]
pub struct Outline {
    /// Sampling step in cells.
    pub step: usize,
    /// Relief of the earlier survey above the base, metres (NaN where no data).
    pub earlier: Array2<f32>,
    /// Relief of the later survey above the base.
    pub later: Array2<f32>,
    /// The contour level, metres above the base.
    pub level_m: f64,
}

/// Builds the outline relief (module doc).
pub fn outline(
    z0: &ArrayRef2<f32>,
    z1: &ArrayRef2<f32>,
    lod_m: f64,
    step: usize,
) -> Option<Outline> {
    let step = step.max(1);
    let (rows, cols) = z0.dim();
    let (nr, nc) = (rows.div_ceil(step), cols.div_ceil(step));
    if nr < 3 || nc < 3 {
        return None;
    }
    let sample = |z: &ArrayRef2<f32>| {
        Array2::from_shape_fn((nr, nc), |(r, c)| {
            z[[(r * step).min(rows - 1), (c * step).min(cols - 1)]]
        })
    };
    let s0 = box_mean(&sample(z0), 2);
    let s1 = box_mean(&sample(z1), 2);
    let low = Array2::from_shape_fn((nr, nc), |(r, c)| {
        let (a, b) = (s0[[r, c]], s1[[r, c]]);
        match (a.is_finite(), b.is_finite()) {
            (true, true) => a.min(b),
            (true, false) => a,
            (false, true) => b,
            _ => f32::NAN,
        }
    });
    let half = (nr.min(nc) / 4).max(3);
    // Opening (running minimum, then running maximum of that): exact on a plane, removes anything
    // narrower than the window; then a short mean softens its corners.
    let opened = running_min(&low, half).mapv(|v| -v);
    let opened = running_min(&opened, half).mapv(|v| -v);
    let base = box_mean(&opened, (half / 4).max(1));
    let earlier = &s0 - &base;
    let later = &s1 - &base;
    let top = earlier
        .iter()
        .chain(later.iter())
        .copied()
        .filter(|v| v.is_finite())
        .fold(f32::NEG_INFINITY, f32::max) as f64;
    let level_m = (0.2 * top).max(2.0 * lod_m);
    (top.is_finite() && level_m < top).then_some(Outline {
        step,
        earlier,
        later,
        level_m,
    })
}

/// Running minimum over a square window of half-width `half`, NaN ignored (separable, a monotonic
/// deque per row and column: linear in the cells whatever the window).
fn running_min(z: &ArrayRef2<f32>, half: usize) -> Array2<f32> {
    let (rows, cols) = z.dim();
    let mut tmp = Array2::from_elem((rows, cols), f32::NAN);
    let mut buf = Vec::new();
    for r in 0..rows {
        let row: Vec<f32> = z.row(r).to_vec();
        min_1d(&row, half, &mut buf);
        tmp.row_mut(r)
            .iter_mut()
            .zip(&buf)
            .for_each(|(o, &v)| *o = v);
    }
    let mut out = Array2::from_elem((rows, cols), f32::NAN);
    for c in 0..cols {
        let col: Vec<f32> = tmp.column(c).to_vec();
        min_1d(&col, half, &mut buf);
        out.column_mut(c)
            .iter_mut()
            .zip(&buf)
            .for_each(|(o, &v)| *o = v);
    }
    out
}

fn min_1d(x: &[f32], half: usize, out: &mut Vec<f32>) {
    use std::collections::VecDeque;
    out.clear();
    let n = x.len();
    let mut dq: VecDeque<usize> = VecDeque::new();
    let mut next = 0;
    for i in 0..n {
        let hi = (i + half).min(n - 1);
        while next <= hi {
            if x[next].is_finite() {
                while dq.back().is_some_and(|&j| x[j] >= x[next]) {
                    dq.pop_back();
                }
                dq.push_back(next);
            }
            next += 1;
        }
        while dq.front().is_some_and(|&j| j + half < i) {
            dq.pop_front();
        }
        out.push(dq.front().map_or(f32::NAN, |&j| x[j]));
    }
}

/// Mean over a square window of half-width `half`, NaN cells left out (summed-area tables);
/// NaN where the cell itself has no data.
fn box_mean(z: &ArrayRef2<f32>, half: usize) -> Array2<f32> {
    let (rows, cols) = z.dim();
    let mut sum = vec![0f64; (rows + 1) * (cols + 1)];
    let mut cnt = vec![0u32; (rows + 1) * (cols + 1)];
    let w = cols + 1;
    for r in 0..rows {
        for c in 0..cols {
            let v = z[[r, c]];
            let (s, k) = if v.is_finite() {
                (v as f64, 1)
            } else {
                (0.0, 0)
            };
            let i = (r + 1) * w + c + 1;
            sum[i] = s + sum[i - 1] + sum[i - w] - sum[i - w - 1];
            cnt[i] = k + cnt[i - 1] + cnt[i - w] - cnt[i - w - 1];
        }
    }
    Array2::from_shape_fn((rows, cols), |(r, c)| {
        if !z[[r, c]].is_finite() {
            return f32::NAN;
        }
        let (r0, c0) = (r.saturating_sub(half), c.saturating_sub(half));
        let (r1, c1) = ((r + half + 1).min(rows), (c + half + 1).min(cols));
        let at = |rr: usize, cc: usize| (sum[rr * w + cc], cnt[rr * w + cc]);
        let (a, ka) = at(r1, c1);
        let (b, kb) = at(r0, c1);
        let (d, kd) = at(r1, c0);
        let (e, ke) = at(r0, c0);
        let k = ka + ke - kb - kd;
        ((a - b - d + e) / k.max(1) as f64) as f32
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_mound_on_a_slope_is_outlined_at_its_foot() {
        // A plain rising 5 m over 200 cells, a cone of 6 m and radius 20 cells on it.
        let n = 200;
        let z = Array2::from_shape_fn((n, n), |(r, c)| {
            let plain = 5.0 * c as f64 / n as f64;
            let d = ((r as f64 - 100.0).powi(2) + (c as f64 - 100.0).powi(2)).sqrt();
            (plain + (6.0 * (1.0 - d / 20.0)).max(0.0)) as f32
        });
        let o = outline(&z, &z, 0.3, 1).expect("a mound stands above its base");
        // Check: analytic — a cone of 6 m: a fifth of its height (1.2 m) is reached 16 cells from
        // its centre; the plain's slope is not relief. Tolerance 3 cells (smoothing, base).
        assert!((o.level_m - 1.2).abs() < 0.3, "{}", o.level_m);
        for &(r, c, inside) in &[
            (100, 100, true),
            (100, 110, true),
            (100, 140, false),
            (10, 10, false),
            (190, 190, false),
        ] {
            assert_eq!(
                o.later[[r, c]] as f64 > o.level_m,
                inside,
                "({r}, {c}): {}",
                o.later[[r, c]]
            );
        }
        // Running minimum and mean agree with a direct computation on a small grid.
        let x = [3.0, 1.0, 4.0, f32::NAN, 5.0, 9.0, 2.0];
        let mut out = Vec::new();
        min_1d(&x, 1, &mut out);
        assert_eq!(out, vec![1.0, 1.0, 1.0, 4.0, 5.0, 2.0, 2.0]);
    }

    #[test]
    fn flat_noise_draws_no_outline() {
        let z = Array2::from_shape_fn((60, 60), |(r, c)| {
            2.0 + 0.05 * (((r * 7 + c * 13) % 5) as f32 - 2.0)
        });
        assert!(outline(&z, &z, 0.3, 1).is_none());
    }
}
