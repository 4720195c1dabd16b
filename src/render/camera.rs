//! View options + grid extent -> `Camera`: a pinhole look-at camera, default framing and orbit easing.
//!
//! The scene is in local metres: x east and y north from the grid's centre, z up (metres times the
//! vertical exaggeration). The camera follows the look-at construction of REFERENCES.md §2
//! (Hartley & Zisserman 2003, ch. 6): `f = norm(T − E)`, `r = norm(f × up)`, `u = r × f`, focal
//! length in pixels `F = (H/2)/tan(fovy/2)`, pixel `col = W/2 + F·xc/zc`, `row = H/2 − F·yc/zc`
//! (continuous, origin at the top-left corner, pixel centres at half-integers). Math is f64 here;
//! the per-vertex loop takes an f32 copy.

/// Nearest depth (metres along the line of sight) that is drawn; closer points are clipped.
pub const NEAR_M: f64 = 0.01;

/// A pinhole camera looking from `eye` along `fwd`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Camera {
    /// Eye position (local metres).
    pub eye: [f64; 3],
    /// Unit vector to the right of the image.
    pub right: [f64; 3],
    /// Unit vector up the image.
    pub up: [f64; 3],
    /// Unit line of sight.
    pub fwd: [f64; 3],
    /// Focal length in pixels.
    pub focal_px: f64,
    /// Image width in pixels.
    pub width: f64,
    /// Image height in pixels.
    pub height: f64,
}

pub(crate) fn sub(a: [f64; 3], b: [f64; 3]) -> [f64; 3] {
    [a[0] - b[0], a[1] - b[1], a[2] - b[2]]
}
pub(crate) fn dot(a: [f64; 3], b: [f64; 3]) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}
fn cross(a: [f64; 3], b: [f64; 3]) -> [f64; 3] {
    [
        a[1] * b[2] - a[2] * b[1],
        a[2] * b[0] - a[0] * b[2],
        a[0] * b[1] - a[1] * b[0],
    ]
}
fn norm(a: [f64; 3]) -> [f64; 3] {
    let l = dot(a, a).sqrt();
    [a[0] / l, a[1] / l, a[2] / l]
}

/// Line of sight for a compass bearing `facing_deg` (clockwise from north) tilted `elevation_deg`
/// below the horizon.
pub fn view_direction(facing_deg: f64, elevation_deg: f64) -> [f64; 3] {
    let (sp, cp) = facing_deg.to_radians().sin_cos();
    let (se, ce) = elevation_deg.to_radians().sin_cos();
    [sp * ce, cp * ce, -se]
}

impl Camera {
    /// Camera at `eye` looking at `target` with world up = +z, vertical field of view `fovy_deg`.
    /// When the line of sight is vertical, `facing_deg` decides which way is up on the image.
    pub fn look_at(
        eye: [f64; 3],
        target: [f64; 3],
        facing_deg: f64,
        fovy_deg: f64,
        width: f64,
        height: f64,
    ) -> Camera {
        let fwd = norm(sub(target, eye));
        let side = cross(fwd, [0.0, 0.0, 1.0]);
        let right = if dot(side, side) > 1e-18 {
            norm(side)
        } else {
            // Straight down: the top of the image points along the facing bearing.
            let (s, c) = facing_deg.to_radians().sin_cos();
            [c, -s, 0.0]
        };
        let up = cross(right, fwd);
        let focal_px = (height / 2.0) / (fovy_deg.to_radians() / 2.0).tan();
        Camera {
            eye,
            right,
            up,
            fwd,
            focal_px,
            width,
            height,
        }
    }

    /// Camera-frame coordinates (xc right, yc up, zc depth) of a point.
    pub fn to_camera(&self, p: [f64; 3]) -> [f64; 3] {
        let d = sub(p, self.eye);
        [dot(d, self.right), dot(d, self.up), dot(d, self.fwd)]
    }

    /// Continuous pixel (col, row) and depth of a point, or None when closer than [`NEAR_M`].
    pub fn project(&self, p: [f64; 3]) -> Option<(f64, f64, f64)> {
        let [xc, yc, zc] = self.to_camera(p);
        if zc <= NEAR_M {
            return None;
        }
        Some((
            self.width / 2.0 + self.focal_px * xc / zc,
            self.height / 2.0 - self.focal_px * yc / zc,
            zc,
        ))
    }

    /// The same camera on an image `s` times larger in each direction (for supersampling).
    pub fn scaled(&self, s: f64) -> Camera {
        Camera {
            focal_px: self.focal_px * s,
            width: self.width * s,
            height: self.height * s,
            ..*self
        }
    }
}

/// Smallest distance from `target` along `-fwd` at which every point of `points` projects inside
/// the image with `margin` (a share of the half-width/half-height kept free on each side).
#[allow(clippy::too_many_arguments)]
pub fn fit_distance(
    points: &[[f64; 3]],
    target: [f64; 3],
    fwd: [f64; 3],
    right: [f64; 3],
    up: [f64; 3],
    fovy_deg: f64,
    aspect: f64,
    margin: f64,
) -> f64 {
    let ty = (fovy_deg.to_radians() / 2.0).tan() * (1.0 - margin);
    let tx = ty * aspect;
    let mut d: f64 = NEAR_M * 10.0;
    for &p in points {
        let q = sub(p, target);
        let (x, y, z) = (dot(q, right), dot(q, up), dot(q, fwd));
        // zc = z + d must satisfy |x| <= tx·zc and |y| <= ty·zc.
        d = d.max(x.abs() / tx - z).max(y.abs() / ty - z);
    }
    d
}

/// Smooth start and end of an orbit: 3t² − 2t³ (zero speed at both ends); common practice, no source.
pub fn ease(t: f64) -> f64 {
    let t = t.clamp(0.0, 1.0);
    t * t * (3.0 - 2.0 * t)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: (f64, f64, f64), col: f64, row: f64) -> bool {
        (a.0 - col).abs() < 1e-4 && (a.1 - row).abs() < 1e-4
    }

    #[test]
    fn projects_reference_points() {
        let cam = Camera::look_at([0.0, -10.0, 10.0], [0.0; 3], 0.0, 90.0, 200.0, 200.0);
        // Check: Hartley & Zisserman (2003) pinhole look-at — E=(0,−10,10), fovy 90°, 200×200:
        // origin → (100, 100), zc = 14.14214; hand-computed, REFERENCES.md §2; abs diff < 1e-4
        let p = cam.project([0.0, 0.0, 0.0]).unwrap();
        assert!(close(p, 100.0, 100.0) && (p.2 - 14.14214).abs() < 1e-4);
        // Check: same camera — P=(5,0,0) → (135.3553, 100.0000); REFERENCES.md §2; abs diff < 1e-4
        assert!(close(
            cam.project([5.0, 0.0, 0.0]).unwrap(),
            135.3553,
            100.0
        ));
        // Check: same camera — P=(0,0,5) → (100.0000, 66.6667), zc = 10.60660; REFERENCES.md §2
        let p = cam.project([0.0, 0.0, 5.0]).unwrap();
        assert!(close(p, 100.0, 66.6667) && (p.2 - 10.60660).abs() < 1e-4);
        // Check: same camera — P=(5,5,2) → (130.7438, 69.5652); REFERENCES.md §2; abs diff < 1e-4
        assert!(close(
            cam.project([5.0, 5.0, 2.0]).unwrap(),
            130.7438,
            69.5652
        ));
        let cam = Camera::look_at([0.0, -10.0, 10.0], [0.0; 3], 0.0, 60.0, 640.0, 480.0);
        // Check: same camera, fovy 60°, 640×480 — P=(5,0,0) → (466.9694, 240.0000); REFERENCES.md §2
        assert!(close(
            cam.project([5.0, 0.0, 0.0]).unwrap(),
            466.9694,
            240.0
        ));
        // Behind the eye: clipped.
        assert!(cam.project([0.0, -20.0, 20.0]).is_none());
    }

    #[test]
    fn view_direction_follows_compass_and_straight_down_keeps_facing_up() {
        // Check: analytic — facing east (90°) at 0° elevation looks along +x.
        let f = view_direction(90.0, 0.0);
        assert!((f[0] - 1.0).abs() < 1e-12 && f[1].abs() < 1e-12 && f[2].abs() < 1e-12);
        // Looking straight down while facing north: north (+y) is up on the image.
        let cam = Camera::look_at([0.0, 0.0, 100.0], [0.0; 3], 0.0, 40.0, 100.0, 100.0);
        let (_, row_n, _) = cam.project([0.0, 10.0, 0.0]).unwrap();
        let (col_e, _, _) = cam.project([10.0, 0.0, 0.0]).unwrap();
        assert!(row_n < 50.0 && col_e > 50.0);
    }

    #[test]
    fn fitted_distance_keeps_points_inside() {
        let fwd = view_direction(20.0, 35.0);
        let target = [0.0, 0.0, 5.0];
        let cam0 = Camera::look_at([0.0, 0.0, 0.0], fwd, 20.0, 40.0, 1.0, 1.0);
        let pts: Vec<[f64; 3]> = [-500.0, 500.0]
            .iter()
            .flat_map(|&x| [-300.0, 300.0].map(move |y| [x, y, 0.0]))
            .flat_map(|p| [p, [p[0], p[1], 10.0]])
            .collect();
        let d = fit_distance(
            &pts,
            target,
            cam0.fwd,
            cam0.right,
            cam0.up,
            40.0,
            16.0 / 9.0,
            0.05,
        );
        let eye = sub(target, [fwd[0] * d, fwd[1] * d, fwd[2] * d]);
        let cam = Camera::look_at(eye, target, 20.0, 40.0, 1600.0, 900.0);
        let mut touches = false;
        for p in &pts {
            let (c, r, _) = cam.project(*p).unwrap();
            assert!(
                (0.0..=1600.0).contains(&c) && (0.0..=900.0).contains(&r),
                "{c} {r}"
            );
            touches |= !(48.0..=1552.0).contains(&c) || !(27.0..=873.0).contains(&r);
        }
        assert!(touches, "the fit is tight: some corner is near the border");
    }

    #[test]
    fn easing_is_smooth_at_both_ends() {
        // Check: analytic — smoothstep 3t²−2t³ has value 0, 0.5, 1 and zero slope at t = 0 and 1.
        assert_eq!((ease(0.0), ease(0.5), ease(1.0)), (0.0, 0.5, 1.0));
        assert!(ease(0.01) < 0.001 && ease(0.99) > 0.999);
    }
}
