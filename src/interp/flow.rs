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
//! 3. **Dense field**: iterative windowed Lucas–Kanade (Lucas & Kanade 1981) with warping, coarse to
//!    fine (Bergen et al. 1992), started on the coarse level from the dominant displacement. Chosen
//!    over NCC block matching because dune surfaces are smooth (gradients are well defined, and
//!    sub-cell accuracy comes from the warp without a peak-shape assumption) and because it costs a
//!    few window sums per cell per iteration, independent of the window size and search radius.
//!    On every level the field is scored, cleaned and filled:
//!    - quality = NCC between the earlier relief and the later one warped by the field, over the
//!      window; 0 where the window is flat, a pure ramp (aperture test on the structure matrix),
//!      mostly nodata or anti-correlated;
//!    - outliers are rejected by the normalised median test (Westerweel & Scarano 2005);
//!    - normalised convolution (weights = quality) smooths well-measured cells lightly and fills
//!      weak ones (flat beach, nodata) from good vectors within `fill_radius_m`, fading towards the
//!      dominant displacement where nothing was measured within reach. On static sloping ground
//!      the filled value is harmless to the morph: a plane warped by any uniform vector and blended
//!      with the weights of the morph reproduces itself.
//! 4. The dominant displacement is then refined as the mean of the field over the landform (cells
//!    more than `min_relief_m` above the base), weighted by quality times relief (the
//!    mass-weighted motion of the dune).
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

use ndarray::Array2;

use dense::{FillRule, QualityRule, Scratch};
use raster::Dims;

pub(crate) use raster::{sample_clamped, Dims as RasterDims};

/// Settings of the displacement estimate. The job file deserialises into this.
#[derive(Debug, Clone, PartialEq, serde::Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct FlowOptions {
    /// Side of the square matching window, in metres; about the size of the smallest landform part
    /// that should move on its own. Default: 16.
    pub window_m: f64,
    /// Largest displacement searched, in metres. A dominant displacement at the edge of this disc
    /// gives [`Verdict::AtSearchLimit`]. Default: 60.
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

/// The displacement field on the grid of the earlier survey, in metres, with its quality.
#[derive(Debug, Clone)]
pub struct FlowField {
    /// East component of the displacement from the earlier to the later survey, metres.
    pub east_m: Array2<f32>,
    /// North component of the displacement, metres (positive north, i.e. towards row 0).
    pub north_m: Array2<f32>,
    /// Per-cell quality from 0 to 1 (local NCC after warping); 0 where the vector was filled in
    /// rather than measured (flat, ramp, nodata, outlier, or below `min_quality`).
    pub quality: Array2<f32>,
    /// Cell width in metres the components were converted with.
    pub cell_size_m: f64,
}

impl FlowField {
    /// A field of zero displacement and zero quality (what an untrusted result carries).
    pub fn zeros(rows: usize, cols: usize, cell_size_m: f64) -> Self {
        FlowField {
            east_m: Array2::zeros((rows, cols)),
            north_m: Array2::zeros((rows, cols)),
            quality: Array2::zeros((rows, cols)),
            cell_size_m,
        }
    }
}

/// The displacement of the landform as a whole.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Dominant {
    /// East component, metres.
    pub east_m: f64,
    /// North component, metres.
    pub north_m: f64,
    /// Length of the vector, metres.
    pub distance_m: f64,
    /// Direction of travel, compass degrees clockwise from north in [0, 360); 0 when the distance is 0.
    pub azimuth_deg: f64,
    /// NCC of the whole relief at the best whole-cell shift, -1 to 1.
    pub ncc: f64,
    /// Share of the landform's cells (relief more than `min_relief_m` above the base) whose vector
    /// was measured with quality at least `min_quality`; 0 when the dense field was not used.
    pub support: f64,
}

impl Dominant {
    /// A dominant displacement from east and north components in metres.
    pub fn from_components(east_m: f64, north_m: f64, ncc: f64, support: f64) -> Self {
        let distance_m = east_m.hypot(north_m);
        let azimuth_deg = if distance_m > 0.0 {
            east_m.atan2(north_m).to_degrees().rem_euclid(360.0)
        } else {
            0.0
        };
        // rem_euclid can round -0.0000001 up to 360.0 exactly; keep the documented range.
        let azimuth_deg = if azimuth_deg >= 360.0 {
            0.0
        } else {
            azimuth_deg
        };
        Dominant {
            east_m,
            north_m,
            distance_m,
            azimuth_deg,
            ncc,
            support,
        }
    }
    /// Migration rate in metres per year over `years` (None unless `years` > 0).
    pub fn rate_m_per_yr(&self, years: f64) -> Option<f64> {
        (years.is_finite() && years > 0.0).then(|| self.distance_m / years)
    }
}

/// Whether the displacement can be trusted, and if not, why.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Verdict {
    /// The field and the dominant displacement are usable for the morph and the record.
    Trusted,
    /// The two surveys share too few cells with data.
    LittleOverlap {
        /// Share of cells with data in both, out of those with data in either.
        share: f64,
        /// The `min_overlap` setting.
        required: f64,
    },
    /// At least one survey is too flat to match (relief standard deviation below the setting).
    NoTexture {
        /// Smaller of the two surveys' relief standard deviations, metres.
        relief_std_m: f64,
        /// The `min_relief_m` setting.
        required_m: f64,
    },
    /// The best match lies at the edge of the search disc: the true displacement may be larger.
    AtSearchLimit {
        /// Distance of the best match, metres.
        distance_m: f64,
        /// The `search_radius_m` setting.
        radius_m: f64,
    },
    /// The relief of the two surveys correlates too weakly at the best shift (reshaped, not moved).
    WeakMatch {
        /// Best whole-relief NCC found.
        ncc: f64,
        /// The `min_quality` setting.
        required: f64,
    },
    /// The two rasters differ in shape (a bug upstream: `align` guarantees one geometry).
    ShapeMismatch {
        /// (rows, cols) of the earlier raster.
        earlier: (usize, usize),
        /// (rows, cols) of the later raster.
        later: (usize, usize),
    },
}

impl Verdict {
    /// True for [`Verdict::Trusted`].
    pub fn is_trusted(&self) -> bool {
        matches!(self, Verdict::Trusted)
    }
}

impl std::fmt::Display for Verdict {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match *self {
            Verdict::Trusted => write!(f, "displacement trusted"),
            Verdict::LittleOverlap { share, required } => write!(
                f,
                "the surveys overlap on {:.0}% of their cells (at least {:.0}% needed); check the survey \
                 extents or lower flow.min_overlap",
                share * 100.0,
                required * 100.0
            ),
            Verdict::NoTexture { relief_std_m, required_m } => write!(
                f,
                "no texture to match: relief varies by {relief_std_m:.3} m (at least {required_m} m needed); \
                 nothing moves that can be followed, or lower flow.min_relief_m"
            ),
            Verdict::AtSearchLimit { distance_m, radius_m } => write!(
                f,
                "best match {distance_m:.1} m away, at the edge of the {radius_m} m search; raise \
                 flow.search_radius_m if the landform really moved that far"
            ),
            Verdict::WeakMatch { ncc, required } => write!(
                f,
                "the relief correlates only {ncc:.2} at the best shift (at least {required} needed); the \
                 landform changed shape more than it moved"
            ),
            Verdict::ShapeMismatch { earlier, later } => write!(
                f,
                "rasters differ in shape ({}x{} vs {}x{}); align the surveys first",
                earlier.0, earlier.1, later.0, later.1
            ),
        }
    }
}

/// Everything [`estimate`] finds for one pair of surveys.
#[derive(Debug, Clone)]
pub struct FlowResult {
    /// The dense field (zero with zero quality when the verdict is not `Trusted`).
    pub field: FlowField,
    /// The landform's displacement, when a correlation peak was found (also on some untrusted
    /// verdicts, for the warning).
    pub dominant: Option<Dominant>,
    /// Whether to use the result.
    pub verdict: Verdict,
}

/// Whole-cell shifts searched on the coarse level at most this many cells away; sets the depth of
/// the pyramid (12 keeps the coarse search at about 450 NCC evaluations).
const COARSE_RADIUS_CELLS: f64 = 12.0;
/// The pyramid stops before a level would be smaller than this on its short side.
const MIN_LEVEL_CELLS: usize = 24;
/// Aperture test: smallest eigenvalue ratio of the window's structure matrix.
const MIN_APERTURE: f32 = 0.01;

/// Estimates the displacement from survey `a` (earlier) to survey `b` (later).
///
/// `cell_size_m` is the width of a (square) cell in metres. Never fails: problems are reported in
/// [`FlowResult::verdict`]. Invalid options are clamped to the nearest sane value (call
/// [`FlowOptions::validate`] first to report them).
///
/// # Allocations
/// About 25 rasters of the grid's size (f32), plus a third more for the pyramid.
pub fn estimate(
    a: &Array2<f32>,
    b: &Array2<f32>,
    cell_size_m: f64,
    opts: &FlowOptions,
) -> FlowResult {
    let (rows, cols) = a.dim();
    let cell = if cell_size_m.is_finite() && cell_size_m > 0.0 {
        cell_size_m
    } else {
        1.0
    };
    let untrusted = |verdict: Verdict, dominant: Option<Dominant>| FlowResult {
        field: FlowField::zeros(rows, cols, cell),
        dominant,
        verdict,
    };
    if a.dim() != b.dim() {
        return untrusted(
            Verdict::ShapeMismatch {
                earlier: a.dim(),
                later: b.dim(),
            },
            None,
        );
    }
    let d = Dims { rows, cols };
    let fa: Vec<f32> = a.iter().copied().collect();
    let fb: Vec<f32> = b.iter().copied().collect();

    // Overlap.
    let (mut both, mut either) = (0usize, 0usize);
    for (x, y) in fa.iter().zip(&fb) {
        both += (x.is_finite() && y.is_finite()) as usize;
        either += (x.is_finite() || y.is_finite()) as usize;
    }
    let share = if either == 0 {
        0.0
    } else {
        both as f64 / either as f64
    };
    let min_overlap = opts.min_overlap.clamp(0.0, 1.0);
    if either == 0 || share < min_overlap || both < 16 {
        return untrusted(
            Verdict::LittleOverlap {
                share,
                required: min_overlap,
            },
            None,
        );
    }

    // Base plane and relief.
    let p = raster::base_plane(&fa, &fb, d);
    let relief = |z: &[f32]| -> Vec<f32> {
        z.iter()
            .enumerate()
            .map(|(i, &v)| {
                (v as f64 - (p[0] + p[1] * (i % cols) as f64 + p[2] * (i / cols) as f64)) as f32
            })
            .collect()
    };
    let ra = relief(&fa);
    let rb = relief(&fb);
    let relief_std_m = relief_std(&ra, &rb).min(relief_std(&rb, &ra));
    let min_relief_m = if opts.min_relief_m.is_finite() {
        opts.min_relief_m.max(0.0)
    } else {
        0.1
    };
    if relief_std_m.is_nan() || relief_std_m < min_relief_m || relief_std_m == 0.0 {
        return untrusted(
            Verdict::NoTexture {
                relief_std_m,
                required_m: min_relief_m,
            },
            None,
        );
    }

    // Pyramid deep enough that the search radius is about COARSE_RADIUS_CELLS on the top level.
    let radius_m = if opts.search_radius_m.is_finite() && opts.search_radius_m > 0.0 {
        opts.search_radius_m
    } else {
        60.0
    };
    let radius_cells = radius_m / cell;
    let mut levels: Vec<(Vec<f32>, Vec<f32>, Dims)> = vec![(ra, rb, d)];
    loop {
        let top = &levels[levels.len() - 1];
        let scale = (1usize << (levels.len() - 1)) as f64;
        let next_short = top.2.rows.min(top.2.cols) / 2;
        if radius_cells / scale <= COARSE_RADIUS_CELLS || next_short < MIN_LEVEL_CELLS {
            break;
        }
        let (ha, hd) = raster::halve(&top.0, top.2);
        let (hb, _) = raster::halve(&top.1, top.2);
        levels.push((ha, hb, hd));
    }
    let top = levels.len() - 1;
    let min_pairs = |l: usize| {
        let (la, lb, ld) = &levels[l];
        let n = la
            .iter()
            .zip(lb)
            .filter(|(x, y)| x.is_finite() && y.is_finite())
            .count();
        (n / 4).max(16).min(ld.len())
    };

    // Dominant displacement: coarse disc search, climb down, sub-cell fit.
    let min_q = if opts.min_quality.is_finite() {
        opts.min_quality.clamp(0.0, 1.0)
    } else {
        0.6
    };
    let coarse_radius = radius_cells / (1usize << top) as f64;
    let (la, lb, ld) = &levels[top];
    let Some((mut peak, at_limit)) =
        global::search_disc(la, lb, *ld, coarse_radius, min_pairs(top))
    else {
        return untrusted(
            Verdict::WeakMatch {
                ncc: 0.0,
                required: min_q as f64,
            },
            None,
        );
    };
    log::debug!(
        "flow: {} pyramid levels, coarse peak ({}, {}) ncc {:.3}",
        top + 1,
        peak.row,
        peak.col,
        peak.ncc
    );
    for l in (0..top).rev() {
        let (la, lb, ld) = &levels[l];
        match global::climb(la, lb, *ld, (2 * peak.row, 2 * peak.col), min_pairs(l), 8) {
            Some(pk) => peak = pk,
            None => {
                return untrusted(
                    Verdict::WeakMatch {
                        ncc: peak.ncc,
                        required: min_q as f64,
                    },
                    None,
                )
            }
        }
    }
    let (la, lb, ld) = &levels[0];
    let (g_row, g_col) = global::subcell(la, lb, *ld, peak, min_pairs(0));
    let global_dom = Dominant::from_components(g_col * cell, -g_row * cell, peak.ncc, 0.0);
    if at_limit || global_dom.distance_m > radius_m {
        return untrusted(
            Verdict::AtSearchLimit {
                distance_m: global_dom.distance_m,
                radius_m,
            },
            Some(global_dom),
        );
    }
    if peak.ncc < min_q as f64 {
        return untrusted(
            Verdict::WeakMatch {
                ncc: peak.ncc,
                required: min_q as f64,
            },
            Some(global_dom),
        );
    }

    // Dense field, coarse to fine, started from the dominant displacement.
    let window_cells = if opts.window_m.is_finite() && opts.window_m > 0.0 {
        opts.window_m / cell
    } else {
        16.0
    };
    let fill_cells = if opts.fill_radius_m.is_finite() && opts.fill_radius_m > 0.0 {
        opts.fill_radius_m / cell
    } else {
        40.0
    };
    let iters = opts.iterations.clamp(1, 50);
    let scale_top = (1usize << top) as f32;
    let mut u = vec![g_col as f32 / scale_top; levels[top].2.len()];
    let mut v = vec![g_row as f32 / scale_top; levels[top].2.len()];
    let mut q = Vec::new();
    for l in (0..=top).rev() {
        let (la, lb, ld) = &levels[l];
        let ld = *ld;
        let short = ld.rows.min(ld.cols);
        let h = ((window_cells / 2.0).round() as usize).clamp(2, (short / 4).max(2));
        let scale = (1usize << l) as f32;
        let mut s = Scratch::new(ld);
        dense::refine(la, lb, ld, (&mut u, &mut v), h, iters, &mut s);
        let rule = QualityRule {
            h,
            min_std_m: (min_relief_m as f32 * 0.1).max(1e-4),
            min_aperture: MIN_APERTURE,
        };
        q = dense::quality(la, lb, ld, &u, &v, rule, &mut s);
        let rejected = dense::reject_outliers(&u, &v, &mut q, ld, (h / 2).max(1), min_q);
        let fill = FillRule {
            min_q,
            h_small: (h / 2).max(1),
            h_large: ((fill_cells / scale as f64).round() as usize).clamp(1, ld.rows.max(ld.cols)),
            prior: (g_col as f32 / scale, g_row as f32 / scale),
        };
        dense::smooth_fill(&mut u, &mut v, &q, ld, fill, &mut s);
        log::debug!(
            "flow: level {l} ({}x{}), window {} cells, {rejected} outliers rejected",
            ld.rows,
            ld.cols,
            2 * h + 1
        );
        if l > 0 {
            let fine = levels[l - 1].2;
            u = raster::double_field(&u, ld, fine);
            v = raster::double_field(&v, ld, fine);
        }
    }

    // Dominant refined from the field: mean over the landform (relief above `min_relief_m`, so
    // that noise on bare ground does not count), weighted by quality x relief.
    let ra = &levels[0].0;
    let (mut sw, mut su, mut sv) = (0.0f64, 0.0f64, 0.0f64);
    let (mut land, mut measured) = (0usize, 0usize);
    for i in 0..d.len() {
        let h = ra[i];
        if h.is_nan() || h as f64 <= min_relief_m.max(1e-3) {
            continue;
        }
        land += 1;
        if q[i] >= min_q {
            measured += 1;
            let w = q[i] as f64 * h as f64;
            sw += w;
            su += w * u[i] as f64;
            sv += w * v[i] as f64;
        }
    }
    let support = if land == 0 {
        0.0
    } else {
        measured as f64 / land as f64
    };
    let dominant = if sw > 0.0 {
        Dominant::from_components(su / sw * cell, -sv / sw * cell, peak.ncc, support)
    } else {
        global_dom
    };
    if dominant.distance_m > radius_m {
        return untrusted(
            Verdict::AtSearchLimit {
                distance_m: dominant.distance_m,
                radius_m,
            },
            Some(dominant),
        );
    }
    let to_array =
        |f: Vec<f32>| Array2::from_shape_vec((rows, cols), f).expect("field has the grid's shape");
    let k = cell as f32;
    FlowResult {
        field: FlowField {
            east_m: to_array(u.iter().map(|x| x * k).collect()),
            north_m: to_array(v.iter().map(|y| -y * k).collect()),
            quality: to_array(q),
            cell_size_m: cell,
        },
        dominant: Some(dominant),
        verdict: Verdict::Trusted,
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
