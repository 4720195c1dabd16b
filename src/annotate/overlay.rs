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

/// A small chart of a value (the crest) against time: the surveys as dots with ±σ bars, joined by a
/// dashed line (nothing was measured between them), and this frame's time as a marker on that line.
///
/// The marker sits on the dashed line, not at the in-between surface's own value: an interpolated
/// surface is not a measurement, and its small artefacts must not read as spikes. The value range
/// is at least `min_span`, so survey noise and a small decline never fill the chart's height.
/// Everything but `current` is the same on every frame of a job, so it is drawn once and reused.
#[derive(Debug, Clone, PartialEq)]
pub struct InsetChart {
    /// Chart heading (e.g. "Crest elevation").
    pub title: String,
    /// Unit symbol of the values.
    pub unit: String,
    /// Survey values: (decimal year, value), in time order.
    pub survey_points: Vec<(f64, f64)>,
    /// This frame: (decimal year, value); the value may be NaN (no data). Only the time places the
    /// marker while it lies within the surveys' dates; the value is used outside them.
    pub current: (f64, f64),
    /// One standard deviation of each survey value (same order as `survey_points`, same unit);
    /// drawn as ±σ bars. Empty: no bars.
    pub survey_sigma: Vec<f64>,
    /// Smallest range of values the chart spans, same unit (0: fit the values).
    pub min_span: f64,
}

impl InsetChart {
    /// The value on the dashed line between the surveys at decimal year `t` (linear between the two
    /// surveys around it); None outside the surveys' dates or without points.
    pub fn on_line(&self, t: f64) -> Option<f64> {
        let pts: Vec<(f64, f64)> = self
            .survey_points
            .iter()
            .copied()
            .filter(|(x, y)| x.is_finite() && y.is_finite())
            .collect();
        let first = pts.first()?;
        if pts.len() == 1 {
            return ((t - first.0).abs() < 1e-9).then_some(first.1);
        }
        pts.windows(2).find_map(|w| {
            let ((x0, y0), (x1, y1)) = (w[0], w[1]);
            (t >= x0 && t <= x1 && x1 > x0).then(|| y0 + (y1 - y0) * (t - x0) / (x1 - x0))
        })
    }

    /// The chart's value range (low, high): the survey values with their ±σ bars, widened about
    /// their middle to at least `min_span` (and 0.1 of the unit), plus a tenth on each side.
    pub fn value_range(&self) -> (f64, f64) {
        let (mut lo, mut hi) = (f64::MAX, f64::MIN);
        for (k, &(_, y)) in self.survey_points.iter().enumerate() {
            if !y.is_finite() {
                continue;
            }
            let s = self
                .survey_sigma
                .get(k)
                .copied()
                .filter(|s| s.is_finite())
                .unwrap_or(0.0);
            lo = lo.min(y - s);
            hi = hi.max(y + s);
        }
        if lo > hi {
            return (0.0, 1.0);
        }
        let span = (hi - lo) * 1.2;
        let span = span.max(self.min_span).max(0.1);
        let mid = (lo + hi) / 2.0;
        (mid - span / 2.0, mid + span / 2.0)
    }
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

#[cfg(test)]
mod tests {
    use super::*;

    fn chart() -> InsetChart {
        InsetChart {
            title: "Crest elevation".into(),
            unit: "m".into(),
            survey_points: vec![(2030.0, 17.8), (2032.0, 17.6), (2034.0, 16.9)],
            current: (2031.0, 17.95),
            survey_sigma: vec![0.1, 0.05, 0.15],
            min_span: 3.5,
        }
    }

    #[test]
    fn the_marker_rides_the_dashed_line() {
        let c = chart();
        // Halfway between the first two surveys: halfway between their values, whatever the
        // in-between surface's own value (17.95 here) says.
        assert!((c.on_line(2031.0).unwrap() - 17.7).abs() < 1e-12);
        assert_eq!(c.on_line(2034.0), Some(16.9));
        assert_eq!(c.on_line(2035.0), None);
    }

    #[test]
    fn the_range_never_shrinks_below_the_floor() {
        let c = chart();
        let (lo, hi) = c.value_range();
        // A decline of 0.9 m (5 %) on a 3.5 m floor: it fills about a quarter of the height.
        assert!((hi - lo - 3.5).abs() < 1e-9, "{lo} {hi}");
        // Centred on the values with their σ bars (16.75 to 17.9).
        assert!(((lo + hi) / 2.0 - 17.325).abs() < 1e-9);
        let wide = InsetChart {
            min_span: 0.0,
            ..chart()
        };
        let (lo, hi) = wide.value_range();
        // Check: own rule — the bars' extent times 1.2: (17.9 - 16.75) * 1.2 = 1.38
        assert!((hi - lo - 1.38).abs() < 1e-9);
    }
}
