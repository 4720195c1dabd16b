//! The surveys + view options -> what the camera frames: the area that matters, the vertical
//! exaggeration that makes its relief read, and the target and distance that fill the part of the
//! frame the panels leave free.
//!
//! Everything here is a pure function of its inputs, so a single-frame command gets exactly the
//! camera of the full render.
//!
//! 1. [`focus_of_change`]: the landforms that change over the series. A cell changes when the DEM of
//!    difference of some pair reaches that pair's level of detection (REFERENCES.md §7). Survey noise
//!    alone makes about 5 % of cells pass a 95 % LoD, scattered; real change comes in patches. So the
//!    grid is cut into square blocks and a block counts only when at least half of its cells change;
//!    the box around those blocks, widened by a margin, is the focus. When change is spread over most
//!    of the grid, or absent, the focus is the whole grid.
//! 2. [`auto_exaggeration`]: the documented rule of [`AUTO_RELIEF_SHARE`].
//! 3. [`fit`]: the camera looks at the focus from the view's bearing and elevation; the distance is
//!    the smallest at which the focus box (top and bottom corners) projects inside the [`FreeArea`]
//!    on every step of the orbit (pinhole projection, REFERENCES.md §2). For a fixed view the target
//!    is then slid so the box sits in the middle of the free area, and the distance refitted.

use ndarray::ArrayView2;
use rayon::prelude::*;

use super::camera::{self, Camera};
use crate::grid::GridGeometry;

/// The part of the frame left for the terrain, as shares of the frame's width (from the left) and
/// height (from the top).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FreeArea {
    /// Left edge, share of the width.
    pub left: f64,
    /// Right edge, share of the width.
    pub right: f64,
    /// Top edge, share of the height.
    pub top: f64,
    /// Bottom edge, share of the height.
    pub bottom: f64,
}

/// The free area of every frame: the panels sit in a top band (the top 11 % of the height) and a
/// bottom band (the bottom 9 %); the terrain is framed into 2–98 % of the width and 12–90 % of the
/// height, a little inside those bands.
pub const FREE_AREA: FreeArea = FreeArea {
    left: 0.02,
    right: 0.98,
    top: 0.12,
    bottom: 0.90,
};

impl FreeArea {
    /// The free area in pixels of a `width` × `height` frame: (left, right, top, bottom).
    pub fn pixels(&self, width: f64, height: f64) -> (f64, f64, f64, f64) {
        (
            self.left * width,
            self.right * width,
            self.top * height,
            self.bottom * height,
        )
    }
}

/// The area the camera frames, in cells of the analysis grid (ends exclusive), with the relief
/// found in it and the envelope of its terrain.
#[derive(Debug, Clone, PartialEq)]
pub struct Focus {
    /// First row (north edge).
    pub row0: usize,
    /// One past the last row.
    pub row1: usize,
    /// First column (west edge).
    pub col0: usize,
    /// One past the last column.
    pub col1: usize,
    /// Relief of the area in metres: the spread between the 0.5th and 99.5th percentile of its
    /// elevations over all surveys (robust to a few wild cells).
    pub relief_m: f64,
    /// The terrain's envelope over all surveys on a lattice spanning the focus: `[x, y, z_min,
    /// z_max]` with x, y in scene metres (east and north of the grid's centre) and the lowest and
    /// highest elevation (metres, not exaggerated) of the cells around each node. Empty = unknown;
    /// the box of the focus and the elevation range are framed instead.
    pub envelope: Vec<[f64; 4]>,
}

impl Focus {
    /// The whole grid, with `relief_m` as its relief.
    pub fn whole(g: &GridGeometry, relief_m: f64) -> Focus {
        Focus {
            row0: 0,
            row1: g.rows,
            col0: 0,
            col1: g.cols,
            relief_m,
            envelope: Vec::new(),
        }
    }

    /// Whether the focus is the whole grid.
    pub fn is_whole(&self, g: &GridGeometry) -> bool {
        (self.row0, self.row1, self.col0, self.col1) == (0, g.rows, 0, g.cols)
    }

    /// Longer horizontal side of the focus in metres.
    pub fn longer_side_m(&self, g: &GridGeometry) -> f64 {
        let w = (self.col1 - self.col0) as f64 * g.cell_x_m();
        let h = (self.row1 - self.row0) as f64 * g.cell_y_m();
        w.max(h)
    }

    /// Map coordinates of the focus: (west, south, east, north).
    pub fn extent(&self, g: &GridGeometry) -> (f64, f64, f64, f64) {
        let (west, _, _, north) = g.extent();
        (
            west + self.col0 as f64 * g.cell_x,
            north - self.row1 as f64 * g.cell_y,
            west + self.col1 as f64 * g.cell_x,
            north - self.row0 as f64 * g.cell_y,
        )
    }
}

/// A block counts as changed when at least this share of its cells with data changes beyond the
/// LoD. Noise alone passes a 95 % LoD in about 5 % of cells (REFERENCES.md §7, t = 1.96), so half
/// is far above chance and still catches a dune's moving flanks.
const BLOCK_CHANGED_SHARE: f64 = 0.5;

/// Blocks per shorter side of the grid (at least 4 cells a block).
const BLOCKS_PER_SIDE: usize = 32;

/// Margin around the changed blocks, as a share of their box's size on each side.
const FOCUS_MARGIN: f64 = 0.2;

/// When the widened box of change covers more than this share of the grid's area, change is spread
/// out and the whole grid is framed.
const SPREAD_SHARE: f64 = 0.6;

/// Smallest focus side, as a share of the grid's side (so one small patch is not blown up to fill
/// the frame).
const MIN_FOCUS_SHARE: f64 = 0.3;

/// The area of the grid where the landforms change: see the module doc.
///
/// The surveys (one shape) are `surface(0..count)`, fetched when needed and never more than two
/// at a time (a stack kept in a scratch file hands each back when the next is fetched); `pairs`
/// are the compared pairs `(earlier, later, lod_m)`.
pub fn focus_of_change<'s>(
    g: &GridGeometry,
    count: usize,
    surface: &dyn Fn(usize) -> ArrayView2<'s, f32>,
    pairs: &[(usize, usize, f64)],
) -> Focus {
    let (rows, cols) = (g.rows, g.cols);
    let block = (rows.min(cols) / BLOCKS_PER_SIDE).max(4);
    let (br, bc) = (rows.div_ceil(block), cols.div_ceil(block));
    let mut changed_block = vec![false; br * bc];
    for &(a, b, lod) in pairs {
        if a >= count || b >= count {
            continue;
        }
        let (za, zb) = (surface(a), surface(b));
        if za.dim() != (rows, cols) || zb.dim() != (rows, cols) {
            continue;
        }
        // Each row of blocks counted alone, side by side (counts do not depend on the order).
        let mut count = vec![(0u32, 0u32); br * bc];
        count
            .par_chunks_mut(bc)
            .enumerate()
            .for_each(|(brow, counts)| {
                for r in brow * block..((brow + 1) * block).min(rows) {
                    for (c, (&va, &vb)) in za.row(r).iter().zip(zb.row(r)).enumerate() {
                        let d = vb - va;
                        if d.is_finite() {
                            let e = &mut counts[c / block];
                            e.0 += 1;
                            e.1 += u32::from(f64::from(d.abs()) >= lod);
                        }
                    }
                }
            });
        for (flag, &(n, hit)) in changed_block.iter_mut().zip(&count) {
            *flag |= n > 0 && f64::from(hit) >= BLOCK_CHANGED_SHARE * f64::from(n);
        }
    }
    let finish = |f: Focus| Focus {
        relief_m: robust_relief_m(count, surface, &f),
        envelope: envelope(g, count, surface, &f),
        ..f
    };
    let whole = Focus::whole(g, 0.0);
    let mut bbox: Option<(usize, usize, usize, usize)> = None;
    for (i, _) in changed_block.iter().enumerate().filter(|(_, &f)| f) {
        let (r, c) = (i / bc, i % bc);
        bbox = Some(match bbox {
            None => (r, r + 1, c, c + 1),
            Some((r0, r1, c0, c1)) => (r0.min(r), r1.max(r + 1), c0.min(c), c1.max(c + 1)),
        });
    }
    let Some((r0, r1, c0, c1)) = bbox else {
        return finish(whole);
    };
    // Widen by the margin and to the smallest side, centred, clamped to the grid.
    let widen = |lo: usize, hi: usize, n: usize| -> (usize, usize) {
        let (lo, hi) = ((lo * block).min(n), (hi * block).min(n));
        let size = (hi - lo) as f64;
        let want = (size * (1.0 + 2.0 * FOCUS_MARGIN)).max(MIN_FOCUS_SHARE * n as f64);
        let centre = (lo + hi) as f64 / 2.0;
        let (mut a, mut b) = (centre - want / 2.0, centre + want / 2.0);
        if a < 0.0 {
            b -= a;
            a = 0.0;
        }
        if b > n as f64 {
            a -= b - n as f64;
            b = n as f64;
        }
        (a.max(0.0).floor() as usize, (b.ceil() as usize).min(n))
    };
    let (row0, row1) = widen(r0, r1, rows);
    let (col0, col1) = widen(c0, c1, cols);
    let share = ((row1 - row0) * (col1 - col0)) as f64 / (rows * cols) as f64;
    finish(if share > SPREAD_SHARE {
        whole
    } else {
        Focus {
            row0,
            row1,
            col0,
            col1,
            relief_m: 0.0,
            envelope: Vec::new(),
        }
    })
}

/// Lattice intervals per side of the envelope.
const ENVELOPE_STEPS: usize = 32;

/// The terrain's envelope over `surfaces` inside `f`: see [`Focus::envelope`]. Each node covers
/// the cells within half a lattice step of it, so every cell of the focus is under some node.
fn envelope<'s>(
    g: &GridGeometry,
    count: usize,
    surface: &dyn Fn(usize) -> ArrayView2<'s, f32>,
    f: &Focus,
) -> Vec<[f64; 4]> {
    let (nr, nc) = (f.row1 - f.row0, f.col1 - f.col0);
    let (sr, sc) = (nr.min(ENVELOPE_STEPS), nc.min(ENVELOPE_STEPS));
    if sr == 0 || sc == 0 {
        return Vec::new();
    }
    let (hr, hc) = (nr.div_ceil(2 * sr), nc.div_ceil(2 * sc));
    let (cxm, cym) = (g.cell_x_m(), g.cell_y_m());
    // Node (i, j): its edge position and the cells it covers.
    let nodes: Vec<(f64, f64, std::ops::Range<usize>, std::ops::Range<usize>)> = (0..=sr)
        .flat_map(|i| (0..=sc).map(move |j| (i, j)))
        .map(|(i, j)| {
            let edge_r = f.row0 as f64 + nr as f64 * i as f64 / sr as f64;
            let rn = edge_r.round() as usize;
            let rows = rn.saturating_sub(hr).max(f.row0)..(rn + hr).min(f.row1).max(f.row0 + 1);
            let edge_c = f.col0 as f64 + nc as f64 * j as f64 / sc as f64;
            let cn = edge_c.round() as usize;
            let cols = cn.saturating_sub(hc).max(f.col0)..(cn + hc).min(f.col1).max(f.col0 + 1);
            (edge_r, edge_c, rows, cols)
        })
        .collect();
    // One survey at a time over every node (lowest and highest do not depend on the order).
    // (Nodes side by side; a zero counts as +0 whatever its sign, so nothing depends on the order.)
    let mut range = vec![(f32::INFINITY, f32::NEG_INFINITY); nodes.len()];
    for k in 0..count {
        let z = surface(k);
        nodes
            .par_iter()
            .zip(range.par_iter_mut())
            .for_each(|((_, _, rows, cols), (lo, hi))| {
                for v in z.slice(ndarray::s![rows.clone(), cols.clone()]) {
                    if v.is_finite() {
                        *lo = lo.min(*v + 0.0);
                        *hi = hi.max(*v + 0.0);
                    }
                }
            });
    }
    let mut out = Vec::with_capacity(nodes.len());
    for ((edge_r, edge_c, _, _), (lo, hi)) in nodes.into_iter().zip(range) {
        if lo <= hi {
            out.push([
                (edge_c - g.cols as f64 / 2.0) * cxm,
                (g.rows as f64 / 2.0 - edge_r) * cym,
                f64::from(lo),
                f64::from(hi),
            ]);
        }
    }
    out
}

/// The points to keep in view, in scene metres with heights exaggerated by `k`: the envelope's
/// lowest and highest point at every node, and, when `base_m` is given (the block's sides are
/// drawn), the base under the focus's rim. Without an envelope, the corners of the focus box from
/// `range_m.0` (or the base) to `range_m.1`.
pub fn framing_points(
    g: &GridGeometry,
    f: &Focus,
    k: f64,
    range_m: (f64, f64),
    base_m: Option<f64>,
) -> Vec<[f64; 3]> {
    if f.envelope.is_empty() {
        let lo = base_m.unwrap_or(range_m.0).min(range_m.0);
        return focus_corners(g, f, lo * k, range_m.1 * k).to_vec();
    }
    let mut out = Vec::with_capacity(f.envelope.len() * 3);
    let (xs, ys) = (
        f.envelope.iter().map(|n| n[0]),
        f.envelope.iter().map(|n| n[1]),
    );
    let (x0, x1) = (
        xs.clone().fold(f64::MAX, f64::min),
        xs.fold(f64::MIN, f64::max),
    );
    let (y0, y1) = (
        ys.clone().fold(f64::MAX, f64::min),
        ys.fold(f64::MIN, f64::max),
    );
    for &[x, y, lo, hi] in &f.envelope {
        out.push([x, y, lo * k]);
        out.push([x, y, hi * k]);
        let rim = x == x0 || x == x1 || y == y0 || y == y1;
        if let (Some(b), true) = (base_m, rim) {
            out.push([x, y, b * k]);
        }
    }
    out
}

/// Most cells sampled per survey for the relief percentiles (a regular stride beyond that).
const RELIEF_SAMPLES: usize = 1 << 18;

/// The 0.5th to 99.5th percentile spread of the elevations inside `f` over all `surfaces`, in metres
/// (0 when there are no data).
/// The surveys are `surface(0..count)`, fetched one at a time.
pub fn robust_relief_m<'s>(
    count: usize,
    surface: &dyn Fn(usize) -> ArrayView2<'s, f32>,
    f: &Focus,
) -> f64 {
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for k in 0..count {
        let z = surface(k);
        let cells = (f.row1 - f.row0) * (f.col1 - f.col0);
        let stride = cells.div_ceil(RELIEF_SAMPLES).max(1);
        let mut v: Vec<f32> = z
            .slice(ndarray::s![f.row0..f.row1, f.col0..f.col1])
            .iter()
            .step_by(stride)
            .copied()
            .filter(|v| v.is_finite())
            .collect();
        if v.is_empty() {
            continue;
        }
        let n = v.len();
        let (i_lo, i_hi) = ((n - 1) * 5 / 1000, (n - 1) * 995 / 1000);
        let a = *v.select_nth_unstable_by(i_lo, f32::total_cmp).1;
        let b = *v.select_nth_unstable_by(i_hi, f32::total_cmp).1;
        lo = lo.min(f64::from(a));
        hi = hi.max(f64::from(b));
    }
    if hi >= lo {
        hi - lo
    } else {
        0.0
    }
}

/// Target of the automatic vertical exaggeration: the exaggerated relief of the framed area is
/// about this share of its longer horizontal side. A dune then stands up clearly without turning
/// into a spike; the design value of this project, common practice, no source.
pub const AUTO_RELIEF_SHARE: f64 = 0.125;

/// Bounds of the automatic exaggeration: 1 (true scale) to 5; coastal presentations usually use
/// 2 to 5 (REFERENCES.md §17, common practice, no source).
pub const AUTO_EXAGGERATION_RANGE: (f64, f64) = (1.0, 5.0);

/// The vertical exaggeration chosen when the job sets none: `AUTO_RELIEF_SHARE · L / R` for an
/// area of relief `R` and longer side `L` (metres), rounded to the nearest half and kept within
/// [`AUTO_EXAGGERATION_RANGE`]; a flat area (R = 0) gets the largest value.
pub fn auto_exaggeration(relief_m: f64, longer_side_m: f64) -> f64 {
    let (lo, hi) = AUTO_EXAGGERATION_RANGE;
    if !(relief_m > 0.0 && longer_side_m > 0.0) {
        return hi;
    }
    let k = AUTO_RELIEF_SHARE * longer_side_m / relief_m;
    ((k * 2.0).round() / 2.0).clamp(lo, hi)
}

/// Where the camera looks and how far it stands (scene metres: x east, y north from the grid's
/// centre, z up in exaggerated metres).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Framing {
    /// The point looked at, and orbited around.
    pub target: [f64; 3],
    /// Distance from the eye to the target, in metres.
    pub distance_m: f64,
}

/// What [`fit`] needs of the view: the camera's bearing, tilt and lens, and the orbit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Shot {
    /// Compass bearing of the line of sight at the orbit's start, degrees.
    pub facing_deg: f64,
    /// Angle of the line of sight below the horizon, degrees.
    pub elevation_deg: f64,
    /// Vertical field of view, degrees.
    pub fov_deg: f64,
    /// Degrees turned over the whole orbit (0 = fixed view).
    pub orbit_deg: f64,
    /// Frame width in pixels.
    pub width: f64,
    /// Frame height in pixels.
    pub height: f64,
}

/// Degrees between the orbit steps checked when fitting.
pub const ORBIT_STEP_DEG: f64 = 1.0;

/// Share by which the free area is narrowed for an orbit, so points between two checked steps
/// (at most half a step away) cannot leave it: the projection moves smoothly with the bearing, by
/// far less than this over half a degree.
const ORBIT_SAFETY: f64 = 0.003;

impl Shot {
    /// Bearings checked: the start alone for a fixed view, else one every [`ORBIT_STEP_DEG`] or
    /// closer along the orbit, both ends included.
    pub fn bearings(&self) -> Vec<f64> {
        if self.orbit_deg == 0.0 {
            vec![self.facing_deg]
        } else {
            let steps = (self.orbit_deg.abs() / ORBIT_STEP_DEG).ceil().max(1.0) as usize;
            (0..=steps)
                .map(|i| self.facing_deg + self.orbit_deg * i as f64 / steps as f64)
                .collect()
        }
    }

    /// The camera at `bearing_deg` looking at `f.target` from `f.distance_m`.
    pub fn camera(&self, bearing_deg: f64, f: &Framing) -> Camera {
        let dir = camera::view_direction(bearing_deg, self.elevation_deg);
        let t = f.target;
        let d = f.distance_m;
        let eye = [t[0] - dir[0] * d, t[1] - dir[1] * d, t[2] - dir[2] * d];
        Camera::look_at(eye, t, bearing_deg, self.fov_deg, self.width, self.height)
    }
}

/// The eight corners of the focus box in scene metres: cell edges horizontally, `z_lo`..`z_hi`
/// (exaggerated) vertically.
pub fn focus_corners(g: &GridGeometry, f: &Focus, z_lo: f64, z_hi: f64) -> [[f64; 3]; 8] {
    let (cxm, cym) = (g.cell_x_m(), g.cell_y_m());
    let x = |c: usize| (c as f64 - g.cols as f64 / 2.0) * cxm;
    let y = |r: usize| (g.rows as f64 / 2.0 - r as f64) * cym;
    let (x0, x1, y0, y1) = (x(f.col0), x(f.col1), y(f.row1), y(f.row0));
    let mut out = [[0.0; 3]; 8];
    for (i, o) in out.iter_mut().enumerate() {
        *o = [
            if i & 1 == 0 { x0 } else { x1 },
            if i & 2 == 0 { y0 } else { y1 },
            if i & 4 == 0 { z_lo } else { z_hi },
        ];
    }
    out
}

/// Smallest distance from `target` along the line of sight of `cam` (its axes only) at which every
/// point projects inside the free area. Tangent bounds: `x/zc` in [xl, xr], `y/zc` in [yb, yt].
fn fit_distance(points: &[[f64; 3]], target: [f64; 3], cam: &Camera, tan: [f64; 4]) -> f64 {
    let [xl, xr, yb, yt] = tan;
    let mut d: f64 = camera::NEAR_M * 10.0;
    for &p in points {
        let q = camera::sub(p, target);
        let (x, y, z) = (
            camera::dot(q, cam.right),
            camera::dot(q, cam.up),
            camera::dot(q, cam.fwd),
        );
        // zc = z + d must satisfy xl·zc <= x <= xr·zc and yb·zc <= y <= yt·zc (xl, yb < 0 < xr, yt).
        let need_x = if x >= 0.0 { x / xr } else { x / xl };
        let need_y = if y >= 0.0 { y / yt } else { y / yb };
        d = d.max(need_x - z).max(need_y - z);
    }
    d
}

/// Tangent bounds of the free area for a lens: `[left, right, bottom, top]` of `x/zc` and `y/zc`.
fn tangent_bounds(shot: &Shot, free: &FreeArea) -> [f64; 4] {
    let keep = if shot.orbit_deg == 0.0 {
        1.0
    } else {
        1.0 - ORBIT_SAFETY
    };
    let t = (shot.fov_deg.to_radians() / 2.0).tan() * keep;
    let aspect = shot.width / shot.height;
    [
        (2.0 * free.left - 1.0) * t * aspect,
        (2.0 * free.right - 1.0) * t * aspect,
        (1.0 - 2.0 * free.bottom) * t,
        (1.0 - 2.0 * free.top) * t,
    ]
}

/// Largest distance needed over the orbit for `target`, and never so close that the eye dips to
/// the top of the box.
fn fit_over_orbit(
    points: &[[f64; 3]],
    target: [f64; 3],
    shot: &Shot,
    tan: [f64; 4],
    z_top: f64,
) -> f64 {
    let probe = Framing {
        target,
        distance_m: 1.0,
    };
    let d = shot
        .bearings()
        .into_iter()
        .map(|b| fit_distance(points, target, &shot.camera(b, &probe), tan))
        .fold(0.0, f64::max);
    // The eye stays above the highest ground of the box by a tenth of the distance.
    let sin_e = shot.elevation_deg.to_radians().sin();
    let clear = (z_top - target[2]).max(0.0) / (sin_e - 0.1).max(0.05);
    d.max(clear)
}

/// Centring passes for a fixed view (each moves the box's middle to the free area's middle).
const CENTRING_PASSES: usize = 6;

/// The target and distance that frame `corners` (the points of [`framing_points`]) into `free`
/// for `shot`.
/// `target` is the starting target (the box's middle); when `slide` is true the target is moved
/// so the box sits in the middle of the free area: over the ground for a fixed view, up or down
/// for an orbit (which turns about the target).
pub fn fit(
    corners: &[[f64; 3]],
    target: [f64; 3],
    shot: &Shot,
    free: &FreeArea,
    slide: bool,
) -> Framing {
    let tan = tangent_bounds(shot, free);
    let z_top = corners.iter().map(|p| p[2]).fold(f64::MIN, f64::max);
    let mut f = Framing {
        target,
        distance_m: fit_over_orbit(corners, target, shot, tan, z_top),
    };
    if !slide {
        return f;
    }
    let (l, r, t, b) = free.pixels(shot.width, shot.height);
    let (sin_e, cos_e) = shot.elevation_deg.to_radians().sin_cos();
    let fixed = shot.orbit_deg == 0.0;
    if !fixed && cos_e < 0.05 {
        return f;
    }
    for _ in 0..CENTRING_PASSES {
        // The box over the whole orbit (one bearing for a fixed view).
        let mut union = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
        let mut focal = 1.0;
        for bearing in shot.bearings() {
            let cam = shot.camera(bearing, &f);
            focal = cam.focal_px;
            let Some(p) = projected_box(&cam, corners) else {
                return f;
            };
            union = (
                union.0.min(p.0),
                union.1.max(p.1),
                union.2.min(p.2),
                union.3.max(p.3),
            );
        }
        let (c0, c1, r0, r1) = union;
        let (du, dv) = ((c0 + c1 - l - r) / 2.0, (r0 + r1 - t - b) / 2.0);
        let scale = f.distance_m / focal;
        let moved = if fixed {
            // Along the image's right: the box moves left by the same amount. Along the ground's
            // forward direction: a shift s moves the image up by s·sin(elevation).
            let cam = shot.camera(shot.facing_deg, &f);
            let s_right = du * scale;
            let s_fwd = -dv * scale / sin_e.max(0.05);
            let (sb, cb) = shot.facing_deg.to_radians().sin_cos();
            [
                f.target[0] + s_right * cam.right[0] + s_fwd * sb,
                f.target[1] + s_right * cam.right[1] + s_fwd * cb,
                f.target[2],
            ]
        } else {
            // An orbit turns about a vertical axis through the target: only raise or lower it.
            // Raising the target (and the eye with it) by s moves the image down by s·cos(elevation).
            [f.target[0], f.target[1], f.target[2] - dv * scale / cos_e]
        };
        f = Framing {
            target: moved,
            distance_m: fit_over_orbit(corners, moved, shot, tan, z_top),
        };
    }
    f
}

/// Pixel box (left, right, top, bottom) of the projected points, or None if one is behind the eye.
pub fn projected_box(cam: &Camera, points: &[[f64; 3]]) -> Option<(f64, f64, f64, f64)> {
    let mut b = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for &p in points {
        let (c, r, _) = cam.project(p)?;
        b = (b.0.min(c), b.1.max(c), b.2.min(r), b.3.max(r));
    }
    Some(b)
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    fn geometry(cols: usize, rows: usize) -> GridGeometry {
        GridGeometry {
            cols,
            rows,
            origin_x: 500_000.0,
            origin_y: 4_000_000.0,
            cell_x: 1.0,
            cell_y: 1.0,
            epsg: Some(32631),
            horizontal_unit: crate::grid::LinearUnit::Metre,
        }
    }

    /// A seeded normal deviate (Box–Muller on a 64-bit LCG); enough for fixtures.
    fn noise(seed: &mut u64) -> f32 {
        let mut u = || {
            *seed = seed
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            ((*seed >> 11) as f64 + 0.5) / (1u64 << 53) as f64
        };
        let (a, b) = (u(), u());
        ((-2.0 * a.ln()).sqrt() * (std::f64::consts::TAU * b).cos()) as f32
    }

    fn dune(g: &GridGeometry, cx: f64, cy: f64, seed: u64) -> Array2<f32> {
        let mut s = seed;
        Array2::from_shape_fn((g.rows, g.cols), |(r, c)| {
            let (dx, dy) = (c as f64 - cx, r as f64 - cy);
            (2.0 + 12.0 * (-(dx * dx + dy * dy) / (2.0 * 15.0 * 15.0)).exp()) as f32
                + 0.1 * noise(&mut s)
        })
    }

    #[test]
    fn focus_follows_the_moving_dune_not_the_noise() {
        let g = geometry(400, 300);
        let (a, b) = (dune(&g, 100.0, 150.0, 1), dune(&g, 130.0, 150.0, 2));
        // Check: Brasington et al. (2003) LoD = 1.96·√(0.1² + 0.1²) = 0.277186 m; REFERENCES.md §7
        let f = focus_of_change(&g, 2, &|i| [&a, &b][i].view(), &[(0, 1, 0.277_186)]);
        assert!(!f.is_whole(&g), "{f:?}");
        // The dune spans about cols 55..175 over the two surveys; the focus holds it, with margin,
        // and leaves out the unchanged east of the grid.
        assert!(f.col0 <= 60 && f.col1 >= 170 && f.col1 < 300, "{f:?}");
        assert!(f.row0 <= 110 && f.row1 >= 190, "{f:?}");
        // Relief: the 12 m dune stands on a 2 m plane; noise adds a few tenths.
        assert!((11.5..13.0).contains(&f.relief_m), "{f:?}");
        // Noise alone (same dune, new noise) gives no change: the whole grid.
        let c = dune(&g, 100.0, 150.0, 3);
        assert!(focus_of_change(&g, 2, &|i| [&a, &c][i].view(), &[(0, 1, 0.277_186)]).is_whole(&g));
    }

    #[test]
    fn automatic_exaggeration_follows_the_rule() {
        // Check: analytic — the rule of AUTO_RELIEF_SHARE: 0.125 · 1000 / 30 = 4.17 → 4.0;
        // 0.125 · 250 / 16 = 1.95 → 2.0; a 100 m hill on 200 m → 1 (never below true scale);
        // a 2 m foredune on 800 m → 50 → 5 (the upper bound); flat → 5.
        assert_eq!(auto_exaggeration(30.0, 1000.0), 4.0);
        assert_eq!(auto_exaggeration(16.0, 250.0), 2.0);
        assert_eq!(auto_exaggeration(100.0, 200.0), 1.0);
        assert_eq!(auto_exaggeration(2.0, 800.0), 5.0);
        assert_eq!(auto_exaggeration(0.0, 800.0), 5.0);
    }

    fn inside(cam: &Camera, corners: &[[f64; 3]], free: &FreeArea) -> (bool, f64, f64) {
        let (l, r, t, b) = free.pixels(cam.width, cam.height);
        let (c0, c1, r0, r1) = projected_box(cam, corners).unwrap();
        let tol = 1e-6 * cam.width;
        let ok = c0 >= l - tol && c1 <= r + tol && r0 >= t - tol && r1 <= b + tol;
        (ok, (c1 - c0) / (r - l), (r1 - r0) / (b - t))
    }

    #[test]
    fn framed_box_stays_inside_the_free_area_on_every_orbit_step() {
        let g = geometry(1000, 1000);
        let focus = Focus {
            row0: 300,
            row1: 600,
            col0: 200,
            col1: 700,
            relief_m: 30.0,
            envelope: Vec::new(),
        };
        let k = 3.0;
        let corners = focus_corners(&g, &focus, 2.0 * k, 32.0 * k);
        let mid = [
            corners.iter().map(|p| p[0]).sum::<f64>() / 8.0,
            corners.iter().map(|p| p[1]).sum::<f64>() / 8.0,
            17.0 * k,
        ];
        for (facing, elevation, orbit) in [
            (20.0, 35.0, 0.0),
            (60.0, 30.0, 40.0),
            (200.0, 50.0, 360.0),
            (0.0, 90.0, 0.0),
            (300.0, 20.0, -90.0),
        ] {
            let shot = Shot {
                facing_deg: facing,
                elevation_deg: elevation,
                fov_deg: 40.0,
                orbit_deg: orbit,
                width: 1280.0,
                height: 720.0,
            };
            let f = fit(&corners, mid, &shot, &FREE_AREA, true);
            let (l, r, t, b) = FREE_AREA.pixels(1280.0, 720.0);
            let mut union = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
            // Check: Hartley & Zisserman (2003) pinhole projection, REFERENCES.md §2 — every corner
            // of the focus box projects inside the free area on every one of 720 orbit steps.
            for i in 0..=720 {
                let bearing = facing + orbit * i as f64 / 720.0;
                let cam = shot.camera(bearing, &f);
                let (ok, _, _) = inside(&cam, &corners, &FREE_AREA);
                assert!(ok, "facing {facing} orbit {orbit} step {i}: outside");
                let p = projected_box(&cam, &corners).unwrap();
                union = (
                    union.0.min(p.0),
                    union.1.max(p.1),
                    union.2.min(p.2),
                    union.3.max(p.3),
                );
            }
            // The fit is tight: the box touches the free area's border (within 0.5 %), over an
            // orbit it spans at least 75 % of the free width or height (an orbit turns about the
            // box's middle, whose image is not the image's middle), and a fixed view spans all of
            // one of them, centred.
            let touch = (union.0 - l)
                .min(r - union.1)
                .min(union.2 - t)
                .min(b - union.3);
            assert!(
                touch < 0.005 * (r - l),
                "facing {facing} orbit {orbit}: {touch} px free"
            );
            let fill = ((union.1 - union.0) / (r - l)).max((union.3 - union.2) / (b - t));
            assert!(fill > 0.75, "facing {facing} orbit {orbit}: fill {fill}");
            if orbit == 0.0 {
                assert!(fill > 0.995, "fixed view fill {fill}");
                let centre = ((union.0 + union.1) / 2.0, (union.2 + union.3) / 2.0);
                assert!(
                    (centre.0 - (l + r) / 2.0).abs() < 2.0
                        && (centre.1 - (t + b) / 2.0).abs() < 2.0,
                    "{centre:?}"
                );
            }
            // The eye is above every corner.
            let cam = shot.camera(facing, &f);
            assert!(corners.iter().all(|p| cam.eye[2] > p[2]));
        }
    }

    #[test]
    fn framing_is_a_pure_function() {
        let g = geometry(200, 100);
        let focus = Focus::whole(&g, 10.0);
        let corners = focus_corners(&g, &focus, 0.0, 20.0);
        let shot = Shot {
            facing_deg: 20.0,
            elevation_deg: 35.0,
            fov_deg: 40.0,
            orbit_deg: 0.0,
            width: 960.0,
            height: 540.0,
        };
        let a = fit(&corners, [0.0, 0.0, 10.0], &shot, &FREE_AREA, true);
        let b = fit(&corners, [0.0, 0.0, 10.0], &shot, &FREE_AREA, true);
        assert_eq!(a, b);
    }
}
