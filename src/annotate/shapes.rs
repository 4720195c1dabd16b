//! Anti-aliased shapes on a `Frame` (or a cached layer) through the tiny-skia 2D rasteriser: filled
//! and rounded rectangles, circles, rings, polylines (solid or dashed), polygons and a colour ramp.
//!
//! Frames are opaque RGBA, so their bytes already are the premultiplied RGBA tiny-skia expects and
//! it draws on them in place. A layer made with [`layer`] is transparent and premultiplied; put it
//! on a frame with [`composite`]. Every function ignores non-finite or empty input, so none panics.

use tiny_skia::{
    Color, FillRule, GradientStop, LinearGradient, Paint, PathBuilder, Pixmap, PixmapMut,
    PixmapPaint, Point, SpreadMode, Stroke, StrokeDash, Transform,
};

use crate::render::Frame;

/// A canvas over a frame's pixels; None for an empty or short buffer.
pub fn canvas(frame: &mut Frame) -> Option<PixmapMut<'_>> {
    let (w, h) = (frame.width, frame.height);
    PixmapMut::from_bytes(&mut frame.rgba, w, h)
}

/// A transparent layer of `w` x `h` pixels to draw once and composite many times.
pub fn layer(w: u32, h: u32) -> Option<Pixmap> {
    Pixmap::new(w.max(1), h.max(1))
}

/// Puts `layer` on `frame` with its top-left corner at (x, y), source-over.
pub fn composite(frame: &mut Frame, layer: &Pixmap, x: i32, y: i32) {
    if let Some(mut c) = canvas(frame) {
        c.draw_pixmap(
            x,
            y,
            layer.as_ref(),
            &PixmapPaint::default(),
            Transform::identity(),
            None,
        );
    }
}

fn paint(rgba: [u8; 4]) -> Paint<'static> {
    let mut p = Paint::default();
    p.set_color_rgba8(rgba[0], rgba[1], rgba[2], rgba[3]);
    p.anti_alias = true;
    p
}

fn finite(v: &[f32]) -> bool {
    v.iter().all(|x| x.is_finite())
}

/// Fills a rectangle with corners rounded to radius `r` (0 for square corners).
pub fn fill_round_rect(c: &mut PixmapMut, x: f32, y: f32, w: f32, h: f32, r: f32, rgba: [u8; 4]) {
    if !finite(&[x, y, w, h, r]) || w <= 0.0 || h <= 0.0 {
        return;
    }
    let r = r.clamp(0.0, w.min(h) / 2.0);
    // Cubic Bézier quarter circles: handle length 0.5523·r (common practice, no source).
    let k = 0.552_284_8 * r;
    let mut pb = PathBuilder::new();
    pb.move_to(x + r, y);
    pb.line_to(x + w - r, y);
    pb.cubic_to(x + w - r + k, y, x + w, y + r - k, x + w, y + r);
    pb.line_to(x + w, y + h - r);
    pb.cubic_to(x + w, y + h - r + k, x + w - r + k, y + h, x + w - r, y + h);
    pb.line_to(x + r, y + h);
    pb.cubic_to(x + r - k, y + h, x, y + h - r + k, x, y + h - r);
    pb.line_to(x, y + r);
    pb.cubic_to(x, y + r - k, x + r - k, y, x + r, y);
    pb.close();
    if let Some(path) = pb.finish() {
        c.fill_path(
            &path,
            &paint(rgba),
            FillRule::Winding,
            Transform::identity(),
            None,
        );
    }
}

/// Fills a disc of radius `r` centred on (cx, cy).
pub fn fill_circle(c: &mut PixmapMut, cx: f32, cy: f32, r: f32, rgba: [u8; 4]) {
    if !finite(&[cx, cy, r]) || r <= 0.0 {
        return;
    }
    if let Some(path) = PathBuilder::from_circle(cx, cy, r) {
        c.fill_path(
            &path,
            &paint(rgba),
            FillRule::Winding,
            Transform::identity(),
            None,
        );
    }
}

/// Strokes a circle of radius `r` with a line `width` wide.
pub fn stroke_circle(c: &mut PixmapMut, cx: f32, cy: f32, r: f32, width: f32, rgba: [u8; 4]) {
    if !finite(&[cx, cy, r, width]) || r <= 0.0 || width <= 0.0 {
        return;
    }
    if let Some(path) = PathBuilder::from_circle(cx, cy, r) {
        let stroke = Stroke {
            width,
            ..Stroke::default()
        };
        c.stroke_path(&path, &paint(rgba), &stroke, Transform::identity(), None);
    }
}

/// Strokes the polyline through `pts`, `width` wide with round joins and ends; `dash` gives
/// (on, off) lengths in pixels for a dashed line.
pub fn stroke_polyline(
    c: &mut PixmapMut,
    pts: &[(f32, f32)],
    width: f32,
    rgba: [u8; 4],
    dash: Option<(f32, f32)>,
) {
    let pts: Vec<(f32, f32)> = pts
        .iter()
        .copied()
        .filter(|(x, y)| x.is_finite() && y.is_finite())
        .collect();
    if pts.len() < 2 || !(width.is_finite() && width > 0.0) {
        return;
    }
    let mut pb = PathBuilder::new();
    pb.move_to(pts[0].0, pts[0].1);
    for p in &pts[1..] {
        pb.line_to(p.0, p.1);
    }
    let Some(path) = pb.finish() else { return };
    let stroke = Stroke {
        width,
        line_cap: tiny_skia::LineCap::Round,
        line_join: tiny_skia::LineJoin::Round,
        dash: dash.and_then(|(on, off)| StrokeDash::new(vec![on, off], 0.0)),
        ..Stroke::default()
    };
    c.stroke_path(&path, &paint(rgba), &stroke, Transform::identity(), None);
}

/// Fills the polygon through `pts` (closed).
pub fn fill_polygon(c: &mut PixmapMut, pts: &[(f32, f32)], rgba: [u8; 4]) {
    if pts.len() < 3 || !pts.iter().all(|(x, y)| x.is_finite() && y.is_finite()) {
        return;
    }
    let mut pb = PathBuilder::new();
    pb.move_to(pts[0].0, pts[0].1);
    for p in &pts[1..] {
        pb.line_to(p.0, p.1);
    }
    pb.close();
    if let Some(path) = pb.finish() {
        c.fill_path(
            &path,
            &paint(rgba),
            FillRule::Winding,
            Transform::identity(),
            None,
        );
    }
}

/// Fills a rectangle with a left-to-right ramp through `stops` (evenly spaced, at least one).
pub fn fill_ramp(c: &mut PixmapMut, x: f32, y: f32, w: f32, h: f32, stops: &[[u8; 3]]) {
    if stops.is_empty() || !finite(&[x, y, w, h]) || w <= 0.0 || h <= 0.0 {
        return;
    }
    let Some(rect) = tiny_skia::Rect::from_xywh(x, y, w, h) else {
        return;
    };
    let mut p = Paint::default();
    if stops.len() == 1 {
        let s = stops[0];
        p.set_color_rgba8(s[0], s[1], s[2], 255);
    } else {
        let n = (stops.len() - 1) as f32;
        let grad: Vec<GradientStop> = stops
            .iter()
            .enumerate()
            .map(|(i, s)| GradientStop::new(i as f32 / n, Color::from_rgba8(s[0], s[1], s[2], 255)))
            .collect();
        match LinearGradient::new(
            Point::from_xy(x, y),
            Point::from_xy(x + w, y),
            grad,
            SpreadMode::Pad,
            Transform::identity(),
        ) {
            Some(shader) => p.shader = shader,
            None => return,
        }
    }
    c.fill_rect(rect, &p, Transform::identity(), None);
}

#[cfg(test)]
mod tests {
    use super::*;

    fn px(f: &Frame, x: usize, y: usize) -> [u8; 4] {
        let i = (y * f.width as usize + x) * 4;
        [f.rgba[i], f.rgba[i + 1], f.rgba[i + 2], f.rgba[i + 3]]
    }

    #[test]
    fn half_opaque_rect_blends_halfway_and_frame_stays_opaque() {
        let mut f = Frame::new(10, 10);
        let mut c = canvas(&mut f).unwrap();
        fill_round_rect(&mut c, 2.0, 2.0, 4.0, 4.0, 0.0, [200, 100, 0, 128]);
        // Check: analytic — alpha 128/255 over black gives 200·0.502 = 100 (±1 for rounding)
        let p = px(&f, 3, 3);
        assert!(
            (p[0] as i32 - 100).abs() <= 1 && (p[1] as i32 - 50).abs() <= 1,
            "{p:?}"
        );
        assert_eq!(p[3], 255);
        assert_eq!(px(&f, 7, 7), [0, 0, 0, 255]);
    }

    #[test]
    fn discs_rings_polygons_cover_what_they_should() {
        let mut f = Frame::new(40, 40);
        let mut c = canvas(&mut f).unwrap();
        fill_circle(&mut c, 10.0, 10.0, 4.0, [255, 255, 255, 255]);
        fill_polygon(
            &mut c,
            &[(25.0, 25.0), (35.0, 25.0), (30.0, 35.0)],
            [0, 255, 0, 255],
        );
        stroke_circle(&mut c, 30.0, 10.0, 5.0, 2.0, [0, 0, 255, 255]);
        assert_eq!(px(&f, 10, 10)[0], 255);
        assert_eq!(px(&f, 16, 10)[0], 0);
        assert_eq!(px(&f, 30, 28)[1], 255);
        assert_eq!(px(&f, 25, 34)[1], 0);
        assert_eq!(px(&f, 30, 10)[2], 0);
        assert!(px(&f, 35, 10)[2] > 200);
    }

    #[test]
    fn a_layer_composites_where_it_is_put() {
        let mut l = layer(4, 4).unwrap();
        fill_round_rect(&mut l.as_mut(), 0.0, 0.0, 4.0, 4.0, 0.0, [255, 0, 0, 255]);
        let mut f = Frame::new(10, 10);
        composite(&mut f, &l, 5, 5);
        assert_eq!(px(&f, 6, 6), [255, 0, 0, 255]);
        assert_eq!(px(&f, 4, 4), [0, 0, 0, 255]);
    }

    #[test]
    fn nonsense_input_does_not_panic() {
        let mut f = Frame::new(4, 3);
        let mut c = canvas(&mut f).unwrap();
        stroke_polyline(
            &mut c,
            &[(-100.0, -100.0), (100.0, 100.0)],
            3.0,
            [255; 4],
            None,
        );
        stroke_polyline(
            &mut c,
            &[(f32::NAN, 0.0), (1.0, 1.0)],
            3.0,
            [255; 4],
            Some((2.0, 2.0)),
        );
        fill_circle(&mut c, 1e12, 1e12, 5.0, [255; 4]);
        fill_round_rect(&mut c, -5.0, -5.0, 100.0, 100.0, 8.0, [0, 0, 0, 100]);
        fill_polygon(&mut c, &[(0.0, 0.0), (1.0, 1.0), (2.0, 2.0)], [255; 4]);
        fill_ramp(&mut c, 0.0, 0.0, f32::NAN, 1.0, &[[1, 2, 3]]);
    }
}
