//! The overlay of one frame as plain data ([`Overlay`]), filled by the pipeline per frame, and the
//! job's switches for each element ([`LabelOptions`]). Placement is in `layout`, drawing in `paint`.

/// Whether a frame shows a survey or something made between two surveys.
#[derive(Debug, Clone, PartialEq)]
pub enum FrameStatus {
    /// The frame shows a survey as measured.
    Surveyed {
        /// Optional survey label from the job (e.g. "spring survey").
        label: Option<String>,
    },
    /// The frame is made between two surveys and is not a measurement.
    Interpolated {
        /// How it was made, in words (e.g. "linear blend", "morph").
        method: String,
        /// Date text of the earlier survey.
        from_date: String,
        /// Date text of the later survey.
        to_date: String,
    },
}

/// A colour legend for the elevation ramp in use.
#[derive(Debug, Clone, PartialEq)]
pub struct Legend {
    /// What the colours show (e.g. "Elevation").
    pub title: String,
    /// Ramp colours, evenly spaced from `min` to `max` (at least one).
    pub stops: Vec<[u8; 3]>,
    /// Value at the first stop, in `unit`.
    pub min: f64,
    /// Value at the last stop, in `unit`.
    pub max: f64,
    /// Unit symbol (e.g. "m").
    pub unit: String,
}

/// A small chart of a value (the crest) against time: the surveys as dots joined by a dashed line
/// (nothing was measured between them), and this frame's own value as a marker.
///
/// Everything but `current` is the same on every frame of a job, so it is drawn once and reused.
#[derive(Debug, Clone, PartialEq)]
pub struct InsetChart {
    /// Chart heading (e.g. "Crest elevation").
    pub title: String,
    /// Unit symbol of the values.
    pub unit: String,
    /// Survey values: (decimal year, value), in time order.
    pub survey_points: Vec<(f64, f64)>,
    /// This frame: (decimal year, value); the value may be NaN (no data).
    pub current: (f64, f64),
}

/// Which crest figure a frame shows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Deserialize, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum CrestFigure {
    /// The crest's elevation on the grids' vertical datum.
    #[default]
    Elevation,
    /// The crest's height above `change.reference_elevation_m`.
    HeightAboveReference,
}

/// The crest figure of one frame, as drawn.
#[derive(Debug, Clone, PartialEq)]
pub struct CrestLabel {
    /// What the figure is, in words that say which (e.g. "Crest elevation",
    /// "Crest above 5 m reference").
    pub name: String,
    /// The value, already in the display unit.
    pub value: f64,
    /// Unit symbol (e.g. "m", "ft").
    pub unit: String,
}

/// Everything the overlay of one frame says. Plain data, filled by the pipeline per frame.
#[derive(Debug, Clone, PartialEq)]
pub struct Overlay {
    /// Title of the animation.
    pub title: String,
    /// The date the frame stands for, as text (drawn large).
    pub date_text: String,
    /// Measured or interpolated.
    pub status: FrameStatus,
    /// The crest figure (never dropped).
    pub crest: CrestLabel,
    /// Pixel (column, row) of the crest on the terrain, from the renderer's projection.
    pub crest_px: Option<(f32, f32)>,
    /// The vertical exaggeration the frame was rendered with (stated on every frame).
    pub vertical_exaggeration: f64,
    /// Colour legend.
    pub legend: Option<Legend>,
    /// Screen direction of north in radians, clockwise from straight up (0 = north is up).
    pub north_angle_rad: Option<f32>,
    /// Approximate ground metres per pixel in the foreground, for a scale bar.
    pub metres_per_px: Option<f64>,
    /// Unit of the scale bar: (metres in one unit, symbol), e.g. (0.3048, "ft"). Default: (1, "m").
    pub scale_unit: (f64, String),
    /// Inset chart.
    pub inset: Option<InsetChart>,
    /// Credit line (agency, survey source).
    pub credit: Option<String>,
}

impl Default for Overlay {
    fn default() -> Self {
        Overlay {
            title: String::new(),
            date_text: String::new(),
            status: FrameStatus::Surveyed { label: None },
            crest: CrestLabel {
                name: "Crest elevation".into(),
                value: f64::NAN,
                unit: "m".into(),
            },
            crest_px: None,
            vertical_exaggeration: 1.0,
            legend: None,
            north_angle_rad: None,
            metres_per_px: None,
            scale_unit: (1.0, "m".into()),
            inset: None,
            credit: None,
        }
    }
}

/// Which overlay elements the job wants drawn.
#[derive(Debug, Clone, PartialEq, Eq, serde::Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct LabelOptions {
    /// Draw the title. Default: true.
    pub title: bool,
    /// Draw the date. Default: true.
    pub date: bool,
    /// Draw the measured/interpolated badge and its detail line; the job cannot turn it off.
    /// Default: true.
    pub status: bool,
    /// Which crest figure the frames show, its name saying which: `elevation` (on the grids'
    /// vertical datum) or `height-above-reference` (above `change.reference_elevation_m`).
    /// Default: elevation.
    pub crest_shows: CrestFigure,
    /// Draw the crest figure (top right). Default: true.
    pub crest: bool,
    /// Draw the marker on the crest. Default: true.
    pub crest_marker: bool,
    /// Draw the colour legend. Default: true.
    pub legend: bool,
    /// Draw the north arrow. Default: true.
    pub north_arrow: bool,
    /// Draw the approximate scale bar. Default: true.
    pub scale_bar: bool,
    /// Draw the inset chart. Default: true.
    pub inset_chart: bool,
    /// Draw the credit line. Default: true.
    pub credit: bool,
}

impl Default for LabelOptions {
    fn default() -> Self {
        LabelOptions {
            title: true,
            date: true,
            status: true,
            crest_shows: CrestFigure::Elevation,
            crest: true,
            crest_marker: true,
            legend: true,
            north_arrow: true,
            scale_bar: true,
            inset_chart: true,
            credit: true,
        }
    }
}

impl LabelOptions {
    /// Everything off: a bare frame.
    pub fn none() -> Self {
        LabelOptions {
            title: false,
            date: false,
            status: false,
            crest_shows: CrestFigure::Elevation,
            crest: false,
            crest_marker: false,
            legend: false,
            north_arrow: false,
            scale_bar: false,
            inset_chart: false,
            credit: false,
        }
    }
}
