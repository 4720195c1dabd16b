//! Reduced grid + camera -> the quads of the terrain block's sides, down to the base elevation.
//!
//! The four edges of the reduced grid each get one quad per cell edge, from the surface down to the
//! base (exaggerated), lit by the sun through the side's outward normal and darkened toward the base
//! so the block reads as a solid. Quads facing away from the eye are dropped; an edge over nodata is
//! left open.

use super::raster::Vert;
use super::scene::{Buffers, CamF, Light};
use super::shade::{dot3, lambert};

/// One quad of the block's side: top edge (a, b) and base (b, a), front-facing already decided.
#[derive(Debug, Clone, Copy)]
pub(super) struct Side {
    pub(super) v: [Vert; 4],
    pub(super) ymin: f32,
    pub(super) ymax: f32,
}

/// Front-facing side quads of the block around the reduced grid.
#[allow(clippy::too_many_arguments)]
pub(super) fn build_sides(
    out: &mut Vec<Side>,
    b: &Buffers,
    cam: &CamF,
    base_k: f32,
    side_lin: [f32; 3],
    light: &Light,
) {
    out.clear();
    let (lr, lc) = (b.lr, b.lc);
    // (vertex index a, vertex index b, outward normal) along each edge; a→b runs so that the quad
    // (a, b, base b, base a) is front-facing seen from outside.
    let mut push = |ia: usize, ib: usize, n: [f32; 3], pa: [f32; 2], pb: [f32; 2]| {
        let (va, vb) = (b.verts[ia], b.verts[ib]);
        if !va.x.is_finite() || !vb.x.is_finite() {
            return;
        }
        let mid = [
            (pa[0] + pb[0]) / 2.0,
            (pa[1] + pb[1]) / 2.0,
            (b.zk[ia] + b.zk[ib]) / 2.0,
        ];
        let to_eye = [
            cam.eye[0] - mid[0],
            cam.eye[1] - mid[1],
            cam.eye[2] - mid[2],
        ];
        if dot3(n, to_eye) <= 0.0 {
            return;
        }
        let shade = (light.ambient + light.diffuse * lambert(n, light.sun)) * light.intensity;
        let top = side_lin.map(|c| c * shade);
        let bottom = side_lin.map(|c| c * shade * 0.55);
        let base = |p: [f32; 2], rgb: [f32; 3]| {
            let (x, y, iz) = cam.project([p[0], p[1], base_k]);
            Vert {
                x,
                y,
                iz,
                rgb,
                a: 1.0,
            }
        };
        let v = [
            Vert { rgb: top, ..va },
            Vert { rgb: top, ..vb },
            base(pb, bottom),
            base(pa, bottom),
        ];
        if v.iter().any(|v| !v.x.is_finite()) {
            return;
        }
        let ymin = v.iter().map(|v| v.y).fold(f32::MAX, f32::min);
        let ymax = v.iter().map(|v| v.y).fold(f32::MIN, f32::max);
        out.push(Side { v, ymin, ymax });
    };
    let (x0, x1, y0, y1) = (b.xs[0], b.xs[lc - 1], b.ys[0], b.ys[lr - 1]);
    for c in 0..lc - 1 {
        push(c, c + 1, [0.0, 1.0, 0.0], [b.xs[c], y0], [b.xs[c + 1], y0]);
        let (ia, ib) = ((lr - 1) * lc + c, (lr - 1) * lc + c + 1);
        push(ia, ib, [0.0, -1.0, 0.0], [b.xs[c], y1], [b.xs[c + 1], y1]);
    }
    for r in 0..lr - 1 {
        push(
            r * lc,
            (r + 1) * lc,
            [-1.0, 0.0, 0.0],
            [x0, b.ys[r]],
            [x0, b.ys[r + 1]],
        );
        let (ia, ib) = (r * lc + lc - 1, (r + 1) * lc + lc - 1);
        push(ia, ib, [1.0, 0.0, 0.0], [x1, b.ys[r]], [x1, b.ys[r + 1]]);
    }
}
