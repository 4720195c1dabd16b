//! Small drawing helpers on a `Frame` for maps and charts: rectangles, lines, triangles (through the
//! tiny-skia rasteriser, `annotate::shapes`), text, ticks.
//!
//! All coordinates are pixels with the origin at the top-left; everything clips to the frame.

use crate::annotate::shapes;
use crate::annotate::text::{draw_text, draw_text_bold, measure_text, measure_text_bold};
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

/// Fills a circle of radius `r` around (cx, cy).
pub fn fill_circle(frame: &mut Frame, cx: f32, cy: f32, r: f32, rgba: [u8; 4]) {
    if let Some(mut c) = shapes::canvas(frame) {
        shapes::fill_circle(&mut c, cx, cy, r, rgba);
    }
}

/// Strokes every polyline, `width` wide, optionally dashed (on, off) along each polyline.
pub fn polylines(
    frame: &mut Frame,
    lines: &[Vec<(f32, f32)>],
    width: f32,
    rgba: [u8; 4],
    dash: Option<(f32, f32)>,
) {
    if let Some(mut c) = shapes::canvas(frame) {
        for l in lines {
            shapes::stroke_polyline(&mut c, l, width, rgba, dash);
        }
    }
}

/// The contour of `z` at `level` as polylines in pixels: marching squares over the samples of a
/// grid taken every `step` cells (sample (r, c) is the centre of cell (r·step, c·step), drawn at
/// `(x0 + (c·step + 0.5)·scale, y0 + (r·step + 0.5)·scale)`), segments joined end to end through the
/// grid edges they cross. Samples without data break the line.
pub fn contour_lines(
    z: &ndarray::ArrayRef2<f32>,
    level: f64,
    step: usize,
    scale: f64,
    (x0, y0): (f32, f32),
) -> Vec<Vec<(f32, f32)>> {
    use std::collections::HashMap;
    let (nr, nc) = z.dim();
    if nr < 2 || nc < 2 {
        return Vec::new();
    }
    let at = |r: usize, c: usize| z[[r, c]] as f64 - level;
    let px = |r: f64, c: f64| -> (f32, f32) {
        (
            x0 + ((c * step as f64 + 0.5) * scale) as f32,
            y0 + ((r * step as f64 + 0.5) * scale) as f32,
        )
    };
    // Edge ids: 2·(r·nc + c) for the edge from (r, c) to (r, c+1), +1 for (r, c) to (r+1, c).
    let mut point: HashMap<usize, (f32, f32)> = HashMap::new();
    let mut segs: Vec<(usize, usize)> = Vec::new();
    for r in 0..nr - 1 {
        for c in 0..nc - 1 {
            let v = [at(r, c), at(r, c + 1), at(r + 1, c + 1), at(r + 1, c)];
            if v.iter().any(|x| !x.is_finite()) {
                continue;
            }
            // Corners in order TL, TR, BR, BL; the edges between them and their ids.
            let edges = [
                (2 * (r * nc + c), (0, 1)),
                (2 * (r * nc + c + 1) + 1, (1, 2)),
                (2 * ((r + 1) * nc + c), (3, 2)),
                (2 * (r * nc + c) + 1, (0, 3)),
            ];
            let corner = [(r, c), (r, c + 1), (r + 1, c + 1), (r + 1, c)];
            let mut crossing = Vec::with_capacity(4);
            for &(id, (i, j)) in &edges {
                let (a, b) = (v[i], v[j]);
                if (a >= 0.0) != (b >= 0.0) {
                    let t = a / (a - b);
                    let (ra, ca) = corner[i];
                    let (rb, cb) = corner[j];
                    let p = px(
                        ra as f64 + t * (rb as f64 - ra as f64),
                        ca as f64 + t * (cb as f64 - ca as f64),
                    );
                    point.insert(id, p);
                    crossing.push(id);
                }
            }
            match crossing.len() {
                2 => segs.push((crossing[0], crossing[1])),
                // A saddle: pair the crossings by the cell's mean (the usual disambiguation).
                4 => {
                    let mean = v.iter().sum::<f64>() / 4.0;
                    if (mean >= 0.0) == (v[0] >= 0.0) {
                        segs.push((crossing[0], crossing[1]));
                        segs.push((crossing[2], crossing[3]));
                    } else {
                        segs.push((crossing[0], crossing[3]));
                        segs.push((crossing[1], crossing[2]));
                    }
                }
                _ => {}
            }
        }
    }
    // Join segments into polylines through shared edges.
    let mut by_edge: HashMap<usize, Vec<usize>> = HashMap::new();
    for (k, &(a, b)) in segs.iter().enumerate() {
        by_edge.entry(a).or_default().push(k);
        by_edge.entry(b).or_default().push(k);
    }
    let mut used = vec![false; segs.len()];
    let mut out = Vec::new();
    for start in 0..segs.len() {
        if used[start] {
            continue;
        }
        used[start] = true;
        let (a, b) = segs[start];
        let mut chain = std::collections::VecDeque::from([a, b]);
        for forward in [true, false] {
            loop {
                let end = if forward { chain.back() } else { chain.front() };
                let Some(&end) = end else { break };
                let next = by_edge
                    .get(&end)
                    .and_then(|ks| ks.iter().copied().find(|&k| !used[k]));
                let Some(k) = next else { break };
                used[k] = true;
                let (p, q) = segs[k];
                let other = if p == end { q } else { p };
                if forward {
                    chain.push_back(other);
                } else {
                    chain.push_front(other);
                }
            }
        }
        out.push(
            chain
                .iter()
                .filter_map(|id| point.get(id).copied())
                .collect(),
        );
    }
    out
}

/// Width in pixels of `s` at `size_px`.
pub fn text_width(size_px: f32, s: &str) -> f32 {
    measure_text(size_px, s).0
}

/// Breaks `s` at spaces into lines no wider than `max_w` at `size_px` (a word wider than that
/// stands alone).
pub fn wrap(s: &str, size_px: f32, max_w: f32) -> Vec<String> {
    let mut out = Vec::new();
    let mut cur = String::new();
    for word in s.split(' ') {
        let trial = if cur.is_empty() {
            word.to_string()
        } else {
            format!("{cur} {word}")
        };
        if !cur.is_empty() && text_width(size_px, &trial) > max_w {
            out.push(std::mem::take(&mut cur));
            cur = word.to_string();
        } else {
            cur = trial;
        }
    }
    if !cur.is_empty() {
        out.push(cur);
    }
    out
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

impl Anchor {
    /// The left edge of a run of width `w` anchored at `x`.
    fn left_edge(self, x: f32, w: f32) -> f32 {
        match self {
            Anchor::Left => x,
            Anchor::Centre => x - w / 2.0,
            Anchor::Right => x - w,
        }
    }
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
    draw_text(frame, anchor.left_edge(x, w), y, size_px, rgba, s);
}

/// Draws bold text with its top at `y`, anchored at `x`.
pub fn text_bold(
    frame: &mut Frame,
    x: f32,
    y: f32,
    size_px: f32,
    anchor: Anchor,
    rgba: [u8; 4],
    s: &str,
) {
    let (w, _) = measure_text_bold(size_px, s);
    draw_text_bold(frame, anchor.left_edge(x, w), y, size_px, rgba, s);
}

/// Draws bold text on a white halo (readable over a map), top at `y`, anchored at `x`.
pub fn text_halo(
    frame: &mut Frame,
    x: f32,
    y: f32,
    size_px: f32,
    anchor: Anchor,
    rgba: [u8; 4],
    s: &str,
) {
    let white = [255, 255, 255, 255];
    let d = (size_px / 12.0).max(1.0);
    for (dx, dy) in [
        (-d, 0.0),
        (d, 0.0),
        (0.0, -d),
        (0.0, d),
        (-d, -d),
        (d, d),
        (-d, d),
        (d, -d),
    ] {
        text_bold(frame, x + dx, y + dy, size_px, anchor, white, s);
    }
    text_bold(frame, x, y, size_px, anchor, rgba, s);
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
