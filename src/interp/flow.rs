//! Two surveys on one grid -> the displacement field between them, a quality score per cell, the
//! dominant displacement of the landform, and a verdict saying whether any of it can be trusted.
//!
//! Place in the pipeline: after `align` (both rasters share one geometry, rows north to south, NaN
//! = nodata), before the morph (`interp::morph`) and the change record (migration figures, the
//! field as a two-band raster).
//!
//! # Method
//! 1. **Base and relief.** One plane is fitted to the mean of the two surveys where both have data
//!    (least squares, refitted twice through the cells below it so it settles on the ground around
//!    the landform); the *relief* (height above that base) of each survey is what gets matched. The
//!    same plane serves both, so the subtraction cannot itself shift anything; without it the
//!    sloping ground that does not move would, once shifted with the dune, read as a height change.
//! 2. **Dominant displacement** (normalised cross-correlation, Lewis 1995): whole-cell shifts are
//!    searched in a disc of `search_radius_m` on a coarse pyramid level (2x2 means, Burt & Adelson
//!    1983), followed down the pyramid by hill-climbing on each finer level, then given a sub-cell
//!    offset by a three-point Gaussian fit (parabolic when a value is not positive; Willert &
//!    Gharib 1991). REFERENCES.md §4. NCC over the whole overlap is normalised by the overlap, so
//!    a partly overlapping pair is not biased towards small shifts the way a plain correlation is.
//!    The estimate is then refined by Gauss–Newton on one translation of the whole relief with a
//!    gain and an offset (a single Lucas–Kanade window covering the grid). The gain makes it blind
//!    to growth in place. A mean of the dense field over the dune was tried first and rejected:
//!    growth reads as outward motion on every flank, and on an asymmetric dune those do not cancel
//!    (a mound grown by half in place gave 1.66 cells of "migration"; the global fit gives 0.0005).
//! 3. **Dense field**: iterative windowed Lucas–Kanade (Lucas & Kanade 1981) with warping, coarse to
//!    fine (Bergen et al. 1992), started on the coarse level from the dominant displacement. The
//!    window is triangular (two box passes), whose spectrum is never negative, so cell-to-cell
//!    errors shrink from one iteration to the next instead of growing. Chosen over NCC block
//!    matching because dune surfaces are smooth (gradients are well defined, and sub-cell accuracy
//!    comes from the warp without a peak-shape assumption) and because it costs a few window sums
//!    per cell per iteration, independent of the window size and search radius.
//!    On every level the field is scored, cleaned and filled:
//!    - quality = NCC between the earlier relief and the later one warped by the field, over the
//!      window; 0 where the window is flat, a pure ramp (aperture test on the structure matrix),
//!      mostly nodata or anti-correlated;
//!    - outliers are rejected by the normalised median test (Westerweel & Scarano 2005, from
//!      memory: threshold 2, noise level 0.1 cell);
//!    - normalised convolution (weights = quality) smooths well-measured cells lightly and fills
//!      weak ones (flat beach, nodata) from good vectors within `fill_radius_m`, fading towards the
//!      dominant displacement where nothing was measured within reach. On static sloping ground
//!      the filled value is harmless to the morph: a plane warped by any uniform vector and blended
//!      with the weights of the morph reproduces itself.
//! 4. **Support**: the share of the landform (relief above `min_relief_m`) whose motion was
//!    measured rather than filled in, reported with the dominant displacement.
//!
//! # Limits
//! - A field of evenly spaced, similar dunes looks the same after a move of one spacing: a true
//!   move beyond the search radius can alias onto a smaller one inside it. Keep `search_radius_m`
//!   below the dune spacing.
//! - Where one dune moves and its neighbour does not, the dominant displacement is a blend,
//!   weighted by how much relief each has; the field tells them apart.
//! - Cells are assumed square.
//!
//! # Conventions
//! The field lives on the grid of the earlier survey `a`: the sand at cell x of `a` is found at
//! x + d(x) in `b`. Components are in **metres**, `east_m` positive east and `north_m` positive
//! north (a displacement one row down the raster is negative north). Cells are assumed square;
//! pass the cell width in metres. Azimuths are compass degrees, clockwise from north, in [0, 360).
//!
//! # When the result cannot be trusted
//! [`Verdict`] names the reason (little overlap, no texture, peak at the edge of the search, weak
//! match). The pipeline should then warn, naming the pair, and use the linear blend instead. An
//! untrusted result carries a zero field and zero quality, so a careless caller's morph degrades to
//! a cross-fade rather than to nonsense.

mod dense;
mod global;
mod raster;
mod reduce;
mod result;
pub mod stored;

use ndarray::{Array2, ArrayRef2};

use dense::{FillRule, QualityRule, Scratch};
use raster::Dims;

pub use reduce::{estimate_dominant_within, estimate_within};
pub use result::{Dominant, FlowField, FlowResult, Verdict};

pub(crate) use raster::{base_plane_outside, sample_clamped, Dims as RasterDims};

/// Settings of the displacement estimate. The job file deserialises into this.
#[derive(Debug, Clone, PartialEq, serde::Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct FlowOptions {
    /// Side of the square matching window, in metres; about the size of the smallest landform part
    /// that should move on its own. Default: 16.
    pub window_m: f64,
    /// Largest displacement searched, in metres. A dominant displacement at the edge of this disc
    /// gives [`Verdict::AtSearchLimit`]. Also sets the depth of the coarse-to-fine pyramid: levels
    /// are added until this radius is about 12 cells on the coarsest one. Default: 60.
    pub search_radius_m: f64,
    /// Lucas–Kanade iterations on each pyramid level. Default: 4.
    pub iterations: usize,
    /// Smallest quality (local NCC after warping, 0 to 1) for a vector to count as measured; also
    /// the smallest whole-relief NCC for the pair to be trusted. Default: 0.6.
    pub min_quality: f32,
    /// Smallest standard deviation of the relief (height above the base plane) of either survey for
    /// the pair to have texture to match, in metres. Default: 0.1.
    pub min_relief_m: f64,
    /// Smallest share of cells with data in both surveys, out of those with data in either.
    /// Default: 0.3.
    pub min_overlap: f64,
    /// How far good vectors are spread into weak cells, in metres (about one Gaussian sigma).
    /// Default: 40.
    pub fill_radius_m: f64,
}

impl Default for FlowOptions {
    fn default() -> Self {
        FlowOptions {
            window_m: 16.0,
            search_radius_m: 60.0,
            iterations: 4,
            min_quality: 0.6,
            min_relief_m: 0.1,
            min_overlap: 0.3,
            fill_radius_m: 40.0,
        }
    }
}

impl FlowOptions {
    /// Checks the settings; the message names the key and the fix (the caller adds the job path).
    ///
    /// # Errors
    /// A message when a value is out of range.
    pub fn validate(&self) -> Result<(), String> {
        let pos = |v: f64, key: &str| {
            if v.is_finite() && v > 0.0 {
                Ok(())
            } else {
                Err(format!(
                    "flow.{key} is {v}; give a positive number of metres"
                ))
            }
        };
        pos(self.window_m, "window_m")?;
        pos(self.search_radius_m, "search_radius_m")?;
        pos(self.fill_radius_m, "fill_radius_m")?;
        if !(self.min_relief_m.is_finite() && self.min_relief_m >= 0.0) {
            return Err(format!(
                "flow.min_relief_m is {}; give 0 or more metres",
                self.min_relief_m
            ));
        }
        if !(0.0..=1.0).contains(&self.min_quality) {
            return Err(format!(
                "flow.min_quality is {}; give a value from 0 to 1",
                self.min_quality
            ));
        }
        if !(0.0..=1.0).contains(&self.min_overlap) {
            return Err(format!(
                "flow.min_overlap is {}; give a share from 0 to 1",
                self.min_overlap
            ));
        }
        if self.iterations == 0 || self.iterations > 50 {
            return Err(format!(
                "flow.iterations is {}; give 1 to 50",
                self.iterations
            ));
        }
        Ok(())
    }
}

/// Whole-cell shifts searched on the coarse level at most this many cells away; sets the depth of
/// the pyramid (12 keeps the coarse search at about 450 NCC evaluations).
const COARSE_RADIUS_CELLS: f64 = 12.0;
/// The pyramid stops before a level would be smaller than this on its short side.
const MIN_LEVEL_CELLS: usize = 24;
/// Aperture test: smallest eigenvalue ratio of the window's structure matrix.
const MIN_APERTURE: f32 = 0.01;

/// The options made safe to use (out-of-range values replaced by defaults) and put in cells.
struct Settings {
    cell_m: f64,
    radius_m: f64,
    min_q: f32,
    min_relief_m: f64,
    min_overlap: f64,
    window_cells: f64,
    fill_cells: f64,
    iters: usize,
}

impl Settings {
    fn new(o: &FlowOptions, cell_size_m: f64) -> Self {
        let def = FlowOptions::default();
        let positive = |v: f64, d: f64| if v.is_finite() && v > 0.0 { v } else { d };
        let cell_m = positive(cell_size_m, 1.0);
        let min_q = if (0.0..=1.0).contains(&o.min_quality) {
            o.min_quality
        } else {
            def.min_quality
        };
        let min_relief_m = if o.min_relief_m.is_finite() && o.min_relief_m >= 0.0 {
            o.min_relief_m
        } else {
            def.min_relief_m
        };
        let min_overlap = if (0.0..=1.0).contains(&o.min_overlap) {
            o.min_overlap
        } else {
            def.min_overlap
        };
        Settings {
            cell_m,
            radius_m: positive(o.search_radius_m, def.search_radius_m),
            min_q,
            min_relief_m,
            min_overlap,
            window_cells: positive(o.window_m, def.window_m) / cell_m,
            fill_cells: positive(o.fill_radius_m, def.fill_radius_m) / cell_m,
            iters: o.iterations.clamp(1, 50),
        }
    }
}

/// One pyramid level: both reliefs at one resolution (level l has cells 2^l times wider).
struct Level {
    a: Vec<f32>,
    b: Vec<f32>,
    d: Dims,
    /// Fewest overlapping pairs an NCC may rest on: a quarter of the cells with data in both.
    min_pairs: usize,
}

impl Level {
    fn new(a: Vec<f32>, b: Vec<f32>, d: Dims) -> Self {
        let n = a
            .iter()
            .zip(&b)
            .filter(|(x, y)| x.is_finite() && y.is_finite())
            .count();
        Level {
            a,
            b,
            d,
            min_pairs: (n / 4).max(16).min(d.len()),
        }
    }
}

/// Estimates the displacement from survey `a` (earlier) to survey `b` (later).
///
/// `cell_size_m` is the width of a (square) cell in metres. Never fails: problems are reported in
/// [`FlowResult::verdict`]. Invalid options are replaced by their defaults (call
/// [`FlowOptions::validate`] first to report them).
///
/// # Allocations
/// About 25 rasters of the grid's size (f32), plus a third more for the pyramid.
pub fn estimate(
    a: &ArrayRef2<f32>,
    b: &ArrayRef2<f32>,
    cell_size_m: f64,
    opts: &FlowOptions,
) -> FlowResult {
    let (rows, cols) = a.dim();
    let s = Settings::new(opts, cell_size_m);
    let untrusted = |verdict: Verdict, dominant: Option<Dominant>| FlowResult {
        field: FlowField::zeros(rows, cols, s.cell_m),
        dominant,
        verdict,
    };
    let m = match match_whole(a, b, &s) {
        Ok(m) => m,
        Err((verdict, dom)) => return untrusted(verdict, dom),
    };
    let (g_row, g_col) = m.shift;
    let (u, v, q) = dense_field(&m.levels, &s, m.shift);
    let support = landform_support(&m.levels[0].a, &q, &s);
    let dominant =
        Dominant::from_components(g_col * s.cell_m, -g_row * s.cell_m, m.peak.ncc, support);
    if let Some(verdict) = beyond_radius(&dominant, &s) {
        return untrusted(verdict, Some(dominant));
    }
    let to_array =
        |f: Vec<f32>| Array2::from_shape_vec((rows, cols), f).expect("field has the grid's shape");
    let k = s.cell_m as f32;
    FlowResult {
        field: FlowField::full(
            to_array(u.iter().map(|x| x * k).collect()),
            to_array(v.iter().map(|y| -y * k).collect()),
            to_array(q),
            s.cell_m,
        ),
        dominant: Some(dominant),
        verdict: Verdict::Trusted,
    }
}

/// The dominant displacement alone, as [`estimate`] finds it (method steps 1 and 2), without the
/// dense field: the same east, north, distance, azimuth and NCC bit for bit, and the same verdict
/// whenever the verdict does not depend on the dense field (it never does). `support` is 0, as
/// it needs the dense field. For callers that want one vector per landform, at a fraction of the
/// cost.
///
/// # Errors
/// The verdict that stops the estimate, with the displacement found so far when there is one.
pub fn estimate_dominant(
    a: &ArrayRef2<f32>,
    b: &ArrayRef2<f32>,
    cell_size_m: f64,
    opts: &FlowOptions,
) -> Result<Dominant, (Verdict, Option<Dominant>)> {
    let s = Settings::new(opts, cell_size_m);
    let m = match_whole(a, b, &s)?;
    let (g_row, g_col) = m.shift;
    let dominant = Dominant::from_components(g_col * s.cell_m, -g_row * s.cell_m, m.peak.ncc, 0.0);
    match beyond_radius(&dominant, &s) {
        Some(verdict) => Err((verdict, Some(dominant))),
        None => Ok(dominant),
    }
}

/// The whole-relief match both [`estimate`] and [`estimate_dominant`] start from: the reliefs'
/// pyramid, the whole-cell correlation peak and the refined (rows, cols) shift in level-0 cells.
struct WholeMatch {
    levels: Vec<Level>,
    peak: global::Peak,
    shift: (f64, f64),
}

/// Method steps 1 and 2: overlap and texture checks, base plane and reliefs, pyramid, dominant
/// shift, refined by one Gauss–Newton translation of the whole relief.
fn match_whole(
    a: &ArrayRef2<f32>,
    b: &ArrayRef2<f32>,
    s: &Settings,
) -> Result<WholeMatch, (Verdict, Option<Dominant>)> {
    let (rows, cols) = a.dim();
    if a.dim() != b.dim() {
        return Err((
            Verdict::ShapeMismatch {
                earlier: a.dim(),
                later: b.dim(),
            },
            None,
        ));
    }
    let d = Dims { rows, cols };
    let fa: Vec<f32> = a.iter().copied().collect();
    let fb: Vec<f32> = b.iter().copied().collect();

    let (both, either) = fa
        .iter()
        .zip(&fb)
        .fold((0usize, 0usize), |(n2, n1), (x, y)| {
            (
                n2 + (x.is_finite() && y.is_finite()) as usize,
                n1 + (x.is_finite() || y.is_finite()) as usize,
            )
        });
    let share = if either == 0 {
        0.0
    } else {
        both as f64 / either as f64
    };
    if either == 0 || share < s.min_overlap || both < 16 {
        return Err((
            Verdict::LittleOverlap {
                share,
                required: s.min_overlap,
            },
            None,
        ));
    }

    let p = raster::base_plane(&fa, &fb, d);
    let relief = |z: &[f32]| -> Vec<f32> {
        z.iter()
            .enumerate()
            .map(|(i, &v)| {
                (v as f64 - (p[0] + p[1] * (i % cols) as f64 + p[2] * (i / cols) as f64)) as f32
            })
            .collect()
    };
    let (ra, rb) = (relief(&fa), relief(&fb));
    drop((fa, fb));
    let relief_std_m = relief_std(&ra, &rb).min(relief_std(&rb, &ra));
    if relief_std_m.is_nan() || relief_std_m < s.min_relief_m || relief_std_m == 0.0 {
        return Err((
            Verdict::NoTexture {
                relief_std_m,
                required_m: s.min_relief_m,
            },
            None,
        ));
    }

    let levels = pyramid(ra, rb, d, s.radius_m / s.cell_m);
    let (peak, coarse) = dominant_shift(&levels, s)?;
    let l0 = &levels[0];
    let shift = global::refine_translation(&l0.a, &l0.b, l0.d, coarse, 12).unwrap_or(coarse);
    Ok(WholeMatch {
        levels,
        peak,
        shift,
    })
}

/// [`Verdict::AtSearchLimit`] when the refined dominant displacement lies beyond the search radius.
fn beyond_radius(dominant: &Dominant, s: &Settings) -> Option<Verdict> {
    (dominant.distance_m > s.radius_m).then_some(Verdict::AtSearchLimit {
        distance_m: dominant.distance_m,
        radius_m: s.radius_m,
    })
}

/// Halves the reliefs until the search radius is about [`COARSE_RADIUS_CELLS`] on the top level
/// (or the next level would be too small). Level 0 is the full grid.
fn pyramid(ra: Vec<f32>, rb: Vec<f32>, d: Dims, radius_cells: f64) -> Vec<Level> {
    let mut levels = vec![Level::new(ra, rb, d)];
    loop {
        let top = &levels[levels.len() - 1];
        let scale = (1usize << (levels.len() - 1)) as f64;
        if radius_cells / scale <= COARSE_RADIUS_CELLS
            || top.d.rows.min(top.d.cols) / 2 < MIN_LEVEL_CELLS
        {
            return levels;
        }
        let (ha, hd) = raster::halve(&top.a, top.d);
        let (hb, _) = raster::halve(&top.b, top.d);
        levels.push(Level::new(ha, hb, hd));
    }
}

/// Whole-relief NCC: disc search on the top level, hill-climb down the pyramid, sub-cell fit on
/// level 0. Gives the whole-cell peak and the sub-cell (rows, cols) shift, or the verdict that stops
/// the estimate (with the shift found so far, when there is one).
#[allow(clippy::type_complexity)]
fn dominant_shift(
    levels: &[Level],
    s: &Settings,
) -> Result<(global::Peak, (f64, f64)), (Verdict, Option<Dominant>)> {
    let weak = |ncc: f64| Verdict::WeakMatch {
        ncc,
        required: s.min_q as f64,
    };
    let top = levels.len() - 1;
    let coarse_radius = s.radius_m / s.cell_m / (1usize << top) as f64;
    let t = &levels[top];
    let (mut peak, at_limit) = global::search_disc(&t.a, &t.b, t.d, coarse_radius, t.min_pairs)
        .ok_or((weak(0.0), None))?;
    log::debug!(
        "flow: {} pyramid levels, coarse peak ({}, {}) ncc {:.3}",
        top + 1,
        peak.row,
        peak.col,
        peak.ncc
    );
    for l in levels[..top].iter().rev() {
        peak = global::climb(
            &l.a,
            &l.b,
            l.d,
            (2 * peak.row, 2 * peak.col),
            l.min_pairs,
            8,
        )
        .ok_or((weak(peak.ncc), None))?;
    }
    let l0 = &levels[0];
    let (g_row, g_col) = global::subcell(&l0.a, &l0.b, l0.d, peak, l0.min_pairs);
    let dom = Dominant::from_components(g_col * s.cell_m, -g_row * s.cell_m, peak.ncc, 0.0);
    if at_limit || dom.distance_m > s.radius_m {
        return Err((
            Verdict::AtSearchLimit {
                distance_m: dom.distance_m,
                radius_m: s.radius_m,
            },
            Some(dom),
        ));
    }
    if peak.ncc < s.min_q as f64 {
        return Err((weak(peak.ncc), Some(dom)));
    }
    Ok((peak, (g_row, g_col)))
}

/// Dense field (u = columns east, v = rows south, in level-0 cells) and its quality, coarse to fine
/// from the dominant shift `(g_row, g_col)`.
fn dense_field(
    levels: &[Level],
    s: &Settings,
    (g_row, g_col): (f64, f64),
) -> (Vec<f32>, Vec<f32>, Vec<f32>) {
    let top = levels.len() - 1;
    let scale_top = (1usize << top) as f32;
    let mut u = vec![g_col as f32 / scale_top; levels[top].d.len()];
    let mut v = vec![g_row as f32 / scale_top; levels[top].d.len()];
    let mut q = Vec::new();
    for (l, lv) in levels.iter().enumerate().rev() {
        let ld = lv.d;
        // Same window in cells on every level, so it covers more ground on coarse levels.
        let h =
            ((s.window_cells / 2.0).round() as usize).clamp(2, (ld.rows.min(ld.cols) / 4).max(2));
        let scale = (1usize << l) as f32;
        let mut scratch = Scratch::new(ld);
        dense::refine(&lv.a, &lv.b, ld, (&mut u, &mut v), h, s.iters, &mut scratch);
        let rule = QualityRule {
            h,
            min_std_m: (s.min_relief_m as f32 * 0.1).max(1e-4),
            min_aperture: MIN_APERTURE,
        };
        q = dense::quality(&lv.a, &lv.b, ld, &u, &v, rule, &mut scratch);
        let rejected = dense::reject_outliers(&u, &v, &mut q, ld, (h / 2).max(1), s.min_q);
        let fill = FillRule {
            min_q: s.min_q,
            h_small: (h / 2).max(1),
            h_large: ((s.fill_cells / scale as f64).round() as usize)
                .clamp(1, ld.rows.max(ld.cols)),
            prior: (g_col as f32 / scale, g_row as f32 / scale),
        };
        dense::smooth_fill(&mut u, &mut v, &q, ld, fill, &mut scratch);
        log::debug!(
            "flow: level {l} ({}x{}), window {} cells, {rejected} outliers rejected",
            ld.rows,
            ld.cols,
            2 * h + 1
        );
        if l > 0 {
            let fine = levels[l - 1].d;
            u = raster::double_field(&u, ld, fine);
            v = raster::double_field(&v, ld, fine);
        }
    }
    (u, v, q)
}

/// Share of the landform's cells (more than `min_relief_m` above the base, so that noise on bare
/// ground does not count) whose vector was measured with quality at least `min_quality`.
fn landform_support(ra: &[f32], q: &[f32], s: &Settings) -> f64 {
    let floor = s.min_relief_m.max(1e-3);
    let (mut land, mut measured) = (0usize, 0usize);
    for (&h, &qi) in ra.iter().zip(q) {
        if h.is_nan() || (h as f64) <= floor {
            continue;
        }
        land += 1;
        measured += (qi >= s.min_q) as usize;
    }
    if land == 0 {
        0.0
    } else {
        measured as f64 / land as f64
    }
}

/// Standard deviation of `x` over the cells where both `x` and `other` have data.
fn relief_std(x: &[f32], other: &[f32]) -> f64 {
    let (mut n, mut s, mut ss) = (0.0f64, 0.0f64, 0.0f64);
    for (&a, &b) in x.iter().zip(other) {
        if a.is_finite() && b.is_finite() {
            n += 1.0;
            s += a as f64;
            ss += a as f64 * a as f64;
        }
    }
    if n < 2.0 {
        return 0.0;
    }
    ((ss - s * s / n) / n).max(0.0).sqrt()
}
