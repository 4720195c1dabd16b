//! Private serde mirror of the job file. Nothing outside `job` sees these types: `validate` turns
//! them into a resolved `Job`.

use serde::Deserialize;

use crate::annotate::LabelOptions;
use crate::change::ChangeOptions;
use crate::encode::gif::GifOptions;
use crate::encode::png_seq::PosterOptions;
use crate::encode::video::VideoOptions;
use crate::interp::flow::FlowOptions;
use crate::render::{LightOptions, ShellOptions, ViewOptions, WaterOptions};

/// The whole job file as written.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct JobFile {
    pub format_version: u32,
    pub title: String,
    pub surveys: Vec<SurveyEntry>,
    #[serde(default)]
    pub area_of_interest: Option<AreaEntry>,
    #[serde(default)]
    pub timeline: TimelineEntry,
    #[serde(default)]
    pub in_between: InBetweenEntry,
    #[serde(default)]
    pub view: ViewOptions,
    #[serde(default)]
    pub sun: LightOptions,
    #[serde(default)]
    pub colour: ColourEntry,
    #[serde(default)]
    pub water: WaterOptions,
    #[serde(default)]
    pub shell: ShellEntry,
    #[serde(default)]
    pub flow: FlowOptions,
    #[serde(default)]
    pub labels: LabelOptions,
    #[serde(default)]
    pub credit: Option<String>,
    #[serde(default)]
    pub animation: GifOptions,
    #[serde(default)]
    pub poster: PosterOptions,
    #[serde(default)]
    pub video: VideoOptions,
    #[serde(default)]
    pub change: ChangeOptions,
    /// Co-register later surveys to the first on stable ground.
    #[serde(default = "default_true")]
    pub coregister: bool,
    #[serde(default)]
    pub stable_ground: StableGroundEntry,
    pub output: OutputEntry,
}

/// Where the ground that did not change lies, and the limits of the co-registration fit.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub(super) struct StableGroundEntry {
    /// Polygons in map coordinates (CRS units), each a list of `[x, y]` vertices.
    pub polygons: Option<Vec<Vec<[f64; 2]>>>,
    /// A mask GeoTIFF (non-zero = stable), relative to the job file.
    pub mask: Option<String>,
    pub min_slope_deg: f64,
    pub max_slope_deg: f64,
    pub min_cells: usize,
    pub buffer_m: f64,
}

impl Default for StableGroundEntry {
    fn default() -> Self {
        let d = crate::coregister::CoregOptions::default();
        StableGroundEntry {
            polygons: None,
            mask: None,
            min_slope_deg: d.min_slope_deg,
            max_slope_deg: d.max_slope_deg,
            min_cells: d.min_cells,
            buffer_m: d.buffer_m,
        }
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct SurveyEntry {
    pub date: String,
    pub grid: String,
    #[serde(default)]
    pub id: Option<String>,
    #[serde(default)]
    pub label: Option<String>,
    #[serde(default, deserialize_with = "super::length::opt_metres")]
    pub sigma_z_m: Option<f64>,
    #[serde(default)]
    pub vertical_unit: Option<crate::grid::LinearUnit>,
    #[serde(default)]
    pub horizontal_unit: Option<crate::grid::LinearUnit>,
    #[serde(default)]
    pub vertical_offset_m: f64,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct AreaEntry {
    pub west: f64,
    pub south: f64,
    pub east: f64,
    pub north: f64,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub(super) struct TimelineEntry {
    pub frames_per_year: Option<f64>,
    pub total_frames: Option<usize>,
    pub fps: f64,
    pub hold_s: f64,
}

impl Default for TimelineEntry {
    fn default() -> Self {
        TimelineEntry {
            frames_per_year: None,
            total_frames: None,
            fps: 12.0,
            hold_s: 1.0,
        }
    }
}

#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields, default)]
pub(super) struct InBetweenEntry {
    pub method: Option<String>,
    /// Per-interval overrides, one entry per interval: `linear` or `morph`.
    pub per_interval: Option<Vec<String>>,
}

/// How the terrain is coloured.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub(super) struct ColourEntry {
    /// `elevation`, `change` or `drape`.
    pub by: String,
    /// For `change`: `first` or `previous` survey.
    pub since: String,
    /// For `change`: the change in metres at the ends of the ramp; absent = the largest change.
    #[serde(deserialize_with = "super::length::opt_metres")]
    pub limit_m: Option<f64>,
    /// For `drape`: an RGB GeoTIFF, relative to the job file.
    pub drape: Option<String>,
    /// For `elevation` (and drape cells outside the image): `sand-coast` or `viridis`.
    pub ramp: String,
}

impl Default for ColourEntry {
    fn default() -> Self {
        ColourEntry {
            by: "elevation".into(),
            since: "first".into(),
            limit_m: None,
            drape: None,
            ramp: "sand-coast".into(),
        }
    }
}

/// The translucent shell: which surface, and how it looks.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub(super) struct ShellEntry {
    /// `none`, `first` (the first survey), `previous` (the survey before the frame) or `grid`.
    pub survey: String,
    /// With `survey: grid`: another elevation grid (a design profile, a bedrock surface), relative
    /// to the job file.
    pub grid: Option<String>,
    pub rgb: [u8; 3],
    pub opacity: f64,
    #[serde(deserialize_with = "super::length::metres")]
    pub min_gap_m: f64,
    pub full_gap_m: f64,
}

impl Default for ShellEntry {
    fn default() -> Self {
        let d = ShellOptions::default();
        ShellEntry {
            survey: "none".into(),
            grid: None,
            rgb: d.rgb,
            opacity: d.opacity,
            min_gap_m: d.min_gap_m,
            full_gap_m: d.full_gap_m,
        }
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct OutputEntry {
    pub folder: String,
    #[serde(default = "default_gif")]
    pub gif: Option<String>,
    #[serde(default)]
    pub video: Option<String>,
    #[serde(default = "default_true")]
    pub png_frames: bool,
    #[serde(default = "default_true")]
    pub poster: bool,
    #[serde(default)]
    pub overwrite: bool,
}

fn default_gif() -> Option<String> {
    Some("animation.gif".to_string())
}

fn default_true() -> bool {
    true
}
