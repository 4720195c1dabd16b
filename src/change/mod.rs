//! AlignedStack -> `ChangeRecord`: what each survey measured and how the dune changed between surveys.
//!
//! Place in the pipeline: after `align`, beside the animation. Takes the aligned surveys and
//! [`ChangeOptions`]; gives a [`ChangeRecord`] (plain data, metres throughout) and, on request, the
//! figures that go with it: one DEM-of-difference map per pair ([`dod_map`]) and a transect chart
//! ([`transect_chart`]). `crate::archive` turns all of it into files.
//!
//! Design notes:
//! - Every figure is computed in metres (elevations, lengths), square metres and cubic metres. The
//!   display unit chosen in the job is applied only when tables and figures are written, by the
//!   column-name suffix (`_m`, `_m2`, `_m3`, `_m_per_yr`); see `crate::archive`. Map coordinates stay
//!   in the CRS's own unit (`_crs` suffix) so they can be plotted over the source grids.
//! - Uncertainty follows the minimum level of detection of Brasington et al. (2003) and Lane et al.
//!   (2003): `LoD = t * sqrt(s1^2 + s2^2)`, with a uniform vertical uncertainty per survey; cells whose
//!   change is smaller than the LoD are left out of the thresholded budget (Wheaton et al. 2010, their
//!   simple uniform-threshold case; the spatially variable variant is not implemented).
//! - Sums run over fixed chunks of cells with f64 partials combined in index order, so every figure is
//!   the same on any number of threads.
//! - Only survey dates are measurements. Rates assume steady change between two surveys and every
//!   record says so.

pub mod colour;
pub mod crest;
pub mod detect;
mod draw;
pub mod landform;
pub mod map;
pub mod metrics;
mod outline;
pub mod record;
pub(crate) mod transect;

use serde::Deserialize;

use crate::align::AlignedStack;
use crate::error::Result;
use crate::grid::LinearUnit;
use crate::render::Frame;

pub use landform::{landforms, LandformRecord};
pub use map::dod_map;
pub use metrics::decimal_year;
pub use record::{record, ChangeRecord, PairKind, PairRecord, SurveyRecord, TransectPoint};
pub use transect::transect_chart;

/// Settings for the change record, read from the job's `change:` section.
#[derive(Debug, Clone, PartialEq, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct ChangeOptions {
    /// Elevation, in metres on the grids' vertical datum, above which peak heights, volumes and areas
    /// are measured. Default: 0.0.
    #[serde(deserialize_with = "crate::job::length::metres")]
    pub reference_elevation_m: f64,
    /// Multiplier t of the level of detection `LoD = t * sqrt(s1^2 + s2^2)`; 1.96 gives 95 % for
    /// normally distributed errors, 1.0 gives 68 %. Default: 1.96.
    pub lod_t: f64,
    /// Vertical uncertainty (one standard deviation, metres) assumed for a survey that states none;
    /// the record carries a warning wherever it is used. 0.15 m sits at the cautious end of typical
    /// airborne lidar on bare sand. Default: 0.15.
    pub default_sigma_z_m: f64,
    /// Unit of every length, area, volume and rate in the tables and on the figures: `metre`, `foot`
    /// (international, 0.3048 m) or `us-survey-foot` (1200/3937 m). Default: metre.
    pub display_unit: LinearUnit,
    /// Optional transect `[[x0, y0], [x1, y1]]` in map coordinates (CRS units); both ends must lie
    /// on the analysis grid. Default: none.
    pub transect: Option<[[f64; 2]; 2]>,
    /// Gaps narrower than this, in metres, between patches of detected change are closed, so the
    /// eroded and the raised flank of one dune make one landform; landforms closer than this
    /// merge. Default: 10.
    pub landform_join_m: f64,
    /// Smallest area of detected change, in square metres, that counts as a moving landform.
    /// Default: 100.
    pub landform_min_area_m2: f64,
    /// Smallest patch of detected change, in square metres: cells beyond the LoD in a patch of one
    /// sign (8-neighbour) smaller than this are not counted as detected (a spatial-coherence filter
    /// in the spirit of Wheaton et al. 2010; see `change::detect`). 0 turns the filter off. Default:
    /// from the cell size and the LoD's t, the area of the smallest patch that noise alone forms with
    /// under 1 % chance (4 cells at t = 1.96).
    pub min_patch_m2: Option<f64>,
}

impl Default for ChangeOptions {
    fn default() -> Self {
        ChangeOptions {
            reference_elevation_m: 0.0,
            lod_t: 1.96,
            default_sigma_z_m: 0.15,
            display_unit: LinearUnit::Metre,
            transect: None,
            landform_join_m: 10.0,
            landform_min_area_m2: 100.0,
            min_patch_m2: None,
        }
    }
}

/// A rendered figure and the file name it should get in the archive.
#[derive(Debug, Clone)]
pub struct Figure {
    /// File name relative to the archive's payload, forward slashes, e.g. `maps/dod-s1-s2.png`.
    pub file_name: String,
    /// The image.
    pub frame: Frame,
}

/// Renders every figure of a record: one DoD map per pair, and the transect chart when there is one.
///
/// # Allocations
/// One frame per figure.
pub fn figures(stack: &AlignedStack, record: &ChangeRecord, opts: &ChangeOptions) -> Vec<Figure> {
    let mut out: Vec<Figure> = record
        .pairs
        .iter()
        .map(|p| {
            let frame = dod_map(stack, p, opts);
            stack.let_go();
            Figure {
                file_name: format!(
                    "maps/dod-{}-{}.png",
                    file_safe(&p.from_id),
                    file_safe(&p.to_id)
                ),
                frame,
            }
        })
        .collect();
    if !record.transect.is_empty() {
        out.push(Figure {
            file_name: "charts/transect.png".into(),
            frame: transect_chart(record, opts),
        });
    }
    out
}

/// The detection mask of a pair exactly as the record counted it (same LoD, same smallest patch).
///
/// # Allocations
/// One byte a cell.
pub fn pair_detection(stack: &AlignedStack, pair: &PairRecord) -> detect::Detection {
    let cells = (pair.min_patch_m2 / stack.geometry().cell_area_m2())
        .round()
        .max(1.0) as usize;
    detect::detect(
        &stack.z(pair.from_index),
        &stack.z(pair.to_index),
        pair.lod_m,
        cells,
    )
}

/// The DEM of difference of a pair, later minus earlier, in metres (NaN where either survey has no
/// data).
pub fn dod_grid(stack: &AlignedStack, pair: &PairRecord) -> ndarray::Array2<f32> {
    let mut d = stack.z(pair.to_index).to_owned();
    ndarray::Zip::from(&mut d)
        .and(&stack.z(pair.from_index))
        .par_for_each(|b, &a| *b -= a);
    d
}

/// The pair's detection mask as float32 codes for a raster: -1 erosion, 1 deposition, 0 not
/// detected, NaN no data.
pub fn detection_raster(det: &detect::Detection) -> ndarray::Array2<f32> {
    det.codes.mapv(|c| match c {
        detect::NODATA => f32::NAN,
        c => c as f32,
    })
}

/// A survey id made safe for a file name: letters, digits, `-`, `_` and `.` kept, others become `_`.
pub(crate) fn file_safe(id: &str) -> String {
    id.chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || "-_.".contains(c) {
                c
            } else {
                '_'
            }
        })
        .collect()
}

/// Builds the record and its figures in one call (what the pipeline usually wants).
///
/// # Errors
/// As [`record()`].
pub fn record_with_figures(
    stack: &AlignedStack,
    opts: &ChangeOptions,
) -> Result<(ChangeRecord, Vec<Figure>)> {
    let rec = record(stack, opts)?;
    let figs = figures(stack, &rec, opts);
    Ok((rec, figs))
}

#[doc(hidden)]
pub mod bench_api {
    pub use super::metrics::{pair_stats, survey_stats};
}

#[cfg(test)]
pub(crate) mod testkit;

#[cfg(test)]
mod figure_tests;
