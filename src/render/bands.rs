//! Binned triangles + sky + translucent layers -> the frame's rows, one row band at a time.
//!
//! Each band (16 output rows) fills its sky gradient, rasterises the terrain triangles binned to it
//! and the block's sides with a depth buffer, draws the shell surface into a layer of its own and
//! blends it once (so folds of the shell are not blended twice), blends the water plane (intersected
//! per pixel, analytically) where it is nearer than the terrain, then averages the supersamples in
//! linear light (box filter) and encodes sRGB into its rows of the frame. Bands share nothing
//! writable, so they run in parallel with the same result for any thread count.

use std::cell::RefCell;

use rayon::prelude::*;

use super::camera::NEAR_M;
use super::ramp::Encoder;
use super::raster::{draw_triangle, draw_triangle_layer, Band, Vert};
use super::scene::{CamF, Light};
use super::shade::dot3;
use super::sides::Side;

/// Output rows per band: 45 bands on a 720-row frame, a few per thread and cheap to bin into.
pub(super) const BAND_OUT_ROWS: usize = 16;

/// A drawn point this far (scene metres) below the smoothed terrain is on the block's side, not on
/// the surface: its water is decided by depth alone.
const SIDE_DEPTH: f32 = 2.0;

/// A drawn point this far (scene metres) above the water is dry: the smoothed terrain differs from
/// the drawn one by survey noise and rounded crests, far less than this.
const CLEAR_ABOVE: f32 = 2.0;

/// A water plane in scene units: height (exaggerated), half extents, linear colour, opacity.
pub(super) type Water = (f32, f32, f32, [f32; 3], f32);

/// The terrain smoothed over a few cells, on the reduced grid, for deciding the waterline: a
/// pixel is under water when the smoothed terrain at the point it shows lies below the water, so
/// survey noise cannot fray the shoreline.
#[derive(Clone, Copy)]
pub(super) struct Ground<'a> {
    /// Smoothed exaggerated heights, row-major `lr` × `lc` (NaN = nodata).
    pub(super) z: &'a [f32],
    pub(super) lr: usize,
    pub(super) lc: usize,
    /// Scene position of vertex (0, 0) and the inverse spacing (rows run south: y falls by
    /// `1 / inv_dy` a row).
    pub(super) x0: f32,
    pub(super) y0: f32,
    pub(super) inv_dx: f32,
    pub(super) inv_dy: f32,
}

/// Steepest smoothed slope (rise over run, scene units) the waterline's anti-aliasing ramp allows
/// for: beyond half a ramp of this slope from the water a sample is plainly wet or dry, and the
/// gradient is not needed.
const MAX_RAMP_SLOPE: f32 = 8.0;

/// A bilinear sample of the smoothed terrain: its height and what its gradient needs.
#[derive(Clone, Copy)]
struct GroundSample {
    h: f32,
    corners: [f32; 4],
    tc: f32,
    tr: f32,
}

impl Ground<'_> {
    /// The smoothed terrain at scene point (x, y); None off the grid or over nodata.
    #[inline]
    fn sample(&self, x: f32, y: f32) -> Option<GroundSample> {
        let fc = (x - self.x0) * self.inv_dx;
        let fr = (self.y0 - y) * self.inv_dy;
        let (maxc, maxr) = ((self.lc - 1) as f32, (self.lr - 1) as f32);
        if !(fc >= 0.0 && fr >= 0.0 && fc <= maxc && fr <= maxr) {
            return None;
        }
        let (c0, r0) = (
            (fc as usize).min(self.lc - 2),
            (fr as usize).min(self.lr - 2),
        );
        let (tc, tr) = (fc - c0 as f32, fr - r0 as f32);
        let i = r0 * self.lc + c0;
        let corners = [
            self.z[i],
            self.z[i + 1],
            self.z[i + self.lc],
            self.z[i + self.lc + 1],
        ];
        let [a, b, c, d] = corners;
        let top = a + (b - a) * tc;
        let bottom = c + (d - c) * tc;
        let h = top + (bottom - top) * tr;
        h.is_finite().then_some(GroundSample { h, corners, tc, tr })
    }

    /// Share of a sample under water level `wz`, given the sample's footprint on the ground
    /// (scene metres): a ramp one footprint wide across the smoothed contour.
    #[inline]
    fn cover(&self, s: &GroundSample, wz: f32, footprint: f32) -> f32 {
        let dh = s.h - wz;
        if dh.abs() >= 0.5 * MAX_RAMP_SLOPE * footprint {
            return f32::from(u8::from(dh < 0.0));
        }
        let [a, b, c, d] = s.corners;
        let gx = ((b - a) * (1.0 - s.tr) + (d - c) * s.tr) * self.inv_dx;
        let gy = ((c - a) * (1.0 - s.tc) + (d - b) * s.tc) * self.inv_dy;
        let width = (gx * gx + gy * gy).sqrt().min(MAX_RAMP_SLOPE) * footprint + 1e-4;
        (0.5 - dh / width).clamp(0.0, 1.0)
    }
}

/// Everything a band reads.
#[derive(Clone, Copy)]
pub(super) struct BandScene<'a> {
    pub(super) ss: usize,
    pub(super) iw: usize,
    pub(super) ih: usize,
    pub(super) out_w: usize,
    pub(super) sky: ([f32; 3], [f32; 3]),
    pub(super) draw_surface: bool,
    pub(super) lc: usize,
    pub(super) verts: &'a [Vert],
    pub(super) bins: &'a [Vec<Vec<u32>>],
    pub(super) sides: &'a [Side],
    pub(super) shell_verts: &'a [Vert],
    pub(super) shell_bins: &'a [Vec<Vec<u32>>],
    pub(super) water: Option<Water>,
    /// The smoothed terrain the waterline is decided against (see [`Ground`]); None without water.
    pub(super) ground: Option<Ground<'a>>,
    pub(super) cam: CamF,
    pub(super) light: Light,
    pub(super) enc: &'a Encoder,
}

#[inline]
fn draw_binned(
    band: &mut Band,
    bins: &[Vec<Vec<u32>>],
    bi: usize,
    verts: &[Vert],
    lc: usize,
    under: Option<&[f32]>,
) {
    for chunk in bins {
        for &q in &chunk[bi] {
            let i = q as usize;
            let (a, b, c, d) = (&verts[i], &verts[i + 1], &verts[i + lc], &verts[i + lc + 1]);
            match under {
                None => {
                    draw_triangle(band, a, b, c, false);
                    draw_triangle(band, b, d, c, false);
                }
                Some(u) => {
                    draw_triangle_layer(band, u, a, b, c);
                    draw_triangle_layer(band, u, b, d, c);
                }
            }
        }
    }
}

thread_local! {
    /// Per-thread colour scratch of one band (and the shell layer's colour and depth), made on a
    /// thread's first band and reused: a band's working set then stays in cache between frames
    /// instead of streaming a frame-sized colour buffer through memory. Every band initialises
    /// what it reads, so the contents left by earlier bands never reach the output.
    static SCRATCH: RefCell<[Vec<f32>; 3]> = const { RefCell::new([Vec::new(), Vec::new(), Vec::new()]) };
}

/// Draws every band of the frame in parallel into `rgba`, keeping the frame's depth in `depth`.
pub(super) fn draw_all(scene: &BandScene, depth: &mut [f32], has_shell: bool, rgba: &mut [u8]) {
    let band_rows = BAND_OUT_ROWS * scene.ss;
    let jobs: Vec<_> = depth
        .chunks_mut(band_rows * scene.iw)
        .zip(rgba.chunks_mut(BAND_OUT_ROWS * scene.out_w * 4))
        .enumerate()
        .collect();
    jobs.into_par_iter().for_each(|(bi, (depth, out))| {
        SCRATCH.with(|cell| {
            let mut scratch = cell.borrow_mut();
            let [rgb, lrgb, ldepth] = &mut *scratch;
            let n = depth.len();
            if rgb.len() < n * 3 {
                rgb.resize(n * 3, 0.0);
            }
            let layer = if has_shell {
                if lrgb.len() < n * 4 {
                    lrgb.resize(n * 4, 0.0);
                    ldepth.resize(n, 0.0);
                }
                Some((&mut lrgb[..n * 4], &mut ldepth[..n]))
            } else {
                None
            };
            draw_band(scene, bi, &mut rgb[..n * 3], depth, out, layer);
        });
    });
}

/// Draws band `bi` into its rows.
fn draw_band(
    scene: &BandScene,
    bi: usize,
    rgb: &mut [f32],
    depth: &mut [f32],
    out: &mut [u8],
    layer: Option<(&mut [f32], &mut [f32])>,
) {
    let BandScene {
        ss,
        iw,
        ih,
        out_w,
        sky,
        draw_surface,
        lc,
        verts,
        bins,
        sides,
        shell_verts,
        shell_bins,
        water,
        ground,
        cam,
        light,
        enc,
    } = *scene;
    let band_rows = BAND_OUT_ROWS * ss;
    let y0 = bi * band_rows;
    let rows = depth.len() / iw;
    depth.iter_mut().for_each(|d| *d = 0.0);
    let mut band = Band {
        y0,
        rows,
        width: iw,
        rgb,
        depth,
    };
    if draw_surface {
        draw_binned(&mut band, bins, bi, verts, lc, None);
        let (fy0, fy1) = (y0 as f32, (y0 + rows) as f32);
        for s in sides.iter().filter(|s| s.ymax >= fy0 && s.ymin <= fy1) {
            draw_triangle(&mut band, &s.v[0], &s.v[1], &s.v[2], true);
            draw_triangle(&mut band, &s.v[0], &s.v[2], &s.v[3], true);
        }
    }
    // Sky gradient where nothing was drawn: a drawn sample's colour was written with its depth, so
    // the sky is needed (and written) only where the depth is still 0.
    for y in 0..rows {
        let t = ((y0 + y) as f32 + 0.5) / ih as f32;
        let c = [0, 1, 2].map(|k| sky.0[k] + (sky.1[k] - sky.0[k]) * t);
        let (crow, drow) = (
            &mut band.rgb[y * iw * 3..(y + 1) * iw * 3],
            &band.depth[y * iw..(y + 1) * iw],
        );
        for (px, &d) in crow.chunks_exact_mut(3).zip(drow) {
            if d == 0.0 {
                px.copy_from_slice(&c);
            }
        }
    }
    if let Some((lrgb, ldepth)) = layer {
        ldepth.iter_mut().for_each(|d| *d = 0.0);
        let under: &[f32] = band.depth;
        let mut lband = Band {
            y0,
            rows,
            width: iw,
            rgb: lrgb,
            depth: ldepth,
        };
        draw_binned(&mut lband, shell_bins, bi, shell_verts, lc, Some(under));
        for i in 0..rows * iw {
            if lband.depth[i] > 0.0 {
                let alpha = lband.rgb[i * 4 + 3];
                for k in 0..3 {
                    let o = &mut band.rgb[i * 3 + k];
                    *o += (lband.rgb[i * 4 + k] - *o) * alpha;
                }
            }
        }
    }
    if let Some((wz, hw, hh, wcol, alpha)) = water {
        let lit = [0, 1, 2]
            .map(|k| wcol[k] * (light.ambient + light.diffuse * light.sun[2]) * light.intensity);
        for y in 0..rows {
            let b_up = -((y0 + y) as f32 + 0.5 - cam.half_h) / cam.focal;
            for x in 0..iw {
                let a_r = (x as f32 + 0.5 - cam.half_w) / cam.focal;
                let d = [0, 1, 2].map(|k| cam.fwd[k] + a_r * cam.right[k] + b_up * cam.up[k]);
                if d[2] == 0.0 {
                    continue;
                }
                let t = (wz - cam.eye[2]) / d[2];
                if t <= NEAR_M as f32 {
                    continue;
                }
                let (hx, hy) = (cam.eye[0] + t * d[0], cam.eye[1] + t * d[1]);
                let i = y * iw + x;
                if hx.abs() > hw || hy.abs() > hh {
                    continue;
                }
                let iz = band.depth[i];
                // Share of this sample under water: decided against the smoothed terrain at the
                // point the sample shows, with a ramp one sample wide (anti-aliasing); the block's
                // sides and samples off the smoothed grid keep the plain depth test.
                let cover = match (iz > 0.0, ground) {
                    (true, Some(g)) => {
                        let zc = 1.0 / iz;
                        let pz = cam.eye[2] + zc * d[2];
                        if pz > wz + CLEAR_ABOVE {
                            // Far above the water: dry whatever the smoothing (saves the lookup).
                            continue;
                        }
                        let (px, py) = (cam.eye[0] + zc * d[0], cam.eye[1] + zc * d[1]);
                        match g.sample(px, py) {
                            // On the surface (the block's side lies well below it).
                            Some(s) if pz > s.h - SIDE_DEPTH => g.cover(&s, wz, zc / cam.focal),
                            _ => f32::from(u8::from(1.0 / t > iz)),
                        }
                    }
                    // Nothing drawn here: a gap in the data shows as a gap, not as a pond.
                    (false, Some(g)) => f32::from(u8::from(g.sample(hx, hy).is_some())),
                    _ => f32::from(u8::from(1.0 / t > iz)),
                };
                if cover <= 0.0 {
                    continue;
                }
                // Blinn (1977) highlight of the flat water (normal up), 4× as tight as on sand;
                // below n·h = 0.95 it is under 1e-3 of full light and skipped.
                let len = dot3(d, d).sqrt();
                let h = [0, 1, 2].map(|k| light.sun[k] - d[k] / len);
                let nh = h[2] / dot3(h, h).sqrt();
                let spec = if nh > 0.95 {
                    light.specular * nh.powf(light.shininess * 4.0)
                } else {
                    0.0
                };
                for (o, l) in band.rgb[i * 3..i * 3 + 3].iter_mut().zip(lit) {
                    *o += (l + spec * light.intensity - *o) * alpha * cover;
                }
            }
        }
    }
    // Resolve: box filter of ss × ss samples, then sRGB.
    let out_rows = out.len() / (out_w * 4);
    let norm = 1.0 / (ss * ss) as f32;
    if ss == 2 {
        // The usual case, without the general loop's indexing; the same sums in the same order
        // (s00 + s01 + s10 + s11; a leading 0 changes only the sign of a zero sum), so the same bytes.
        for (oy, orow) in out.chunks_exact_mut(out_w * 4).enumerate() {
            let top = &band.rgb[2 * oy * iw * 3..(2 * oy + 1) * iw * 3];
            let bottom = &band.rgb[(2 * oy + 1) * iw * 3..(2 * oy + 2) * iw * 3];
            for ((o, t), b) in orow
                .chunks_exact_mut(4)
                .zip(top.chunks_exact(6))
                .zip(bottom.chunks_exact(6))
            {
                for k in 0..3 {
                    o[k] = enc.byte((t[k] + t[k + 3] + b[k] + b[k + 3]) * norm);
                }
                o[3] = 255;
            }
        }
        return;
    }
    for oy in 0..out_rows {
        for ox in 0..out_w {
            let mut acc = [0.0f32; 3];
            for sy in 0..ss {
                let row = (oy * ss + sy) * iw;
                for sx in 0..ss {
                    let i = (row + ox * ss + sx) * 3;
                    acc[0] += band.rgb[i];
                    acc[1] += band.rgb[i + 1];
                    acc[2] += band.rgb[i + 2];
                }
            }
            let o = &mut out[(oy * out_w + ox) * 4..(oy * out_w + ox) * 4 + 4];
            o[0] = enc.byte(acc[0] * norm);
            o[1] = enc.byte(acc[1] * norm);
            o[2] = enc.byte(acc[2] * norm);
            o[3] = 255;
        }
    }
}
