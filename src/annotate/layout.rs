//! Per-frame overlay: the pipeline fills an [`Overlay`] (plain data) and calls [`draw_overlay`].
//!
//! Placement (all sizes scale with the frame height, 360 px = 1 unit, so 640x360 and 1920x1080 look
//! alike):
//! - top left: title, the date (large), a status badge (measured or interpolated) and a detail line
//!   naming the survey, or the method and the two bracketing survey dates;
//! - top right: the peak height with units, and under it the north arrow;
//! - bottom right: the approximate scale bar above the colour legend;
//! - bottom left: the inset chart above the credit line;
//! - on the terrain: a ring and dot on the peak pixel, with a leader line to a small tag.
//!
//! Every block sits on a translucent dark panel with white text, for a projector.
//!
//! When the frame is too small for everything, optional elements are dropped in this order until
//! the rest fit inside the frame without overlapping (see [`DROP_ORDER`]): inset chart, scale bar,
//! north arrow, colour legend, credit, title, status detail line, peak tag. The date, the status
//! badge and the peak height are never dropped; they shrink instead. A `log::warn!` names what was
//! dropped, once per change of frame size or drop set.

use std::sync::atomic::{AtomicU64, Ordering};

use super::draw;
use super::fit::{fit_text, FittedText, LINE_SPACING};
use super::text::{draw_text_weighted, Weight};
use crate::render::Frame;

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
            peak_height: f64::NAN,
            peak_unit: "m".into(),
            peak_px: None,
            legend: None,
            north_angle_rad: None,
            metres_per_px: None,
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

/// An overlay element that can be dropped when the frame is too small.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Optional {
    /// The inset chart.
    InsetChart,
    /// The scale bar.
    ScaleBar,
    /// The north arrow.
    NorthArrow,
    /// The colour legend.
    Legend,
    /// The credit line.
    Credit,
    /// The title.
    Title,
    /// The status detail line (method and dates; the badge stays).
    StatusDetail,
    /// The tag at the end of the peak leader line (the ring and dot stay).
    PeakTag,
}

/// The order in which optional elements are dropped from a frame too small for all of them.
pub const DROP_ORDER: [Optional; 8] = [
    Optional::InsetChart,
    Optional::ScaleBar,
    Optional::NorthArrow,
    Optional::Legend,
    Optional::Credit,
    Optional::Title,
    Optional::StatusDetail,
    Optional::PeakTag,
];

/// An axis-aligned box in pixels.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Rect {
    /// Left edge.
    pub x: f32,
    /// Top edge.
    pub y: f32,
    /// Width.
    pub w: f32,
    /// Height.
    pub h: f32,
}

impl Rect {
    fn right(&self) -> f32 {
        self.x + self.w
    }
    fn bottom(&self) -> f32 {
        self.y + self.h
    }
    /// Whether the two boxes share any area.
    pub fn overlaps(&self, o: &Rect) -> bool {
        self.x < o.right() && o.x < self.right() && self.y < o.bottom() && o.y < self.bottom()
    }
    /// Whether the box lies inside a `w` x `h` frame.
    pub fn inside(&self, w: f32, h: f32) -> bool {
        self.x >= 0.0 && self.y >= 0.0 && self.right() <= w + 0.01 && self.bottom() <= h + 0.01
    }
}

/// Where each block of the overlay goes on a frame; see [`plan`].
#[derive(Debug, Clone)]
pub struct Plan {
    /// Size unit in pixels (frame height / 360, bounded by width / 640).
    pub unit: f32,
    /// Title, date, badge, detail panel.
    pub head: Option<Rect>,
    /// The status badge inside the head panel.
    pub badge: Option<Rect>,
    /// Peak height panel.
    pub peak: Option<Rect>,
    /// North arrow panel.
    pub north: Option<Rect>,
    /// Scale bar panel.
    pub scale: Option<Rect>,
    /// Legend panel.
    pub legend: Option<Rect>,
    /// Inset chart panel.
    pub chart: Option<Rect>,
    /// Credit panel.
    pub credit: Option<Rect>,
    /// Tag at the end of the peak leader line.
    pub peak_tag: Option<Rect>,
    /// Optional elements left out because the frame is too small.
    pub dropped: Vec<Optional>,
    /// The frame cannot hold even the date, status and peak height at the smallest text size, so
    /// no panel is drawn at all.
    pub too_small: bool,
    head_text: HeadText,
    peak_text: (FittedText, FittedText),
    scale_bar: Option<(f64, f32, FittedText)>,
    credit_text: FittedText,
    tag_text: FittedText,
}

#[derive(Debug, Clone)]
struct HeadText {
    title: FittedText,
    date: FittedText,
    badge: FittedText,
    detail: FittedText,
}

const WHITE: [u8; 4] = [255, 255, 255, 255];
const SOFT_WHITE: [u8; 4] = [225, 230, 235, 255];
const PANEL: [u8; 4] = [12, 16, 22, 165];
/// Badge colours: measured = light green, interpolated = amber; both carry dark text.
const MEASURED_BADGE: [u8; 4] = [122, 214, 138, 255];
const INTERP_BADGE: [u8; 4] = [255, 184, 64, 255];
const BADGE_TEXT: [u8; 4] = [16, 20, 16, 255];
const MARKER_DOT: [u8; 4] = [255, 64, 64, 255];
/// Smallest text size, pixels. Below this DejaVu Sans stops being legible at all.
const MIN_TEXT_PX: f32 = 6.0;
/// Smallest size for optional text (title, detail, credit, tags): below it they are dropped instead.
const MIN_OPTIONAL_TEXT_PX: f32 = 8.0;

fn status_texts(status: &FrameStatus) -> (String, String) {
    match status {
        FrameStatus::Surveyed { label } => (
            "SURVEYED — measured".to_string(),
            match label {
                Some(l) if !l.trim().is_empty() => format!("survey: {}", l.trim()),
                _ => "survey data on this date".to_string(),
            },
        ),
        FrameStatus::Interpolated {
            method,
            from_date,
            to_date,
        } => (
            "INTERPOLATED — not a measurement".to_string(),
            format!(
                "{} between surveys of {} and {}",
                method.trim(),
                from_date.trim(),
                to_date.trim()
            ),
        ),
    }
}

fn short_status(status: &FrameStatus) -> &'static str {
    match status {
        FrameStatus::Surveyed { .. } => "SURVEYED",
        FrameStatus::Interpolated { .. } => "INTERPOLATED",
    }
}

fn format_value(v: f64) -> String {
    if !v.is_finite() {
        return "—".to_string();
    }
    let a = v.abs();
    if a >= 100.0 {
        format!("{v:.0}")
    } else if a >= 10.0 || a == 0.0 {
        format!("{v:.1}")
    } else {
        format!("{v:.2}")
    }
}

/// A "nice" scale-bar length in metres (1, 2 or 5 times a power of ten) no longer than `max_m`.
pub fn nice_length_m(max_m: f64) -> Option<f64> {
    if !(max_m.is_finite() && max_m > 0.0) {
        return None;
    }
    let p = 10f64.powf(max_m.log10().floor());
    [5.0, 2.0, 1.0]
        .iter()
        .map(|k| k * p)
        .find(|&l| l <= max_m * (1.0 + 1e-9))
}

fn scale_label(len_m: f64) -> String {
    if len_m >= 1000.0 {
        format!("{} km", len_m / 1000.0)
    } else if len_m >= 1.0 {
        format!("{len_m:.0} m")
    } else {
        format!("{len_m} m")
    }
}

/// Computes where every element goes on a `width` x `height` frame, dropping optional elements in
/// [`DROP_ORDER`] until what remains fits inside the frame without overlaps.
pub fn plan(width: u32, height: u32, overlay: &Overlay, opts: &LabelOptions) -> Plan {
    let mut dropped = Vec::new();
    loop {
        let p = plan_with(width, height, overlay, opts, &dropped);
        if fits(&p, width as f32, height as f32) {
            return p;
        }
        // Drop the next element that is actually present.
        let next = DROP_ORDER
            .iter()
            .find(|e| !dropped.contains(*e) && present(&p, **e));
        match next {
            Some(e) => dropped.push(*e),
            None => {
                // Even the date, badge and peak height cannot fit: draw no panels at all rather
                // than cut text at the frame edge. The peak marker (no text) is still drawn.
                let mut p = p;
                p.head = None;
                p.badge = None;
                p.peak = None;
                p.peak_tag = None;
                p.too_small = true;
                return p;
            }
        }
    }
}

fn present(p: &Plan, e: Optional) -> bool {
    match e {
        Optional::InsetChart => p.chart.is_some(),
        Optional::ScaleBar => p.scale.is_some(),
        Optional::NorthArrow => p.north.is_some(),
        Optional::Legend => p.legend.is_some(),
        Optional::Credit => p.credit.is_some(),
        Optional::Title => !p.head_text.title.lines.is_empty(),
        Optional::StatusDetail => !p.head_text.detail.lines.is_empty(),
        Optional::PeakTag => p.peak_tag.is_some(),
    }
}

fn fits(p: &Plan, w: f32, h: f32) -> bool {
    let boxes: Vec<Rect> = [
        p.head, p.peak, p.north, p.scale, p.legend, p.chart, p.credit,
    ]
    .iter()
    .flatten()
    .copied()
    .collect();
    for (i, a) in boxes.iter().enumerate() {
        if !a.inside(w, h) {
            return false;
        }
        if boxes[i + 1..].iter().any(|b| a.overlaps(b)) {
            return false;
        }
    }
    // The peak tag may not be placeable; that alone never blocks the plan.
    true
}

fn plan_with(
    width: u32,
    height: u32,
    ov: &Overlay,
    opts: &LabelOptions,
    dropped: &[Optional],
) -> Plan {
    let (fw, fh) = (width as f32, height as f32);
    let u = (fh / 360.0).min(fw / 640.0).max(0.05);
    let m = (8.0 * u).max(2.0);
    let pad = (6.0 * u).max(2.0);
    let gap = (6.0 * u).max(2.0);
    let px = |s: f32| (s * u).max(MIN_TEXT_PX);
    let opx = |s: f32| (s * u).max(MIN_OPTIONAL_TEXT_PX);
    let on = |e: Optional| !dropped.contains(&e);
    // Graphic elements (arrow, legend, scale, chart) stop shrinking at the size they have on a
    // 320x162 frame; below that they would be unreadable, so they are dropped instead.
    let gu = u.max(0.45);

    // Head panel: title, date, badge, detail.
    // Small frames stack the peak panel under the head panel, so the head may use the full width.
    let head_max_w = if fw < 400.0 {
        fw - 2.0 * m - 2.0 * pad
    } else {
        (fw - 2.0 * m) * 0.58 - 2.0 * pad
    }
    .max(1.0);
    let title = if opts.title && on(Optional::Title) {
        fit_text(
            &ov.title,
            Weight::Bold,
            opx(15.0),
            MIN_OPTIONAL_TEXT_PX,
            head_max_w,
            2,
        )
    } else {
        FittedText::empty(Weight::Bold)
    };
    let date = if opts.date {
        fit_text(
            &ov.date_text,
            Weight::Bold,
            px(30.0),
            MIN_TEXT_PX,
            head_max_w,
            1,
        )
    } else {
        FittedText::empty(Weight::Bold)
    };
    let (badge_s, detail_s) = status_texts(&ov.status);
    let badge_pad = (3.0 * u).max(1.0);
    let (badge, detail) = if opts.status {
        let badge_w = head_max_w - 2.0 * badge_pad;
        let mut b = fit_text(&badge_s, Weight::Bold, px(12.0), MIN_TEXT_PX, badge_w, 1);
        if b.size_px < px(12.0) * 0.8 || b.lines.first().is_some_and(|l| l.ends_with('…')) {
            // Too narrow for the full wording: the one word that matters, at a readable size.
            b = fit_text(
                short_status(&ov.status),
                Weight::Bold,
                px(12.0),
                MIN_TEXT_PX,
                badge_w,
                1,
            );
        }
        let d = if on(Optional::StatusDetail) {
            fit_text(
                &detail_s,
                Weight::Regular,
                opx(11.5),
                MIN_OPTIONAL_TEXT_PX,
                head_max_w,
                2,
            )
        } else {
            FittedText::empty(Weight::Regular)
        };
        (b, d)
    } else {
        (
            FittedText::empty(Weight::Bold),
            FittedText::empty(Weight::Regular),
        )
    };
    let mut head_h = 0.0f32;
    let mut head_w = 0.0f32;
    let mut badge_rect = None;
    {
        let mut y = pad;
        for t in [&title, &date] {
            if !t.lines.is_empty() {
                head_w = head_w.max(t.width);
                y += t.height + gap * 0.6;
            }
        }
        if !badge.lines.is_empty() {
            let bw = badge.width + 2.0 * badge_pad;
            badge_rect = Some(Rect {
                x: m + pad,
                y: m + y,
                w: bw,
                h: badge.height + 2.0 * badge_pad,
            });
            head_w = head_w.max(bw);
            y += badge.height + 2.0 * badge_pad + gap * 0.6;
        }
        if !detail.lines.is_empty() {
            head_w = head_w.max(detail.width);
            y += detail.height + gap * 0.6;
        }
        if head_w > 0.0 {
            head_h = y - gap * 0.6 + pad;
        }
    }
    let head = (head_w > 0.0).then_some(Rect {
        x: m,
        y: m,
        w: head_w + 2.0 * pad,
        h: head_h,
    });

    // Peak panel.
    let (peak_label, peak_value) = if opts.peak_height {
        let max_w = (fw - 2.0 * m - 2.0 * pad).max(1.0);
        (
            if u >= 0.5 {
                fit_text(
                    "Peak height",
                    Weight::Regular,
                    px(11.0),
                    MIN_TEXT_PX,
                    max_w,
                    1,
                )
            } else {
                FittedText::empty(Weight::Regular)
            },
            fit_text(
                &format!(
                    "{}{} {}",
                    if u >= 0.5 { "" } else { "peak " },
                    format_value(ov.peak_height),
                    ov.peak_unit.trim()
                ),
                Weight::Bold,
                px(24.0),
                MIN_TEXT_PX,
                max_w,
                1,
            ),
        )
    } else {
        (
            FittedText::empty(Weight::Regular),
            FittedText::empty(Weight::Bold),
        )
    };
    let mut peak = None;
    if !peak_value.lines.is_empty() {
        let w = peak_label.width.max(peak_value.width) + 2.0 * pad;
        let label_gap = if peak_label.lines.is_empty() {
            0.0
        } else {
            gap * 0.4
        };
        let h = peak_label.height + label_gap + peak_value.height + 2.0 * pad;
        let mut r = Rect {
            x: fw - m - w,
            y: m,
            w,
            h,
        };
        if let Some(hd) = head {
            if r.overlaps(&hd) {
                // Not enough width: stack it under the head panel.
                r = Rect {
                    x: m,
                    y: hd.bottom() + gap,
                    w,
                    h,
                };
            }
        }
        peak = Some(r);
    }

    // North arrow, right side under the peak panel (or top right).
    let north = (opts.north_arrow
        && on(Optional::NorthArrow)
        && ov.north_angle_rad.is_some_and(f32::is_finite))
    .then(|| {
        let s = 50.0 * gu;
        let y = match peak {
            Some(p) if p.x > fw / 2.0 => p.bottom() + gap,
            _ => m,
        };
        Rect {
            x: fw - m - s,
            y,
            w: s,
            h: s,
        }
    });

    // Bottom right: legend, and the scale bar above it.
    let legend = match (&ov.legend, opts.legend && on(Optional::Legend)) {
        (Some(l), true) if !l.stops.is_empty() => {
            let w = 170.0 * gu + 2.0 * pad;
            let small = (10.0 * gu).max(MIN_OPTIONAL_TEXT_PX);
            let h = 2.0 * pad + small * LINE_SPACING + 11.0 * gu + 3.0 * gu + small;
            Some(Rect {
                x: fw - m - w,
                y: fh - m - h,
                w,
                h,
            })
        }
        _ => None,
    };
    let mut scale_bar = None;
    let scale = match (ov.metres_per_px, opts.scale_bar && on(Optional::ScaleBar)) {
        (Some(mpp), true) if mpp.is_finite() && mpp > 0.0 => {
            nice_length_m(mpp * (120.0 * gu) as f64).map(|len_m| {
                let bar_px = (len_m / mpp) as f32;
                let size = (10.0 * gu).max(MIN_OPTIONAL_TEXT_PX);
                let long = format!("{} (approx., foreground)", scale_label(len_m));
                let text = if super::text::measure_text(size, &long).0 <= 170.0 * gu {
                    long
                } else {
                    format!("{} (approx.)", scale_label(len_m))
                };
                let label = fit_text(
                    &text,
                    Weight::Regular,
                    size,
                    MIN_OPTIONAL_TEXT_PX,
                    170.0 * gu,
                    1,
                );
                let w = bar_px.max(label.width) + 2.0 * pad;
                let h = 2.0 * pad + label.height + 3.0 * gu + 6.0 * gu;
                let bottom = legend.map_or(fh - m, |l| l.y - gap);
                scale_bar = Some((len_m, bar_px, label));
                Rect {
                    x: fw - m - w,
                    y: bottom - h,
                    w,
                    h,
                }
            })
        }
        _ => None,
    };

    // Bottom left: credit, and the chart above it.
    let credit_text = match (&ov.credit, opts.credit && on(Optional::Credit)) {
        (Some(c), true) => fit_text(
            c,
            Weight::Regular,
            opx(10.0),
            MIN_OPTIONAL_TEXT_PX,
            (fw * 0.5 - m - 2.0 * pad).max(1.0),
            2,
        ),
        _ => FittedText::empty(Weight::Regular),
    };
    let credit = (!credit_text.lines.is_empty()).then(|| {
        let h = credit_text.height + 2.0 * pad * 0.6;
        Rect {
            x: m,
            y: fh - m - h,
            w: credit_text.width + 2.0 * pad,
            h,
        }
    });
    let chart = match (&ov.inset, opts.inset_chart && on(Optional::InsetChart)) {
        (Some(c), true) if c.series.len() >= 2 => {
            let (w, h) = (220.0 * gu, 112.0 * gu);
            let bottom = credit.map_or(fh - m, |c| c.y - gap);
            Some(Rect {
                x: m,
                y: bottom - h,
                w,
                h,
            })
        }
        _ => None,
    };

    // Peak tag: try four diagonal directions, keep the first inside the frame clear of the panels.
    let tag_text = if opts.peak_marker && on(Optional::PeakTag) {
        fit_text(
            &format!(
                "peak {} {}",
                format_value(ov.peak_height),
                ov.peak_unit.trim()
            ),
            Weight::Bold,
            opx(11.0),
            MIN_OPTIONAL_TEXT_PX,
            fw,
            1,
        )
    } else {
        FittedText::empty(Weight::Bold)
    };
    let mut peak_tag = None;
    if let (Some((x, y)), false, true) = (ov.peak_px, tag_text.lines.is_empty(), opts.peak_marker) {
        if x.is_finite() && y.is_finite() && x >= 0.0 && y >= 0.0 && x < fw && y < fh {
            let (tw, th) = (
                tag_text.width + 2.0 * pad * 0.7,
                tag_text.height + 2.0 * pad * 0.5,
            );
            let reach = 34.0 * u;
            let panels: Vec<Rect> = [head, peak, north, scale, legend, chart, credit]
                .iter()
                .flatten()
                .copied()
                .collect();
            for (dx, dy) in [(1.0, -1.0), (-1.0, -1.0), (1.0, 1.0), (-1.0, 1.0)] {
                let ex = x + dx * reach;
                let ey = y + dy * reach * 0.8;
                let r = Rect {
                    x: if dx > 0.0 { ex } else { ex - tw },
                    y: if dy < 0.0 { ey - th } else { ey },
                    w: tw,
                    h: th,
                };
                if r.inside(fw, fh) && !panels.iter().any(|p| p.overlaps(&r)) {
                    peak_tag = Some(r);
                    break;
                }
            }
        }
    }

    Plan {
        unit: u,
        head,
        badge: badge_rect,
        peak,
        north,
        scale,
        legend,
        chart,
        credit,
        peak_tag,
        dropped: dropped.to_vec(),
        too_small: false,
        head_text: HeadText {
            title,
            date,
            badge,
            detail,
        },
        peak_text: (peak_label, peak_value),
        scale_bar,
        credit_text,
        tag_text,
    }
}

static LAST_WARNING: AtomicU64 = AtomicU64::new(u64::MAX);

/// Draws the overlay of one frame in place. Infallible: whatever does not fit is shrunk, wrapped or
/// dropped (see the module doc); a drop is reported once with `log::warn!`.
pub fn draw_overlay(frame: &mut Frame, overlay: &Overlay, opts: &LabelOptions) {
    if frame.width == 0
        || frame.height == 0
        || frame.rgba.len() < frame.width as usize * frame.height as usize * 4
    {
        return;
    }
    let p = plan(frame.width, frame.height, overlay, opts);
    if !p.dropped.is_empty() || p.too_small {
        let mask: u64 = p.dropped.iter().map(|e| 1u64 << (*e as u32)).sum::<u64>()
            | (u64::from(p.too_small) << 15);
        let sig = ((frame.width as u64) << 40) | ((frame.height as u64) << 16) | mask;
        if LAST_WARNING.swap(sig, Ordering::Relaxed) != sig {
            if p.too_small {
                log::warn!(
                    "frame {}x{} is too small for any label; only the peak marker is drawn (use at least 64x48)",
                    frame.width,
                    frame.height
                );
            } else {
                log::warn!(
                    "frame {}x{} is too small for every label; left out: {:?} (raise the frame size or turn elements off)",
                    frame.width,
                    frame.height,
                    p.dropped
                );
            }
        }
    }
    let u = p.unit;
    let pad = (6.0 * u).max(2.0);
    let gap = (6.0 * u).max(2.0);
    let radius = 5.0 * u;
    let gu = u.max(0.45);

    if opts.peak_marker {
        if let Some((x, y)) = overlay.peak_px {
            draw_peak_marker(frame, x, y, u, p.peak_tag, &p.tag_text);
        }
    }
    if let Some(r) = p.head {
        draw::fill_rounded_rect(frame, r.x, r.y, r.w, r.h, radius, PANEL);
        let mut y = r.y + pad;
        let x = r.x + pad;
        let ht = &p.head_text;
        for (t, colour) in [(&ht.title, SOFT_WHITE), (&ht.date, WHITE)] {
            if !t.lines.is_empty() {
                draw_lines(frame, x, y, t, colour);
                y += t.height + gap * 0.6;
            }
        }
        if let Some(b) = p.badge {
            let fill = match overlay.status {
                FrameStatus::Surveyed { .. } => MEASURED_BADGE,
                FrameStatus::Interpolated { .. } => INTERP_BADGE,
            };
            draw::fill_rounded_rect(frame, b.x, b.y, b.w, b.h, 3.0 * u, fill);
            let bp = (3.0 * u).max(1.0);
            draw_lines(frame, b.x + bp, b.y + bp, &ht.badge, BADGE_TEXT);
            y = b.bottom() + gap * 0.6;
        }
        if !ht.detail.lines.is_empty() {
            draw_lines(frame, x, y, &ht.detail, SOFT_WHITE);
        }
    }
    if let Some(r) = p.peak {
        draw::fill_rounded_rect(frame, r.x, r.y, r.w, r.h, radius, PANEL);
        let (label, value) = &p.peak_text;
        draw_lines(frame, r.x + pad, r.y + pad, label, SOFT_WHITE);
        let label_gap = if label.lines.is_empty() {
            0.0
        } else {
            gap * 0.4
        };
        draw_lines(
            frame,
            r.x + pad,
            r.y + pad + label.height + label_gap,
            value,
            WHITE,
        );
    }
    if let (Some(r), Some(a)) = (p.north, overlay.north_angle_rad) {
        draw_north_arrow(frame, r, a, gu);
    }
    if let (Some(r), Some((_, bar_px, label))) = (p.scale, &p.scale_bar) {
        draw::fill_rounded_rect(frame, r.x, r.y, r.w, r.h, radius, PANEL);
        draw_lines(frame, r.x + pad, r.y + pad, label, SOFT_WHITE);
        let by = r.y + pad + label.height + 3.0 * gu;
        let (bx, bh) = (r.x + pad, 6.0 * gu);
        // Two halves, white and grey, with end ticks: readable on light and dark terrain alike.
        draw::fill_rect(frame, bx, by, bar_px / 2.0, bh, WHITE);
        draw::fill_rect(
            frame,
            bx + bar_px / 2.0,
            by,
            bar_px / 2.0,
            bh,
            [150, 155, 160, 255],
        );
    }
    if let (Some(r), Some(l)) = (p.legend, &overlay.legend) {
        draw_legend(frame, r, l, gu, pad);
    }
    if let (Some(r), Some(c)) = (p.chart, &overlay.inset) {
        draw_chart(frame, r, c, gu, pad);
    }
    if let Some(r) = p.credit {
        draw::fill_rounded_rect(frame, r.x, r.y, r.w, r.h, radius, PANEL);
        draw_lines(
            frame,
            r.x + pad,
            r.y + pad * 0.6,
            &p.credit_text,
            SOFT_WHITE,
        );
    }
}

fn draw_lines(frame: &mut Frame, x: f32, y: f32, t: &FittedText, rgba: [u8; 4]) {
    for (i, line) in t.lines.iter().enumerate() {
        draw_text_weighted(
            frame,
            x,
            y + i as f32 * t.size_px * LINE_SPACING,
            t.size_px,
            rgba,
            line,
            t.weight,
        );
    }
}

fn draw_peak_marker(
    frame: &mut Frame,
    x: f32,
    y: f32,
    u: f32,
    tag: Option<Rect>,
    text: &FittedText,
) {
    if !(x.is_finite() && y.is_finite()) {
        return;
    }
    let r = (8.0 * u).max(3.0);
    let lw = (2.0 * u).max(1.0);
    if let Some(t) = tag {
        // Leader from the ring to the nearest corner of the tag.
        let cx = if t.x > x { t.x } else { t.x + t.w };
        let cy = if t.y > y { t.y } else { t.y + t.h };
        let (dx, dy) = (cx - x, cy - y);
        let len = (dx * dx + dy * dy).sqrt().max(1e-3);
        let (sx, sy) = (x + dx / len * r, y + dy / len * r);
        draw::line(frame, sx, sy, cx, cy, lw + 2.0, [0, 0, 0, 150]);
        draw::line(frame, sx, sy, cx, cy, lw, WHITE);
        draw::fill_rounded_rect(frame, t.x, t.y, t.w, t.h, 3.0 * u, PANEL);
        let pad_x = (t.w - text.width) / 2.0;
        let pad_y = (t.h - text.height) / 2.0;
        draw_lines(frame, t.x + pad_x, t.y + pad_y, text, WHITE);
    }
    draw::ring(frame, x, y, r + 1.0, lw + 2.0, [0, 0, 0, 170]);
    draw::ring(frame, x, y, r, lw, WHITE);
    draw::disc(frame, x, y, (2.5 * u).max(1.5), MARKER_DOT);
}

fn draw_north_arrow(frame: &mut Frame, r: Rect, angle: f32, u: f32) {
    draw::fill_rounded_rect(frame, r.x, r.y, r.w, r.h, 5.0 * u, PANEL);
    let (cx, cy) = (r.x + r.w / 2.0, r.y + r.h / 2.0 + 3.0 * u);
    let rad = 12.0 * u;
    draw::ring(frame, cx, cy, rad, (1.2 * u).max(1.0), [180, 185, 190, 255]);
    let (s, c) = angle.sin_cos();
    // Screen direction of north: clockwise from up, so up is (0, -1).
    let (nx, ny) = (s, -c);
    let (px_, py_) = (-ny, nx);
    let tip = (cx + nx * rad, cy + ny * rad);
    let tail = (cx - nx * rad, cy - ny * rad);
    let half_w = 4.5 * u;
    draw::convex_polygon(
        frame,
        &[
            tip,
            (cx + px_ * half_w, cy + py_ * half_w),
            (cx - px_ * half_w, cy - py_ * half_w),
        ],
        WHITE,
    );
    draw::convex_polygon(
        frame,
        &[
            tail,
            (cx + px_ * half_w, cy + py_ * half_w),
            (cx - px_ * half_w, cy - py_ * half_w),
        ],
        [110, 115, 120, 255],
    );
    // "N" beyond the tip, clamped into the panel.
    let size = (9.0 * u).max(MIN_TEXT_PX);
    let (w, h) = super::text::measure_text_bold(size, "N");
    let lx = (cx + nx * (rad + 6.5 * u) - w / 2.0)
        .min(r.x + r.w - w)
        .max(r.x);
    let ly = (cy + ny * (rad + 6.5 * u) - h / 2.0)
        .min(r.y + r.h - h)
        .max(r.y);
    super::text::draw_text_bold(frame, lx, ly, size, WHITE, "N");
}

fn ramp_colour(stops: &[[u8; 3]], t: f32) -> [u8; 4] {
    let n = stops.len();
    if n == 1 {
        let s = stops[0];
        return [s[0], s[1], s[2], 255];
    }
    let f = t.clamp(0.0, 1.0) * (n - 1) as f32;
    let i = (f.floor() as usize).min(n - 2);
    let k = f - i as f32;
    let (a, b) = (stops[i], stops[i + 1]);
    let mix = |c: usize| (a[c] as f32 + (b[c] as f32 - a[c] as f32) * k + 0.5) as u8;
    [mix(0), mix(1), mix(2), 255]
}

fn draw_legend(frame: &mut Frame, r: Rect, l: &Legend, u: f32, pad: f32) {
    draw::fill_rounded_rect(frame, r.x, r.y, r.w, r.h, 5.0 * u, PANEL);
    let small = (10.0 * u).max(MIN_OPTIONAL_TEXT_PX);
    let inner_w = r.w - 2.0 * pad;
    let head = fit_text(
        &format!("{} ({})", l.title.trim(), l.unit.trim()),
        Weight::Regular,
        small,
        MIN_OPTIONAL_TEXT_PX,
        inner_w,
        1,
    );
    draw_lines(frame, r.x + pad, r.y + pad, &head, SOFT_WHITE);
    let by = r.y + pad + small * LINE_SPACING;
    let bh = 11.0 * u;
    let bx = r.x + pad;
    let cols = inner_w.max(1.0).ceil() as usize;
    for i in 0..cols {
        let t = (i as f32 + 0.5) / cols as f32;
        draw::fill_rect(
            frame,
            bx + i as f32,
            by,
            1.0_f32.min(inner_w - i as f32),
            bh,
            ramp_colour(&l.stops, t),
        );
    }
    let ly = by + bh + 3.0 * u;
    let lo = format_value(l.min);
    let hi = format_value(l.max);
    let (hw, _) = super::text::measure_text(small, &hi);
    super::text::draw_text(frame, bx, ly, small, WHITE, &lo);
    super::text::draw_text(frame, bx + inner_w - hw, ly, small, WHITE, &hi);
}

fn draw_chart(frame: &mut Frame, r: Rect, c: &InsetChart, u: f32, pad: f32) {
    draw::fill_rounded_rect(frame, r.x, r.y, r.w, r.h, 5.0 * u, PANEL);
    let small = (9.5 * u).max(MIN_OPTIONAL_TEXT_PX);
    let head = fit_text(
        &format!("{} ({})", c.title.trim(), c.unit.trim()),
        Weight::Regular,
        small,
        MIN_OPTIONAL_TEXT_PX,
        r.w - 2.0 * pad,
        1,
    );
    draw_lines(frame, r.x + pad, r.y + pad, &head, SOFT_WHITE);
    let pts: Vec<(f64, f64)> = c
        .series
        .iter()
        .copied()
        .filter(|(x, y)| x.is_finite() && y.is_finite())
        .collect();
    if pts.len() < 2 {
        return;
    }
    let (mut x0, mut x1, mut y0, mut y1) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for &(x, y) in pts.iter().chain(
        c.survey_points
            .iter()
            .filter(|(x, y)| x.is_finite() && y.is_finite()),
    ) {
        x0 = x0.min(x);
        x1 = x1.max(x);
        y0 = y0.min(y);
        y1 = y1.max(y);
    }
    if x1 - x0 <= 0.0 {
        x1 = x0 + 1.0;
    }
    let span = (y1 - y0).max(1e-6);
    let (y0, y1) = (y0 - 0.08 * span, y1 + 0.08 * span);
    let lo_s = format_value(y0);
    let hi_s = format_value(y1);
    let axis_w = super::text::measure_text(small, &lo_s)
        .0
        .max(super::text::measure_text(small, &hi_s).0);
    let plot = Rect {
        x: r.x + pad + axis_w + 4.0 * u,
        y: r.y + pad + head.height + 4.0 * u,
        w: r.w - 2.0 * pad - axis_w - 4.0 * u,
        h: r.h - 2.0 * pad - head.height - 4.0 * u - small - 3.0 * u,
    };
    if plot.w < 4.0 || plot.h < 4.0 {
        return;
    }
    let to_px = |x: f64, y: f64| {
        (
            plot.x + ((x - x0) / (x1 - x0)) as f32 * plot.w,
            plot.y + plot.h - ((y - y0) / (y1 - y0)) as f32 * plot.h,
        )
    };
    let axis = [120, 128, 136, 255];
    draw::line(
        frame,
        plot.x,
        plot.y + plot.h,
        plot.x + plot.w,
        plot.y + plot.h,
        1.0,
        axis,
    );
    draw::line(frame, plot.x, plot.y, plot.x, plot.y + plot.h, 1.0, axis);
    super::text::draw_text(
        frame,
        r.x + pad,
        plot.y - small / 2.0,
        small,
        SOFT_WHITE,
        &hi_s,
    );
    super::text::draw_text(
        frame,
        r.x + pad,
        plot.y + plot.h - small / 2.0,
        small,
        SOFT_WHITE,
        &lo_s,
    );
    let ya = format!("{:.0}", x0.floor());
    let yb = format!("{:.0}", x1.floor());
    let (yw, _) = super::text::measure_text(small, &yb);
    super::text::draw_text(
        frame,
        plot.x,
        plot.y + plot.h + 2.0 * u,
        small,
        SOFT_WHITE,
        &ya,
    );
    super::text::draw_text(
        frame,
        plot.x + plot.w - yw,
        plot.y + plot.h + 2.0 * u,
        small,
        SOFT_WHITE,
        &yb,
    );
    for w in pts.windows(2) {
        let (a, b) = (to_px(w[0].0, w[0].1), to_px(w[1].0, w[1].1));
        draw::line(frame, a.0, a.1, b.0, b.1, (1.6 * u).max(1.0), WHITE);
    }
    for &(x, y) in &c.survey_points {
        if x.is_finite() && y.is_finite() {
            let (sx, sy) = to_px(x, y);
            draw::disc(frame, sx, sy, (3.0 * u).max(1.5), MEASURED_BADGE);
        }
    }
    if c.current_year.is_finite() {
        let t = c.current_year.clamp(x0, x1);
        let (cx, _) = to_px(t, y0);
        draw::line(
            frame,
            cx,
            plot.y,
            cx,
            plot.y + plot.h,
            (1.2 * u).max(1.0),
            INTERP_BADGE,
        );
        // Value on the line at the current time, by linear interpolation along the series.
        let v = pts
            .windows(2)
            .find(|w| t >= w[0].0 && t <= w[1].0)
            .map(|w| {
                let k = if w[1].0 > w[0].0 {
                    (t - w[0].0) / (w[1].0 - w[0].0)
                } else {
                    0.0
                };
                w[0].1 + k * (w[1].1 - w[0].1)
            })
            .unwrap_or(pts[pts.len() - 1].1);
        let (vx, vy) = to_px(t, v);
        draw::disc(frame, vx, vy, (3.5 * u).max(2.0), INTERP_BADGE);
    }
}
