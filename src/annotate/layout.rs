//! Placement of the per-frame overlay: [`plan`] decides where each element of an `Overlay` goes,
//! and what is left out on a small frame; `paint::draw_overlay` draws it.
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

use super::fit::{fit_text, FittedText, LINE_SPACING};
use super::overlay::{FrameStatus, LabelOptions, Overlay};
use super::paint::{format_value, MIN_OPTIONAL_TEXT_PX, MIN_TEXT_PX};
use super::text::Weight;

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
    pub(super) fn right(&self) -> f32 {
        self.x + self.w
    }
    pub(super) fn bottom(&self) -> f32 {
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
    pub(super) head_text: HeadText,
    pub(super) peak_text: (FittedText, FittedText),
    pub(super) scale_bar: Option<(f64, f32, FittedText)>,
    pub(super) credit_text: FittedText,
    pub(super) tag_text: FittedText,
}

#[derive(Debug, Clone)]
pub(super) struct HeadText {
    pub(super) title: FittedText,
    pub(super) date: FittedText,
    pub(super) badge: FittedText,
    pub(super) detail: FittedText,
}

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
        (Some(mpp), true) if mpp.is_finite() && mpp > 0.0 && ov.scale_unit.0 > 0.0 => {
            // Lengths below are in the scale's unit (metres unless the job asks for feet).
            let (unit_m, symbol) = (ov.scale_unit.0, ov.scale_unit.1.as_str());
            let upp = mpp / unit_m;
            let scale_label = |len: f64| {
                if symbol == "m" {
                    scale_label(len)
                } else {
                    format!("{len} {symbol}")
                }
            };
            nice_length_m(upp * (120.0 * gu) as f64).map(|len_m| {
                let bar_px = (len_m / upp) as f32;
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scale_bar_follows_the_display_unit() {
        let mut ov = Overlay {
            metres_per_px: Some(0.5),
            ..Overlay::default()
        };
        let metres = plan(1280, 720, &ov, &LabelOptions::default());
        let (len_m, px_m, label_m) = metres.scale_bar.expect("room for a scale bar");
        assert!(
            label_m.lines.join(" ").contains(" m"),
            "{:?}",
            label_m.lines
        );
        assert!(((px_m as f64) * 0.5 - len_m).abs() < 1e-3);
        // Check: international foot = 0.3048 m exactly (from memory, 1959 agreement); the bar's
        // length in pixels times metres per pixel equals the labelled feet times 0.3048
        ov.scale_unit = (0.3048, "ft".into());
        let feet = plan(1280, 720, &ov, &LabelOptions::default());
        let (len_ft, px_ft, label_ft) = feet.scale_bar.expect("room for a scale bar");
        assert!(
            label_ft.lines.join(" ").contains(" ft"),
            "{:?}",
            label_ft.lines
        );
        assert!(((px_ft as f64) * 0.5 - len_ft * 0.3048).abs() < 1e-3);
    }
}
