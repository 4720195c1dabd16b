//! (AlignedStack, PairRecord) -> `Frame`: a DEM-of-difference map with legend, scale bar and north arrow.
//!
//! Colours: a diverging ramp with zero at its exact middle entry and symmetric limits ±max|DoD|;
//! erosion (lowering) warm, deposition (raising) cool; cells whose change is inside ±LoD neutral grey;
//! nodata a light hatch. Cells are drawn nearest-neighbour (no smoothing of the measured change).
//! The grid is north-up by construction (`GridGeometry` has no rotation), so the arrow points up.

use rayon::prelude::*;

use super::draw::{self, Anchor, BLACK};
use super::{ChangeOptions, PairRecord};
use crate::align::AlignedStack;
use crate::render::Frame;

/// Entries of the ramp; odd, so entry `RAMP_MID` is exactly zero change.
pub const RAMP_LEN: usize = 255;
/// The ramp entry of zero change.
pub const RAMP_MID: usize = RAMP_LEN / 2;
/// Colour of cells whose change is within the level of detection.
pub const WITHIN_LOD: [u8; 4] = [150, 150, 150, 255];
const HATCH_LIGHT: [u8; 4] = [236, 236, 236, 255];
const HATCH_DARK: [u8; 4] = [196, 196, 196, 255];

/// Longest side of the map area in pixels.
const MAP_PX: f64 = 720.0;
const TOP: u32 = 64;
const LEFT: u32 = 24;
const RIGHT: u32 = 210;
const BOTTOM: u32 = 72;

/// The diverging ramp: index 0 = strongest erosion, `RAMP_MID` = no change, last = strongest deposition.
pub fn ramp() -> [[u8; 4]; RAMP_LEN] {
    // Own stops, warm for lowering and cool for raising (REFERENCES.md §10 guidance for a DoD).
    const STOPS: [(f32, [f32; 3]); 5] = [
        (-1.0, [150.0, 30.0, 20.0]),
        (-0.5, [232.0, 135.0, 80.0]),
        (0.0, [248.0, 246.0, 240.0]),
        (0.5, [120.0, 175.0, 215.0]),
        (1.0, [20.0, 60.0, 140.0]),
    ];
    let mut out = [[0u8; 4]; RAMP_LEN];
    for (i, px) in out.iter_mut().enumerate() {
        let t = (i as f32 - RAMP_MID as f32) / RAMP_MID as f32;
        let k = STOPS
            .iter()
            .rposition(|s| s.0 <= t)
            .unwrap_or(0)
            .min(STOPS.len() - 2);
        let (t0, c0) = STOPS[k];
        let (t1, c1) = STOPS[k + 1];
        let f = ((t - t0) / (t1 - t0)).clamp(0.0, 1.0);
        for ch in 0..3 {
            px[ch] = (c0[ch] + (c1[ch] - c0[ch]) * f).round() as u8;
        }
        px[3] = 255;
    }
    out
}

/// Ramp index of a change `d` with limits ±`limit` (limit > 0).
pub fn ramp_index(d: f64, limit: f64) -> usize {
    let t = (d / limit).clamp(-1.0, 1.0);
    (RAMP_MID as f64 + (t * RAMP_MID as f64).round()) as usize
}

/// Colour of one cell's change, given the limit and the LoD (both metres).
pub fn cell_colour(d: f32, limit: f64, lod: f64, lut: &[[u8; 4]; RAMP_LEN]) -> Option<[u8; 4]> {
    if !d.is_finite() {
        return None;
    }
    let d = d as f64;
    if d.abs() < lod {
        Some(WITHIN_LOD)
    } else {
        Some(lut[ramp_index(d, limit)])
    }
}

/// Colour limit for a pair: the largest absolute change, never below the LoD (so a pair with no
/// detectable change still gets a readable legend) and never zero.
pub fn colour_limit(pair: &PairRecord) -> f64 {
    let m = pair.min_change_m.abs().max(pair.max_change_m.abs());
    let m = if m.is_finite() { m } else { 0.0 };
    m.max(pair.lod_m * 1.25).max(1e-3)
}

/// Draws the DEM of difference of `pair` (later minus earlier) as a map.
///
/// # Allocations
/// One frame of about 950 × 860 pixels at most.
pub fn dod_map(stack: &AlignedStack, pair: &PairRecord, opts: &ChangeOptions) -> Frame {
    let g = stack.geometry();
    let scale = (MAP_PX / g.cols.max(g.rows) as f64).min(8.0);
    let mw = ((g.cols as f64 * scale).round() as u32).max(1);
    let mh = ((g.rows as f64 * scale).round() as u32).max(1);
    let width = LEFT + mw + RIGHT;
    let height = TOP + mh.max(360) + BOTTOM;
    let mut frame = draw::blank(width, height);
    let lut = ramp();
    let limit = colour_limit(pair);
    let lod = pair.lod_m;
    let (z0, z1) = (stack.z(pair.from_index), stack.z(pair.to_index));
    let row_bytes = width as usize * 4;
    let map_rows = &mut frame.rgba[TOP as usize * row_bytes..(TOP + mh) as usize * row_bytes];
    map_rows
        .par_chunks_mut(row_bytes)
        .enumerate()
        .for_each(|(py, row)| {
            let r = (((py as f64 + 0.5) / scale) as usize).min(g.rows - 1);
            for px in 0..mw as usize {
                let c = (((px as f64 + 0.5) / scale) as usize).min(g.cols - 1);
                let colour = cell_colour(z1[[r, c]] - z0[[r, c]], limit, lod, &lut).unwrap_or(
                    if (px + py) % 8 < 2 {
                        HATCH_DARK
                    } else {
                        HATCH_LIGHT
                    },
                );
                let i = (LEFT as usize + px) * 4;
                row[i..i + 4].copy_from_slice(&colour);
            }
        });
    draw::stroke_rect(
        &mut frame,
        LEFT as f32 - 1.0,
        TOP as f32 - 1.0,
        mw as f32 + 2.0,
        mh as f32 + 2.0,
        BLACK,
    );

    let unit = opts.display_unit;
    let per = 1.0 / unit.metres();
    let sym = unit.symbol();
    let title = format!(
        "Elevation change {} to {}",
        id_and_date(&pair.from_id, &pair.from_date.to_string()),
        id_and_date(&pair.to_id, &pair.to_date.to_string())
    );
    draw::text(
        &mut frame,
        LEFT as f32,
        10.0,
        20.0,
        Anchor::Left,
        BLACK,
        &title,
    );
    let sub = format!(
        "DoD = later minus earlier; grey: within LoD {:.3} {sym} (t = {}); net {:.1} {sym}3 detected",
        lod * per,
        pair.lod_t,
        pair.net_volume_m3 * per * per * per
    );
    draw::text(
        &mut frame,
        LEFT as f32,
        36.0,
        14.0,
        Anchor::Left,
        BLACK,
        &sub,
    );

    legend(&mut frame, LEFT + mw + 28, TOP, limit, lod, per, sym, &lut);
    scale_bar(
        &mut frame,
        g.cols as f64 * g.cell_x_m(),
        mw,
        TOP + mh + 18,
        per,
        sym,
    );
    north_arrow(&mut frame, (LEFT + mw) as f32 - 22.0, TOP as f32 + 10.0);
    frame
}

#[allow(clippy::too_many_arguments)]
fn legend(
    frame: &mut Frame,
    x: u32,
    y: u32,
    limit: f64,
    lod: f64,
    per: f64,
    sym: &str,
    lut: &[[u8; 4]; RAMP_LEN],
) {
    let (x, y) = (x as f32, y as f32);
    let bar_h = 260.0f32;
    let bar_w = 22.0f32;
    draw::text(
        frame,
        x,
        y,
        14.0,
        Anchor::Left,
        BLACK,
        &format!("Change ({sym})"),
    );
    let top = y + 40.0;
    draw::text(
        frame,
        x,
        top - 18.0,
        12.0,
        Anchor::Left,
        BLACK,
        "deposition (raised)",
    );
    for k in 0..bar_h as u32 {
        // Top of the bar is +limit, bottom is -limit.
        let v = limit * (1.0 - 2.0 * (k as f64 + 0.5) / bar_h as f64);
        let c = if v.abs() < lod {
            super::map::WITHIN_LOD
        } else {
            lut[ramp_index(v, limit)]
        };
        draw::fill_rect(frame, x, top + k as f32, bar_w, 1.0, c);
    }
    draw::stroke_rect(frame, x - 1.0, top - 1.0, bar_w + 2.0, bar_h + 2.0, BLACK);
    draw::text(
        frame,
        x,
        top + bar_h + 6.0,
        12.0,
        Anchor::Left,
        BLACK,
        "erosion (lowered)",
    );
    let step = draw::nice_step(limit * per, 2.0);
    let mut v = -(limit * per / step).floor() * step;
    while v <= limit * per + 1e-9 {
        let ty = top + bar_h * (1.0 - ((v / per / limit + 1.0) / 2.0)) as f32;
        draw::fill_rect(frame, x + bar_w, ty, 6.0, 1.0, BLACK);
        draw::text(
            frame,
            x + bar_w + 9.0,
            ty - 6.0,
            12.0,
            Anchor::Left,
            BLACK,
            &draw::format_tick(v, step),
        );
        v += step;
    }
    let sy = top + bar_h + 34.0;
    draw::fill_rect(frame, x, sy, bar_w, 14.0, WITHIN_LOD);
    draw::text(
        frame,
        x + bar_w + 8.0,
        sy,
        12.0,
        Anchor::Left,
        BLACK,
        &format!("|change| < LoD {:.3} {sym}", lod * per),
    );
    let ny = sy + 22.0;
    for k in 0..14u32 {
        for j in 0..bar_w as u32 {
            let c = if (j + k) % 8 < 2 {
                HATCH_DARK
            } else {
                HATCH_LIGHT
            };
            draw::fill_rect(frame, x + j as f32, ny + k as f32, 1.0, 1.0, c);
        }
    }
    draw::stroke_rect(frame, x - 1.0, ny - 1.0, bar_w + 2.0, 16.0, BLACK);
    draw::text(
        frame,
        x + bar_w + 8.0,
        ny,
        12.0,
        Anchor::Left,
        BLACK,
        "no data in a survey",
    );
}

fn scale_bar(frame: &mut Frame, map_width_m: f64, map_px: u32, y: u32, per: f64, sym: &str) {
    let map_width_units = map_width_m * per;
    let len = draw::nice_floor(map_width_units / 4.0);
    let px = (len / map_width_units * map_px as f64) as f32;
    let (x0, y) = (LEFT as f32, y as f32);
    draw::fill_rect(frame, x0, y, px / 2.0, 6.0, BLACK);
    draw::stroke_rect(frame, x0, y, px, 6.0, BLACK);
    draw::text(frame, x0, y + 10.0, 12.0, Anchor::Centre, BLACK, "0");
    draw::text(
        frame,
        x0 + px,
        y + 10.0,
        12.0,
        Anchor::Centre,
        BLACK,
        &format!("{} {sym}", draw::format_tick(len, len)),
    );
}

fn north_arrow(frame: &mut Frame, x: f32, y: f32) {
    draw::fill_triangle(
        frame,
        (x, y + 14.0),
        (x - 8.0, y + 38.0),
        (x, y + 32.0),
        BLACK,
    );
    draw::fill_triangle(
        frame,
        (x, y + 14.0),
        (x + 8.0, y + 38.0),
        (x, y + 32.0),
        [90, 90, 90, 255],
    );
    draw::text(frame, x, y - 4.0, 14.0, Anchor::Centre, BLACK, "N");
}

/// "id (date)", or just the date when the id is the date.
pub(super) fn id_and_date(id: &str, date: &str) -> String {
    if id == date {
        date.to_string()
    } else {
        format!("{id} ({date})")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ramp_is_centred_and_diverging() {
        let lut = ramp();
        // Check: common practice, no source (REFERENCES.md §10) — zero change maps to the exact middle entry
        assert_eq!(ramp_index(0.0, 2.0), RAMP_MID);
        assert_eq!(ramp_index(2.0, 2.0), RAMP_LEN - 1);
        assert_eq!(ramp_index(-2.0, 2.0), 0);
        // Symmetric limits: +v and -v sit the same distance from the middle.
        assert_eq!(
            RAMP_MID - ramp_index(-0.7, 2.0),
            ramp_index(0.7, 2.0) - RAMP_MID
        );
        // Erosion warm (red above blue), deposition cool (blue above red).
        assert!(lut[0][0] > lut[0][2]);
        assert!(lut[RAMP_LEN - 1][2] > lut[RAMP_LEN - 1][0]);
        // Inside the LoD: grey; nodata: none.
        assert_eq!(cell_colour(0.1, 2.0, 0.2, &lut), Some(WITHIN_LOD));
        assert_eq!(cell_colour(f32::NAN, 2.0, 0.2, &lut), None);
        assert_ne!(cell_colour(0.3, 2.0, 0.2, &lut), Some(WITHIN_LOD));
    }
}
