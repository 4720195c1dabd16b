//! Anti-aliased shapes blended onto a `Frame`: rectangles, lines, discs, rings and convex polygons.
//!
//! Coverage comes from the distance of the pixel centre to the shape's edge (one pixel of soft
//! edge), which is cheap and smooth enough for labels. Every function clips to the frame and
//! ignores non-finite input, so none can panic.

use super::text::blend_pixel;
use crate::render::Frame;

/// Pixel bounds `[x0, x1) x [y0, y1)` of a box grown by `pad`, clipped to the frame.
fn clip_box(
    frame: &Frame,
    x0: f32,
    y0: f32,
    x1: f32,
    y1: f32,
    pad: f32,
) -> Option<(usize, usize, usize, usize)> {
    if ![x0, y0, x1, y1, pad].iter().all(|v| v.is_finite()) {
        return None;
    }
    let xa = (x0.min(x1) - pad).floor().max(0.0);
    let ya = (y0.min(y1) - pad).floor().max(0.0);
    let xb = (x0.max(x1) + pad).ceil().min(frame.width as f32);
    let yb = (y0.max(y1) + pad).ceil().min(frame.height as f32);
    if xa >= xb || ya >= yb {
        return None;
    }
    Some((xa as usize, ya as usize, xb as usize, yb as usize))
}

/// Blends a filled rectangle with corners (x, y) and (x + w, y + h); fractional edges are partly covered.
pub fn fill_rect(frame: &mut Frame, x: f32, y: f32, w: f32, h: f32, rgba: [u8; 4]) {
    let Some((xa, ya, xb, yb)) = clip_box(frame, x, y, x + w, y + h, 0.0) else {
        return;
    };
    let a = rgba[3] as f32 / 255.0;
    for py in ya..yb {
        let cy = ((py as f32 + 1.0).min(y + h) - (py as f32).max(y)).clamp(0.0, 1.0);
        for px in xa..xb {
            let cx = ((px as f32 + 1.0).min(x + w) - (px as f32).max(x)).clamp(0.0, 1.0);
            blend_pixel(frame, px, py, rgba, a * cx * cy);
        }
    }
}

/// Blends a rectangle with rounded corners of radius `r` (a label panel).
pub fn fill_rounded_rect(frame: &mut Frame, x: f32, y: f32, w: f32, h: f32, r: f32, rgba: [u8; 4]) {
    let r = r.min(w / 2.0).min(h / 2.0).max(0.0);
    let Some((xa, ya, xb, yb)) = clip_box(frame, x, y, x + w, y + h, 0.0) else {
        return;
    };
    let a = rgba[3] as f32 / 255.0;
    let (cx0, cy0, cx1, cy1) = (x + r, y + r, x + w - r, y + h - r);
    for py in ya..yb {
        let fy = py as f32 + 0.5;
        for px in xa..xb {
            let fx = px as f32 + 0.5;
            // Signed distance to the rounded box: distance to the inner rectangle minus r.
            let dx = (cx0 - fx).max(fx - cx1).max(0.0);
            let dy = (cy0 - fy).max(fy - cy1).max(0.0);
            let inner = (cx0 - fx)
                .max(fx - cx1)
                .max((cy0 - fy).max(fy - cy1))
                .min(0.0);
            let d = (dx * dx + dy * dy).sqrt() + inner - r;
            let cov = (0.5 - d).clamp(0.0, 1.0);
            blend_pixel(frame, px, py, rgba, a * cov);
        }
    }
}

/// Blends a line from (x0, y0) to (x1, y1), `width` pixels wide, with round ends.
pub fn line(frame: &mut Frame, x0: f32, y0: f32, x1: f32, y1: f32, width: f32, rgba: [u8; 4]) {
    let half = (width / 2.0).max(0.35);
    let Some((xa, ya, xb, yb)) = clip_box(frame, x0, y0, x1, y1, half + 1.0) else {
        return;
    };
    let a = rgba[3] as f32 / 255.0;
    let (dx, dy) = (x1 - x0, y1 - y0);
    let len2 = dx * dx + dy * dy;
    for py in ya..yb {
        let fy = py as f32 + 0.5;
        for px in xa..xb {
            let fx = px as f32 + 0.5;
            let t = if len2 > 0.0 {
                (((fx - x0) * dx + (fy - y0) * dy) / len2).clamp(0.0, 1.0)
            } else {
                0.0
            };
            let (ex, ey) = (fx - (x0 + t * dx), fy - (y0 + t * dy));
            let d = (ex * ex + ey * ey).sqrt() - half;
            let cov = (0.5 - d).clamp(0.0, 1.0);
            blend_pixel(frame, px, py, rgba, a * cov);
        }
    }
}

/// Blends a filled disc of radius `r` centred on (cx, cy).
pub fn disc(frame: &mut Frame, cx: f32, cy: f32, r: f32, rgba: [u8; 4]) {
    ring_or_disc(frame, cx, cy, r, None, rgba);
}

/// Blends a ring of outer radius `r` and line `width` centred on (cx, cy).
pub fn ring(frame: &mut Frame, cx: f32, cy: f32, r: f32, width: f32, rgba: [u8; 4]) {
    ring_or_disc(frame, cx, cy, r, Some(width), rgba);
}

fn ring_or_disc(frame: &mut Frame, cx: f32, cy: f32, r: f32, width: Option<f32>, rgba: [u8; 4]) {
    let Some((xa, ya, xb, yb)) = clip_box(frame, cx - r, cy - r, cx + r, cy + r, 1.0) else {
        return;
    };
    let a = rgba[3] as f32 / 255.0;
    for py in ya..yb {
        let fy = py as f32 + 0.5 - cy;
        for px in xa..xb {
            let fx = px as f32 + 0.5 - cx;
            let dist = (fx * fx + fy * fy).sqrt();
            let d = match width {
                None => dist - r,
                Some(w) => (dist - r).max(r - w - dist),
            };
            let cov = (0.5 - d).clamp(0.0, 1.0);
            blend_pixel(frame, px, py, rgba, a * cov);
        }
    }
}

/// Blends a convex polygon (vertices in either winding order).
pub fn convex_polygon(frame: &mut Frame, pts: &[(f32, f32)], rgba: [u8; 4]) {
    if pts.len() < 3 {
        return;
    }
    let (mut x0, mut y0, mut x1, mut y1) = (f32::MAX, f32::MAX, f32::MIN, f32::MIN);
    for &(x, y) in pts {
        x0 = x0.min(x);
        y0 = y0.min(y);
        x1 = x1.max(x);
        y1 = y1.max(y);
    }
    let Some((xa, ya, xb, yb)) = clip_box(frame, x0, y0, x1, y1, 1.0) else {
        return;
    };
    // Orientation: signed area tells which side of each edge is inside.
    let mut area2 = 0.0;
    for i in 0..pts.len() {
        let (p, q) = (pts[i], pts[(i + 1) % pts.len()]);
        area2 += p.0 * q.1 - q.0 * p.1;
    }
    if area2.abs() < 1e-6 {
        return;
    }
    let sign = area2.signum();
    let a = rgba[3] as f32 / 255.0;
    for py in ya..yb {
        let fy = py as f32 + 0.5;
        for px in xa..xb {
            let fx = px as f32 + 0.5;
            // Largest signed distance outside any edge (negative inside).
            let mut d = f32::MIN;
            for i in 0..pts.len() {
                let (p, q) = (pts[i], pts[(i + 1) % pts.len()]);
                let (ex, ey) = (q.0 - p.0, q.1 - p.1);
                let len = (ex * ex + ey * ey).sqrt().max(1e-6);
                let cross = (ex * (fy - p.1) - ey * (fx - p.0)) / len;
                d = d.max(-cross * sign);
            }
            let cov = (0.5 - d).clamp(0.0, 1.0);
            blend_pixel(frame, px, py, rgba, a * cov);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn px(f: &Frame, x: usize, y: usize) -> [u8; 4] {
        let i = (y * f.width as usize + x) * 4;
        [f.rgba[i], f.rgba[i + 1], f.rgba[i + 2], f.rgba[i + 3]]
    }

    #[test]
    fn half_opaque_rect_blends_halfway() {
        let mut f = Frame::new(10, 10);
        fill_rect(&mut f, 2.0, 2.0, 4.0, 4.0, [200, 100, 0, 128]);
        // Check: analytic — alpha 128/255 over black gives round(200 * 0.50196) = 100.
        assert_eq!(px(&f, 3, 3), [100, 50, 0, 255]);
        assert_eq!(px(&f, 7, 7), [0, 0, 0, 255]);
    }

    #[test]
    fn disc_and_polygon_cover_their_centres_only() {
        let mut f = Frame::new(40, 40);
        disc(&mut f, 10.0, 10.0, 4.0, [255, 255, 255, 255]);
        assert_eq!(px(&f, 10, 10)[0], 255);
        assert_eq!(px(&f, 16, 10)[0], 0);
        convex_polygon(
            &mut f,
            &[(25.0, 25.0), (35.0, 25.0), (30.0, 35.0)],
            [0, 255, 0, 255],
        );
        assert_eq!(px(&f, 30, 28)[1], 255);
        assert_eq!(px(&f, 25, 34)[1], 0);
        ring(&mut f, 30.0, 10.0, 6.0, 2.0, [0, 0, 255, 255]);
        assert_eq!(px(&f, 30, 10)[2], 0);
        assert!(px(&f, 35, 10)[2] > 240);
    }

    #[test]
    fn shapes_off_frame_or_nan_do_not_panic() {
        let mut f = Frame::new(4, 3);
        line(&mut f, -100.0, -100.0, 100.0, 100.0, 3.0, [255; 4]);
        line(&mut f, f32::NAN, 0.0, 1.0, 1.0, 3.0, [255; 4]);
        disc(&mut f, 1e12, 1e12, 5.0, [255; 4]);
        fill_rounded_rect(&mut f, -5.0, -5.0, 100.0, 100.0, 8.0, [0, 0, 0, 100]);
        convex_polygon(&mut f, &[(0.0, 0.0), (1.0, 1.0), (2.0, 2.0)], [255; 4]);
    }
}
