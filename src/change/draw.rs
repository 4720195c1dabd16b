//! Small drawing helpers on a `Frame` for maps and charts: rectangles, lines, triangles (through the
//! tiny-skia rasteriser, `annotate::shapes`), text, ticks.
//!
//! All coordinates are pixels with the origin at the top-left; everything clips to the frame.

use crate::annotate::shapes;
use crate::annotate::text::{draw_text, measure_text};
use crate::render::Frame;

/// Opaque colour.
pub const BLACK: [u8; 4] = [0, 0, 0, 255];

/// A white frame.
pub fn blank(width: u32, height: u32) -> Frame {
    let mut f = Frame::new(width, height);
    f.rgba.fill(255);
    f
}

/// Fills the rectangle with top-left (x, y) and size (w, h) (tiny-skia, anti-aliased edges).
pub fn fill_rect(frame: &mut Frame, x: f32, y: f32, w: f32, h: f32, rgba: [u8; 4]) {
    if let Some(mut c) = shapes::canvas(frame) {
        shapes::fill_round_rect(&mut c, x, y, w, h, 0.0, rgba);
    }
}

/// Outlines the rectangle with a 1-pixel line.
pub fn stroke_rect(frame: &mut Frame, x: f32, y: f32, w: f32, h: f32, rgba: [u8; 4]) {
    fill_rect(frame, x, y, w, 1.0, rgba);
    fill_rect(frame, x, y + h - 1.0, w, 1.0, rgba);
    fill_rect(frame, x, y, 1.0, h, rgba);
    fill_rect(frame, x + w - 1.0, y, 1.0, h, rgba);
}

/// Draws a line `width` pixels wide from (x0, y0) to (x1, y1), round ends.
pub fn line(frame: &mut Frame, x0: f32, y0: f32, x1: f32, y1: f32, width: f32, rgba: [u8; 4]) {
    if let Some(mut c) = shapes::canvas(frame) {
        shapes::stroke_polyline(&mut c, &[(x0, y0), (x1, y1)], width, rgba, None);
    }
}

/// Fills the triangle (a, b, c).
pub fn fill_triangle(
    frame: &mut Frame,
    a: (f32, f32),
    b: (f32, f32),
    c: (f32, f32),
    rgba: [u8; 4],
) {
    if let Some(mut cv) = shapes::canvas(frame) {
        shapes::fill_polygon(&mut cv, &[a, b, c], rgba);
    }
}

/// Where a text is anchored horizontally.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Anchor {
    /// `x` is the left edge.
    Left,
    /// `x` is the centre.
    Centre,
    /// `x` is the right edge.
    Right,
}

/// Draws text with its top at `y`, anchored at `x`.
pub fn text(
    frame: &mut Frame,
    x: f32,
    y: f32,
    size_px: f32,
    anchor: Anchor,
    rgba: [u8; 4],
    s: &str,
) {
    let (w, _) = measure_text(size_px, s);
    let left = match anchor {
        Anchor::Left => x,
        Anchor::Centre => x - w / 2.0,
        Anchor::Right => x - w,
    };
    draw_text(frame, left, y, size_px, rgba, s);
}

/// A "nice" step (1, 2 or 5 times a power of ten) close to `range / target_count`.
pub fn nice_step(range: f64, target_count: f64) -> f64 {
    if !(range.is_finite() && range > 0.0) {
        return 1.0;
    }
    let raw = range / target_count.max(1.0);
    let pow = 10f64.powf(raw.log10().floor());
    let m = raw / pow;
    let nice = if m < 1.5 {
        1.0
    } else if m < 3.5 {
        2.0
    } else if m < 7.5 {
        5.0
    } else {
        10.0
    };
    nice * pow
}

/// The largest 1/2/5 × 10^k not above `limit`.
pub fn nice_floor(limit: f64) -> f64 {
    if !(limit.is_finite() && limit > 0.0) {
        return 1.0;
    }
    let pow = 10f64.powf(limit.log10().floor());
    let m = limit / pow;
    let nice = if m >= 5.0 {
        5.0
    } else if m >= 2.0 {
        2.0
    } else {
        1.0
    };
    nice * pow
}

/// Formats a value with as many decimals as a tick step needs.
pub fn format_tick(v: f64, step: f64) -> String {
    let decimals = if step >= 1.0 {
        0
    } else {
        (-step.log10().floor()) as usize
    }
    .min(6);
    let s = format!("{v:.decimals$}");
    if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') {
        s[1..].to_string()
    } else {
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nice_numbers() {
        // Check: common practice, no source — 1-2-5 tick steps
        assert_eq!(nice_step(10.0, 5.0), 2.0);
        assert_eq!(nice_step(0.9, 5.0), 0.2);
        assert_eq!(nice_floor(37.0), 20.0);
        assert_eq!(nice_floor(600.0), 500.0);
        assert_eq!(format_tick(-0.0001, 0.5), "0.0");
        assert_eq!(format_tick(2.5, 0.5), "2.5");
    }

    #[test]
    fn shapes_stay_inside_and_fill() {
        let mut f = blank(20, 10);
        fill_rect(&mut f, -5.0, -5.0, 8.0, 8.0, BLACK);
        assert_eq!(&f.rgba[0..4], &BLACK);
        // Continuous coordinates: row 9 spans y 9.0 to 10.0, so a 1-pixel line on y = 9.5 fills it.
        line(&mut f, 0.0, 9.5, 19.0, 9.5, 1.0, [255, 0, 0, 255]);
        let i = (9 * 20 + 10) * 4;
        assert_eq!(&f.rgba[i..i + 4], &[255, 0, 0, 255]);
        fill_triangle(
            &mut f,
            (10.0, 0.0),
            (19.0, 0.0),
            (19.0, 8.0),
            [0, 0, 255, 255],
        );
        let j = (20 + 18) * 4; // row 1, column 18
        assert_eq!(&f.rgba[j..j + 4], &[0, 0, 255, 255]);
    }
}
