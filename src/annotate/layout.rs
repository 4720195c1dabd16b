//! Placement of the per-frame overlay: [`plan`] decides where each element of an `Overlay` goes,
//! and what is left out on a small frame; `paint` draws it.
//!
//! Everything sits in two bands so the landform keeps the middle of the picture: a top band (the
//! top [`TOP_BAND`] of the frame height) and a bottom band (the bottom [`BOTTOM_BAND`]); the
//! renderer frames the landform in the rectangle between. Sizes scale with the unit
//! `u = min(height, width·9/16) / 100`, so 960x540 and 1280x720 look alike.
//!
//! - top band, left: the date (large), the status badge beside it (measured or interpolated; it
//!   cannot be turned off) and under them a detail line naming the survey, or the method and the
//!   two surveys an in-between frame was made from;
//! - top band, middle: the title; top band, right: the crest figure, its name saying which figure
//!   it is (crest elevation, or crest height above the reference);
//! - bottom band, left: the inset chart of the crest, the only box; middle: the credit;
//!   right: the colour legend, the scale bar with the vertical exaggeration ("heights ×2", never
//!   dropped), the north arrow;
//! - on the terrain: a ring on the crest and the word "crest" beside it.
//!
//! Text is light with a dark halo rather than on boxes, so the panels together cover a few per cent
//! of the frame. The smallest text is [`SMALLEST_TEXT`] of the frame height (2.5 %, 18 px on a 720-row
//! frame, 13.5 px on 540): about the least a back row reads on a projected slide (common practice,
//! no source). Below 6 px nothing is legible, so small frames drop optional elements in
//! [`DROP_ORDER`] until the rest fit without overlaps; the date, the status badge, the crest figure
//! and the exaggeration are never dropped.

use super::fit::{fit_text, FittedText, LINE_SPACING};
use super::overlay::{FrameStatus, LabelOptions, Overlay};
use super::text::{measure_text, Weight};

/// Share of the frame height, from the top, that panels may use.
pub const TOP_BAND: f32 = 0.11;
/// Share of the frame height, from the bottom, that panels may use.
pub const BOTTOM_BAND: f32 = 0.09;
/// Smallest text size as a share of the frame height (in units of `u`, 2.5).
pub const SMALLEST_TEXT: f32 = 0.025;
/// Below this many pixels no text is legible at all.
pub const MIN_TEXT_PX: f32 = 6.0;

/// An overlay element that can be dropped when the frame is too small.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Optional {
    /// The inset chart.
    InsetChart,
    /// The credit line.
    Credit,
    /// The scale bar (the exaggeration beside it stays).
    ScaleBar,
    /// The north arrow.
    NorthArrow,
    /// The colour legend.
    Legend,
    /// The title.
    Title,
    /// The status detail line (method and dates; the badge stays).
    StatusDetail,
    /// The word "crest" beside the marker (the ring stays).
    MarkerLabel,
}

/// The order in which optional elements are dropped from a frame too small for all of them.
pub const DROP_ORDER: [Optional; 8] = [
    Optional::InsetChart,
    Optional::Credit,
    Optional::ScaleBar,
    Optional::NorthArrow,
    Optional::Legend,
    Optional::Title,
    Optional::StatusDetail,
    Optional::MarkerLabel,
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
    /// Right edge.
    pub fn right(&self) -> f32 {
        self.x + self.w
    }
    /// Bottom edge.
    pub fn bottom(&self) -> f32 {
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

/// Where each element of the overlay goes on a frame; see [`plan`].
#[derive(Debug, Clone)]
pub struct Plan {
    /// Size unit in pixels: min(height, width·9/16) / 100.
    pub unit: f32,
    /// Date text.
    pub date: Option<Rect>,
    /// Status badge (filled box).
    pub badge: Option<Rect>,
    /// Status detail line.
    pub detail: Option<Rect>,
    /// Title text.
    pub title: Option<Rect>,
    /// Crest figure (name and value).
    pub crest: Option<Rect>,
    /// Inset chart box.
    pub chart: Option<Rect>,
    /// Credit text.
    pub credit: Option<Rect>,
    /// Colour legend (title, ramp and end values).
    pub legend: Option<Rect>,
    /// Scale bar and the exaggeration text (the text is always there).
    pub scale: Option<Rect>,
    /// North arrow.
    pub north: Option<Rect>,
    /// The word beside the crest marker.
    pub marker_label: Option<Rect>,
    /// Optional elements left out because the frame is too small.
    pub dropped: Vec<Optional>,
    /// The frame cannot hold even the date, status and crest figure: no text is drawn at all.
    pub too_small: bool,
    /// Size of the smallest text drawn, pixels.
    pub smallest_text_px: f32,
    pub(super) t: Texts,
}

/// The text of every element, set to its size.
#[derive(Debug, Clone)]
pub(super) struct Texts {
    pub(super) date: FittedText,
    pub(super) badge: FittedText,
    pub(super) detail: FittedText,
    pub(super) title: FittedText,
    pub(super) crest_name: FittedText,
    pub(super) crest_value: FittedText,
    pub(super) credit: FittedText,
    pub(super) legend_title: FittedText,
    pub(super) legend_lo: String,
    pub(super) legend_hi: String,
    /// Scale text ("100 m · heights ×2" or just "heights ×2") and the bar: (length, pixels).
    pub(super) scale_text: FittedText,
    pub(super) scale_bar: Option<(f64, f32)>,
    pub(super) marker: FittedText,
    /// Text size of the small labels (chart, legend values), pixels.
    pub(super) small_px: f32,
    /// Halo width, pixels.
    pub(super) halo_px: f32,
    /// Inner padding of boxes (badge, chart), pixels.
    pub(super) pad: f32,
}

fn status_texts(status: &FrameStatus) -> (&'static str, &'static str, String) {
    match status {
        FrameStatus::Surveyed { label } => (
            "SURVEYED — measured",
            "SURVEYED",
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
            "INTERPOLATED — not a measurement",
            "INTERPOLATED",
            format!(
                "{} between surveys of {} and {}",
                method.trim(),
                from_date.trim(),
                to_date.trim()
            ),
        ),
    }
}

/// A "nice" scale-bar length (1, 2 or 5 times a power of ten) no longer than `max`.
pub fn nice_length_m(max: f64) -> Option<f64> {
    if !(max.is_finite() && max > 0.0) {
        return None;
    }
    let p = 10f64.powf(max.log10().floor());
    [5.0, 2.0, 1.0]
        .iter()
        .map(|k| k * p)
        .find(|&l| l <= max * (1.0 + 1e-9))
}

fn length_label(len: f64, symbol: &str) -> String {
    if symbol == "m" && len >= 1000.0 {
        format!("{} km", len / 1000.0)
    } else {
        format!("{len} {symbol}")
    }
}

/// The exaggeration in words, e.g. "heights ×2" or "heights ×2.5"; "true heights" at 1.
pub fn exaggeration_text(k: f64) -> String {
    if !(k.is_finite() && k > 0.0) {
        return "heights ×?".into();
    }
    if (k - 1.0).abs() < 1e-9 {
        return "true heights (×1)".into();
    }
    let s = format!("{k:.2}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    format!("heights ×{s}")
}

/// Formats a figure with a precision fit for a slide: 3 significant digits, at most 2 decimals.
pub fn format_value(v: f64) -> String {
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

/// Computes where every element goes on a `width` x `height` frame, dropping optional elements in
/// [`DROP_ORDER`] until what remains fits inside the frame without overlaps.
pub fn plan(width: u32, height: u32, overlay: &Overlay, opts: &LabelOptions) -> Plan {
    let mut dropped = Vec::new();
    loop {
        let p = plan_with(width, height, overlay, opts, &dropped);
        if fits(&p, width as f32, height as f32) {
            return p;
        }
        // Strictly in order: an element that found no room so far counts as dropped too, so it
        // cannot reappear once later ones make room.
        let next = DROP_ORDER
            .iter()
            .position(|e| !dropped.contains(e) && present(&p, *e));
        match next {
            Some(k) => {
                for e in &DROP_ORDER[..=k] {
                    if !dropped.contains(e) {
                        dropped.push(*e);
                    }
                }
            }
            None => {
                // Even the essentials cannot fit: draw no text rather than cut it at the frame
                // edge. The crest ring (no text) is still drawn.
                let mut p = p;
                for r in [
                    &mut p.date,
                    &mut p.badge,
                    &mut p.detail,
                    &mut p.title,
                    &mut p.crest,
                    &mut p.scale,
                    &mut p.marker_label,
                ] {
                    *r = None;
                }
                p.too_small = true;
                return p;
            }
        }
    }
}

fn present(p: &Plan, e: Optional) -> bool {
    match e {
        Optional::InsetChart => p.chart.is_some(),
        Optional::Credit => p.credit.is_some(),
        Optional::ScaleBar => p.t.scale_bar.is_some(),
        Optional::NorthArrow => p.north.is_some(),
        Optional::Legend => p.legend.is_some(),
        Optional::Title => p.title.is_some(),
        Optional::StatusDetail => p.detail.is_some(),
        Optional::MarkerLabel => p.marker_label.is_some(),
    }
}

/// The boxes that must neither overlap nor leave the frame (the marker label only avoids them).
pub(super) fn boxes(p: &Plan) -> Vec<Rect> {
    [
        p.date, p.badge, p.detail, p.title, p.crest, p.chart, p.credit, p.legend, p.scale, p.north,
    ]
    .iter()
    .flatten()
    .copied()
    .collect()
}

fn fits(p: &Plan, w: f32, h: f32) -> bool {
    let b = boxes(p);
    b.iter()
        .enumerate()
        .all(|(i, a)| a.inside(w, h) && a.w > 0.0 && !b[i + 1..].iter().any(|o| a.overlaps(o)))
        && p.date.is_some() != p.t.date.lines.is_empty()
}

/// A text's box with room for its halo.
fn text_rect(x: f32, y: f32, t: &FittedText, halo: f32) -> Rect {
    Rect {
        x: x - halo,
        y: y - halo,
        w: t.width + 2.0 * halo,
        h: t.height + 2.0 * halo,
    }
}

fn plan_with(
    width: u32,
    height: u32,
    ov: &Overlay,
    opts: &LabelOptions,
    dropped: &[Optional],
) -> Plan {
    let (fw, fh) = (width as f32, height as f32);
    let u = (fh.min(fw * 9.0 / 16.0) / 100.0).max(0.01);
    let on = |e: Optional| !dropped.contains(&e);
    let px = |s: f32| (s * u).max(MIN_TEXT_PX);
    let small = px(SMALLEST_TEXT * 100.0);
    let halo = (0.28 * u).clamp(1.0, 4.0);
    let m = (0.8 * u).max(2.0);
    let pad = (0.5 * u).max(1.5);
    let gap = (1.2 * u).max(3.0);
    let empty = |w| FittedText::empty(w);
    let top_h = TOP_BAND * fh;
    let bottom_y = fh - BOTTOM_BAND * fh;

    // ---- Top band, right: the crest figure (never dropped).
    let crest_value = if opts.crest {
        let v = format!("{} {}", format_value(ov.crest.value), ov.crest.unit.trim());
        fit_text(&v, Weight::Bold, px(4.6), MIN_TEXT_PX, fw * 0.3, 1)
    } else {
        empty(Weight::Bold)
    };
    let crest_name = if opts.crest {
        fit_text(
            &ov.crest.name,
            Weight::Regular,
            small,
            MIN_TEXT_PX,
            fw * 0.3,
            1,
        )
    } else {
        empty(Weight::Regular)
    };
    let crest = (!crest_value.lines.is_empty()).then(|| {
        let w = crest_name.width.max(crest_value.width) + 2.0 * halo;
        let h = crest_name.height + crest_value.height + 2.0 * halo;
        Rect {
            x: fw - m - w,
            y: m,
            w,
            h,
        }
    });
    let right_limit = crest.map_or(fw - m, |c| c.x - gap);

    // ---- Top band, left: date, badge beside it, detail under both.
    let date = if opts.date {
        fit_text(
            &ov.date_text,
            Weight::Bold,
            px(4.6),
            MIN_TEXT_PX,
            fw * 0.4,
            1,
        )
    } else {
        empty(Weight::Bold)
    };
    let (long_badge, short_badge, detail_s) = status_texts(&ov.status);
    let date_rect = (!date.lines.is_empty()).then(|| text_rect(m + halo, m + halo, &date, halo));
    let row1_right = date_rect.map_or(m, |r| r.right() + gap * 0.6);
    let badge_room = (right_limit - row1_right - 2.0 * pad).max(1.0);
    let mut badge = fit_text(
        long_badge,
        Weight::Bold,
        px(2.6),
        MIN_TEXT_PX,
        badge_room,
        1,
    );
    if badge.lines.first().is_none_or(|l| l.ends_with('…')) || badge.size_px < px(2.6) * 0.85 {
        badge = fit_text(
            short_badge,
            Weight::Bold,
            px(2.6),
            MIN_TEXT_PX,
            badge_room,
            1,
        );
    }
    // The badge cannot be turned off in a job (the job check refuses `labels.status: false`); the
    // library still allows a bare frame.
    if !opts.status {
        badge = empty(Weight::Bold);
    }
    let row1_h = date_rect.map_or(badge.height + 2.0 * pad, |r| r.h);
    let badge_rect = (!badge.lines.is_empty()).then(|| Rect {
        x: row1_right,
        y: m + (row1_h - badge.height - 2.0 * pad) / 2.0,
        w: badge.width + 2.0 * pad,
        h: badge.height + 2.0 * pad,
    });
    let row2_y = m + row1_h + 0.2 * u;
    let detail = if opts.status && on(Optional::StatusDetail) {
        fit_text(
            &detail_s,
            Weight::Regular,
            small,
            MIN_TEXT_PX,
            right_limit - m - 2.0 * halo,
            1,
        )
    } else {
        empty(Weight::Regular)
    };
    let detail_rect =
        (!detail.lines.is_empty()).then(|| text_rect(m + halo, row2_y + halo, &detail, halo));

    // ---- Top band, middle: the title, between the head and the crest figure.
    let head_right = [date_rect, badge_rect, detail_rect]
        .iter()
        .flatten()
        .map(|r| r.right())
        .fold(m, f32::max);
    let title_room = right_limit - head_right - 2.0 * gap;
    let title = if opts.title && on(Optional::Title) && title_room > 12.0 * u {
        fit_text(
            &ov.title,
            Weight::Bold,
            px(2.7),
            small.min(px(2.7)),
            title_room,
            2,
        )
    } else {
        empty(Weight::Bold)
    };
    let title_rect = (!title.lines.is_empty()).then(|| {
        let x = head_right + gap + (title_room - title.width) / 2.0;
        let y = ((top_h - title.height) / 2.0).max(m);
        text_rect(x + halo, y, &title, halo)
    });

    // ---- Bottom band, right to left: north arrow, scale with exaggeration, legend.
    let band_h = (BOTTOM_BAND * fh - 1.2 * u).max(1.0);
    let band_y = bottom_y + 0.6 * u;
    let north = (opts.north_arrow
        && on(Optional::NorthArrow)
        && ov.north_angle_rad.is_some_and(f32::is_finite))
    .then(|| {
        let s = band_h.min(9.0 * u);
        Rect {
            x: fw - m - s,
            y: band_y + (band_h - s) / 2.0,
            w: s,
            h: s,
        }
    });
    let scale_right = north.map_or(fw - m, |n| n.x - gap);
    let exag = exaggeration_text(ov.vertical_exaggeration);
    let mut scale_bar = None;
    let mut scale_words = exag.clone();
    if let (Some(mpp), true) = (ov.metres_per_px, opts.scale_bar && on(Optional::ScaleBar)) {
        if mpp.is_finite() && mpp > 0.0 && ov.scale_unit.0 > 0.0 {
            let upp = mpp / ov.scale_unit.0;
            if let Some(len) = nice_length_m(upp * (16.0 * u) as f64) {
                scale_bar = Some((len, (len / upp) as f32));
                scale_words = format!(
                    "{} (foreground) · {exag}",
                    length_label(len, ov.scale_unit.1.trim())
                );
                if measure_text(small, &scale_words).0 > 34.0 * u {
                    scale_words = format!("{} · {exag}", length_label(len, ov.scale_unit.1.trim()));
                }
            }
        }
    }
    // The exaggeration goes with the status mark: on every frame of a run.
    if !opts.status && scale_bar.is_none() {
        scale_words.clear();
    }
    let scale_text = fit_text(
        &scale_words,
        Weight::Regular,
        small,
        MIN_TEXT_PX,
        fw * 0.45,
        1,
    );
    let bar_h = (0.9 * u).max(2.0);
    let scale = (!scale_text.lines.is_empty()).then(|| {
        let bar_w = scale_bar.map_or(0.0, |(_, p)| p);
        let w = scale_text.width.max(bar_w) + 2.0 * halo;
        let h = scale_text.height
            + 2.0 * halo
            + if scale_bar.is_some() {
                bar_h + 0.4 * u
            } else {
                0.0
            };
        Rect {
            x: scale_right - w,
            y: band_y + (band_h - h) / 2.0,
            w,
            h,
        }
    });
    let legend_right = scale.map_or(scale_right, |s| s.x - gap);
    let (legend, legend_title, legend_lo, legend_hi) =
        match (&ov.legend, opts.legend && on(Optional::Legend)) {
            (Some(l), true) if !l.stops.is_empty() => {
                let t = fit_text(
                    &format!("{} ({})", l.title.trim(), l.unit.trim()),
                    Weight::Regular,
                    small,
                    MIN_TEXT_PX,
                    40.0 * u,
                    1,
                );
                let (lo, hi) = (format_value(l.min), format_value(l.max));
                let ends = measure_text(small, &lo).0 + measure_text(small, &hi).0;
                let ramp_w = 20.0 * u;
                let w = t.width.max(ends + ramp_w + 2.0 * pad) + 2.0 * halo;
                let h = t.height + small * LINE_SPACING + 2.0 * halo;
                (
                    Some(Rect {
                        x: legend_right - w,
                        y: band_y + (band_h - h) / 2.0,
                        w,
                        h,
                    }),
                    t,
                    lo,
                    hi,
                )
            }
            _ => (None, empty(Weight::Regular), String::new(), String::new()),
        };

    // ---- Bottom band, left: the chart; then the credit up to the legend.
    let chart = match (&ov.inset, opts.inset_chart && on(Optional::InsetChart)) {
        (Some(c), true) if !c.survey_points.is_empty() => Some(Rect {
            x: m,
            y: band_y,
            w: 46.0 * u,
            h: band_h,
        }),
        _ => None,
    };
    let credit_left = chart.map_or(m, |c| c.right() + gap);
    let credit_right = legend.or(scale).map_or(fw - m, |r| r.x - gap);
    let credit = match (&ov.credit, opts.credit && on(Optional::Credit)) {
        (Some(c), true) if credit_right - credit_left > 10.0 * u => fit_text(
            c,
            Weight::Regular,
            small,
            MIN_TEXT_PX.max(small * 0.8),
            credit_right - credit_left - 2.0 * halo,
            2,
        ),
        _ => empty(Weight::Regular),
    };
    let credit_rect = (!credit.lines.is_empty()).then(|| {
        let y = band_y + (band_h - credit.height) / 2.0;
        text_rect(credit_left + halo, y, &credit, halo)
    });

    // ---- On the terrain: "crest" beside the marker, right of it or left, clear of the panels.
    let marker = if opts.crest_marker && on(Optional::MarkerLabel) {
        fit_text("crest", Weight::Bold, small, MIN_TEXT_PX, fw, 1)
    } else {
        empty(Weight::Bold)
    };
    let mut plan = Plan {
        unit: u,
        date: date_rect,
        badge: badge_rect,
        detail: detail_rect,
        title: title_rect,
        crest,
        chart,
        credit: credit_rect,
        legend,
        scale,
        north,
        marker_label: None,
        dropped: dropped.to_vec(),
        too_small: false,
        smallest_text_px: 0.0,
        t: Texts {
            date,
            badge,
            detail,
            title,
            crest_name,
            crest_value,
            credit,
            legend_title,
            legend_lo,
            legend_hi,
            scale_text,
            scale_bar,
            marker,
            small_px: small,
            halo_px: halo,
            pad,
        },
    };
    if let (Some((x, y)), false) = (ov.crest_px, plan.t.marker.lines.is_empty()) {
        let ring = marker_radius(u);
        let panels = boxes(&plan);
        let t = &plan.t.marker;
        for side in [1.0f32, -1.0] {
            let tx = if side > 0.0 {
                x + ring + 0.6 * u
            } else {
                x - ring - 0.6 * u - t.width
            };
            let r = text_rect(tx, y - t.height / 2.0, t, halo);
            if r.inside(fw, fh) && !panels.iter().any(|p| p.overlaps(&r)) {
                plan.marker_label = Some(r);
                break;
            }
        }
    }
    plan.smallest_text_px = [
        &plan.t.date,
        &plan.t.badge,
        &plan.t.detail,
        &plan.t.title,
        &plan.t.crest_name,
        &plan.t.crest_value,
        &plan.t.credit,
        &plan.t.legend_title,
        &plan.t.scale_text,
    ]
    .iter()
    .filter(|t| !t.lines.is_empty())
    .map(|t| t.size_px)
    .chain(plan.legend.map(|_| small))
    .chain(plan.chart.map(|_| small))
    .fold(f32::MAX, f32::min);
    plan
}

/// Radius of the ring on the crest, pixels.
pub(super) fn marker_radius(u: f32) -> f32 {
    (1.1 * u).max(3.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scale_bar_follows_the_display_unit_and_states_the_exaggeration() {
        let mut ov = Overlay {
            metres_per_px: Some(0.5),
            vertical_exaggeration: 2.5,
            ..Overlay::default()
        };
        let metres = plan(1280, 720, &ov, &LabelOptions::default());
        let (len_m, px_m) = metres.t.scale_bar.expect("room for a scale bar");
        let words = metres.t.scale_text.lines.join(" ");
        assert!(
            words.contains(" m") && words.contains("heights ×2.5"),
            "{words}"
        );
        assert!(((px_m as f64) * 0.5 - len_m).abs() < 1e-3);
        // Check: international foot = 0.3048 m exactly (from memory, 1959 agreement); the bar's
        // length in pixels times metres per pixel equals the labelled feet times 0.3048
        ov.scale_unit = (0.3048, "ft".into());
        let feet = plan(1280, 720, &ov, &LabelOptions::default());
        let (len_ft, px_ft) = feet.t.scale_bar.expect("room for a scale bar");
        assert!(feet.t.scale_text.lines.join(" ").contains(" ft"));
        assert!(((px_ft as f64) * 0.5 - len_ft * 0.3048).abs() < 1e-3);
        // With the scale bar off, the exaggeration is still stated.
        let off = plan(
            1280,
            720,
            &ov,
            &LabelOptions {
                scale_bar: false,
                ..LabelOptions::default()
            },
        );
        assert_eq!(off.t.scale_text.lines.join(" "), "heights ×2.5");
    }

    #[test]
    fn exaggeration_words() {
        assert_eq!(exaggeration_text(2.0), "heights ×2");
        assert_eq!(exaggeration_text(3.25), "heights ×3.25");
        assert_eq!(exaggeration_text(1.0), "true heights (×1)");
    }
}
