//! Dominant displacement of the whole relief: normalised cross-correlation (NCC) over the overlap
//! for whole-cell shifts, searched in a disc on a coarse pyramid level, climbed down the pyramid,
//! and given a sub-cell offset by a three-point peak fit.

use rayon::prelude::*;

use super::raster::{sample_or_nan, Dims};

/// A whole-cell shift of the later survey against the earlier one and its NCC.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Peak {
    /// Shift in rows (south positive).
    pub row: i32,
    /// Shift in columns (east positive).
    pub col: i32,
    /// NCC at that shift, in [-1, 1].
    pub ncc: f64,
}

/// NCC between `a(r, c)` and `b(r + tr, c + tc)` over the cells where both have data
/// (Lewis 1995 form, means and energies taken over the overlap). None when fewer than `min_pairs`
/// pairs overlap or either side has no variance there (a flat window matches nothing).
pub(crate) fn ncc_shift(
    a: &[f32],
    b: &[f32],
    d: Dims,
    tr: i32,
    tc: i32,
    min_pairs: usize,
) -> Option<f64> {
    let (rows, cols) = (d.rows as i64, d.cols as i64);
    let (tr, tc) = (tr as i64, tc as i64);
    let r_lo = (-tr).max(0);
    let r_hi = (rows - tr).min(rows);
    let c_lo = (-tc).max(0);
    let c_hi = (cols - tc).min(cols);
    if r_lo >= r_hi || c_lo >= c_hi {
        return None;
    }
    let (mut n, mut sa, mut sb, mut saa, mut sbb, mut sab) =
        (0usize, 0.0f64, 0.0f64, 0.0f64, 0.0f64, 0.0f64);
    for r in r_lo..r_hi {
        let ar = &a[(r * cols + c_lo) as usize..(r * cols + c_hi) as usize];
        let br0 = ((r + tr) * cols + c_lo + tc) as usize;
        let br = &b[br0..br0 + ar.len()];
        // Row partials in f32 keep the inner loop fast; rows are at most a few thousand cells.
        let (mut rn, mut ra, mut rb, mut raa, mut rbb, mut rab) =
            (0usize, 0.0f32, 0.0f32, 0.0f32, 0.0f32, 0.0f32);
        for (&x, &y) in ar.iter().zip(br) {
            if x.is_finite() && y.is_finite() {
                rn += 1;
                ra += x;
                rb += y;
                raa += x * x;
                rbb += y * y;
                rab += x * y;
            }
        }
        n += rn;
        sa += ra as f64;
        sb += rb as f64;
        saa += raa as f64;
        sbb += rbb as f64;
        sab += rab as f64;
    }
    if n < min_pairs.max(2) {
        return None;
    }
    let nf = n as f64;
    let va = saa - sa * sa / nf;
    let vb = sbb - sb * sb / nf;
    let cov = sab - sa * sb / nf;
    // Relative floor: below it the overlap is flat to f32 precision.
    if va <= 1e-9 * saa.max(1e-12) || vb <= 1e-9 * sbb.max(1e-12) || va <= 0.0 || vb <= 0.0 {
        return None;
    }
    Some((cov / (va * vb).sqrt()).clamp(-1.0, 1.0))
}

/// Best NCC over all whole-cell shifts within `radius` cells. The flag is true when the best shift
/// has a neighbour outside the searched disc, i.e. the true peak may lie beyond the search.
///
/// Shifts of a whole grid side or more leave no overlap, so the loops stop short of them: a radius
/// far beyond the grid (a library caller's 1e30 m) costs what the grid's own size costs, and the
/// result is the one the whole disc would give.
pub(crate) fn search_disc(
    a: &[f32],
    b: &[f32],
    d: Dims,
    radius: f64,
    min_pairs: usize,
) -> Option<(Peak, bool)> {
    let ri = radius.floor().max(0.0) as i64;
    let rr = ri.min(d.rows as i64 - 1).max(0) as i32;
    let rc = ri.min(d.cols as i64 - 1).max(0) as i32;
    // In f64: the squares of shifts near the radius's own size would overflow i32.
    let inside = |r: i32, c: i32| {
        let (r, c) = (r as f64, c as f64);
        r * r + c * c <= radius * radius
    };
    let mut best: Option<Peak> = None;
    for tr in -rr..=rr {
        for tc in -rc..=rc {
            if !inside(tr, tc) {
                continue;
            }
            if let Some(ncc) = ncc_shift(a, b, d, tr, tc, min_pairs) {
                // Ties keep the first (row-major) shift, so the result is deterministic.
                if best.is_none_or(|p| ncc > p.ncc) {
                    best = Some(Peak {
                        row: tr,
                        col: tc,
                        ncc,
                    });
                }
            }
        }
    }
    let p = best?;
    let at_limit = (-1..=1).any(|dr| (-1..=1).any(|dc| !inside(p.row + dr, p.col + dc)));
    Some((p, at_limit))
}

/// Climbs from `start` to the local NCC maximum of whole-cell shifts (at most `max_steps` moves).
pub(crate) fn climb(
    a: &[f32],
    b: &[f32],
    d: Dims,
    start: (i32, i32),
    min_pairs: usize,
    max_steps: usize,
) -> Option<Peak> {
    let mut cur = Peak {
        row: start.0,
        col: start.1,
        ncc: ncc_shift(a, b, d, start.0, start.1, min_pairs)?,
    };
    for _ in 0..max_steps {
        let mut best = cur;
        for dr in -1..=1 {
            for dc in -1..=1 {
                if dr == 0 && dc == 0 {
                    continue;
                }
                if let Some(ncc) = ncc_shift(a, b, d, cur.row + dr, cur.col + dc, min_pairs) {
                    if ncc > best.ncc {
                        best = Peak {
                            row: cur.row + dr,
                            col: cur.col + dc,
                            ncc,
                        };
                    }
                }
            }
        }
        if best == cur {
            break;
        }
        cur = best;
    }
    Some(cur)
}

/// Sub-cell offset of a peak from three samples (c_minus, c0, c_plus) at -1, 0, +1.
/// Gaussian fit when all three are positive, else parabolic (Willert & Gharib 1991 forms, see
/// REFERENCES.md §4); 0 when the samples do not form a peak. Clamped to +-1 cell.
pub(crate) fn peak_offset(cm: f64, c0: f64, cp: f64) -> f64 {
    if cm > 0.0 && c0 > 0.0 && cp > 0.0 {
        let (lm, l0, lp) = (cm.ln(), c0.ln(), cp.ln());
        let den = 2.0 * (lm - 2.0 * l0 + lp);
        if den < 0.0 {
            return ((lm - lp) / den).clamp(-1.0, 1.0);
        }
    }
    let den = 2.0 * (cm - 2.0 * c0 + cp);
    if den < 0.0 {
        ((cm - cp) / den).clamp(-1.0, 1.0)
    } else {
        0.0
    }
}

/// Sub-cell shift (rows, cols) around a whole-cell NCC peak, fitted separately along each axis.
pub(crate) fn subcell(a: &[f32], b: &[f32], d: Dims, p: Peak, min_pairs: usize) -> (f64, f64) {
    let at =
        |dr: i32, dc: i32| ncc_shift(a, b, d, p.row + dr, p.col + dc, min_pairs).unwrap_or(-1.0);
    let dr = peak_offset(at(-1, 0), p.ncc, at(1, 0));
    let dc = peak_offset(at(0, -1), p.ncc, at(0, 1));
    (p.row as f64 + dr, p.col as f64 + dc)
}

/// Refines a whole-relief shift `(rows, cols)` by Gauss–Newton on one global translation with a
/// gain and an offset: minimises the sum over the overlap of `(b(x + t) - g*a(x) - o)^2` (the
/// Lucas–Kanade step for a single window covering the grid). The gain makes it blind to a landform
/// that grows or shrinks in place, which a mean of the dense field is not (growth reads as
/// outward motion on every flank, and on an asymmetric dune those do not cancel). None when the
/// system is singular or the step runs more than 2 cells away from `start`.
// Matrix code reads best with indices.
#[allow(clippy::needless_range_loop)]
pub(crate) fn refine_translation(
    a: &[f32],
    b: &[f32],
    d: Dims,
    start: (f64, f64),
    iters: usize,
) -> Option<(f64, f64)> {
    let (rows, cols) = (d.rows, d.cols);
    if rows < 3 || cols < 3 {
        return None;
    }
    let (mut tr, mut tc) = start;
    let mut bw = vec![0.0f32; d.len()];
    for _ in 0..iters {
        let (ftr, ftc) = (tr as f32, tc as f32);
        bw.par_chunks_mut(cols).enumerate().for_each(|(r, row)| {
            for (c, o) in row.iter_mut().enumerate() {
                *o = sample_or_nan(b, d, r as f32 + ftr, c as f32 + ftc);
            }
        });
        let bw = &bw;
        // Per-row partial sums of the 4x4 normal equations (upper triangle) and right-hand side,
        // combined in row order so the result does not depend on the thread count.
        let partial: Vec<[f64; 14]> = (1..rows - 1)
            .into_par_iter()
            .map(|r| {
                let mut acc = [0.0f64; 14];
                for c in 1..cols - 1 {
                    let i = r * cols + c;
                    let x = a[i];
                    let gx = 0.5 * (bw[i + 1] - bw[i - 1]);
                    let gy = 0.5 * (bw[i + cols] - bw[i - cols]);
                    if !(x.is_finite() && bw[i].is_finite() && gx.is_finite() && gy.is_finite()) {
                        continue;
                    }
                    // Unknowns (dc, dr, g, o): gx*dc + gy*dr - g*x - o = -bw.
                    let j = [gx as f64, gy as f64, -(x as f64), -1.0];
                    let rhs = -(bw[i] as f64);
                    let mut k = 0;
                    for p in 0..4 {
                        for q in p..4 {
                            acc[k] += j[p] * j[q];
                            k += 1;
                        }
                    }
                    for p in 0..4 {
                        acc[10 + p] += j[p] * rhs;
                    }
                }
                acc
            })
            .collect();
        let mut acc = [0.0f64; 14];
        for p in &partial {
            for (s, v) in acc.iter_mut().zip(p) {
                *s += v;
            }
        }
        let mut m = [[0.0f64; 5]; 4];
        let mut k = 0;
        for p in 0..4 {
            for q in p..4 {
                m[p][q] = acc[k];
                m[q][p] = acc[k];
                k += 1;
            }
            m[p][4] = acc[10 + p];
        }
        let x = solve4(m)?;
        let (mut dc, mut dr) = (x[0], x[1]);
        let step = dc.hypot(dr);
        if !step.is_finite() {
            return None;
        }
        if step > 1.0 {
            dc /= step;
            dr /= step;
        }
        tr += dr;
        tc += dc;
        if (tr - start.0).hypot(tc - start.1) > 2.0 {
            return None;
        }
        if step < 1e-4 {
            break;
        }
    }
    Some((tr, tc))
}

/// Solves a 4x4 system given as an augmented matrix, by Gaussian elimination with partial pivoting.
#[allow(clippy::needless_range_loop)]
fn solve4(mut m: [[f64; 5]; 4]) -> Option<[f64; 4]> {
    let scale = m
        .iter()
        .flat_map(|r| r[..4].iter())
        .fold(0.0f64, |s, v| s.max(v.abs()));
    if scale.is_nan() || scale <= 0.0 {
        return None;
    }
    for col in 0..4 {
        let piv = (col..4).max_by(|&i, &j| m[i][col].abs().total_cmp(&m[j][col].abs()))?;
        if m[piv][col].abs() <= 1e-12 * scale {
            return None;
        }
        m.swap(col, piv);
        for row in col + 1..4 {
            let f = m[row][col] / m[col][col];
            for k in col..5 {
                m[row][k] -= f * m[col][k];
            }
        }
    }
    let mut x = [0.0f64; 4];
    for row in (0..4).rev() {
        let mut s = m[row][4];
        for k in row + 1..4 {
            s -= m[row][k] * x[k];
        }
        x[row] = s / m[row][row];
    }
    Some(x)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gaussian_fit_is_exact_for_a_gaussian_peak() {
        // Cross-correlation of two sigma=3 Gaussians, one moved 0.3 cells: a Gaussian of variance
        // 2*9 = 18 centred at 0.3.
        let g = |x: f64| (-(x - 0.3) * (x - 0.3) / (2.0 * 18.0)).exp();
        // Check: Willert & Gharib (1991) three-point Gaussian fit — 1-D sigma=3 shift 0.3 gives
        // 0.300000; analytic, REFERENCES.md §4, abs diff < 1e-9
        assert!((peak_offset(g(-1.0), g(0.0), g(1.0)) - 0.3).abs() < 1e-9);
        let (cm, c0, cp) = (g(-1.0) - 2.0, g(0.0) - 2.0, g(1.0) - 2.0);
        // Check: Willert & Gharib (1991) parabolic fit — same peak gives 0.297332; REFERENCES.md §4,
        // abs diff < 1e-5 (the constant offset forces the parabolic branch and leaves it unchanged)
        assert!((peak_offset(cm, c0, cp) - 0.297_332).abs() < 1e-5);
    }

    #[test]
    fn gaussian_moved_by_2_3_and_minus_1_7_is_found() {
        // 48x48, Gaussian sigma=3 cells, moved +2.3 columns and -1.7 rows.
        let d = Dims { rows: 48, cols: 48 };
        let g = |r0: f64, c0: f64| -> Vec<f32> {
            (0..d.len())
                .map(|i| {
                    let (r, c) = ((i / 48) as f64 - r0, (i % 48) as f64 - c0);
                    (-(r * r + c * c) / 18.0).exp() as f32
                })
                .collect()
        };
        let a = g(24.0, 24.0);
        let b = g(24.0 - 1.7, 24.0 + 2.3);
        let (p, at_limit) = search_disc(&a, &b, d, 6.0, 100).unwrap();
        // Check: REFERENCES.md §4 — 48x48, sigma=3, moved (2.3, -1.7): integer peak (2, -2); analytic
        assert_eq!((p.col, p.row), (2, -2));
        assert!(!at_limit);
        let (r, c) = subcell(&a, &b, d, p, 100);
        // Check: REFERENCES.md §4 — sub-cell fit recovers (2.3, -1.7); 0.05 cell tolerance because
        // NCC over the overlap is not exactly the Gaussian-shaped plain correlation the exact value assumes
        assert!(
            (c - 2.3).abs() < 0.05 && (r + 1.7).abs() < 0.05,
            "({c}, {r})"
        );
    }

    #[test]
    fn global_refinement_ignores_gain_and_offset() {
        let d = Dims { rows: 64, cols: 64 };
        let g = |r0: f64, c0: f64, k: f64, o: f64| -> Vec<f32> {
            (0..d.len())
                .map(|i| {
                    let (r, c) = ((i / 64) as f64 - r0, (i % 64) as f64 - c0);
                    (o + k * 3.0 * (-(r * r) / 50.0 - c * c / 18.0).exp()) as f32
                })
                .collect()
        };
        let a = g(32.0, 32.0, 1.0, 0.0);
        // Moved (+2.3 cols, -1.7 rows), 1.6 times taller and 0.4 m higher overall.
        let b = g(32.0 - 1.7, 32.0 + 2.3, 1.6, 0.4);
        let (r, c) = refine_translation(&a, &b, d, (-2.0, 2.0), 20).unwrap();
        // Check: analytic — a translated, rescaled copy is registered at the translation
        // (REFERENCES.md §4 Lucas–Kanade step); 0.02 cell tolerance for bilinear resampling
        assert!(
            (c - 2.3).abs() < 0.02 && (r + 1.7).abs() < 0.02,
            "({c}, {r})"
        );
    }

    #[test]
    fn ncc_of_affine_copy_is_one_and_flat_is_none() {
        let d = Dims { rows: 16, cols: 16 };
        let a: Vec<f32> = (0..d.len()).map(|i| ((i * 7919) % 13) as f32).collect();
        let b: Vec<f32> = a.iter().map(|v| 2.0 * v + 5.0).collect();
        let neg: Vec<f32> = a.iter().map(|v| -0.5 * v).collect();
        // Check: Lewis (1995) NCC — t = a*f + b gives +1 (a > 0) and -1 (a < 0); REFERENCES.md §4, 1e-6
        assert!((ncc_shift(&a, &b, d, 0, 0, 4).unwrap() - 1.0).abs() < 1e-6);
        assert!((ncc_shift(&a, &neg, d, 0, 0, 4).unwrap() + 1.0).abs() < 1e-6);
        let flat = vec![3.0f32; d.len()];
        // Check: Lewis (1995) — a flat window has no defined NCC: "no match", never NaN; REFERENCES.md §4
        assert!(ncc_shift(&a, &flat, d, 0, 0, 4).is_none());
    }
}
