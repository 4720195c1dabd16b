//! Drawing the overlay: panels, text, badge, peak marker and leader, north arrow, scale bar, legend
//! and inset chart, at the places `layout::plan` chose. Colours are chosen for a projector: white
//! text on a translucent near-black panel; the status badge is light green for a survey and amber
//! for an interpolation, both with dark text.

use std::sync::atomic::{AtomicU64, Ordering};

use super::draw;
use super::fit::{fit_text, FittedText, LINE_SPACING};
use super::layout::{plan, Rect};
use super::overlay::{FrameStatus, InsetChart, LabelOptions, Legend, Overlay};
use super::text::{draw_text_weighted, Weight};
use crate::render::Frame;

pub(super) const WHITE: [u8; 4] = [255, 255, 255, 255];
pub(super) const SOFT_WHITE: [u8; 4] = [225, 230, 235, 255];
pub(super) const PANEL: [u8; 4] = [12, 16, 22, 165];
/// Badge colours: measured = light green, interpolated = amber; both carry dark text.
pub(super) const MEASURED_BADGE: [u8; 4] = [122, 214, 138, 255];
pub(super) const INTERP_BADGE: [u8; 4] = [255, 184, 64, 255];
pub(super) const BADGE_TEXT: [u8; 4] = [16, 20, 16, 255];
pub(super) const MARKER_DOT: [u8; 4] = [255, 64, 64, 255];
/// Smallest text size, pixels. Below this DejaVu Sans stops being legible at all.
pub(super) const MIN_TEXT_PX: f32 = 6.0;
/// Smallest size for optional text (title, detail, credit, tags): below it they are dropped instead.
pub(super) const MIN_OPTIONAL_TEXT_PX: f32 = 8.0;

pub(super) fn format_value(v: f64) -> String {
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
