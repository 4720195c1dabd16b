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

/// A small chart of a value (peak height, volume) against time.
#[derive(Debug, Clone, PartialEq)]
pub struct InsetChart {
    /// Chart heading (e.g. "Peak height").
    pub title: String,
    /// Unit symbol of the values.
    pub unit: String,
    /// The line: (decimal year, value), in time order.
    pub series: Vec<(f64, f64)>,
    /// Survey points drawn as dots: (decimal year, value).
    pub survey_points: Vec<(f64, f64)>,
    /// The time of this frame, decimal year.
    pub current_year: f64,
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
    /// Peak height, already converted to the display unit.
    pub peak_height: f64,
    /// Unit symbol of `peak_height` (e.g. "m", "ft").
    pub peak_unit: String,
    /// Pixel (column, row) of the peak on the terrain, from the renderer's projection.
    pub peak_px: Option<(f32, f32)>,
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
    /// The vertical exaggeration the terrain is drawn with (the job's, or the automatic choice),
    /// for a "heights ×N" note; None when not known.
    pub vertical_exaggeration: Option<f64>,
}

impl Default for Overlay {
    fn default() -> Self {
        Overlay {
            title: String::new(),
            date_text: String::new(),
            status: FrameStatus::Surveyed { label: None },
            peak_height: f64::NAN,
            peak_unit: "m".into(),
            peak_px: None,
            legend: None,
            north_angle_rad: None,
            metres_per_px: None,
            scale_unit: (1.0, "m".into()),
            inset: None,
            credit: None,
            vertical_exaggeration: None,
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
    /// Draw the measured/interpolated badge and its detail line. Default: true.
    pub status: bool,
    /// Draw the peak height panel. Default: true.
    pub peak_height: bool,
    /// Draw the marker and leader line on the peak. Default: true.
    pub peak_marker: bool,
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
            peak_height: true,
            peak_marker: true,
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
            peak_height: false,
            peak_marker: false,
            legend: false,
            north_arrow: false,
            scale_bar: false,
            inset_chart: false,
            credit: false,
        }
    }
}
