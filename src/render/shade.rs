//! Heights -> normals -> light: Horn's gradient, Lambert diffuse, Blinn-Phong specular, 2D hillshade.
//!
//! Conventions (REFERENCES.md §1): x east, y north, z up; grid rows run north to south, so the
//! "north" neighbour of row r is row r−1. `p = dz/dx` (east), `q = dz/dy` (north), from Horn's (1981)
//! 3x3 stencil. Heights passed in are already multiplied by the vertical exaggeration, so normals,
//! geometry and shadows all see the same surface. The sun vector is `(sin φ·cos h, cos φ·cos h, sin h)`
//! for compass azimuth φ and altitude h.
//!
//! Edges and nodata: a missing side neighbour (outside the grid or NaN) is replaced by reflecting
//! the opposite one through the centre (`2·z5 − z_opposite`, or the centre when both are missing),
//! then a missing corner by `z_row + z_col − z5`. That keeps the gradient of a plane exact right up
//! to the edge.

use ndarray::{Array2, ArrayRef2};

/// Unit vector toward the sun for compass azimuth and altitude in degrees.
pub fn sun_vector(azimuth_deg: f64, altitude_deg: f64) -> [f32; 3] {
    let (sa, ca) = azimuth_deg.to_radians().sin_cos();
    let (sh, ch) = altitude_deg.to_radians().sin_cos();
    [(sa * ch) as f32, (ca * ch) as f32, sh as f32]
}

/// Horn (1981) gradient `(p, q) = (dz/dx east, dz/dy north)` at (r, c) of a row-major height slice.
/// `dx`, `dy` are the cell sizes in the same unit as the heights. The centre must be finite.
#[inline]
pub fn horn_gradient(
    z: &[f32],
    rows: usize,
    cols: usize,
    r: usize,
    c: usize,
    dx: f32,
    dy: f32,
) -> (f32, f32) {
    let z5 = z[r * cols + c];
    let at = |rr: isize, cc: isize| -> f32 {
        if rr < 0 || cc < 0 || rr >= rows as isize || cc >= cols as isize {
            f32::NAN
        } else {
            z[rr as usize * cols + cc as usize]
        }
    };
    let (ri, ci) = (r as isize, c as isize);
    let mut w = [[0f32; 3]; 3];
    for (dr, row) in w.iter_mut().enumerate() {
        for (dc, v) in row.iter_mut().enumerate() {
            *v = at(ri + dr as isize - 1, ci + dc as isize - 1);
        }
    }
    // Fill missing edge neighbours by reflection through the centre, then missing corners from
    // the filled edge neighbours (z_corner = z_row + z_col − z5): both exact on a plane.
    for (dr, dc) in [(0, 1), (2, 1), (1, 0), (1, 2)] {
        if w[dr][dc].is_nan() {
            let opp = w[2 - dr][2 - dc];
            w[dr][dc] = if opp.is_nan() { z5 } else { 2.0 * z5 - opp };
        }
    }
    for (dr, dc) in [(0, 0), (0, 2), (2, 0), (2, 2)] {
        if w[dr][dc].is_nan() {
            w[dr][dc] = w[dr][1] + w[1][dc] - z5;
        }
    }
    let [[z1, z2, z3], [z4, _, z6], [z7, z8, z9]] = w;
    let p = ((z3 + 2.0 * z6 + z9) - (z1 + 2.0 * z4 + z7)) / (8.0 * dx);
    let q = ((z1 + 2.0 * z2 + z3) - (z7 + 2.0 * z8 + z9)) / (8.0 * dy);
    (p, q)
}

/// Unit surface normal `(−p, −q, 1)/√(1+p²+q²)`.
#[inline]
pub fn normal(p: f32, q: f32) -> [f32; 3] {
    let inv = 1.0 / (1.0 + p * p + q * q).sqrt();
    [-p * inv, -q * inv, inv]
}

/// Dot product of two 3-vectors.
#[inline]
pub fn dot3(a: [f32; 3], b: [f32; 3]) -> f32 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

/// Lambert's cosine term `max(0, n·l)`.
#[inline]
pub fn lambert(n: [f32; 3], l: [f32; 3]) -> f32 {
    dot3(n, l).max(0.0)
}

/// Blinn (1977) specular term `max(0, n·h)^shininess` with `h = norm(l + v)`; zero where `n·l <= 0`.
#[inline]
pub fn blinn_phong(n: [f32; 3], l: [f32; 3], v: [f32; 3], shininess: f32) -> f32 {
    if dot3(n, l) <= 0.0 {
        return 0.0;
    }
    let h = [l[0] + v[0], l[1] + v[1], l[2] + v[2]];
    let len = dot3(h, h).sqrt();
    if len <= 0.0 {
        return 0.0;
    }
    (dot3(n, h) / len).max(0.0).powf(shininess)
}

/// 2D hillshade `max(0, n·s)` in [0, 1] of a grid (NaN where nodata), from Horn normals with heights
/// multiplied by `exaggeration`. Cell sizes in metres, heights in metres.
pub fn hillshade(
    z: &ArrayRef2<f32>,
    cell_x_m: f64,
    cell_y_m: f64,
    azimuth_deg: f64,
    altitude_deg: f64,
    exaggeration: f64,
) -> Array2<f32> {
    let (rows, cols) = z.dim();
    let k = exaggeration as f32;
    let zk: Vec<f32> = z.iter().map(|v| v * k).collect();
    let s = sun_vector(azimuth_deg, altitude_deg);
    Array2::from_shape_fn((rows, cols), |(r, c)| {
        if zk[r * cols + c].is_nan() {
            return f32::NAN;
        }
        let (p, q) = horn_gradient(&zk, rows, cols, r, c, cell_x_m as f32, cell_y_m as f32);
        lambert(normal(p, q), s)
    })
}

/// A hillshade value as the byte `1 + 254·shade` (0 kept for nodata, ≤ 0 gives 1), the scale used by
/// `gdaldem hillshade` (REFERENCES.md §1).
pub fn hillshade_byte(shade: f32) -> u8 {
    if shade.is_nan() {
        0
    } else {
        (1.0 + 254.0 * shade.max(0.0)).round().clamp(1.0, 255.0) as u8
    }
}

#[cfg(test)]
#[allow(clippy::excessive_precision, clippy::approx_constant)]
mod tests {
    use super::*;

    fn plane(a: f32, b: f32, d: f32) -> Vec<f32> {
        // z = a·x + b·y with x = c·d east, y = −r·d (rows run south).
        (0..25)
            .map(|i| a * (i % 5) as f32 * d - b * (i / 5) as f32 * d)
            .collect()
    }

    #[test]
    fn horn_gradient_of_plane_is_exact_everywhere() {
        let z = plane(0.5, 0.25, 2.0);
        for (r, c) in [(2, 2), (0, 0), (4, 3), (0, 4)] {
            let (p, q) = horn_gradient(&z, 5, 5, r, c, 2.0, 2.0);
            // Check: Horn (1981) 3x3 gradient — plane z=0.5x+0.25y, Δ=2 m gives p=0.5, q=0.25 (north
            // positive, rows run south); analytic, REFERENCES.md §1; abs diff < 1e-6
            assert!(
                (p - 0.5).abs() < 1e-6 && (q - 0.25).abs() < 1e-6,
                "({r},{c}) {p} {q}"
            );
        }
    }

    #[test]
    fn north_facing_plane_has_negative_q() {
        // z falls toward the north: higher rows (south) are higher.
        let z: Vec<f32> = (0..25).map(|i| (i / 5) as f32).collect();
        let (p, q) = horn_gradient(&z, 5, 5, 2, 2, 1.0, 1.0);
        // Check: REFERENCES.md §1 pitfall — rows grow southward, so dz/dy_north = −dz/drow; analytic
        assert!(p.abs() < 1e-6 && (q + 1.0).abs() < 1e-6);
    }

    #[test]
    fn flat_ground_shades_to_sine_of_altitude_from_any_azimuth() {
        let z = Array2::from_elem((4, 4), 3.0f32);
        for az in [0.0, 45.0, 133.0, 270.0, 359.0] {
            let h = hillshade(&z, 1.0, 1.0, az, 45.0, 2.0);
            // Check: Lambert (1760) — flat ground → sin h = 0.7071068 at h = 45°; REFERENCES.md §1; 1e-6
            assert!(h.iter().all(|v| (v - 0.707_106_8).abs() < 1e-6));
        }
        let h = hillshade(&z, 1.0, 1.0, 10.0, 30.0, 1.0);
        assert!(h.iter().all(|v| (v - 0.5).abs() < 1e-6));
    }

    #[test]
    fn sloped_planes_match_hillshade_formula() {
        // z = 0.5x (faces west), sun altitude 45°.
        let z = Array2::from_shape_fn((5, 5), |(_, c)| 0.5 * c as f32);
        for (az, want) in [
            // Check: Burrough & McDonnell (1998) hillshade, p=0.5, h=45°: φ=270 → 3/√10 = 0.9486833;
            // φ=90 → 0.3162278; φ=0 → 0.6324555; φ=315 → 0.8560623; REFERENCES.md §1; abs diff < 1e-5
            (270.0, 0.948_683_3),
            (90.0, 0.316_227_8),
            (0.0, 0.632_455_5),
            (315.0, 0.856_062_3),
        ] {
            let h = hillshade(&z, 1.0, 1.0, az, 45.0, 1.0);
            assert!(h.iter().all(|v| (v - want).abs() < 1e-5), "az {az}");
        }
        // Check: REFERENCES.md §1 — plane z = −x, sun φ=90°, h=45° → exactly 1.0; abs diff < 1e-5
        let z = Array2::from_shape_fn((5, 5), |(_, c)| -(c as f32));
        assert!(hillshade(&z, 1.0, 1.0, 90.0, 45.0, 1.0)
            .iter()
            .all(|v| (v - 1.0).abs() < 1e-5));
        // Check: REFERENCES.md §1 — z = 0.5x with k = 2 has slope 45°: sun from the east at 45°
        // grazes it → n·s = 0 (self-shadow, clamped); analytic; abs diff < 1e-5
        let z = Array2::from_shape_fn((5, 5), |(_, c)| 0.5 * c as f32);
        assert!(hillshade(&z, 1.0, 1.0, 90.0, 45.0, 2.0)
            .iter()
            .all(|v| v.abs() < 1e-5));
        // Check: gdaldem hillshade scale (GDAL apps/gdaldem_lib.cpp) — p=0.5 plane at az 315 alt 45
        // → 1 + 254·0.8560623 = 218.4 → 218; hand-computed, not a GDAL run
        assert_eq!(hillshade_byte(0.856_062_3), 218);
        assert_eq!((hillshade_byte(f32::NAN), hillshade_byte(-0.3)), (0, 1));
    }

    #[test]
    fn blinn_phong_values_and_peak() {
        let n = [0.0, 0.0, 1.0];
        let (s, c) = 30f32.to_radians().sin_cos();
        let l = [s, 0.0, c];
        // Check: Blinn (1977) — n = v = z, l 30° off: (n·h)^10 = cos(15°)^10 = 0.7070299, ^40 =
        // 0.2498913; hand-computed, REFERENCES.md §1; abs diff < 1e-5
        assert!((blinn_phong(n, l, n, 10.0) - 0.707_029_9).abs() < 1e-5);
        assert!((blinn_phong(n, l, n, 40.0) - 0.249_891_3).abs() < 1e-5);
        // Check: Blinn (1977) — the highlight peaks (=1) where the half vector meets the normal: sweep the
        // normal's tilt and find the maximum at half the light–view angle; analytic
        let v = [-s, 0.0, c]; // mirror of l: half vector is +z
        let mut best = (f32::MIN, 0);
        for tilt in -40..=40 {
            let (ts, tc) = (tilt as f32).to_radians().sin_cos();
            let val = blinn_phong([ts, 0.0, tc], l, v, 40.0);
            if val > best.0 {
                best = (val, tilt);
            }
        }
        assert_eq!(best.1, 0);
        assert!((best.0 - 1.0).abs() < 1e-6);
        // Light behind the surface: no highlight.
        assert_eq!(blinn_phong(n, [0.0, 0.0, -1.0], n, 10.0), 0.0);
    }
}
