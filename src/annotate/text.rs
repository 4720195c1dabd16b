//! Text drawn into a `Frame` with the embedded DejaVu Sans font (regular and bold), alpha-blended.
//!
//! The fonts live in `src/annotate/font/` with their licence (`LICENSE-DejaVu.txt`) and are compiled
//! into the binary, so labels look the same on every machine. `size_px` is the line height in pixels
//! (ascent to descent); `(x, y)` is the top-left corner of the line box. Pixels outside the frame are
//! skipped, so drawing never panics; the layout keeps whole glyphs inside the frame.

use std::sync::OnceLock;

use ab_glyph::{point, Font, FontRef, PxScale, ScaleFont};

use crate::render::Frame;

static REGULAR_TTF: &[u8] = include_bytes!("font/DejaVuSans.ttf");
static BOLD_TTF: &[u8] = include_bytes!("font/DejaVuSans-Bold.ttf");

/// Weight of the typeface.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Weight {
    /// DejaVu Sans.
    Regular,
    /// DejaVu Sans Bold.
    Bold,
}

fn font(weight: Weight) -> &'static FontRef<'static> {
    static REGULAR: OnceLock<FontRef<'static>> = OnceLock::new();
    static BOLD: OnceLock<FontRef<'static>> = OnceLock::new();
    let (cell, bytes) = match weight {
        Weight::Regular => (&REGULAR, REGULAR_TTF),
        Weight::Bold => (&BOLD, BOLD_TTF),
    };
    // The bytes are compiled in and known to parse (checked by a unit test), so this cannot fail
    // on user input.
    cell.get_or_init(|| FontRef::try_from_slice(bytes).expect("embedded DejaVu font parses"))
}

/// Draws `text` with its top-left corner at (x, y) pixels, `size_px` tall, in `rgba` (alpha blends).
pub fn draw_text(frame: &mut Frame, x: f32, y: f32, size_px: f32, rgba: [u8; 4], text: &str) {
    draw_text_weighted(frame, x, y, size_px, rgba, text, Weight::Regular);
}

/// Like [`draw_text`] in bold.
pub fn draw_text_bold(frame: &mut Frame, x: f32, y: f32, size_px: f32, rgba: [u8; 4], text: &str) {
    draw_text_weighted(frame, x, y, size_px, rgba, text, Weight::Bold);
}

/// Width and height in pixels that `draw_text` would cover.
pub fn measure_text(size_px: f32, text: &str) -> (f32, f32) {
    measure_text_weighted(size_px, text, Weight::Regular)
}

/// Width and height in pixels that [`draw_text_bold`] would cover.
pub fn measure_text_bold(size_px: f32, text: &str) -> (f32, f32) {
    measure_text_weighted(size_px, text, Weight::Bold)
}

/// Width and height in pixels of one line of `text` at `size_px` in `weight`.
pub fn measure_text_weighted(size_px: f32, text: &str, weight: Weight) -> (f32, f32) {
    if !size_px.is_finite() || size_px <= 0.0 {
        return (0.0, 0.0);
    }
    let scaled = font(weight).as_scaled(PxScale::from(size_px));
    let mut width = 0.0f32;
    let mut prev = None;
    for c in text.chars() {
        let id = scaled.glyph_id(c);
        if let Some(p) = prev {
            width += scaled.kern(p, id);
        }
        width += scaled.h_advance(id);
        prev = Some(id);
    }
    (width, size_px)
}

/// Draws one line of `text` in `weight`; see [`draw_text`].
pub fn draw_text_weighted(
    frame: &mut Frame,
    x: f32,
    y: f32,
    size_px: f32,
    rgba: [u8; 4],
    text: &str,
    weight: Weight,
) {
    if !size_px.is_finite() || size_px <= 0.0 || !x.is_finite() || !y.is_finite() || rgba[3] == 0 {
        return;
    }
    let f = font(weight);
    let scaled = f.as_scaled(PxScale::from(size_px));
    let baseline = y + scaled.ascent();
    let mut caret = x;
    let mut prev = None;
    let (w, h) = (frame.width as i64, frame.height as i64);
    let alpha = rgba[3] as f32 / 255.0;
    for c in text.chars() {
        let id = scaled.glyph_id(c);
        if let Some(p) = prev {
            caret += scaled.kern(p, id);
        }
        let glyph = id.with_scale_and_position(PxScale::from(size_px), point(caret, baseline));
        caret += scaled.h_advance(id);
        prev = Some(id);
        let Some(outline) = f.outline_glyph(glyph) else {
            continue;
        };
        let bounds = outline.px_bounds();
        let (left, top) = (bounds.min.x as i64, bounds.min.y as i64);
        outline.draw(|gx, gy, coverage| {
            let px = left + gx as i64;
            let py = top + gy as i64;
            if px < 0 || py < 0 || px >= w || py >= h {
                return;
            }
            let a = coverage.clamp(0.0, 1.0) * alpha;
            blend_pixel(frame, px as usize, py as usize, rgba, a);
        });
    }
}

/// One line of text rasterised once, with a halo around its glyphs, to be put on any number of
/// frames ([`draw_stamp`]): light text with a dark halo reads on sky, sand and water alike without
/// a box hiding what lies behind it.
#[derive(Debug, Clone)]
pub struct Stamp {
    /// Width in pixels, halo included.
    pub width: usize,
    /// Height in pixels, halo included.
    pub height: usize,
    /// Halo margin on each side, pixels: the line box starts this far inside the stamp.
    pub pad: usize,
    glyph: Vec<f32>,
    halo: Vec<f32>,
}

impl Stamp {
    /// Coverage of the glyphs and of the halo at stamp pixel (x, y), each in [0, 1].
    pub(crate) fn coverage(&self) -> impl Fn(usize, usize) -> (f32, f32) + '_ {
        move |x, y| {
            let k = y * self.width + x;
            (self.glyph[k], self.halo[k])
        }
    }
}

/// Rasterises `text` at `size_px` with a halo reaching `halo_px` beyond the glyphs.
pub fn stamp(text: &str, size_px: f32, weight: Weight, halo_px: f32) -> Stamp {
    let halo_px = if halo_px.is_finite() {
        halo_px.clamp(0.0, 8.0)
    } else {
        0.0
    };
    let (w, h) = measure_text_weighted(size_px, text, weight);
    let pad = halo_px.ceil() as usize + 1;
    let (sw, sh) = (
        w.ceil() as usize + 2 * pad + 1,
        h.ceil() as usize + 2 * pad + 1,
    );
    let mut glyph = vec![0.0f32; sw * sh];
    if size_px.is_finite() && size_px > 0.0 {
        let f = font(weight);
        let scaled = f.as_scaled(PxScale::from(size_px));
        let baseline = pad as f32 + scaled.ascent();
        let mut caret = pad as f32;
        let mut prev = None;
        for c in text.chars() {
            let id = scaled.glyph_id(c);
            if let Some(p) = prev {
                caret += scaled.kern(p, id);
            }
            let g = id.with_scale_and_position(PxScale::from(size_px), point(caret, baseline));
            caret += scaled.h_advance(id);
            prev = Some(id);
            let Some(outline) = f.outline_glyph(g) else {
                continue;
            };
            let b = outline.px_bounds();
            let (left, top) = (b.min.x as i64, b.min.y as i64);
            outline.draw(|gx, gy, cov| {
                let (px, py) = (left + gx as i64, top + gy as i64);
                if px >= 0 && py >= 0 && (px as usize) < sw && (py as usize) < sh {
                    let k = py as usize * sw + px as usize;
                    glyph[k] = (glyph[k] + cov).min(1.0);
                }
            });
        }
    }
    // Halo: the glyph coverage spread over a disc of radius halo_px, with a one-pixel soft edge.
    let mut halo = glyph.clone();
    if halo_px > 0.0 {
        let r = halo_px.ceil() as isize;
        let offsets: Vec<(isize, isize, f32)> = (-r..=r)
            .flat_map(|dy| (-r..=r).map(move |dx| (dx, dy)))
            .filter_map(|(dx, dy)| {
                let d = ((dx * dx + dy * dy) as f32).sqrt();
                let wgt = (halo_px + 0.5 - d).clamp(0.0, 1.0);
                (wgt > 0.0).then_some((dx, dy, wgt))
            })
            .collect();
        for y in 0..sh as isize {
            for x in 0..sw as isize {
                let mut m = 0.0f32;
                for &(dx, dy, wgt) in &offsets {
                    let (xx, yy) = (x + dx, y + dy);
                    if xx >= 0 && yy >= 0 && (xx as usize) < sw && (yy as usize) < sh {
                        m = m.max(glyph[yy as usize * sw + xx as usize] * wgt);
                    }
                }
                halo[y as usize * sw + x as usize] = m;
            }
        }
    }
    Stamp {
        width: sw,
        height: sh,
        pad,
        glyph,
        halo,
    }
}

/// Blends a [`Stamp`] onto `frame` with its line box's top-left corner at (x, y): the halo in
/// `halo_rgba`, then the glyphs in `rgba`. Pixels outside the frame are skipped.
pub fn draw_stamp(frame: &mut Frame, s: &Stamp, x: i32, y: i32, rgba: [u8; 4], halo_rgba: [u8; 4]) {
    let (fw, fh) = (frame.width as i64, frame.height as i64);
    let (ox, oy) = (x as i64 - s.pad as i64, y as i64 - s.pad as i64);
    let (fa, ha) = (rgba[3] as f32 / 255.0, halo_rgba[3] as f32 / 255.0);
    for sy in 0..s.height {
        let py = oy + sy as i64;
        if py < 0 || py >= fh {
            continue;
        }
        for sx in 0..s.width {
            let px = ox + sx as i64;
            if px < 0 || px >= fw {
                continue;
            }
            let k = sy * s.width + sx;
            let (h, g) = (s.halo[k], s.glyph[k]);
            if h > 0.0 {
                blend_pixel(frame, px as usize, py as usize, halo_rgba, h * ha);
            }
            if g > 0.0 {
                blend_pixel(frame, px as usize, py as usize, rgba, g * fa);
            }
        }
    }
}

/// Blends `rgba`'s colour over the pixel at (x, y) with opacity `a` in [0, 1]; the pixel stays opaque
/// if it was.
#[inline]
pub(crate) fn blend_pixel(frame: &mut Frame, x: usize, y: usize, rgba: [u8; 4], a: f32) {
    if a <= 0.0 {
        return;
    }
    let i = (y * frame.width as usize + x) * 4;
    let Some(p) = frame.rgba.get_mut(i..i + 4) else {
        return;
    };
    let a = a.min(1.0);
    for c in 0..3 {
        let v = p[c] as f32 + (rgba[c] as f32 - p[c] as f32) * a;
        p[c] = (v + 0.5) as u8;
    }
    let out_a = p[3] as f32 + (255.0 - p[3] as f32) * a;
    p[3] = (out_a + 0.5) as u8;
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn embedded_fonts_parse_and_measure() {
        let (w, h) = measure_text(20.0, "Peak 12.5 m");
        assert!(w > 50.0 && w < 200.0, "width {w}");
        assert_eq!(h, 20.0);
        let (wb, _) = measure_text_bold(20.0, "Peak 12.5 m");
        // Check: common practice, no source — a bold face sets wider than the regular one.
        assert!(wb > w);
        // Width scales linearly with size (within rounding of kerning, 1 %).
        let (w2, _) = measure_text(40.0, "Peak 12.5 m");
        assert!((w2 / w - 2.0).abs() < 0.02);
    }

    #[test]
    fn text_is_drawn_inside_its_measured_box() {
        let mut frame = Frame::new(200, 60);
        let (w, h) = measure_text(24.0, "Dune 2031");
        draw_text(
            &mut frame,
            10.0,
            10.0,
            24.0,
            [255, 255, 255, 255],
            "Dune 2031",
        );
        let mut lit = 0;
        for y in 0..60usize {
            for x in 0..200usize {
                let p = &frame.rgba[(y * 200 + x) * 4..][..3];
                if p.iter().any(|&v| v > 0) {
                    lit += 1;
                    assert!(x as f32 >= 9.0 && (x as f32) <= 10.0 + w + 1.0, "x {x}");
                    assert!(y as f32 >= 9.0 && (y as f32) <= 10.0 + h + 1.0, "y {y}");
                }
            }
        }
        assert!(lit > 50);
    }

    #[test]
    fn drawing_off_frame_does_not_panic() {
        let mut frame = Frame::new(8, 6);
        draw_text(
            &mut frame,
            -30.0,
            -5.0,
            40.0,
            [255, 0, 0, 255],
            "Wide text off the edge",
        );
        draw_text(&mut frame, 0.0, 0.0, f32::NAN, [255, 0, 0, 255], "x");
        draw_text_bold(&mut frame, 1e9, 1e9, 10.0, [255, 0, 0, 255], "x");
    }
}
