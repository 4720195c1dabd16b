//! AlignedStack + ChangeOptions -> `ChangeRecord`: the per-survey and per-pair rows of the record.
//!
//! Rows are plain data with the unit in every field name, always in metres (`_m`, `_m2`, `_m3`,
//! `_m_per_yr`); map coordinates keep the CRS unit (`_crs`). The same types are written as CSV and
//! JSON by `crate::archive`, which converts to the display unit by field-name suffix.
//!
//! Volumetric uncertainty of the thresholded budget is given in two forms over the n detected cells
//! of area A (REFERENCES.md §7): `A * sigma_DoD * sqrt(n)` for independent cell errors
//! (`volume_sigma_independent_m3`), and the conservative `A * LoD * n`, as if every detected cell
//! were wrong by a full LoD in the same direction (`volume_bound_lod_m3`). The truth for a real
//! survey lies between the two, depending on how far its errors are spatially correlated.

use std::path::Path;

use chrono::NaiveDateTime;
use rayon::prelude::*;
use serde::Serialize;
use sha2::{Digest, Sha256};

use super::metrics::{self, azimuth_deg, decimal_year, survey_stats};
use super::ChangeOptions;
use crate::align::AlignedStack;
use crate::error::{Error, Result};

/// Note carried by every survey row.
pub const SURVEY_NOTE: &str =
    "measured: the elevations are the survey as delivered, resampled onto the analysis grid, with \
     the datum offset and co-registration correction given in this row";
/// Note carried by every pair row.
pub const PAIR_NOTE: &str =
    "only the two survey dates are measurements; nothing is known of the surface between them, \
     and rates assume steady change over the interval";

/// One survey's row.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SurveyRecord {
    /// Position in date order, from 0.
    pub survey_index: usize,
    /// Survey identifier from the job.
    pub survey_id: String,
    /// Survey date, ISO 8601 (YYYY-MM-DD).
    pub date: String,
    /// Decimal year of the date (actual-length years, REFERENCES.md §8).
    pub decimal_year: f64,
    /// Label from the job, if any.
    pub label: Option<String>,
    /// Always `measured`: a survey row is a measurement.
    pub kind: &'static str,
    /// The grid file as given.
    pub source_file: String,
    /// SHA-256 of the grid file's bytes (lower-case hex); empty when the file could not be read.
    pub source_sha256: String,
    /// EPSG code of the CRS, if the file states one.
    pub crs_epsg: Option<u32>,
    /// Horizontal unit of the CRS (`m`, `ft`, `US ft`); `_crs` columns are in it.
    pub crs_unit: &'static str,
    /// Who stated the CRS unit: `file`, `job` (`surveys[].horizontal_unit`) or `assumed` (metres,
    /// with a warning in the record).
    pub crs_unit_source: &'static str,
    /// Unit the grid's elevations were stored in, before conversion to metres.
    pub grid_vertical_unit: &'static str,
    /// Who stated that unit: `file`, `job` (`surveys[].vertical_unit`) or `assumed` (metres, with a
    /// warning in the record).
    pub vertical_unit_source: &'static str,
    /// Columns of the analysis grid.
    pub cols: usize,
    /// Rows of the analysis grid.
    pub rows: usize,
    /// Cell width.
    pub cell_x_m: f64,
    /// Cell height.
    pub cell_y_m: f64,
    /// West edge of the analysis grid, CRS units.
    pub west_crs: f64,
    /// South edge, CRS units.
    pub south_crs: f64,
    /// East edge, CRS units.
    pub east_crs: f64,
    /// North edge, CRS units.
    pub north_crs: f64,
    /// Share of analysis cells without data, 0 to 1.
    pub nodata_share: f64,
    /// Lowest elevation.
    pub min_elevation_m: f64,
    /// Highest elevation.
    pub max_elevation_m: f64,
    /// Mean elevation over cells with data.
    pub mean_elevation_m: f64,
    /// Map x of the highest cell (parabolic sub-cell fit), CRS units.
    pub highest_cell_x_crs: f64,
    /// Map y of the highest cell, CRS units.
    pub highest_cell_y_crs: f64,
    /// The reference elevation heights and volumes are measured from.
    pub reference_elevation_m: f64,
    /// Highest cell's elevation minus the reference elevation.
    pub highest_cell_height_above_reference_m: f64,
    /// Elevation of the crest (top of a local quadratic fit scaled to the survey's σ, see
    /// `change::crest`) on the grids' vertical datum.
    pub crest_elevation_m: f64,
    /// Crest elevation minus the reference elevation.
    pub crest_height_above_reference_m: f64,
    /// Standard error of the crest elevation from the fit.
    pub crest_standard_error_m: f64,
    /// Side of the square neighbourhood the crest was fitted over (0 when it fell back to the
    /// highest cell).
    pub crest_window_m: f64,
    /// Map x of the crest, CRS units.
    pub crest_x_crs: f64,
    /// Map y of the crest, CRS units.
    pub crest_y_crs: f64,
    /// Volume of the surface above the reference elevation (cell sum).
    pub volume_above_reference_m3: f64,
    /// Area of the cells above the reference elevation.
    pub area_above_reference_m2: f64,
    /// Vertical uncertainty used for this survey (one standard deviation).
    pub sigma_z_m: f64,
    /// `stated` when the job gave the uncertainty, `default` when the program assumed it.
    pub sigma_z_source: &'static str,
    /// The CRS the survey was delivered in, e.g. `EPSG:2264`.
    pub source_crs: String,
    /// How it was brought onto the analysis grid's CRS: `none` when it already was, else the
    /// transformation used (and a caution when the datums differ).
    pub reprojection: String,
    /// Metres added to every elevation on reading for a known datum difference
    /// (`surveys[].vertical_offset_m`).
    pub vertical_offset_m: f64,
    /// Eastward offset of this survey relative to the first, estimated on stable ground; empty when
    /// not estimated.
    pub coreg_east_m: Option<f64>,
    /// Northward offset relative to the first survey.
    pub coreg_north_m: Option<f64>,
    /// Vertical offset relative to the first survey (median on stable ground).
    pub coreg_vertical_m: Option<f64>,
    /// Standard error of the horizontal offset (independent cell errors: a lower bound).
    pub coreg_horizontal_sigma_m: Option<f64>,
    /// Standard error of the vertical offset (NMAD/√n: a lower bound).
    pub coreg_vertical_sigma_m: Option<f64>,
    /// NMAD of the elevation differences on stable ground after correction.
    pub coreg_stable_nmad_m: Option<f64>,
    /// Area of stable ground used.
    pub coreg_stable_area_m2: f64,
    /// Where the stable ground came from: job polygons, job mask, or found.
    pub coreg_stable_ground: &'static str,
    /// What was applied (`applied: …`), or why not (`not applied: …`).
    pub coreg_status: String,
    /// Warnings about this survey, separated by `; `.
    pub warnings: String,
    /// What this row is and is not.
    pub note: &'static str,
}

/// Which comparison a pair row is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum PairKind {
    /// A survey against the one before it.
    Consecutive,
    /// The last survey against the first.
    FirstToLast,
}

/// One pair's row: `DoD = later - earlier`, positive = deposition.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PairRecord {
    /// Consecutive, or last against first.
    pub pair_kind: PairKind,
    /// Index of the earlier survey.
    pub from_index: usize,
    /// Index of the later survey.
    pub to_index: usize,
    /// Id of the earlier survey.
    pub from_id: String,
    /// Id of the later survey.
    pub to_id: String,
    /// Date of the earlier survey.
    pub from_date: String,
    /// Date of the later survey.
    pub to_date: String,
    /// Decimal year of the earlier survey.
    pub from_decimal_year: f64,
    /// Decimal year of the later survey.
    pub to_decimal_year: f64,
    /// Interval in decimal years.
    pub interval_years: f64,
    /// Uncertainty of the earlier survey.
    pub from_sigma_z_m: f64,
    /// Uncertainty of the later survey.
    pub to_sigma_z_m: f64,
    /// `sqrt(from_sigma^2 + to_sigma^2)`.
    pub sigma_dod_m: f64,
    /// The t multiplier of the level of detection.
    pub lod_t: f64,
    /// Minimum level of detection `t * sigma_dod`.
    pub lod_m: f64,
    /// Cells with data in both surveys.
    pub compared_cells: u64,
    /// Area with data in both surveys.
    pub compared_area_m2: f64,
    /// Most negative change.
    pub min_change_m: f64,
    /// Most positive change.
    pub max_change_m: f64,
    /// Erosion volume, every cell counted.
    pub erosion_volume_raw_m3: f64,
    /// Deposition volume, every cell counted.
    pub deposition_volume_raw_m3: f64,
    /// Deposition minus erosion, every cell counted.
    pub net_volume_raw_m3: f64,
    /// Area of lowered cells, every cell counted.
    pub erosion_area_raw_m2: f64,
    /// Area of raised cells, every cell counted.
    pub deposition_area_raw_m2: f64,
    /// Erosion volume over detected cells: lowered by at least the LoD, in a patch of at least
    /// `min_patch_m2`.
    pub erosion_volume_m3: f64,
    /// Deposition volume over detected cells (raised by at least the LoD, in a large enough patch).
    pub deposition_volume_m3: f64,
    /// Thresholded deposition minus thresholded erosion.
    pub net_volume_m3: f64,
    /// Area of detected lowering.
    pub erosion_area_m2: f64,
    /// Area of detected raising.
    pub deposition_area_m2: f64,
    /// Cells of detected change (beyond the LoD, in a large enough patch).
    pub detected_cells: u64,
    /// `A * sigma_dod * sqrt(n_detected)`: uncertainty of a thresholded volume, independent cell errors.
    pub volume_sigma_independent_m3: f64,
    /// `A * LoD * n_detected`: a conservative bound, fully correlated errors at the LoD.
    pub volume_bound_lod_m3: f64,
    /// Lower end of the detected net volume if cell errors are independent:
    /// `net - t * volume_sigma_independent` (t of the LoD).
    pub net_volume_low_independent_m3: f64,
    /// Upper end of the detected net volume if cell errors are independent.
    pub net_volume_high_independent_m3: f64,
    /// Lower end of the detected net volume if every error pulls the same way:
    /// `net - volume_bound_lod`.
    pub net_volume_low_correlated_m3: f64,
    /// Upper end of the detected net volume if every error pulls the same way.
    pub net_volume_high_correlated_m3: f64,
    /// The detected net in plain words: `gain` or `loss` when even the correlated range excludes
    /// zero; otherwise it says "sign not established" (see [`net_sign`]).
    pub net_volume_sign: &'static str,
    /// Smallest patch of detected change used, in square metres (`change.min_patch_m2` or its
    /// default; one cell means no patch filter).
    pub min_patch_m2: f64,
    /// Area beyond the LoD left out because it lay in patches smaller than `min_patch_m2`.
    pub small_patch_area_m2: f64,
    /// Share of the compared area flagged as detected change (erosion or deposition), 0 to 1.
    pub detected_share: f64,
    /// `A * sigma_dod * sqrt(n_compared)`: uncertainty of the raw net volume, independent errors.
    pub net_volume_raw_sigma_independent_m3: f64,
    /// `A * LoD * n_compared`: bound on the raw net volume if every cell's error pulls one way.
    pub net_volume_raw_bound_lod_m3: f64,
    /// The raw net in plain words, as `net_volume_sign`.
    pub net_volume_raw_sign: &'static str,
    /// Later crest elevation minus earlier crest elevation.
    pub crest_elevation_change_m: f64,
    /// Later highest cell's elevation minus the earlier one's (rides on survey noise).
    pub highest_cell_elevation_change_m: f64,
    /// Eastward move of the crest.
    pub crest_shift_east_m: f64,
    /// Northward move of the crest.
    pub crest_shift_north_m: f64,
    /// Distance the crest moved.
    pub crest_shift_distance_m: f64,
    /// Compass direction the crest moved to, degrees clockwise from north.
    pub crest_shift_azimuth_deg: f64,
    /// Eastward migration from the displacement field, when available.
    pub migration_east_m: Option<f64>,
    /// Northward migration from the displacement field, when available.
    pub migration_north_m: Option<f64>,
    /// Migration distance, when available.
    pub migration_distance_m: Option<f64>,
    /// Migration direction, compass degrees, when available.
    pub migration_azimuth_deg: Option<f64>,
    /// Migration distance divided by the interval in decimal years, when available.
    pub migration_rate_m_per_yr: Option<f64>,
    /// Warnings about this pair, separated by `; `.
    pub warnings: String,
    /// What this row is and is not.
    pub note: &'static str,
}

impl SurveyRecord {
    /// Fills the CRS columns from how `align` reprojected this survey.
    pub fn set_reprojection(&mut self, r: &crate::reproject::Reprojection) {
        self.source_crs = r.source_crs.clone();
        self.reprojection = match &r.datum_caution {
            Some(c) => format!("{}; CAUTION: {c}", r.transformation),
            None => r.transformation.clone(),
        };
    }
    /// Fills the co-registration columns from what `coregister` reported for this survey.
    pub fn set_registration(&mut self, r: &crate::coregister::Registration) {
        let some = |v: f64| v.is_finite().then_some(v);
        self.coreg_east_m = some(r.east_m);
        self.coreg_north_m = some(r.north_m);
        self.coreg_vertical_m = some(r.vertical_m);
        self.coreg_horizontal_sigma_m = some(r.horizontal_sigma_m);
        self.coreg_vertical_sigma_m = some(r.vertical_sigma_m);
        self.coreg_stable_nmad_m = some(r.stable_nmad_m);
        self.coreg_stable_area_m2 = r.stable_area_m2;
        self.coreg_stable_ground = r.source.describe();
        self.coreg_status = r.status.clone();
    }
}

impl PairRecord {
    /// Fills the migration fields from a displacement (metres east and north) measured elsewhere,
    /// e.g. the morph's displacement field. Distance, azimuth and the rate per decimal year follow.
    pub fn set_migration(&mut self, east_m: f64, north_m: f64) {
        let distance = east_m.hypot(north_m);
        self.migration_east_m = Some(east_m);
        self.migration_north_m = Some(north_m);
        self.migration_distance_m = Some(distance);
        self.migration_azimuth_deg = Some(azimuth_deg(east_m, north_m));
        self.migration_rate_m_per_yr =
            (self.interval_years > 0.0).then(|| distance / self.interval_years);
    }
}

/// One sample of one survey's profile along the transect.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TransectPoint {
    /// Survey identifier.
    pub survey_id: String,
    /// Survey date.
    pub date: String,
    /// Distance from the transect's start.
    pub distance_m: f64,
    /// Map x of the sample, CRS units.
    pub x_crs: f64,
    /// Map y of the sample, CRS units.
    pub y_crs: f64,
    /// Elevation sampled bilinearly; empty where the grid has no data.
    pub elevation_m: Option<f64>,
}

/// The whole record of one run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChangeRecord {
    /// One row per survey, in date order.
    pub surveys: Vec<SurveyRecord>,
    /// Consecutive pairs in date order, then last against first (when there are more than two surveys).
    pub pairs: Vec<PairRecord>,
    /// Profiles along the transect, survey by survey; empty without a transect.
    pub transect: Vec<TransectPoint>,
    /// Moving landforms of every pair, each pair's site-wide row last; filled by
    /// [`super::landforms`] (empty until then).
    pub landforms: Vec<super::LandformRecord>,
    /// The options the record was made with.
    pub options: ChangeOptions,
    /// Every warning of the run, one per entry.
    pub warnings: Vec<String>,
}

fn bad_option(place: &str, message: String) -> Error {
    Error::job(Path::new("job"), format!("change.{place}"), message)
}

fn check_options(opts: &ChangeOptions) -> Result<()> {
    if !opts.reference_elevation_m.is_finite() {
        return Err(bad_option(
            "reference_elevation_m",
            "must be a finite number of metres".into(),
        ));
    }
    if !(opts.lod_t.is_finite() && opts.lod_t > 0.0) {
        return Err(bad_option(
            "lod_t",
            format!(
                "{} is not a positive number; use 1.96 for 95 % or 1.0 for 68 %",
                opts.lod_t
            ),
        ));
    }
    if !(opts.landform_join_m.is_finite() && (0.0..=1000.0).contains(&opts.landform_join_m)) {
        return Err(bad_option(
            "landform_join_m",
            format!(
                "{} m is out of range; give 0 to 1000 m, e.g. 10",
                opts.landform_join_m
            ),
        ));
    }
    if !(opts.landform_min_area_m2.is_finite() && opts.landform_min_area_m2 >= 0.0) {
        return Err(bad_option(
            "landform_min_area_m2",
            format!(
                "{} is not a non-negative area; give square metres, e.g. 100",
                opts.landform_min_area_m2
            ),
        ));
    }
    if let Some(a) = opts.min_patch_m2 {
        if !(a.is_finite() && a >= 0.0) {
            return Err(bad_option(
                "min_patch_m2",
                format!(
                    "{a} is not a non-negative area; give square metres (e.g. 4 for four 1 m cells), 0 for no patch filter, or leave it out for the default"
                ),
            ));
        }
    }
    if !(opts.default_sigma_z_m.is_finite() && opts.default_sigma_z_m >= 0.0) {
        return Err(bad_option(
            "default_sigma_z_m",
            format!(
                "{} is not a non-negative number of metres; give the vertical uncertainty (one standard \
                 deviation) to assume for surveys without sigma_z_m, typically 0.05 to 0.3 for lidar, \
                 or leave it out for the default 0.15",
                opts.default_sigma_z_m
            ),
        ));
    }
    Ok(())
}

/// SHA-256 of a file as lower-case hex.
///
/// # Errors
/// `Error::Io` when the file cannot be read.
pub fn sha256_file(path: &Path) -> Result<String> {
    let mut f = std::fs::File::open(path).map_err(|e| Error::io(path, e))?;
    let mut h = Sha256::new();
    std::io::copy(&mut f, &mut h).map_err(|e| Error::io(path, e))?;
    Ok(hex(&h.finalize()))
}

/// Lower-case hex of bytes.
pub fn hex(bytes: &[u8]) -> String {
    const DIGITS: &[u8; 16] = b"0123456789abcdef";
    let mut s = String::with_capacity(bytes.len() * 2);
    for b in bytes {
        s.push(DIGITS[(b >> 4) as usize] as char);
        s.push(DIGITS[(b & 15) as usize] as char);
    }
    s
}

/// Builds the change record of an aligned stack.
///
/// # Errors
/// `Error::Job` (path `job`, place `change.…`; the caller may put the job file's path in) when an
/// option is out of range, the reference elevation lies above every cell of every survey, or the
/// transect leaves the analysis grid.
pub fn record(stack: &AlignedStack, opts: &ChangeOptions) -> Result<ChangeRecord> {
    check_options(opts)?;
    let geometry = stack.geometry();
    let reference = opts.reference_elevation_m;
    let stats: Vec<metrics::SurveyStats> = (0..stack.len())
        .map(|i| {
            let st = survey_stats(&stack.z(i), reference);
            stack.let_go();
            st
        })
        .collect();
    let top = stats
        .iter()
        .map(|s| s.max_m)
        .filter(|v| v.is_finite())
        .fold(f64::NEG_INFINITY, f64::max);
    if top <= reference {
        return Err(bad_option(
            "reference_elevation_m",
            format!(
                "{reference} m lies at or above every cell of every survey (highest elevation {top:.3} m), so there \
                 is nothing to measure above it; choose a reference below the dune, e.g. the beach or datum level"
            ),
        ));
    }
    let transect = match opts.transect {
        Some(line) => super::transect::profiles(stack, line)?,
        None => Vec::new(),
    };
    let hashes: Vec<Result<String>> = stack
        .surveys()
        .par_iter()
        .map(|s| sha256_file(&s.source.path))
        .collect();

    let cell_area = geometry.cell_area_m2();
    let unit_m = geometry.horizontal_unit.metres();
    let mut warnings = Vec::new();
    let mut surveys = Vec::with_capacity(stack.len());
    for (i, ((s, st), hash)) in stack.surveys().iter().zip(&stats).zip(hashes).enumerate() {
        let z = stack.z(i);
        let mut notes = Vec::new();
        let sha = match hash {
            Ok(h) => h,
            Err(e) => {
                notes.push(format!("source checksum unavailable ({e})"));
                String::new()
            }
        };
        let (sigma, sigma_source) = match s.sigma_z_m {
            Some(v) if v.is_finite() && v >= 0.0 => (v, "stated"),
            _ => {
                notes.push(format!(
                    "no vertical uncertainty stated; {} m assumed (change.default_sigma_z_m): set sigma_z_m for this survey",
                    opts.default_sigma_z_m
                ));
                (opts.default_sigma_z_m, "default")
            }
        };
        if st.cells_above == 0 {
            notes.push(format!(
                "no cell lies above the reference elevation {reference} m"
            ));
        }
        let (peak_x, peak_y) = match st.peak_index {
            Some(k) => {
                let (r, c) = metrics::peak_subcell(&z, k / geometry.cols, k % geometry.cols);
                (
                    geometry.origin_x + (c + 0.5) * geometry.cell_x,
                    geometry.origin_y - (r + 0.5) * geometry.cell_y,
                )
            }
            None => (f64::NAN, f64::NAN),
        };
        let crest = super::crest::estimate(&z, geometry, sigma);
        let (west, south, east, north) = geometry.extent();
        for n in &notes {
            log::warn!("survey {}: {n}", s.id);
            warnings.push(format!("survey {}: {n}", s.id));
        }
        surveys.push(SurveyRecord {
            survey_index: i,
            survey_id: s.id.clone(),
            date: s.date.to_string(),
            decimal_year: metrics::decimal_year_of_date(s.date),
            label: s.label.clone(),
            kind: "measured",
            source_file: s.source.path.display().to_string(),
            source_sha256: sha,
            crs_epsg: geometry.epsg,
            crs_unit: geometry.horizontal_unit.symbol(),
            crs_unit_source: s.source.horizontal_unit_source.name(),
            grid_vertical_unit: s.source.vertical_unit.symbol(),
            vertical_unit_source: s.source.vertical_unit_source.name(),
            cols: geometry.cols,
            rows: geometry.rows,
            cell_x_m: geometry.cell_x_m(),
            cell_y_m: geometry.cell_y_m(),
            west_crs: west,
            south_crs: south,
            east_crs: east,
            north_crs: north,
            nodata_share: crate::grid::nodata_share(&z),
            min_elevation_m: st.min_m,
            max_elevation_m: st.max_m,
            mean_elevation_m: if st.finite_cells > 0 {
                st.sum_m / st.finite_cells as f64
            } else {
                f64::NAN
            },
            highest_cell_x_crs: peak_x,
            highest_cell_y_crs: peak_y,
            reference_elevation_m: reference,
            highest_cell_height_above_reference_m: st.max_m - reference,
            crest_elevation_m: crest.map_or(f64::NAN, |c| c.elevation_m),
            crest_height_above_reference_m: crest.map_or(f64::NAN, |c| c.elevation_m - reference),
            crest_standard_error_m: crest.map_or(f64::NAN, |c| c.standard_error_m),
            crest_window_m: crest.map_or(f64::NAN, |c| {
                if c.radius_cells == 0 {
                    0.0
                } else {
                    (2 * c.radius_cells + 1) as f64 * geometry.cell_x_m()
                }
            }),
            crest_x_crs: crest.map_or(f64::NAN, |c| c.x_crs),
            crest_y_crs: crest.map_or(f64::NAN, |c| c.y_crs),
            volume_above_reference_m3: st.excess_sum_m * cell_area,
            area_above_reference_m2: st.cells_above as f64 * cell_area,
            sigma_z_m: sigma,
            sigma_z_source: sigma_source,
            source_crs: geometry
                .epsg
                .map_or_else(|| "not stated".to_string(), |c| format!("EPSG:{c}")),
            reprojection: "none".into(),
            vertical_offset_m: 0.0,
            coreg_east_m: None,
            coreg_north_m: None,
            coreg_vertical_m: None,
            coreg_horizontal_sigma_m: None,
            coreg_vertical_sigma_m: None,
            coreg_stable_nmad_m: None,
            coreg_stable_area_m2: 0.0,
            coreg_stable_ground: "",
            coreg_status: "not run".into(),
            warnings: notes.join("; "),
            note: SURVEY_NOTE,
        });
        stack.let_go();
    }

    let n = stack.len();
    let mut plan: Vec<(PairKind, usize, usize)> =
        (1..n).map(|i| (PairKind::Consecutive, i - 1, i)).collect();
    if n > 2 {
        plan.push((PairKind::FirstToLast, 0, n - 1));
    }
    let pairs = plan
        .into_iter()
        .map(|(kind, a, b)| {
            let pair = pair_record(
                stack,
                &surveys,
                kind,
                (a, b),
                (opts.lod_t, opts.min_patch_m2),
                cell_area,
                unit_m,
            );
            stack.let_go();
            pair
        })
        .collect();
    Ok(ChangeRecord {
        surveys,
        pairs,
        transect,
        landforms: Vec::new(),
        options: opts.clone(),
        warnings,
    })
}

#[allow(clippy::too_many_arguments)]
fn pair_record(
    stack: &AlignedStack,
    rows: &[SurveyRecord],
    kind: PairKind,
    (a, b): (usize, usize),
    (t, min_patch_m2): (f64, Option<f64>),
    cell_area: f64,
    unit_m: f64,
) -> PairRecord {
    let (ra, rb) = (&rows[a], &rows[b]);
    let sigma_dod = ra.sigma_z_m.hypot(rb.sigma_z_m);
    let lod = t * sigma_dod;
    let mut st = metrics::pair_stats(&stack.z(a), &stack.z(b), lod);
    // The detected budget counts only cells in patches of at least the smallest patch
    // (`change::detect`); the LoD-only counts stay in `st` for the small-patch figure.
    let min_cells = super::detect::min_patch_cells(min_patch_m2, cell_area, t);
    let det = super::detect::detect(&stack.z(a), &stack.z(b), lod, min_cells);
    let sums = super::detect::detected_sums(&stack.z(a), &stack.z(b), &det.codes);
    st.erosion_m = sums.erosion_m;
    st.erosion_cells = sums.erosion_cells;
    st.deposition_m = sums.deposition_m;
    st.deposition_cells = sums.deposition_cells;
    let detected = st.erosion_cells + st.deposition_cells;
    let net = (st.deposition_m - st.erosion_m) * cell_area;
    let sigma_ind = cell_area * sigma_dod * (detected as f64).sqrt();
    let bound = cell_area * lod * detected as f64;
    let net_raw = (st.deposition_raw_m - st.erosion_raw_m) * cell_area;
    let raw_sigma = cell_area * sigma_dod * (st.compared_cells as f64).sqrt();
    let raw_bound = cell_area * lod * st.compared_cells as f64;
    let east = (rb.crest_x_crs - ra.crest_x_crs) * unit_m;
    let north = (rb.crest_y_crs - ra.crest_y_crs) * unit_m;
    let mut warnings = Vec::new();
    for (r, which) in [(ra, "earlier"), (rb, "later")] {
        if r.sigma_z_source == "default" {
            warnings.push(format!(
                "the {which} survey's uncertainty is the assumed default {} m",
                r.sigma_z_m
            ));
        }
    }
    if st.compared_cells == 0 {
        warnings.push("the two surveys share no cell with data".to_string());
    }
    PairRecord {
        pair_kind: kind,
        from_index: a,
        to_index: b,
        from_id: ra.survey_id.clone(),
        to_id: rb.survey_id.clone(),
        from_date: ra.date.clone(),
        to_date: rb.date.clone(),
        from_decimal_year: ra.decimal_year,
        to_decimal_year: rb.decimal_year,
        interval_years: rb.decimal_year - ra.decimal_year,
        from_sigma_z_m: ra.sigma_z_m,
        to_sigma_z_m: rb.sigma_z_m,
        sigma_dod_m: sigma_dod,
        lod_t: t,
        lod_m: lod,
        compared_cells: st.compared_cells,
        compared_area_m2: st.compared_cells as f64 * cell_area,
        min_change_m: st.min_dod_m,
        max_change_m: st.max_dod_m,
        erosion_volume_raw_m3: st.erosion_raw_m * cell_area,
        deposition_volume_raw_m3: st.deposition_raw_m * cell_area,
        net_volume_raw_m3: net_raw,
        erosion_area_raw_m2: st.erosion_raw_cells as f64 * cell_area,
        deposition_area_raw_m2: st.deposition_raw_cells as f64 * cell_area,
        erosion_volume_m3: st.erosion_m * cell_area,
        deposition_volume_m3: st.deposition_m * cell_area,
        net_volume_m3: net,
        erosion_area_m2: st.erosion_cells as f64 * cell_area,
        deposition_area_m2: st.deposition_cells as f64 * cell_area,
        detected_cells: detected,
        volume_sigma_independent_m3: sigma_ind,
        volume_bound_lod_m3: bound,
        net_volume_low_independent_m3: net - t * sigma_ind,
        net_volume_high_independent_m3: net + t * sigma_ind,
        net_volume_low_correlated_m3: net - bound,
        net_volume_high_correlated_m3: net + bound,
        net_volume_sign: net_sign(net, sigma_ind, bound, t),
        min_patch_m2: det.min_patch_cells as f64 * cell_area,
        small_patch_area_m2: det.small_patch_cells as f64 * cell_area,
        detected_share: if st.compared_cells > 0 {
            detected as f64 / st.compared_cells as f64
        } else {
            0.0
        },
        net_volume_raw_sigma_independent_m3: raw_sigma,
        net_volume_raw_bound_lod_m3: raw_bound,
        net_volume_raw_sign: net_sign(net_raw, raw_sigma, raw_bound, t),
        crest_elevation_change_m: rb.crest_elevation_m - ra.crest_elevation_m,
        highest_cell_elevation_change_m: rb.max_elevation_m - ra.max_elevation_m,
        crest_shift_east_m: east,
        crest_shift_north_m: north,
        crest_shift_distance_m: east.hypot(north),
        crest_shift_azimuth_deg: azimuth_deg(east, north),
        migration_east_m: None,
        migration_north_m: None,
        migration_distance_m: None,
        migration_azimuth_deg: None,
        migration_rate_m_per_yr: None,
        warnings: warnings.join("; "),
        note: PAIR_NOTE,
    }
}

/// A net volume in plain words, from its value, its independent-error σ, its correlated bound and
/// the t of the LoD: `gain`/`loss` when `net ± bound` excludes zero; when only `net ± t·σ` excludes
/// it, `gain`/`loss if errors are independent; sign not established if they are correlated`;
/// otherwise `sign not established`.
pub fn net_sign(net: f64, sigma_independent: f64, bound_correlated: f64, t: f64) -> &'static str {
    if !net.is_finite() {
        return "sign not established";
    }
    if net - bound_correlated > 0.0 {
        "gain"
    } else if net + bound_correlated < 0.0 {
        "loss"
    } else if net - t * sigma_independent > 0.0 {
        "gain if errors are independent; sign not established if they are correlated"
    } else if net + t * sigma_independent < 0.0 {
        "loss if errors are independent; sign not established if they are correlated"
    } else {
        "sign not established"
    }
}

/// Interval in decimal years between two instants (for callers holding times rather than dates).
pub fn interval_years(from: NaiveDateTime, to: NaiveDateTime) -> f64 {
    decimal_year(to) - decimal_year(from)
}

#[cfg(test)]
mod tests;
