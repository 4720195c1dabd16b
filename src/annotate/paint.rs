//! Drawing the overlay at the places `layout::plan` chose. Colours are chosen for a projector: light
//! text with a dark halo; the status badge is light green for a survey and amber for an
//! interpolation, both with dark text; the inset chart is the only box.
//!
//! [`Annotator`] keeps what does not change from frame to frame: every text line already
//! rasterised with its halo, and the static parts of the inset chart and the legend as ready
//! layers (drawn once with tiny-skia, composited on each frame). Only the date, the badge, the crest
//! figure, the scale, the north arrow, the marker and the chart's "now" mark are drawn per frame.

use std::collections::HashMap;

use tiny_skia::Pixmap;

use super::fit::{FittedText, LINE_SPACING};
use super::layout::{self, plan, Plan, Rect};
use super::overlay::{FrameStatus, InsetChart, LabelOptions, Legend, Overlay};
use super::shapes;
use super::text::{draw_stamp, measure_text, stamp, Stamp, Weight};
use crate::render::Frame;

pub(super) const WHITE: [u8; 4] = [255, 255, 255, 255];
pub(super) const SOFT_WHITE: [u8; 4] = [232, 236, 240, 255];
/// Halo behind light text: near-black, mostly opaque.
pub(super) const HALO: [u8; 4] = [6, 10, 16, 215];
/// The chart's box.
pub(super) const PANEL: [u8; 4] = [12, 16, 22, 165];
/// Badge colours: measured = light green, interpolated = amber; both carry dark text.
pub(super) const MEASURED_BADGE: [u8; 4] = [122, 214, 138, 255];
pub(super) const INTERP_BADGE: [u8; 4] = [255, 184, 64, 255];
pub(super) const BADGE_TEXT: [u8; 4] = [16, 20, 16, 255];
pub(super) const MARKER_DOT: [u8; 4] = [255, 64, 64, 255];

pub use layout::format_value;

/// Most text stamps kept; a job has a few dozen distinct lines, dates included.
const STAMP_CACHE: usize = 512;

/// Per-job overlay painter with caches; see the module doc. One per job and thread.
#[derive(Default)]
pub struct Annotator {
    stamps: HashMap<(String, u32, Weight, u32), Stamp>,
    chart: Option<(String, Pixmap, ChartGeometry)>,
    legend: Option<(String, Pixmap)>,
    last_warning: Option<String>,
}

/// Where the chart's plot sits in its box and which values its edges stand for.
#[derive(Debug, Clone, Copy)]
struct ChartGeometry {
    plot: Rect,
    x0: f64,
    x1: f64,
    y0: f64,
    y1: f64,
}

impl ChartGeometry {
    fn to_px(self, x: f64, y: f64) -> (f32, f32) {
        let p = self.plot;
        (
            p.x + ((x - self.x0) / (self.x1 - self.x0)) as f32 * p.w,
            p.y + p.h - ((y - self.y0) / (self.y1 - self.y0)) as f32 * p.h,
        )
    }
}

/// Draws the overlay of one frame in place with a fresh [`Annotator`] (no cache kept).
pub fn draw_overlay(frame: &mut Frame, overlay: &Overlay, opts: &LabelOptions) {
    Annotator::default().draw(frame, overlay, opts);
}

impl Annotator {
    /// A painter with empty caches.
    pub fn new() -> Self {
        Self::default()
    }

    /// Draws the overlay of one frame in place. Infallible: whatever does not fit is shrunk or
    /// dropped (see `layout`); a drop is reported once per change with `log::warn!`.
    pub fn draw(&mut self, frame: &mut Frame, overlay: &Overlay, opts: &LabelOptions) {
        if frame.width == 0
            || frame.height == 0
            || frame.rgba.len() < frame.width as usize * frame.height as usize * 4
        {
            return;
        }
        let p = plan(frame.width, frame.height, overlay, opts);
        self.warn_once(frame, &p);
        let u = p.unit;
        let (halo, small) = (p.t.halo_px, p.t.small_px);

        if opts.crest_marker {
            if let Some((x, y)) = overlay.crest_px {
                self.draw_marker(frame, &p, x, y);
            }
        }
        if let (Some(r), Some(c)) = (p.chart, &overlay.inset) {
            self.draw_chart(frame, r, c, &p);
        }
        if let (Some(r), Some(l)) = (p.legend, &overlay.legend) {
            self.draw_legend(frame, r, l, &p);
        }
        if let Some(r) = p.date {
            self.text(frame, r.x + halo, r.y + halo, &p.t.date, WHITE, halo);
        }
        if let Some(b) = p.badge {
            let fill = match overlay.status {
                FrameStatus::Surveyed { .. } => MEASURED_BADGE,
                FrameStatus::Interpolated { .. } => INTERP_BADGE,
            };
            if let Some(mut c) = shapes::canvas(frame) {
                // A dark rim keeps the badge's edge clear on pale sand.
                shapes::fill_round_rect(
                    &mut c,
                    b.x - 1.0,
                    b.y - 1.0,
                    b.w + 2.0,
                    b.h + 2.0,
                    0.5 * u + 1.0,
                    HALO,
                );
                shapes::fill_round_rect(&mut c, b.x, b.y, b.w, b.h, 0.5 * u, fill);
            }
            let pad = p.t.pad;
            self.text(frame, b.x + pad, b.y + pad, &p.t.badge, BADGE_TEXT, 0.0);
        }
        if let Some(r) = p.detail {
            self.text(frame, r.x + halo, r.y + halo, &p.t.detail, SOFT_WHITE, halo);
        }
        if let Some(r) = p.title {
            self.text(frame, r.x + halo, r.y + halo, &p.t.title, SOFT_WHITE, halo);
        }
        if let Some(r) = p.crest {
            // Right-aligned: name above, value below.
            let (name, value) = (&p.t.crest_name, &p.t.crest_value);
            let right = r.right() - halo;
            self.text(
                frame,
                right - name.width,
                r.y + halo,
                name,
                SOFT_WHITE,
                halo,
            );
            self.text(
                frame,
                right - value.width,
                r.y + halo + name.height,
                value,
                WHITE,
                halo,
            );
        }
        if let Some(r) = p.credit {
            self.text(frame, r.x + halo, r.y + halo, &p.t.credit, SOFT_WHITE, halo);
        }
        if let Some(r) = p.scale {
            let t = &p.t.scale_text;
            self.text(frame, r.x + halo, r.y + halo, t, SOFT_WHITE, halo);
            if let (Some((_, bar_px)), Some(mut c)) = (p.t.scale_bar, shapes::canvas(frame)) {
                let (bx, by, bh) = (
                    r.x + halo,
                    r.y + halo + t.height + 0.4 * u,
                    (0.9 * u).max(2.0),
                );
                // Two halves, white and grey, on a dark rim: readable on light and dark ground.
                shapes::fill_round_rect(
                    &mut c,
                    bx - 1.5,
                    by - 1.5,
                    bar_px + 3.0,
                    bh + 3.0,
                    1.0,
                    HALO,
                );
                shapes::fill_round_rect(&mut c, bx, by, bar_px / 2.0, bh, 0.0, WHITE);
                shapes::fill_round_rect(
                    &mut c,
                    bx + bar_px / 2.0,
                    by,
                    bar_px / 2.0,
                    bh,
                    0.0,
                    [150, 155, 160, 255],
                );
            }
        }
        if let (Some(r), Some(a)) = (p.north, overlay.north_angle_rad) {
            self.draw_north(frame, r, a, small);
        }
    }

    fn warn_once(&mut self, frame: &Frame, p: &Plan) {
        if p.dropped.is_empty() && !p.too_small {
            return;
        }
        let sig = format!(
            "{}x{} {:?} {}",
            frame.width, frame.height, p.dropped, p.too_small
        );
        if self.last_warning.as_deref() == Some(sig.as_str()) {
            return;
        }
        if p.too_small {
            log::warn!(
                "frame {}x{} is too small for any label; only the crest marker is drawn (use at least 160x90)",
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
        self.last_warning = Some(sig);
    }

    fn stamp(&mut self, line: &str, size: f32, weight: Weight, halo: f32) -> &Stamp {
        let key = (line.to_string(), size.to_bits(), weight, halo.to_bits());
        if self.stamps.len() >= STAMP_CACHE && !self.stamps.contains_key(&key) {
            self.stamps.clear();
        }
        self.stamps
            .entry(key)
            .or_insert_with(|| stamp(line, size, weight, halo))
    }

    /// Draws fitted text with its top-left corner at (x, y), rounded to whole pixels.
    fn text(
        &mut self,
        frame: &mut Frame,
        x: f32,
        y: f32,
        t: &FittedText,
        rgba: [u8; 4],
        halo: f32,
    ) {
        for (i, line) in t.lines.iter().enumerate() {
            let s = self.stamp(line, t.size_px, t.weight, halo);
            let ly = y + i as f32 * t.size_px * LINE_SPACING;
            draw_stamp(frame, s, x.round() as i32, ly.round() as i32, rgba, HALO);
        }
    }

    fn draw_marker(&mut self, frame: &mut Frame, p: &Plan, x: f32, y: f32) {
        if !(x.is_finite() && y.is_finite()) {
            return;
        }
        let u = p.unit;
        let r = layout::marker_radius(u);
        let lw = (0.3 * u).max(1.5);
        if let Some(mut c) = shapes::canvas(frame) {
            shapes::stroke_circle(&mut c, x, y, r, lw + 2.0, [0, 0, 0, 170]);
            shapes::stroke_circle(&mut c, x, y, r, lw, WHITE);
            shapes::fill_circle(&mut c, x, y, (0.35 * u).max(1.5), MARKER_DOT);
        }
        if let Some(t) = p.marker_label {
            let halo = p.t.halo_px;
            self.text(
                frame,
                t.x + halo,
                t.y + halo,
                &p.t.marker.clone(),
                WHITE,
                halo,
            );
        }
    }

    fn draw_north(&mut self, frame: &mut Frame, r: Rect, angle: f32, small: f32) {
        let (cx, cy) = (r.x + r.w / 2.0, r.y + r.h / 2.0);
        let rad = r.w / 2.0;
        let (s, c) = angle.sin_cos();
        // Screen direction of north: clockwise from up, so up is (0, -1).
        let (nx, ny) = (s, -c);
        let (qx, qy) = (-ny, nx);
        let len = rad * 0.42;
        let half_w = rad * 0.2;
        let tip = (cx + nx * len, cy + ny * len);
        let tail = (cx - nx * len, cy - ny * len);
        let left = (cx + qx * half_w, cy + qy * half_w);
        let right = (cx - qx * half_w, cy - qy * half_w);
        if let Some(mut cv) = shapes::canvas(frame) {
            shapes::fill_circle(&mut cv, cx, cy, rad, PANEL);
            shapes::stroke_circle(&mut cv, cx, cy, rad - 1.0, 1.2, [180, 185, 190, 200]);
            shapes::fill_polygon(&mut cv, &[tip, left, right], WHITE);
            shapes::fill_polygon(&mut cv, &[tail, left, right], [120, 125, 130, 255]);
        }
        // "N" beyond the tip, inside the disc.
        let size = (small * 0.8).max(layout::MIN_TEXT_PX);
        let (w, h) = super::text::measure_text_bold(size, "N");
        let reach = rad * 0.68;
        let nt = FittedText {
            size_px: size,
            lines: vec!["N".into()],
            width: w,
            height: h,
            weight: Weight::Bold,
        };
        self.text(
            frame,
            cx + nx * reach - w / 2.0,
            cy + ny * reach - h / 2.0,
            &nt,
            WHITE,
            0.0,
        );
    }

    fn draw_chart(&mut self, frame: &mut Frame, r: Rect, c: &InsetChart, p: &Plan) {
        let key = format!(
            "{:?} {} {} {:?} {:?} {} {} {}",
            (r.w, r.h),
            c.title,
            c.unit,
            c.survey_points,
            c.survey_sigma,
            c.min_span,
            p.t.small_px,
            p.unit
        );
        if self.chart.as_ref().is_none_or(|(k, _, _)| *k != key) {
            match self.chart_layer(r, c, p) {
                Some((layer, g)) => self.chart = Some((key, layer, g)),
                None => return,
            }
        }
        let Some((_, layer, g)) = &self.chart else {
            return;
        };
        let (ox, oy) = (r.x.round(), r.y.round());
        shapes::composite(frame, layer, ox as i32, oy as i32);
        // This frame: a vertical line at its time and a dot on the dashed line (its own value only
        // outside the surveys' dates).
        let (t, v) = c.current;
        let v = c.on_line(t).unwrap_or(v);
        if !t.is_finite() {
            return;
        }
        let u = p.unit;
        let t = t.clamp(g.x0, g.x1);
        let (cx, _) = g.to_px(t, g.y0);
        let (cx, top, bottom) = (cx + ox, g.plot.y + oy, g.plot.bottom() + oy);
        if let Some(mut cv) = shapes::canvas(frame) {
            shapes::stroke_polyline(
                &mut cv,
                &[(cx, top), (cx, bottom)],
                (0.25 * u).max(1.0),
                INTERP_BADGE,
                None,
            );
            if v.is_finite() {
                let (_, vy) = g.to_px(t, v.clamp(g.y0, g.y1));
                shapes::fill_circle(&mut cv, cx, vy + oy, (0.6 * u).max(2.0), [0, 0, 0, 200]);
                shapes::fill_circle(&mut cv, cx, vy + oy, (0.45 * u).max(1.5), INTERP_BADGE);
            }
        }
    }

    /// The chart's box, heading, value range and the surveys (dots joined by a dashed line: nothing
    /// was measured between them), drawn once.
    fn chart_layer(
        &mut self,
        r: Rect,
        c: &InsetChart,
        p: &Plan,
    ) -> Option<(Pixmap, ChartGeometry)> {
        let u = p.unit;
        let (w, h) = (r.w.ceil() as u32, r.h.ceil() as u32);
        let mut layer = shapes::layer(w, h)?;
        shapes::fill_round_rect(&mut layer.as_mut(), 0.0, 0.0, r.w, r.h, 0.6 * u, PANEL);
        let pad = p.t.pad.max(0.6 * u);
        let small = p.t.small_px;
        let pts: Vec<(f64, f64)> = c
            .survey_points
            .iter()
            .copied()
            .filter(|(x, y)| x.is_finite() && y.is_finite())
            .collect();
        let (mut x0, mut x1, mut y0, mut y1) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
        for &(x, y) in &pts {
            x0 = x0.min(x);
            x1 = x1.max(x);
            y0 = y0.min(y);
            y1 = y1.max(y);
        }
        if pts.is_empty() {
            (x0, x1, y0, y1) = (0.0, 1.0, 0.0, 1.0);
        }
        if x1 - x0 <= 0.0 {
            (x0, x1) = (x0 - 0.5, x1 + 0.5);
        }
        let _ = (y0, y1);
        let (y0, y1) = c.value_range();
        // Left column: the heading over the surveys' range; right: the plot, full height.
        let heading = c.title.trim().to_string();
        let range = if pts.is_empty() {
            c.unit.trim().to_string()
        } else {
            format!(
                "{}–{} {}",
                format_value(pts.iter().map(|p| p.1).fold(f64::MAX, f64::min)),
                format_value(pts.iter().map(|p| p.1).fold(f64::MIN, f64::max)),
                c.unit.trim()
            )
        };
        // The name never shrinks below the smallest text size: it wraps to two lines instead, and
        // then the range gives way.
        let col_w = (r.w * 0.5 - pad).max(1.0);
        let head = super::fit::fit_text(&heading, Weight::Regular, small, small, col_w, 2);
        let rng = if head.lines.len() < 2 {
            super::fit::fit_text(&range, Weight::Regular, small, small, col_w, 1)
        } else {
            FittedText::empty(Weight::Regular)
        };
        let text_h = head.height + rng.height;
        let ty = ((r.h - text_h) / 2.0).max(pad * 0.5);
        for (i, line) in head.lines.iter().enumerate() {
            let y = ty + i as f32 * head.size_px * LINE_SPACING;
            stamp_onto(
                &mut layer,
                &stamp(line, head.size_px, Weight::Regular, 0.0),
                pad,
                y,
                SOFT_WHITE,
            );
        }
        if let Some(line) = rng.lines.first() {
            stamp_onto(
                &mut layer,
                &stamp(line, rng.size_px, Weight::Regular, 0.0),
                pad,
                ty + head.height,
                [200, 206, 214, 255],
            );
        }
        let dot = (0.45 * u).max(1.5);
        let left = pad + head.width.max(rng.width) + 1.2 * u + dot;
        let plot = Rect {
            x: left,
            y: pad + dot,
            w: (r.w - left - pad - dot).max(1.0),
            h: (r.h - 2.0 * pad - 2.0 * dot).max(1.0),
        };
        let g = ChartGeometry {
            plot,
            x0,
            x1,
            y0,
            y1,
        };
        let px: Vec<(f32, f32)> = pts.iter().map(|&(x, y)| g.to_px(x, y)).collect();
        let mut cv = layer.as_mut();
        shapes::stroke_polyline(
            &mut cv,
            &[(plot.x, plot.bottom()), (plot.right(), plot.bottom())],
            1.0,
            [120, 128, 136, 255],
            None,
        );
        shapes::stroke_polyline(
            &mut cv,
            &px,
            (0.25 * u).max(1.0),
            [235, 238, 242, 230],
            Some(((0.7 * u).max(2.0), (0.5 * u).max(2.0))),
        );
        // ±σ bars: one standard deviation of each survey, capped.
        for (k, &(x, y)) in pts.iter().enumerate() {
            let Some(&s) = c.survey_sigma.get(k) else {
                continue;
            };
            if !(s.is_finite() && s > 0.0) {
                continue;
            }
            let (bx, top) = g.to_px(x, (y + s).min(y1));
            let (_, bottom) = g.to_px(x, (y - s).max(y0));
            let cap = (0.35 * u).max(2.0);
            let bar = [235, 238, 242, 230];
            let wdt = (0.18 * u).max(1.0);
            shapes::stroke_polyline(&mut cv, &[(bx, top), (bx, bottom)], wdt, bar, None);
            shapes::stroke_polyline(&mut cv, &[(bx - cap, top), (bx + cap, top)], wdt, bar, None);
            shapes::stroke_polyline(
                &mut cv,
                &[(bx - cap, bottom), (bx + cap, bottom)],
                wdt,
                bar,
                None,
            );
        }
        for &(x, y) in &px {
            shapes::fill_circle(&mut cv, x, y, dot + 1.0, [0, 0, 0, 200]);
            shapes::fill_circle(&mut cv, x, y, dot, MEASURED_BADGE);
        }
        Some((layer, g))
    }

    fn draw_legend(&mut self, frame: &mut Frame, r: Rect, l: &Legend, p: &Plan) {
        let key = format!("{:?} {:?} {}", (r.w, r.h), l, p.t.small_px);
        if self.legend.as_ref().is_none_or(|(k, _)| *k != key) {
            match legend_layer(r, l, p) {
                Some(layer) => self.legend = Some((key, layer)),
                None => return,
            }
        }
        if let Some((_, layer)) = &self.legend {
            shapes::composite(frame, layer, r.x.round() as i32, r.y.round() as i32);
        }
    }
}

/// The legend (heading, ramp with its end values, all with halos), drawn once.
fn legend_layer(r: Rect, l: &Legend, p: &Plan) -> Option<Pixmap> {
    let (halo, small, u) = (p.t.halo_px, p.t.small_px, p.unit);
    let mut layer = shapes::layer(r.w.ceil() as u32, r.h.ceil() as u32)?;
    let t = &p.t.legend_title;
    if let Some(line) = t.lines.first() {
        stamp_onto_halo(
            &mut layer,
            &stamp(line, t.size_px, t.weight, halo),
            halo,
            halo,
            SOFT_WHITE,
        );
    }
    let y = halo + t.height;
    let lo_w = measure_text(small, &p.t.legend_lo).0;
    let hi_w = measure_text(small, &p.t.legend_hi).0;
    stamp_onto_halo(
        &mut layer,
        &stamp(&p.t.legend_lo, small, Weight::Regular, halo),
        halo,
        y,
        WHITE,
    );
    let ramp_x = halo + lo_w + p.t.pad;
    let ramp_w = (r.w - 2.0 * halo - lo_w - hi_w - 2.0 * p.t.pad).max(1.0);
    let ramp_h = (1.5 * u).max(3.0);
    let ramp_y = y + (small - ramp_h) / 2.0 + 0.1 * small;
    let mut cv = layer.as_mut();
    shapes::fill_round_rect(
        &mut cv,
        ramp_x - 1.5,
        ramp_y - 1.5,
        ramp_w + 3.0,
        ramp_h + 3.0,
        1.0,
        HALO,
    );
    shapes::fill_ramp(&mut cv, ramp_x, ramp_y, ramp_w, ramp_h, &l.stops);
    stamp_onto_halo(
        &mut layer,
        &stamp(&p.t.legend_hi, small, Weight::Regular, halo),
        ramp_x + ramp_w + p.t.pad,
        y,
        WHITE,
    );
    Some(layer)
}

/// Source-over of a text stamp (glyphs only) onto a premultiplied layer at (x, y).
fn stamp_onto(layer: &mut Pixmap, s: &Stamp, x: f32, y: f32, rgba: [u8; 4]) {
    put_stamp(layer, s, x, y, rgba, None);
}

/// Source-over of a text stamp, halo then glyphs, onto a premultiplied layer at (x, y).
fn stamp_onto_halo(layer: &mut Pixmap, s: &Stamp, x: f32, y: f32, rgba: [u8; 4]) {
    put_stamp(layer, s, x, y, rgba, Some(HALO));
}

fn put_stamp(layer: &mut Pixmap, s: &Stamp, x: f32, y: f32, rgba: [u8; 4], halo: Option<[u8; 4]>) {
    // Draw through a scratch frame of the stamp's size: transparent, then blended by coverage.
    let (lw, lh) = (layer.width() as i64, layer.height() as i64);
    let (ox, oy) = (
        x.round() as i64 - s.pad as i64,
        y.round() as i64 - s.pad as i64,
    );
    let cov = s.coverage();
    let data = layer.data_mut();
    for sy in 0..s.height {
        let py = oy + sy as i64;
        if py < 0 || py >= lh {
            continue;
        }
        for sx in 0..s.width {
            let px = ox + sx as i64;
            if px < 0 || px >= lw {
                continue;
            }
            let (g, h) = cov(sx, sy);
            let i = ((py * lw + px) * 4) as usize;
            for (colour, a) in halo
                .map(|c| (c, h * c[3] as f32 / 255.0))
                .into_iter()
                .chain(std::iter::once((rgba, g * rgba[3] as f32 / 255.0)))
            {
                if a <= 0.0 {
                    continue;
                }
                // Premultiplied source-over.
                for k in 0..3 {
                    let d = data[i + k] as f32;
                    data[i + k] = (colour[k] as f32 * a + d * (1.0 - a) + 0.5) as u8;
                }
                let da = data[i + 3] as f32;
                data[i + 3] = (255.0 * a + da * (1.0 - a) + 0.5) as u8;
            }
        }
    }
}
