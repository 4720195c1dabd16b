//! Job file (YAML) -> `Job`: fully resolved and checked before any grid is read.
//!
//! `schema` mirrors the file for serde; `validate` applies defaults, resolves paths against the job
//! file's folder, parses dates and checks every range. Nothing after this stage reads YAML again.

pub mod draft;
pub(crate) mod length;
mod schema;
mod validate;

use std::path::{Path, PathBuf};

use chrono::NaiveDate;

use crate::align::AreaOfInterest;
use crate::annotate::LabelOptions;
use crate::change::ChangeOptions;
use crate::encode::gif::GifOptions;
use crate::encode::png_seq::PosterOptions;
use crate::encode::video::VideoOptions;
use crate::error::{Error, Result};
use crate::interp::flow::FlowOptions;
use crate::render::ramp::ElevationRamp;
use crate::render::{LightOptions, ShellOptions, ViewOptions, WaterOptions};
use crate::timeline::FramePlan;

/// The version of the job format this program reads (`format_version` in the file).
pub const FORMAT_VERSION: u32 = 1;

/// How in-between surfaces are made for one interval.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Cell-by-cell blend of heights.
    Linear,
    /// Warp along the displacement field, then blend (falls back to linear when the field is unreliable).
    Morph,
}

impl Method {
    /// The name used in job files and on frames.
    pub fn name(self) -> &'static str {
        match self {
            Method::Linear => "linear blend",
            Method::Morph => "morph",
        }
    }
}

/// How the terrain is coloured.
#[derive(Debug, Clone, PartialEq)]
pub enum ColourBy {
    /// By elevation, on one ramp fixed for the whole animation.
    Elevation,
    /// By change since a survey, on a diverging ramp centred on zero; changes inside the level of
    /// detection are drawn neutral.
    Change {
        /// Against which survey.
        since: ShellSurvey,
        /// Change in metres at the ends of the ramp; None = the largest change in the job.
        limit_m: Option<f64>,
    },
    /// By an RGB image (an orthophoto GeoTIFF) draped over the surface.
    Drape {
        /// Absolute path of the image.
        path: PathBuf,
    },
}

/// Which survey is drawn as a translucent shell over each frame.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ShellSurvey {
    /// No shell.
    None,
    /// The first survey, on every frame after it.
    First,
    /// The survey before the frame (the earlier end of its interval).
    Previous,
    /// Another elevation grid named in the job (`shell.grid`), the same on every frame.
    Grid,
}

/// One survey as the job lists it (the grid is not read yet).
#[derive(Debug, Clone, PartialEq)]
pub struct SurveySpec {
    /// Unique short id (defaults to the date).
    pub id: String,
    /// Survey date.
    pub date: NaiveDate,
    /// Absolute path of the grid.
    pub grid: PathBuf,
    /// Optional label.
    pub label: Option<String>,
    /// Vertical uncertainty (1 σ) in metres, if stated.
    pub sigma_z_m: Option<f64>,
    /// Unit of the grid's elevations as the job states it (checked against the file's). Default: none.
    pub vertical_unit: Option<crate::grid::LinearUnit>,
    /// Unit of the grid's map coordinates as the job states it (checked against the file's). Default: none.
    pub horizontal_unit: Option<crate::grid::LinearUnit>,
    /// Metres added to every elevation on reading, for a known datum difference. Default: 0.
    pub vertical_offset_m: f64,
}

/// Stable ground named by the job for co-registration.
#[derive(Debug, Clone, PartialEq)]
pub enum StableGround {
    /// Polygons in map coordinates (CRS units).
    Polygons(Vec<Vec<[f64; 2]>>),
    /// A mask GeoTIFF (absolute path), non-zero = stable.
    Mask(PathBuf),
}

/// Where results go.
#[derive(Debug, Clone, PartialEq)]
pub struct OutputSpec {
    /// The run's output folder (absolute).
    pub folder: PathBuf,
    /// File name of the animated GIF inside the folder, or None for no GIF.
    pub gif: Option<String>,
    /// File name of the H.264/MP4 video inside the folder, or None for no video.
    pub video: Option<String>,
    /// Whether to write the numbered PNG frames.
    pub png_frames: bool,
    /// Whether to write the poster of the surveys side by side.
    pub poster: bool,
    /// Whether an existing output folder may be replaced.
    pub overwrite: bool,
}

/// A fully resolved job.
#[derive(Debug, Clone)]
pub struct Job {
    /// The job file (absolute).
    pub path: PathBuf,
    /// The job file's text as run, kept for the archive.
    pub text: String,
    /// Title shown on frames and in the record.
    pub title: String,
    /// Surveys in date order.
    pub surveys: Vec<SurveySpec>,
    /// Optional crop of the analysis grid, in map coordinates.
    pub area_of_interest: Option<AreaOfInterest>,
    /// Frame count rule.
    pub frame_plan: FramePlan,
    /// Playing rate, frames per second.
    pub fps: f64,
    /// Extra seconds each survey frame stays on screen.
    pub hold_s: f64,
    /// In-between method for each interval (length = surveys − 1).
    pub methods: Vec<Method>,
    /// Camera.
    pub view: ViewOptions,
    /// Sun and shading.
    pub sun: LightOptions,
    /// Terrain colouring.
    pub colour: ColourBy,
    /// The ramp of colouring by elevation (also under a drape's gaps).
    pub elevation_ramp: ElevationRamp,
    /// Water plane.
    pub water: WaterOptions,
    /// Which surface to draw as a translucent shell, if any.
    pub shell_survey: ShellSurvey,
    /// With `ShellSurvey::Grid`: the grid file drawn as the shell (absolute path).
    pub shell_grid: Option<PathBuf>,
    /// How the shell looks, and from which height gap it shows.
    pub shell: ShellOptions,
    /// Displacement field settings (used by the morph and the migration figures).
    pub flow: FlowOptions,
    /// Which labels to draw.
    pub labels: LabelOptions,
    /// Credit line (agency, survey source), if any.
    pub credit: Option<String>,
    /// GIF palette, dithering and looping.
    pub animation: GifOptions,
    /// Poster layout.
    pub poster: PosterOptions,
    /// How the MP4 video is made (used when `output.video` names one).
    pub video: VideoOptions,
    /// Change record settings.
    pub change: ChangeOptions,
    /// Co-registration settings (`coregister`, `stable_ground`).
    pub coregister: crate::coregister::CoregOptions,
    /// Stable ground from the job; None = found by the tool.
    pub stable_ground: Option<StableGround>,
    /// Outputs.
    pub output: OutputSpec,
}

/// Largest job file read, in bytes. A job with stable-ground polygons of many thousand vertices
/// stays well under this.
pub const MAX_JOB_BYTES: u64 = 16 << 20;

/// Reads and validates a job file.
///
/// # Errors
/// `Error::Job` naming the key or line at fault and the fix; `Error::Io` if the file can't be read.
pub fn load(path: &Path) -> Result<Job> {
    if path.is_dir() {
        return Err(Error::job(
            path,
            "file",
            "is a folder, not a job file; give the path of the job's YAML file (e.g. jobs/demo.yaml)",
        ));
    }
    // A job is a short text; refuse a large file (a grid given by mistake) before reading it all.
    if let Ok(meta) = std::fs::metadata(path) {
        if meta.len() > MAX_JOB_BYTES {
            return Err(Error::job(
                path,
                "file",
                format!(
                    "is {} MiB, far more than a job file (a short YAML text, at most {} MiB); give the \
                     path of the job's YAML file",
                    meta.len() >> 20,
                    MAX_JOB_BYTES >> 20
                ),
            ));
        }
    }
    let text = std::fs::read_to_string(path).map_err(|e| match e.kind() {
        std::io::ErrorKind::NotFound => {
            Error::job(path, "file", "no job file here; check the path")
        }
        std::io::ErrorKind::InvalidData => Error::job(
            path,
            "file",
            "is not UTF-8 text; save the job file as UTF-8",
        ),
        _ => Error::io(path, e),
    })?;
    let abs = std::path::absolute(path).map_err(|e| Error::io(path, e))?;
    parse(&abs, text)
}

/// Validates job text as if read from `path` (relative grid paths resolve against its folder).
///
/// # Errors
/// As [`load`].
pub fn parse(path: &Path, text: String) -> Result<Job> {
    if let Some((line, column)) = validate::too_deep(&text) {
        return Err(Error::job(
            path,
            format!("line {line} column {column}"),
            format!(
                "brackets nest more than {} deep here; a job's values nest only a few levels, \
                 correct the brackets",
                validate::MAX_FLOW_DEPTH
            ),
        ));
    }
    let file: schema::JobFile =
        serde_yaml::from_str(&text).map_err(|e| validate::yaml_error(path, &text, &e))?;
    // Once the typed reading has passed (so aliases cannot expand without bound here), every
    // number is checked to be finite, with its key path.
    if let Ok(tree) = serde_yaml::from_str::<serde_yaml::Value>(&text) {
        if let Some((key, v)) = validate::non_finite(&tree, String::new()) {
            return Err(Error::job(
                path,
                key,
                format!(
                    "{v} is not a finite number (or is beyond 3.4e38); no job value may be infinite, \
                     not-a-number or that large, write an ordinary number such as 1.5"
                ),
            ));
        }
    }
    validate::resolve(path, text, file).map_err(|e| match e {
        // Messages may quote what the job holds; a quoted value of any length stays short.
        Error::Job {
            path,
            place,
            message,
        } => Error::Job {
            path,
            place,
            message: validate::brief_quotes(&message),
        },
        other => other,
    })
}
