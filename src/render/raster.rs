//! Projected, lit vertices -> pixels of one row band: depth-buffered triangle rasterisation.
//!
//! Why triangles and not ray casting: the reduced level of detail (see `lod.rs`) keeps the number of
//! triangles near the number of pixels, and one triangle set-up plus a few edge-function steps per
//! pixel is far cheaper than marching a ray per pixel across the height field (tens of samples
//! each). The depth buffer gives exact visibility for any view, including block sides.
//!
//! Each band owns its rows of the colour (linear RGB, f32) and depth (1/zc, 0 = far) buffers and
//! draws every triangle binned to it, in a fixed order, clipped to its rows. No band reads another's
//! pixels, so the image is the same whatever the number of threads. Pixel centres sit at
//! half-integers; a pixel is covered when all three edge functions at its centre are ≥ 0. Depth
//! (1/zc) is interpolated linearly in screen space (exact for a perspective projection); colour is
//! interpolated linearly in screen space (Gouraud), adequate for triangles of a few pixels.

/// A projected vertex: continuous pixel position, inverse depth and linear-light colour.
/// A vertex that must not be drawn (nodata, behind the camera) has `x = NaN`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Vert {
    /// Column (continuous).
    pub x: f32,
    /// Row (continuous, down).
    pub y: f32,
    /// 1 / depth along the line of sight.
    pub iz: f32,
    /// Linear RGB.
    pub rgb: [f32; 3],
    /// Opacity, 0 to 1: read only by translucent layers ([`draw_triangle_layer`]); opaque
    /// surfaces leave it at 1.
    pub a: f32,
}

impl Default for Vert {
    fn default() -> Self {
        Vert {
            x: f32::NAN,
            y: f32::NAN,
            iz: 0.0,
            rgb: [0.0; 3],
            a: 1.0,
        }
    }
}

/// The rows `y0 .. y0 + rows` of a frame's colour and depth buffers.
pub struct Band<'a> {
    /// First row (global).
    pub y0: usize,
    /// Number of rows.
    pub rows: usize,
    /// Row length in pixels.
    pub width: usize,
    /// Linear RGB, 3 floats a pixel.
    pub rgb: &'a mut [f32],
    /// Inverse depth, 0 where nothing is drawn.
    pub depth: &'a mut [f32],
}

/// Pixel bounds of a triangle clipped to a band: (x0, x1, y0, y1) inclusive, or None if empty.
#[inline]
fn bounds(band: &Band, a: &Vert, b: &Vert, c: &Vert) -> Option<(usize, usize, usize, usize)> {
    let minx = a.x.min(b.x).min(c.x);
    let maxx = a.x.max(b.x).max(c.x);
    let miny = a.y.min(b.y).min(c.y);
    let maxy = a.y.max(b.y).max(c.y);
    // Clamp before converting; `ceil`/`floor` by integer casts avoid libm calls in this hot path.
    let lo_x = (minx - 0.5).max(0.0);
    let lo_y = (miny - 0.5).max(band.y0 as f32);
    let hi_x = (maxx - 0.5).min(band.width as f32 - 1.0);
    let hi_y = (maxy - 0.5).min((band.y0 + band.rows) as f32 - 1.0);
    if !(lo_x <= hi_x && lo_y <= hi_y) {
        return None;
    }
    let ceil = |v: f32| {
        let t = v as usize;
        t + usize::from((t as f32) < v)
    };
    let (x0, y0) = (ceil(lo_x), ceil(lo_y));
    let (x1, y1) = (hi_x as usize, hi_y as usize);
    if x0 > x1 || y0 > y1 {
        return None;
    }
    Some((x0, x1, y0, y1))
}

/// Draws a triangle with depth test; `area > 0` (clockwise on a y-down screen) is front-facing.
/// Back-facing, degenerate and NaN triangles are skipped unless `two_sided`.
///
/// A row's scan stops at the first uncovered pixel after a covered one: along a row each edge
/// function is monotone in x, also as computed (adding one constant step, or evaluating one
/// product per pixel, are both monotone under round-to-nearest), so the pixels where one edge
/// function is ≥ 0 form a prefix or a suffix of the row, and where all three are, one run.
/// Stopping there skips only pixels the test would reject: the image is the same bit for bit.
/// [`draw_triangle_layer`] stops the same way.
#[inline]
#[allow(clippy::neg_cmp_op_on_partial_ord, clippy::needless_range_loop)] // `!(a > 0)` also rejects NaN
pub fn draw_triangle(band: &mut Band, a: &Vert, b: &Vert, c: &Vert, two_sided: bool) {
    let area = (b.x - a.x) * (c.y - a.y) - (c.x - a.x) * (b.y - a.y);
    if !(area > 0.0) {
        if two_sided && area < 0.0 {
            draw_triangle(band, a, c, b, false);
        }
        return;
    }
    let Some((x0, x1, y0, y1)) = bounds(band, a, b, c) else {
        return;
    };
    let inv = 1.0 / area;
    // Edge functions: w_a is opposite a (edge b→c), etc. d/dx and d/dy of each.
    let (ax, ay, bx, by, cx, cy) = (a.x, a.y, b.x, b.y, c.x, c.y);
    let e = |px: f32, py: f32, p: (f32, f32), q: (f32, f32)| {
        (q.0 - p.0) * (py - p.1) - (q.1 - p.1) * (px - p.0)
    };
    let (dxa, dxb, dxc) = (-(cy - by), -(ay - cy), -(by - ay));
    let width = band.width;
    for y in y0..=y1 {
        let py = y as f32 + 0.5;
        let px = x0 as f32 + 0.5;
        let mut wa = e(px, py, (bx, by), (cx, cy));
        let mut wb = e(px, py, (cx, cy), (ax, ay));
        let mut wc = e(px, py, (ax, ay), (bx, by));
        let row = (y - band.y0) * width;
        let mut entered = false;
        for x in x0..=x1 {
            if wa >= 0.0 && wb >= 0.0 && wc >= 0.0 {
                entered = true;
                let (la, lb, lc) = (wa * inv, wb * inv, wc * inv);
                let iz = la * a.iz + lb * b.iz + lc * c.iz;
                let i = row + x;
                if iz > band.depth[i] {
                    band.depth[i] = iz;
                    let o = &mut band.rgb[i * 3..i * 3 + 3];
                    for k in 0..3 {
                        o[k] = la * a.rgb[k] + lb * b.rgb[k] + lc * c.rgb[k];
                    }
                }
            } else if entered {
                // Past the covered run: the row has no more (see `covered_runs_are_contiguous`).
                break;
            }
            wa += dxa;
            wb += dxb;
            wc += dxc;
        }
    }
}

/// Draws a front-facing triangle into a separate layer (its own colour and opacity, 4 floats a
/// pixel in `band.rgb`, and depth) but only where it is nearer than the opaque depth `under`: used
/// for translucent surfaces, composited once later. Colour and opacity are interpolated like the
/// colour of [`draw_triangle`].
#[inline]
#[allow(clippy::neg_cmp_op_on_partial_ord)] // `!(a > 0)` also rejects NaN
pub fn draw_triangle_layer(band: &mut Band, under: &[f32], a: &Vert, b: &Vert, c: &Vert) {
    let area = (b.x - a.x) * (c.y - a.y) - (c.x - a.x) * (b.y - a.y);
    if !(area > 0.0) {
        return;
    }
    let Some((x0, x1, y0, y1)) = bounds(band, a, b, c) else {
        return;
    };
    let inv = 1.0 / area;
    let e =
        |px: f32, py: f32, p: &Vert, q: &Vert| (q.x - p.x) * (py - p.y) - (q.y - p.y) * (px - p.x);
    for y in y0..=y1 {
        let py = y as f32 + 0.5;
        let row = (y - band.y0) * band.width;
        let mut entered = false;
        for x in x0..=x1 {
            let px = x as f32 + 0.5;
            let (wa, wb, wc) = (e(px, py, b, c), e(px, py, c, a), e(px, py, a, b));
            if !(wa >= 0.0 && wb >= 0.0 && wc >= 0.0) {
                if entered {
                    break;
                }
                continue;
            }
            entered = true;
            let (la, lb, lc) = (wa * inv, wb * inv, wc * inv);
            let iz = la * a.iz + lb * b.iz + lc * c.iz;
            let i = row + x;
            if iz > band.depth[i] && iz > under[i] {
                band.depth[i] = iz;
                for k in 0..3 {
                    band.rgb[i * 4 + k] = la * a.rgb[k] + lb * b.rgb[k] + lc * c.rgb[k];
                }
                band.rgb[i * 4 + 3] = la * a.a + lb * b.a + lc * c.a;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn v(x: f32, y: f32, iz: f32, g: f32) -> Vert {
        Vert {
            x,
            y,
            iz,
            rgb: [g, g, g],
            a: 1.0,
        }
    }

    #[test]
    fn shared_edge_covers_every_pixel_once_and_depth_wins() {
        let (w, h) = (16, 16);
        let mut rgb = vec![0.0; w * h * 3];
        let mut depth = vec![0.0; w * h];
        let mut band = Band {
            y0: 0,
            rows: h,
            width: w,
            rgb: &mut rgb,
            depth: &mut depth,
        };
        // A square 2..14 as two triangles (front-facing: clockwise on screen).
        let (p00, p10, p01, p11) = (
            v(2.0, 2.0, 1.0, 0.5),
            v(14.0, 2.0, 1.0, 0.5),
            v(2.0, 14.0, 1.0, 0.5),
            v(14.0, 14.0, 1.0, 0.5),
        );
        draw_triangle(&mut band, &p00, &p10, &p01, false);
        draw_triangle(&mut band, &p10, &p11, &p01, false);
        let covered = band.depth.iter().filter(|&&d| d > 0.0).count();
        // Check: analytic — a 12×12 px square covers exactly 144 pixel centres.
        assert_eq!(covered, 144);
        // A nearer triangle (larger 1/z) overwrites; a farther one does not.
        draw_triangle(
            &mut band,
            &v(0.0, 0.0, 2.0, 1.0),
            &v(8.0, 0.0, 2.0, 1.0),
            &v(0.0, 8.0, 2.0, 1.0),
            false,
        );
        draw_triangle(
            &mut band,
            &v(4.0, 4.0, 0.5, 0.0),
            &v(16.0, 4.0, 0.5, 0.0),
            &v(4.0, 16.0, 0.5, 0.0),
            false,
        );
        assert_eq!(band.rgb[(3 * w + 3) * 3], 1.0);
        assert_eq!(band.rgb[(10 * w + 10) * 3], 0.5);
        // Back-facing is skipped, unless two-sided.
        let before = band.depth.to_vec();
        draw_triangle(
            &mut band,
            &v(0.0, 0.0, 9.0, 0.2),
            &v(0.0, 8.0, 9.0, 0.2),
            &v(8.0, 0.0, 9.0, 0.2),
            false,
        );
        assert_eq!(before, band.depth.to_vec());
        draw_triangle(
            &mut band,
            &v(0.0, 0.0, 9.0, 0.2),
            &v(0.0, 8.0, 9.0, 0.2),
            &v(8.0, 0.0, 9.0, 0.2),
            true,
        );
        assert!((band.rgb[(w + 1) * 3] - 0.2).abs() < 1e-6);
    }

    /// A band covering a whole `w` × `h` frame.
    fn whole_band<'a>(w: usize, h: usize, rgb: &'a mut [f32], depth: &'a mut [f32]) -> Band<'a> {
        Band {
            y0: 0,
            rows: h,
            width: w,
            rgb,
            depth,
        }
    }

    /// Coverage by the full bounding-box scan: every pixel of the clipped bounding box whose three
    /// edge functions, stepped from its first column as `draw_triangle` steps them, are ≥ 0, with
    /// no early stop (the reference for the row scan's stop).
    fn covered_by_full_scan(w: usize, h: usize, a: &Vert, b: &Vert, c: &Vert) -> Vec<bool> {
        let mut out = vec![false; w * h];
        let (mut rgb, mut depth) = (vec![0.0; w * h * 3], vec![0.0; w * h]);
        let band = whole_band(w, h, &mut rgb, &mut depth);
        let Some((x0, x1, y0, y1)) = bounds(&band, a, b, c) else {
            return out;
        };
        let e = |px: f32, py: f32, p: (f32, f32), q: (f32, f32)| {
            (q.0 - p.0) * (py - p.1) - (q.1 - p.1) * (px - p.0)
        };
        let (dxa, dxb, dxc) = (-(c.y - b.y), -(a.y - c.y), -(b.y - a.y));
        for y in y0..=y1 {
            let py = y as f32 + 0.5;
            let px = x0 as f32 + 0.5;
            let mut wa = e(px, py, (b.x, b.y), (c.x, c.y));
            let mut wb = e(px, py, (c.x, c.y), (a.x, a.y));
            let mut wc = e(px, py, (a.x, a.y), (b.x, b.y));
            for x in x0..=x1 {
                out[y * w + x] = wa >= 0.0 && wb >= 0.0 && wc >= 0.0;
                wa += dxa;
                wb += dxb;
                wc += dxc;
            }
        }
        out
    }

    #[test]
    fn covered_runs_are_contiguous() {
        // Check: common practice, no source — a triangle is convex, and along a row each edge
        // function, stepped by a constant or evaluated per pixel, is monotone under rounding, so a
        // row's covered pixels form one run and the scan may stop after it. Thousands of small
        // random triangles (a few pixels, like the terrain's) cover exactly the pixels the full
        // bounding-box scan covers, in the opaque and in the layer rasteriser.
        let (w, h) = (24usize, 24usize);
        let mut seed = 0x2545_F491_4F6C_DD1Du64;
        let mut next = || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            (seed >> 40) as f32 / (1u64 << 24) as f32
        };
        let mut checked = 0;
        for _ in 0..4000 {
            let (cx, cy, s) = (4.0 + 16.0 * next(), 4.0 + 16.0 * next(), 0.5 + 6.0 * next());
            let mut p = || v(cx + s * (next() - 0.5), cy + s * (next() - 0.5), 1.0, 0.5);
            let (a, b, c) = (p(), p(), p());
            let area = (b.x - a.x) * (c.y - a.y) - (c.x - a.x) * (b.y - a.y);
            let (a, b, c) = if area > 0.0 { (a, b, c) } else { (a, c, b) };
            let reference = covered_by_full_scan(w, h, &a, &b, &c);
            let (mut rgb, mut depth) = (vec![0.0; w * h * 3], vec![0.0; w * h]);
            let mut band = whole_band(w, h, &mut rgb, &mut depth);
            draw_triangle(&mut band, &a, &b, &c, false);
            let drawn: Vec<bool> = band.depth.iter().map(|&d| d > 0.0).collect();
            assert_eq!(drawn, reference, "{a:?} {b:?} {c:?}");
            let (mut lrgb, mut ldepth) = (vec![0.0; w * h * 4], vec![0.0; w * h]);
            let mut layer = whole_band(w, h, &mut lrgb, &mut ldepth);
            draw_triangle_layer(&mut layer, &vec![0.0; w * h], &a, &b, &c);
            let layered: Vec<bool> = layer.depth.iter().map(|&d| d > 0.0).collect();
            // The layer evaluates its edge functions per pixel rather than stepping them, so
            // its reference is its own per-pixel test over the whole band.
            let e = |px: f32, py: f32, p: &Vert, q: &Vert| {
                (q.x - p.x) * (py - p.y) - (q.y - p.y) * (px - p.x)
            };
            let own: Vec<bool> = (0..w * h)
                .map(|i| {
                    let (px, py) = ((i % w) as f32 + 0.5, (i / w) as f32 + 0.5);
                    e(px, py, &b, &c) >= 0.0 && e(px, py, &c, &a) >= 0.0 && e(px, py, &a, &b) >= 0.0
                })
                .collect();
            assert_eq!(layered, own, "layer {a:?} {b:?} {c:?}");
            checked += usize::from(reference.iter().any(|&x| x));
        }
        assert!(checked > 2000, "only {checked} triangles covered a pixel");
    }

    #[test]
    fn band_clips_rows() {
        let w = 8;
        let mut rgb = vec![0.0; w * 4 * 3];
        let mut depth = vec![0.0; w * 4];
        let mut band = Band {
            y0: 4,
            rows: 4,
            width: w,
            rgb: &mut rgb,
            depth: &mut depth,
        };
        draw_triangle(
            &mut band,
            &v(0.0, 0.0, 1.0, 1.0),
            &v(8.0, 0.0, 1.0, 1.0),
            &v(0.0, 16.0, 1.0, 1.0),
            false,
        );
        // Rows 4..8 only; row 4 covers x centres < 8 − 4.5/2 ... some pixels, none outside the band.
        assert!(band.depth.iter().any(|&d| d > 0.0));
        assert_eq!(band.depth.len(), 32);
    }
}
