//! Small drawing helpers on a `Frame` for maps and charts: rectangles, lines, triangles, text, ticks.
//!
//! All coordinates are pixels with the origin at the top-left; everything clips to the frame.

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

/// Blends `rgba` over pixel (x, y) by its alpha; outside the frame does nothing.
pub fn blend(frame: &mut Frame, x: i64, y: i64, rgba: [u8; 4]) {
    if x < 0 || y < 0 || x >= frame.width as i64 || y >= frame.height as i64 {
        return;
    }
    let i = (y as usize * frame.width as usize + x as usize) * 4;
    let a = rgba[3] as u32;
    for (dst, &src) in frame.rgba[i..i + 3].iter_mut().zip(&rgba[..3]) {
        *dst = ((src as u32 * a + *dst as u32 * (255 - a) + 127) / 255) as u8;
    }
    frame.rgba[i + 3] = frame.rgba[i + 3].max(rgba[3]);
}

/// Fills the rectangle with top-left (x, y) and size (w, h).
pub fn fill_rect(frame: &mut Frame, x: f32, y: f32, w: f32, h: f32, rgba: [u8; 4]) {
    let (x0, y0) = (x.round() as i64, y.round() as i64);
    let (x1, y1) = ((x + w).round() as i64, (y + h).round() as i64);
    for yy in y0.max(0)..y1.min(frame.height as i64) {
        for xx in x0.max(0)..x1.min(frame.width as i64) {
            blend(frame, xx, yy, rgba);
        }
    }
}

/// Outlines the rectangle with a 1-pixel line.
pub fn stroke_rect(frame: &mut Frame, x: f32, y: f32, w: f32, h: f32, rgba: [u8; 4]) {
    fill_rect(frame, x, y, w, 1.0, rgba);
    fill_rect(frame, x, y + h - 1.0, w, 1.0, rgba);
    fill_rect(frame, x, y, 1.0, h, rgba);
    fill_rect(frame, x + w - 1.0, y, 1.0, h, rgba);
}

/// Draws a line `width` pixels wide from (x0, y0) to (x1, y1) by stamping squares every half pixel.
pub fn line(frame: &mut Frame, x0: f32, y0: f32, x1: f32, y1: f32, width: f32, rgba: [u8; 4]) {
    if !(x0.is_finite() && y0.is_finite() && x1.is_finite() && y1.is_finite()) {
        return;
    }
    let len = (x1 - x0).hypot(y1 - y0);
    // Limit the work for a line far outside the frame.
    let steps = ((len * 2.0).ceil() as usize).clamp(1, 20_000);
    let half = (width / 2.0).max(0.5);
    let mut last = (i64::MIN, i64::MIN);
    for k in 0..=steps {
        let t = k as f32 / steps as f32;
        let (x, y) = (x0 + (x1 - x0) * t, y0 + (y1 - y0) * t);
        let (xa, ya) = (
            (x - half + 0.5).floor() as i64,
            (y - half + 0.5).floor() as i64,
        );
        if (xa, ya) == last {
            continue;
        }
        last = (xa, ya);
        let n = (width.round() as i64).max(1);
        for yy in ya..ya + n {
            for xx in xa..xa + n {
                set(frame, xx, yy, rgba);
            }
        }
    }
}

/// Sets a pixel without blending (lines overdraw their own stamps).
fn set(frame: &mut Frame, x: i64, y: i64, rgba: [u8; 4]) {
    if x < 0 || y < 0 || x >= frame.width as i64 || y >= frame.height as i64 {
        return;
    }
    let i = (y as usize * frame.width as usize + x as usize) * 4;
    frame.rgba[i..i + 4].copy_from_slice(&rgba);
}

/// Fills the triangle (a, b, c), pixel centres inside count.
pub fn fill_triangle(
    frame: &mut Frame,
    a: (f32, f32),
    b: (f32, f32),
    c: (f32, f32),
    rgba: [u8; 4],
) {
    let x0 = a.0.min(b.0).min(c.0).floor().max(0.0) as i64;
    let x1 = a.0.max(b.0).max(c.0).ceil().min(frame.width as f32) as i64;
    let y0 = a.1.min(b.1).min(c.1).floor().max(0.0) as i64;
    let y1 = a.1.max(b.1).max(c.1).ceil().min(frame.height as f32) as i64;
    let edge = |p: (f32, f32), q: (f32, f32), x: f32, y: f32| {
        (q.0 - p.0) * (y - p.1) - (q.1 - p.1) * (x - p.0)
    };
    for y in y0..y1 {
        for x in x0..x1 {
            let (px, py) = (x as f32 + 0.5, y as f32 + 0.5);
            let (e0, e1, e2) = (edge(a, b, px, py), edge(b, c, px, py), edge(c, a, px, py));
            if (e0 >= 0.0 && e1 >= 0.0 && e2 >= 0.0) || (e0 <= 0.0 && e1 <= 0.0 && e2 <= 0.0) {
                blend(frame, x, y, rgba);
            }
        }
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
        line(&mut f, 0.0, 9.0, 19.0, 9.0, 1.0, [255, 0, 0, 255]);
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
