//! One frame's preparation: reduced heights -> shadows -> lit, projected vertices -> triangles
//! binned to row bands and the block's sides; `bands.rs` then draws the bands.
//!
//! Buffers are made once per job in [`Buffers::new`] and reused; the translucent shell's buffers are
//! made on the first frame that draws a shell. Every parallel step writes disjoint outputs, so the
//! frame is bit-identical whatever the thread count (see the module doc of `render`).

use rayon::prelude::*;

use super::bands::{self, BandScene, Ground, BAND_OUT_ROWS};
use super::camera::{Camera, NEAR_M};
use super::lod;
use super::ramp::{srgb_to_linear, Encoder, Ramp};
use super::raster::Vert;
use super::shade::{blinn_phong, dot3, horn_gradient, lambert, normal, sun_vector};
use super::shadow::cast_shadow_into;
use super::sides::{self, Side};
use super::{Colouring, Frame, FrameView, Renderer, ViewOptions};
use crate::grid::GridGeometry;
use crate::interp::Surface;

/// Quad rows per binning chunk.
const CHUNK_QUAD_ROWS: usize = 8;

/// Per-job buffers of the renderer.
#[derive(Debug, Clone)]
pub(crate) struct Buffers {
    pub(super) lr: usize,
    pub(super) lc: usize,
    /// Local metres (east, north) of each reduced column / row.
    pub(super) xs: Vec<f32>,
    pub(super) ys: Vec<f32>,
    /// Cell size of the reduced level in metres.
    dx: f32,
    dy: f32,
    pub(super) zk: Vec<f32>,
    shadow: Vec<f32>,
    sky: Vec<f32>,
    sky_dir: Vec<f32>,
    scratch: Vec<f32>,
    change: Vec<f32>,
    pub(super) verts: Vec<Vert>,
    bins: Vec<Vec<Vec<u32>>>,
    shell_zk: Vec<f32>,
    /// The terrain smoothed over a few cells (shell gaps and the waterline are decided on it).
    ground: Vec<f32>,
    /// Scratch of the smoothing and of the shell's opacity.
    smooth_tmp: Vec<f32>,
    shell_verts: Vec<Vert>,
    shell_bins: Vec<Vec<Vec<u32>>>,
    sides: Vec<Side>,
    z_copy: Vec<f32>,
    ss: usize,
    iw: usize,
    ih: usize,
    depth: Vec<f32>,
    elevation_ramp: Ramp,
    change_ramp: Ramp,
    encoder: Encoder,
}

fn n_bins(lr: usize, ih: usize, ss: usize) -> (usize, usize) {
    let chunks = lr.saturating_sub(1).div_ceil(CHUNK_QUAD_ROWS);
    let bands = ih.div_ceil(BAND_OUT_ROWS * ss);
    (chunks, bands)
}

impl Buffers {
    pub(crate) fn new(g: &GridGeometry, v: &ViewOptions, level: u32) -> Buffers {
        let (lr, lc) = lod::level_shape(g.rows, g.cols, level);
        let b = 1usize << level;
        let (cxm, cym) = (g.cell_x_m(), g.cell_y_m());
        // Centre of each block (partial blocks at the east and south edges included).
        let xs = (0..lc)
            .map(|c| {
                let (c0, c1) = (c * b, ((c + 1) * b).min(g.cols));
                (((c0 + c1) as f64 / 2.0 - g.cols as f64 / 2.0) * cxm) as f32
            })
            .collect();
        let ys = (0..lr)
            .map(|r| {
                let (r0, r1) = (r * b, ((r + 1) * b).min(g.rows));
                ((g.rows as f64 / 2.0 - (r0 + r1) as f64 / 2.0) * cym) as f32
            })
            .collect();
        let ss = v.supersample as usize;
        let (iw, ih) = (v.width as usize * ss, v.height as usize * ss);
        let (chunks, bands) = n_bins(lr, ih, ss);
        let n = lr * lc;
        Buffers {
            lr,
            lc,
            xs,
            ys,
            dx: (cxm * b as f64) as f32,
            dy: (cym * b as f64) as f32,
            zk: vec![0.0; n],
            shadow: vec![0.0; n],
            sky: Vec::new(),
            sky_dir: Vec::new(),
            scratch: Vec::new(),
            change: Vec::new(),
            verts: vec![Vert::default(); n],
            bins: vec![vec![Vec::new(); bands]; chunks],
            shell_zk: Vec::new(),
            ground: Vec::new(),
            smooth_tmp: Vec::new(),
            shell_verts: Vec::new(),
            shell_bins: Vec::new(),
            sides: Vec::with_capacity(2 * (lr + lc)),
            z_copy: Vec::new(),
            ss,
            iw,
            ih,
            depth: vec![0.0; iw * ih],
            elevation_ramp: Ramp::elevation(),
            change_ramp: Ramp::change(),
            encoder: Encoder::default(),
        }
    }
}

impl Buffers {
    /// Tabulates the elevation ramp `ramp`.
    pub(super) fn set_elevation_ramp(&mut self, ramp: super::ramp::ElevationRamp) {
        self.elevation_ramp = Ramp::elevation_on(ramp);
    }
}

/// Camera in f32 for the per-vertex loop.
#[derive(Debug, Clone, Copy)]
pub(super) struct CamF {
    pub(super) eye: [f32; 3],
    pub(super) right: [f32; 3],
    pub(super) up: [f32; 3],
    pub(super) fwd: [f32; 3],
    pub(super) focal: f32,
    pub(super) half_w: f32,
    pub(super) half_h: f32,
}

impl CamF {
    fn new(c: &Camera) -> CamF {
        let f = |a: [f64; 3]| a.map(|v| v as f32);
        CamF {
            eye: f(c.eye),
            right: f(c.right),
            up: f(c.up),
            fwd: f(c.fwd),
            focal: c.focal_px as f32,
            half_w: (c.width / 2.0) as f32,
            half_h: (c.height / 2.0) as f32,
        }
    }
    #[inline]
    pub(super) fn project(&self, p: [f32; 3]) -> (f32, f32, f32) {
        let d = [p[0] - self.eye[0], p[1] - self.eye[1], p[2] - self.eye[2]];
        let zc = dot3(d, self.fwd);
        if zc <= NEAR_M as f32 {
            return (f32::NAN, f32::NAN, 0.0);
        }
        let iz = 1.0 / zc;
        (
            self.half_w + self.focal * dot3(d, self.right) * iz,
            self.half_h - self.focal * dot3(d, self.up) * iz,
            iz,
        )
    }
}

/// Light parameters in f32.
#[derive(Debug, Clone, Copy)]
pub(super) struct Light {
    pub(super) sun: [f32; 3],
    pub(super) ambient: f32,
    pub(super) diffuse: f32,
    pub(super) specular: f32,
    pub(super) shininess: f32,
    pub(super) intensity: f32,
}

impl Light {
    /// The light of one frame, the sun at compass azimuth `azimuth_deg`.
    fn new(l: &super::LightOptions, azimuth_deg: f64) -> Light {
        Light {
            sun: sun_vector(azimuth_deg, l.altitude_deg),
            ambient: l.ambient as f32,
            diffuse: l.diffuse as f32,
            specular: l.specular as f32,
            shininess: l.shininess as f32,
            intensity: l.intensity as f32,
        }
    }
}

/// Linear colour of a surface point: `I·(albedo·(ka + kd·max(0,n·s)·(1−shadow)) + ks·spec·(1−shadow))`
/// (REFERENCES.md §1, "full pixel"), with the ambient term scaled by the sky visibility `sky`
/// (1 = open); `v` points from the surface to the eye.
#[inline]
pub(crate) fn light_point(
    albedo: [f32; 3],
    n: [f32; 3],
    v: [f32; 3],
    shadow: f32,
    sky: f32,
    l: &Light,
) -> [f32; 3] {
    let lit = 1.0 - shadow;
    let d = l.ambient * sky + l.diffuse * lambert(n, l.sun) * lit;
    let s = if l.specular > 0.0 {
        l.specular * blinn_phong(n, l.sun, v, l.shininess) * lit
    } else {
        0.0
    };
    [0, 1, 2].map(|k| (albedo[k] * d + s) * l.intensity)
}

/// Contiguous row-major heights of a surface, copying only if its layout is not standard.
fn heights<'a>(z: &'a ndarray::ArrayRef2<f32>, copy: &'a mut Vec<f32>) -> &'a [f32] {
    if let Some(s) = z.as_slice() {
        return s;
    }
    copy.clear();
    copy.extend(z.iter().copied());
    copy
}

/// `surface` at `level`, times `k`, into `out`: from the whole grid, or from the level's samples
/// when the surface holds only those (the same values either way).
fn reduce_surface(
    surface: &Surface,
    g: &GridGeometry,
    level: u32,
    k: f32,
    copy: &mut Vec<f32>,
    out: &mut [f32],
) {
    let z = heights(&surface.z, copy);
    match &surface.samples {
        Some(plan) => lod::reduce_samples_into(plan, z, k, out),
        None => lod::reduce_into(z, g.rows, g.cols, level, k, out),
    }
}

/// Per-vertex normals, light and projection of a reduced height field.
#[allow(clippy::too_many_arguments)]
fn vertex_pass(
    zk: &[f32],
    lr: usize,
    lc: usize,
    xs: &[f32],
    ys: &[f32],
    dx: f32,
    dy: f32,
    cam: &CamF,
    shadow: Option<&[f32]>,
    sky: Option<&[f32]>,
    light: &Light,
    albedo: &(dyn Fn(usize) -> [f32; 3] + Sync),
    out: &mut [Vert],
) {
    assert!(zk.len() == lr * lc && out.len() == zk.len() && xs.len() == lc && ys.len() == lr);
    out.par_chunks_mut(lc)
        .with_min_len(4)
        .enumerate()
        .for_each(|(r, row)| {
            for (c, o) in row.iter_mut().enumerate() {
                let i = r * lc + c;
                let z = zk[i];
                if !z.is_finite() {
                    *o = Vert::default();
                    continue;
                }
                let p = [xs[c], ys[r], z];
                let (x, y, iz) = cam.project(p);
                if iz == 0.0 {
                    *o = Vert::default();
                    continue;
                }
                let (gp, gq) = horn_gradient(zk, lr, lc, r, c, dx, dy);
                let n = normal(gp, gq);
                let e = [cam.eye[0] - p[0], cam.eye[1] - p[1], cam.eye[2] - p[2]];
                let el = dot3(e, e).sqrt();
                let v = [e[0] / el, e[1] / el, e[2] / el];
                let sh = shadow.map_or(0.0, |s| s[i]);
                let open = sky.map_or(1.0, |s| s[i]);
                *o = Vert {
                    x,
                    y,
                    iz,
                    rgb: light_point(albedo(i), n, v, sh, open, light),
                    a: 1.0,
                };
            }
        });
}

/// Radius, in cells of the drawn level, of the box filter that smooths surfaces before shell gaps
/// and the waterline are decided; applied twice (a tent-like filter 9 cells wide). 0.1 m survey
/// noise falls to about 0.02 m, far below the shell's and the water's thresholds. Common
/// practice, no source.
const SMOOTH_RADIUS: usize = 2;

/// Smooths a row-major `lr` × `lc` field in place: two passes of a (2R+1)² box mean that skips
/// nodata (NaN stays NaN). Rows in parallel, each written from inputs fixed before the pass.
///
/// Each cell's finite neighbours are summed in ascending order along the pass (as a plain loop over
/// the window would), but tap by tap across the whole row, so the inner loops run over contiguous
/// cells: an out-of-grid tap is skipped, which leaves the sum as adding 0 would.
fn smooth_in_place(z: &mut [f32], lr: usize, lc: usize, tmp: &mut Vec<f32>) {
    assert_eq!(z.len(), lr * lc);
    tmp.resize(lr * lc, 0.0);
    let r = SMOOTH_RADIUS;
    let sums = || (vec![0.0f32; lc], vec![0.0f32; lc]);
    for _ in 0..2 {
        // Along rows: z -> tmp.
        tmp.par_chunks_mut(lc)
            .zip(z.par_chunks(lc))
            .for_each_init(sums, |(s, n), (out, row)| {
                s.fill(0.0);
                n.fill(0.0);
                for k in 0..=2 * r {
                    // Tap k reads column c + k - r, for the cells c where that is in the row.
                    let lo = r.saturating_sub(k);
                    let hi = (lc + r).saturating_sub(k).min(lc);
                    if lo >= hi {
                        continue;
                    }
                    let src = &row[lo + k - r..hi + k - r];
                    add_finite(&mut s[lo..hi], &mut n[lo..hi], src);
                }
                finish_mean(out, row, s, n);
            });
        // Along columns: tmp -> z.
        let src: &[f32] = tmp;
        z.par_chunks_mut(lc)
            .enumerate()
            .for_each_init(sums, |(s, n), (row, out)| {
                let (a, b) = (row.saturating_sub(r), (row + r + 1).min(lr));
                s.fill(0.0);
                n.fill(0.0);
                for rr in a..b {
                    add_finite(s, n, &src[rr * lc..(rr + 1) * lc]);
                }
                finish_mean(out, &src[row * lc..(row + 1) * lc], s, n);
            });
    }
}

/// Adds each finite `v` to its sum `s` and counts it in `n` (a non-finite value adds 0).
#[inline]
fn add_finite(s: &mut [f32], n: &mut [f32], v: &[f32]) {
    for ((s, n), &v) in s.iter_mut().zip(n.iter_mut()).zip(v) {
        let ok = v.is_finite();
        *s += if ok { v } else { 0.0 };
        *n += f32::from(u8::from(ok));
    }
}

/// `out = s / n`, or NaN where the centre value is not finite (nodata stays nodata).
#[inline]
fn finish_mean(out: &mut [f32], centre: &[f32], s: &[f32], n: &[f32]) {
    for (((o, &c), &s), &n) in out.iter_mut().zip(centre).zip(s).zip(n) {
        *o = if c.is_finite() { s / n } else { f32::NAN };
    }
}

/// Smooth ramp 3t² − 2t³ of t clamped to [0, 1]; common practice, no source.
#[inline]
fn smoothstep(t: f32) -> f32 {
    let t = t.clamp(0.0, 1.0);
    t * t * (3.0 - 2.0 * t)
}

/// Sorts the quads of a vertex grid into per-chunk, per-band lists (fixed order: chunk, then grid order).
fn bin_quads(
    verts: &[Vert],
    lr: usize,
    lc: usize,
    band_rows: usize,
    iw: usize,
    bins: &mut [Vec<Vec<u32>>],
) {
    let n_bands = bins.first().map_or(0, |b| b.len());
    let (wf, last_band) = (iw as f32, n_bands.saturating_sub(1));
    bins.par_iter_mut().enumerate().for_each(|(chunk, lists)| {
        lists.iter_mut().for_each(Vec::clear);
        let r0 = chunk * CHUNK_QUAD_ROWS;
        let r1 = (r0 + CHUNK_QUAD_ROWS).min(lr - 1);
        for r in r0..r1 {
            for c in 0..lc - 1 {
                let q = [
                    verts[r * lc + c],
                    verts[r * lc + c + 1],
                    verts[(r + 1) * lc + c],
                    verts[(r + 1) * lc + c + 1],
                ];
                let mut n_ok = 0;
                let (mut ymin, mut ymax, mut xmin, mut xmax) =
                    (f32::MAX, f32::MIN, f32::MAX, f32::MIN);
                for v in &q {
                    if v.x.is_finite() {
                        n_ok += 1;
                        ymin = ymin.min(v.y);
                        ymax = ymax.max(v.y);
                        xmin = xmin.min(v.x);
                        xmax = xmax.max(v.x);
                    }
                }
                if n_ok < 3 || xmax < 0.0 || xmin > wf || ymax < 0.0 {
                    continue;
                }
                let b0 = ((ymin.max(0.0) as usize) / band_rows).min(last_band);
                let b1 = ((ymax.max(0.0) as usize) / band_rows).min(last_band);
                if ymin as usize / band_rows > last_band {
                    continue;
                }
                for list in &mut lists[b0..=b1] {
                    list.push((r * lc + c) as u32);
                }
            }
        }
    });
}

pub(super) fn lin(rgb: [u8; 3]) -> [f32; 3] {
    rgb.map(|c| srgb_to_linear(c as f32 / 255.0))
}

/// Sets each shell vertex's opacity from the height gap between the smoothed shell and the smoothed
/// terrain: `opacity · smoothstep((gap − min_gap) / (full_gap − min_gap))`, so the shell fades in
/// with no hard edge. Vertices whose whole 3×3 neighbourhood is clear are dropped (x = NaN), so
/// quads that cannot show are never rasterised.
#[allow(clippy::too_many_arguments)]
fn shell_opacity(
    verts: &mut [Vert],
    shell_zk: &[f32],
    ground: &[f32],
    lr: usize,
    lc: usize,
    k: f32,
    opts: &super::ShellOptions,
    alpha: &mut Vec<f32>,
) {
    assert!(verts.len() == lr * lc && shell_zk.len() == verts.len() && ground.len() == verts.len());
    let (lo, hi) = (opts.min_gap_m as f32, opts.full_gap_m as f32);
    let top = opts.opacity as f32;
    alpha.clear();
    alpha.extend(shell_zk.iter().zip(ground).map(|(&s, &g)| {
        let gap = (s - g) / k;
        if gap.is_finite() {
            top * smoothstep((gap - lo) / (hi - lo))
        } else {
            0.0
        }
    }));
    let alpha: &[f32] = alpha;
    verts.par_chunks_mut(lc).enumerate().for_each(|(r, row)| {
        let (r0, r1) = (r.saturating_sub(1), (r + 1).min(lr - 1));
        for (c, v) in row.iter_mut().enumerate() {
            let (c0, c1) = (c.saturating_sub(1), (c + 1).min(lc - 1));
            let seen = (r0..=r1).any(|rr| (c0..=c1).any(|cc| alpha[rr * lc + cc] > 0.0));
            if seen {
                v.a = alpha[r * lc + c];
            } else {
                *v = Vert::default();
            }
        }
    });
}

/// Renders one frame; see [`Renderer::render_scene_into`].
pub(super) fn render(
    r: &mut Renderer,
    surface: &Surface,
    shell: Option<&Surface>,
    colouring: Colouring,
    orbit_fraction: f64,
    frame: &mut Frame,
) -> FrameView {
    let fv = r.frame_view(orbit_fraction);
    let v = &r.view;
    if frame.width != v.width || frame.height != v.height {
        log::warn!(
            "render: frame is {}x{} but the view is {}x{}; reallocating the frame",
            frame.width,
            frame.height,
            v.width,
            v.height
        );
        *frame = Frame::new(v.width, v.height);
    }
    let g = &r.geometry;
    let k = r.exaggeration as f32;
    let sun_az = fv.sun_azimuth_deg;
    let light = Light::new(&r.light, sun_az);
    let b = &mut r.buffers;
    let cam_int = fv.camera.scaled(b.ss as f64);
    let cam = CamF::new(&cam_int);
    let level = r.level;
    // A whole grid, or the samples of this renderer's level (see `lod::SamplePlan`).
    let shape_ok = |s: &Surface| match &s.samples {
        None => s.z.dim() == (g.rows, g.cols),
        Some(p) => p.level == level && p.grid == (g.rows, g.cols) && s.z.dim() == p.shape(),
    };
    let mut draw_surface = shape_ok(surface);
    if !draw_surface {
        log::warn!(
            "render: surface is {:?}, the grid is {}x{}; drawing the sky only",
            surface.z.dim(),
            g.rows,
            g.cols
        );
    }
    let (lr, lc) = (b.lr, b.lc);
    if draw_surface {
        reduce_surface(surface, g, level, k, &mut b.z_copy, &mut b.zk);
        if r.light.shadows {
            cast_shadow_into(
                &b.zk,
                lr,
                lc,
                b.dx,
                b.dy,
                sun_az,
                r.light.altitude_deg,
                r.light.shadow_softness_cells as f32,
                &mut b.shadow,
                &mut b.scratch,
            );
        }
        let darkening = r.light.hollow_darkening as f32;
        if darkening > 0.0 {
            super::shadow::sky_visibility_into(
                &b.zk,
                b.lr,
                b.lc,
                b.dx,
                b.dy,
                darkening,
                &mut b.sky,
                &mut b.sky_dir,
                &mut b.scratch,
            );
        }
        let (lo, hi) = r.range_m;
        let inv_range = 1.0 / (hi - lo);
        let zk = &b.zk;
        let ramp = &b.elevation_ramp;
        let shadow = r.light.shadows.then_some(&b.shadow[..]);
        let sky = (darkening > 0.0).then_some(&b.sky[..]);
        let elevation = move |i: usize| ramp.at((zk[i] / k - lo) * inv_range);
        let (xs, ys) = (&b.xs, &b.ys);
        let (west, south, east, north) = g.extent();
        let (cx, cy) = ((west + east) / 2.0, (south + north) / 2.0);
        let unit = g.horizontal_unit.metres();
        // One vertex pass per colouring; only the albedo closure differs.
        macro_rules! shade_vertices {
            ($albedo:expr) => {
                vertex_pass(
                    zk,
                    lr,
                    lc,
                    xs,
                    ys,
                    b.dx,
                    b.dy,
                    &cam,
                    shadow,
                    sky,
                    &light,
                    $albedo,
                    &mut b.verts,
                )
            };
        }
        match colouring {
            Colouring::Change { reference, .. } if reference.dim() != (g.rows, g.cols) => {
                log::warn!("render: change reference has the wrong shape; colouring by elevation");
                shade_vertices!(&elevation);
            }
            Colouring::Change {
                reference,
                limit_m,
                lod_m,
            } => {
                b.change.resize(lr * lc, 0.0);
                let zr = heights(reference, &mut b.z_copy);
                lod::reduce_into(zr, g.rows, g.cols, r.level, 1.0, &mut b.change);
                let (chg, cramp) = (&b.change, &b.change_ramp);
                let limit = limit_m.max(1e-6);
                let albedo = move |i: usize| {
                    let d = zk[i] / k - chg[i];
                    let d = if d.is_finite() && d.abs() >= lod_m {
                        d
                    } else {
                        0.0
                    };
                    cramp.at(0.5 + 0.5 * (d / limit).clamp(-1.0, 1.0))
                };
                shade_vertices!(&albedo);
            }
            Colouring::Drape(drape) => {
                let albedo = move |i: usize| {
                    let (x, y) = (
                        cx + f64::from(xs[i % lc]) / unit,
                        cy + f64::from(ys[i / lc]) / unit,
                    );
                    drape.linear_at(x, y).unwrap_or_else(|| elevation(i))
                };
                shade_vertices!(&albedo);
            }
            Colouring::Elevation => {
                shade_vertices!(&elevation);
            }
        }
        let band_rows = BAND_OUT_ROWS * b.ss;
        bin_quads(&b.verts, lr, lc, band_rows, b.iw, &mut b.bins);
        let mut sides = std::mem::take(&mut b.sides);
        if v.block_sides {
            sides::build_sides(&mut sides, b, &cam, r.base_m * k, lin(v.side_rgb), &light);
        } else {
            sides.clear();
        }
        b.sides = sides;
    } else {
        b.sides.clear();
    }
    // The smoothed terrain, for the shell's gaps and the waterline.
    let needs_ground = (shell.is_some() || r.water.level_m.is_some()) && draw_surface;
    if needs_ground {
        b.ground.clear();
        b.ground.extend_from_slice(&b.zk);
        smooth_in_place(&mut b.ground, lr, lc, &mut b.smooth_tmp);
    }
    // Translucent shell.
    let shell = shell.filter(|s| {
        let ok = shape_ok(s);
        if !ok {
            log::warn!("render: shell surface has the wrong shape; not drawn");
        }
        ok && draw_surface
    });
    if let Some(s) = shell {
        let n = lr * lc;
        b.shell_zk.resize(n, 0.0);
        b.shell_verts.resize(n, Vert::default());
        let (chunks, bands) = n_bins(lr, b.ih, b.ss);
        if b.shell_bins.len() != chunks {
            b.shell_bins = vec![vec![Vec::new(); bands]; chunks];
        }
        reduce_surface(s, g, level, k, &mut b.z_copy, &mut b.shell_zk);
        smooth_in_place(&mut b.shell_zk, lr, lc, &mut b.smooth_tmp);
        let col = lin(r.shell.rgb);
        let albedo = move |_: usize| col;
        vertex_pass(
            &b.shell_zk,
            lr,
            lc,
            &b.xs,
            &b.ys,
            b.dx,
            b.dy,
            &cam,
            None,
            None,
            &light,
            &albedo,
            &mut b.shell_verts,
        );
        shell_opacity(
            &mut b.shell_verts,
            &b.shell_zk,
            &b.ground,
            lr,
            lc,
            k,
            &r.shell,
            &mut b.smooth_tmp,
        );
        bin_quads(
            &b.shell_verts,
            lr,
            lc,
            BAND_OUT_ROWS * b.ss,
            b.iw,
            &mut b.shell_bins,
        );
    }
    draw_surface &= lr >= 2 && lc >= 2;
    let water = r.water.level_m.map(|level| {
        let (west, south, east, north) = g.extent();
        let unit = g.horizontal_unit.metres();
        let hw = ((east - west) / 2.0 * unit) as f32;
        let hh = ((north - south) / 2.0 * unit) as f32;
        (
            level as f32 * k,
            hw,
            hh,
            lin(r.water.rgb),
            r.water.opacity as f32,
        )
    });
    let scene = BandScene {
        ss: b.ss,
        iw: b.iw,
        ih: b.ih,
        out_w: v.width as usize,
        sky: (lin(v.sky_top_rgb), lin(v.sky_bottom_rgb)),
        draw_surface,
        lc,
        verts: &b.verts,
        bins: &b.bins,
        sides: &b.sides,
        shell_verts: &b.shell_verts,
        shell_bins: &b.shell_bins,
        water,
        ground: (water.is_some() && needs_ground && lr >= 2 && lc >= 2).then(|| Ground {
            z: &b.ground,
            lr,
            lc,
            x0: b.xs[0],
            y0: b.ys[0],
            inv_dx: 1.0 / b.dx,
            inv_dy: 1.0 / b.dy,
        }),
        cam,
        light,
        enc: &b.encoder,
    };
    bands::draw_all(&scene, &mut b.depth, shell.is_some(), &mut frame.rgba);
    fv
}

impl Renderer {
    /// Inverse depth (1/zc) last drawn at supersampled pixel (x, y), 0 where only sky; for tests.
    #[cfg(test)]
    pub(crate) fn depth_at(&self, x: usize, y: usize) -> f32 {
        self.buffers.depth[y * self.buffers.iw + x]
    }
}

#[cfg(test)]
mod smooth_tests {
    use super::*;

    /// The box mean written the plain way: every cell sums its window in ascending order.
    fn smooth_by_windows(z: &mut [f32], lr: usize, lc: usize) {
        let r = SMOOTH_RADIUS;
        let mean = |vals: &mut dyn Iterator<Item = f32>, centre: f32| {
            let (mut s, mut n) = (0.0f32, 0.0f32);
            for v in vals {
                let ok = v.is_finite();
                s += if ok { v } else { 0.0 };
                n += f32::from(u8::from(ok));
            }
            if centre.is_finite() {
                s / n
            } else {
                f32::NAN
            }
        };
        for _ in 0..2 {
            let src = z.to_vec();
            let mut tmp = vec![0.0f32; lr * lc];
            for row in 0..lr {
                for c in 0..lc {
                    let (a, b) = (c.saturating_sub(r), (c + r + 1).min(lc));
                    let mut it = (a..b).map(|cc| src[row * lc + cc]);
                    tmp[row * lc + c] = mean(&mut it, src[row * lc + c]);
                }
            }
            for row in 0..lr {
                let (a, b) = (row.saturating_sub(r), (row + r + 1).min(lr));
                for c in 0..lc {
                    let mut it = (a..b).map(|rr| tmp[rr * lc + c]);
                    z[row * lc + c] = mean(&mut it, tmp[row * lc + c]);
                }
            }
        }
    }

    #[test]
    fn tap_by_tap_smoothing_equals_the_plain_window_bit_for_bit() {
        // Grids narrower and shorter than the window, and a wider one with nodata at the edges.
        for (lr, lc) in [(1, 1), (2, 3), (4, 4), (9, 31), (17, 6)] {
            let mut z: Vec<f32> = (0..lr * lc)
                .map(|i| ((i * 37) % 23) as f32 * 0.173 - 1.1 + (i as f32 * 0.41).sin())
                .collect();
            for i in (0..lr * lc).step_by(7) {
                z[i] = f32::NAN;
            }
            let mut want = z.clone();
            smooth_by_windows(&mut want, lr, lc);
            let mut tmp = Vec::new();
            smooth_in_place(&mut z, lr, lc, &mut tmp);
            // Check: common practice, no source — the same sums in the same order give the same bits.
            for (i, (x, y)) in z.iter().zip(&want).enumerate() {
                assert!(x.to_bits() == y.to_bits(), "{lr}x{lc} cell {i}: {x} vs {y}");
            }
        }
    }
}
