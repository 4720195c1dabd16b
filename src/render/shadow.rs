//! Heights + sun -> cast-shadow amount per cell (0 lit, 1 in shadow): the sun's horizon over the grid.
//!
//! A cell is in cast shadow when something toward the sun rises above the sun's ray through it:
//! `max_d (z(x + d·ŝ) − d·tan h) > z(x)` (REFERENCES.md §3; Dozier & Frew 1990 sweep along lines).
//! The grid is cut into parallel lines running toward the sun, one cell apart across them, stepping
//! one whole cell along the dominant axis (so each step lands on a grid column or row and needs only a
//! 1-D linear interpolation across). Along each line, a running "shadow height" is carried from the
//! sun side: `env = max(z, env_prev − step·tan h)`. That is O(cells), and lines are independent, so
//! they run in parallel with the same result for any thread count. Each cell then reads the
//! upstream shadow height of the two lines either side of it, linearly weighted.
//!
//! Soft edge: the shadow amount is `clamp(0.5 + (cast − z)/(w·step·tan h), 0, 1)` with `w` the
//! softness in cells, so the 50 % point sits exactly on the geometric shadow edge; `w = 0` is hard.
//! Heights must already carry the vertical exaggeration, which then lengthens shadows by the same factor.

use rayon::prelude::*;

/// Sun geometry over a grid, reduced to stepping along the dominant axis.
struct Sweep {
    /// True when the primary (stepping) axis is the columns.
    along_cols: bool,
    /// Length of the primary and secondary axes.
    np: usize,
    ns: usize,
    /// +1 or −1: primary index change of one step toward the sun.
    sp: isize,
    /// Secondary change per primary index change (|g| ≤ 1).
    g: f32,
    /// Height the sun's ray rises per step.
    rise: f32,
    /// Line offset of line 0, and the number of lines.
    a_min: f32,
    n_lines: usize,
}

impl Sweep {
    fn new(
        rows: usize,
        cols: usize,
        dx: f32,
        dy: f32,
        azimuth_deg: f64,
        altitude_deg: f64,
    ) -> Sweep {
        let (sa, ca) = azimuth_deg.to_radians().sin_cos();
        let tan_h = altitude_deg.to_radians().tan() as f32;
        // Cells per metre toward the sun: east is +col, north is −row.
        let vc = sa as f32 / dx;
        let vr = -(ca as f32) / dy;
        let along_cols = vc.abs() >= vr.abs();
        let (vp, vs, np, ns) = if along_cols {
            (vc, vr, cols, rows)
        } else {
            (vr, vc, rows, cols)
        };
        let sp: isize = if vp >= 0.0 { 1 } else { -1 };
        let step_m = 1.0 / vp.abs();
        // Moving the primary index by sp moves the secondary by vs/|vp|; per +1 of primary: g.
        let g = (vs / vp.abs()) * sp as f32;
        let span = g * (np.saturating_sub(1)) as f32;
        let a_min = -span.max(0.0);
        let a_max = (ns.saturating_sub(1)) as f32 - span.min(0.0);
        let n_lines = (a_max - a_min).ceil() as usize + 2;
        Sweep {
            along_cols,
            np,
            ns,
            sp,
            g,
            rise: step_m * tan_h,
            a_min,
            n_lines,
        }
    }

    #[inline]
    fn index(&self, i: usize, s: usize, cols: usize) -> usize {
        if self.along_cols {
            s * cols + i
        } else {
            i * cols + s
        }
    }
}

/// Fills `out` (row-major, same shape as `z`) with the cast-shadow amount of every cell.
/// `scratch` is resized as needed and may be reused across frames. Cells with NaN height get 0.
/// `dx`, `dy` are cell sizes in the unit of `z` (metres). Altitude must be in (0, 90].
#[allow(clippy::too_many_arguments)]
pub fn cast_shadow_into(
    z: &[f32],
    rows: usize,
    cols: usize,
    dx: f32,
    dy: f32,
    azimuth_deg: f64,
    altitude_deg: f64,
    softness_cells: f32,
    out: &mut [f32],
    scratch: &mut Vec<f32>,
) {
    assert!(z.len() == rows * cols && out.len() == z.len());
    if rows == 0 || cols == 0 {
        return;
    }
    if altitude_deg >= 90.0 {
        // Check: REFERENCES.md §3 — a sun at the zenith casts no shadow anywhere.
        out.iter_mut().for_each(|v| *v = 0.0);
        return;
    }
    let sw = Sweep::new(rows, cols, dx, dy, azimuth_deg, altitude_deg);
    scratch.clear();
    scratch.resize(sw.n_lines * sw.np, f32::NEG_INFINITY);
    // Pass 1: along each line from the sun side, the upstream shadow height at every primary index.
    scratch
        .par_chunks_mut(sw.np)
        .with_min_len(8)
        .enumerate()
        .for_each(|(l, line)| {
            let a = sw.a_min + l as f32;
            let mut env = f32::NEG_INFINITY;
            let n = sw.np as isize;
            let (start, stop) = if sw.sp > 0 { (n - 1, -1) } else { (0, n) };
            let mut i = start;
            while i != stop {
                let cast = env - sw.rise;
                line[i as usize] = cast;
                let s = a + sw.g * i as f32;
                let mut h = f32::NEG_INFINITY;
                if s >= 0.0 && s <= (sw.ns - 1) as f32 {
                    let s0 = (s.floor() as usize).min(sw.ns - 1);
                    let s1 = (s0 + 1).min(sw.ns - 1);
                    let f = s - s0 as f32;
                    let h0 = z[sw.index(i as usize, s0, cols)];
                    let h1 = z[sw.index(i as usize, s1, cols)];
                    let v = if f == 0.0 { h0 } else { h0 + (h1 - h0) * f };
                    if v.is_finite() {
                        h = v;
                    }
                }
                env = h.max(cast);
                i -= sw.sp;
            }
        });
    // Pass 2: every cell reads the two lines either side of it.
    let width = softness_cells * sw.rise;
    let lines: &[f32] = scratch;
    out.par_chunks_mut(cols)
        .enumerate()
        .for_each(|(r, out_row)| {
            for (c, o) in out_row.iter_mut().enumerate() {
                let zc = z[r * cols + c];
                if !zc.is_finite() {
                    *o = 0.0;
                    continue;
                }
                let (i, s) = if sw.along_cols { (c, r) } else { (r, c) };
                let lf = s as f32 - sw.g * i as f32 - sw.a_min;
                let l0 = (lf.floor().max(0.0) as usize).min(sw.n_lines - 1);
                let l1 = (l0 + 1).min(sw.n_lines - 1);
                let f = lf - l0 as f32;
                let c0 = lines[l0 * sw.np + i];
                let c1 = lines[l1 * sw.np + i];
                let cast = if f <= 1e-6 {
                    c0
                } else if f >= 1.0 - 1e-6 {
                    c1
                } else if c0.is_finite() && c1.is_finite() {
                    c0 + (c1 - c0) * f
                } else {
                    f32::NEG_INFINITY
                };
                *o = if !cast.is_finite() {
                    0.0
                } else if width > 0.0 {
                    (0.5 + (cast - zc) / width).clamp(0.0, 1.0)
                } else if cast > zc {
                    1.0
                } else {
                    0.0
                };
            }
        });
}

/// Sun altitude of the sky-visibility test: a direction counts as hidden when the terrain rises
/// above this angle in it. A crude openness estimate (eight directions, one angle); common
/// practice, no source.
const SKY_TEST_ALT_DEG: f64 = 15.0;
/// Directions of the sky-visibility test.
const SKY_DIRECTIONS: usize = 8;

/// Fills `sky` with `1 − darkening × (share of hidden directions)` for every cell of `zk`, using
/// the cast-shadow sweep toward each of eight compass directions; `dir` and `scratch` are reused.
#[allow(clippy::too_many_arguments)]
pub fn sky_visibility_into(
    zk: &[f32],
    lr: usize,
    lc: usize,
    dx: f32,
    dy: f32,
    darkening: f32,
    sky: &mut Vec<f32>,
    dir: &mut Vec<f32>,
    scratch: &mut Vec<f32>,
) {
    let n = lr * lc;
    sky.clear();
    sky.resize(n, 0.0);
    dir.resize(n, 0.0);
    for j in 0..SKY_DIRECTIONS {
        let az = (j as f64 + 0.5) * 360.0 / SKY_DIRECTIONS as f64;
        cast_shadow_into(zk, lr, lc, dx, dy, az, SKY_TEST_ALT_DEG, 1.0, dir, scratch);
        sky.par_iter_mut()
            .zip(dir.par_iter())
            .for_each(|(s, d)| *s += d);
    }
    let scale = darkening / SKY_DIRECTIONS as f32;
    sky.par_iter_mut().for_each(|s| *s = 1.0 - scale * *s);
}

#[cfg(test)]
#[allow(clippy::excessive_precision)]
mod tests {
    use super::*;

    fn run(z: &[f32], rows: usize, cols: usize, az: f64, alt: f64, soft: f32) -> Vec<f32> {
        let mut out = vec![0.0; z.len()];
        cast_shadow_into(
            z,
            rows,
            cols,
            1.0,
            1.0,
            az,
            alt,
            soft,
            &mut out,
            &mut Vec::new(),
        );
        out
    }

    /// Length in cells of the run of shadowed (> 0.5) cells leaving the wall along a direction.
    fn shadow_run(out: &[f32], cols: usize, r: usize, c: usize, dr: isize, dc: isize) -> usize {
        let mut n = 0;
        let (mut rr, mut cc) = (r as isize + dr, c as isize + dc);
        while rr >= 0
            && cc >= 0
            && (cc as usize) < cols
            && out[rr as usize * cols + cc as usize] > 0.5
        {
            n += 1;
            rr += dr;
            cc += dc;
        }
        n
    }

    #[test]
    fn wall_casts_h_over_tan_alt_in_every_direction() {
        let n = 80;
        for (az, alt, hw, want_m) in [
            // Check: REFERENCES.md §3 — wall h=10, sun 30° → L = 17.32051 m (1 m cells 1..17 dark);
            // within one cell
            (90.0, 30.0, 10.0f32, 17.320_51),
            // Check: REFERENCES.md §3 — h=10, α=45° → 10 m; within one cell
            (270.0, 45.0, 10.0, 10.0),
            // Check: REFERENCES.md §3 — h=1, α=10° → 5.67128 m; within one cell
            (0.0, 10.0, 1.0, 5.671_28),
            (180.0, 30.0, 10.0, 17.320_51),
        ] {
            for soft in [0.0, 1.0] {
                // A one-cell wall across the middle, perpendicular to the sun.
                let mut z = vec![0.0f32; n * n];
                let mid = n / 2;
                for k in 0..n {
                    let i = if az == 90.0 || az == 270.0 {
                        k * n + mid
                    } else {
                        mid * n + k
                    };
                    z[i] = hw;
                }
                let out = run(&z, n, n, az, alt, soft);
                // Shadow falls away from the sun.
                let (dr, dc) = match az as i32 {
                    90 => (0, -1),
                    270 => (0, 1),
                    0 => (1, 0),
                    _ => (-1, 0),
                };
                let len = shadow_run(&out, n, mid, mid, dr, dc) as f64;
                assert!(
                    (len - want_m).abs() <= 1.0,
                    "az {az} alt {alt} soft {soft}: {len} vs {want_m}"
                );
                // Cells on the sun side stay lit.
                assert_eq!(shadow_run(&out, n, mid, mid, -dr, -dc), 0);
            }
        }
    }

    #[test]
    fn exaggeration_scales_shadow_length() {
        let n = 80;
        let mut z = vec![0.0f32; n * n];
        for r in 0..n {
            z[r * n + 60] = 2.0 * 10.0; // wall of 10 m with k = 2
        }
        let out = run(&z, n, n, 90.0, 45.0, 0.0);
        // Check: REFERENCES.md §3 — shadow length scales by k: 10 m wall, α=45°, k=2 → 20 m; one cell
        assert!((shadow_run(&out, n, 40, 60, 0, -1) as f64 - 20.0).abs() <= 1.0);
    }

    #[test]
    fn oblique_sun_and_planes() {
        let n = 64;
        // Check: REFERENCES.md §3 — a plane never shadows itself by casting, whatever the azimuth.
        let z: Vec<f32> = (0..n * n)
            .map(|i| 0.3 * (i % n) as f32 - 0.2 * (i / n) as f32)
            .collect();
        for az in [10.0, 47.0, 135.0, 200.0, 300.0] {
            assert!(
                run(&z, n, n, az, 40.0, 1.0).iter().all(|&v| v < 0.5),
                "az {az}"
            );
        }
        // Check: REFERENCES.md §3 — sun at 90° → no cast shadow anywhere.
        let mut tall = vec![0.0f32; n * n];
        tall[n * n / 2 + n / 2] = 100.0;
        assert!(run(&tall, n, n, 0.0, 90.0, 1.0).iter().all(|&v| v == 0.0));
        // A single post at oblique sun (azimuth 45°, NE) shades cells to its SW over h/tan(alt).
        let out = run(&tall, n, n, 45.0, 80.0, 0.0);
        let (r, c) = (n / 2, n / 2);
        // 100/tan(80°) = 17.6 m → along the diagonal about 12 cells (17.6/√2).
        assert!(out[(r + 5) * n + (c - 5)] > 0.5);
        assert!(out[(r - 5) * n + (c + 5)] < 0.5, "no shadow toward the sun");
        assert!(out[(r + 20) * n + (c - 20)] < 0.5, "shadow ends");
    }

    #[test]
    fn nodata_neither_casts_nor_receives() {
        let n = 20;
        let mut z = vec![0.0f32; n * n];
        z[10 * n + 10] = f32::NAN;
        let out = run(&z, n, n, 90.0, 30.0, 1.0);
        assert!(out.iter().all(|&v| v == 0.0));
    }
}
