//! A line in map coordinates -> every survey's elevation profile along it, and a chart of them.
//!
//! Profiles are sampled bilinearly (`Grid::sample_bilinear`) every cell width along the line (at most
//! `MAX_SAMPLES` samples); a sample touching nodata stays empty. The chart plots distance against
//! elevation, one line per survey, with a dated legend, in the display unit.

use std::path::Path;

use super::draw::{self, Anchor, BLACK};
use super::{ChangeOptions, ChangeRecord, TransectPoint};
use crate::align::AlignedStack;
use crate::error::{Error, Result};
use crate::render::Frame;

/// Most samples along one profile.
pub const MAX_SAMPLES: usize = 4096;

/// Line colours of successive surveys (own choice: distinct in hue and lightness).
const PALETTE: [[u8; 4]; 8] = [
    [40, 90, 170, 255],
    [220, 110, 30, 255],
    [40, 150, 80, 255],
    [190, 40, 60, 255],
    [120, 80, 170, 255],
    [120, 90, 60, 255],
    [210, 90, 170, 255],
    [90, 90, 90, 255],
];

/// Samples every survey along `line` (`[[x0, y0], [x1, y1]]`, CRS units).
///
/// # Errors
/// `Error::Job` (place `change.transect`) when an end lies outside the analysis grid or the line has
/// no length.
pub fn profiles(stack: &AlignedStack, line: [[f64; 2]; 2]) -> Result<Vec<TransectPoint>> {
    let g = stack.geometry();
    let (w, s, e, n) = g.extent();
    let [[x0, y0], [x1, y1]] = line;
    for (which, x, y) in [("start", x0, y0), ("end", x1, y1)] {
        if !(x.is_finite() && y.is_finite() && x >= w && x <= e && y >= s && y <= n) {
            return Err(Error::job(
                Path::new("job"),
                "change.transect",
                format!(
                    "the transect's {which} ({x}, {y}) lies outside the analysis grid (west {w}, south {s}, east {e}, \
                     north {n}); give both ends inside these bounds, in the grids' CRS units"
                ),
            ));
        }
    }
    let len = (x1 - x0).hypot(y1 - y0);
    if len <= 0.0 {
        return Err(Error::job(
            Path::new("job"),
            "change.transect",
            "the transect's two ends are the same point; give two different points",
        ));
    }
    let step = g.cell_x.min(g.cell_y);
    let count = ((len / step).ceil() as usize + 1).clamp(2, MAX_SAMPLES);
    let unit_m = g.horizontal_unit.metres();
    let mut out = Vec::with_capacity(count * stack.len());
    for s in stack.surveys() {
        let date = s.date.to_string();
        for k in 0..count {
            let t = k as f64 / (count - 1) as f64;
            let (x, y) = (x0 + (x1 - x0) * t, y0 + (y1 - y0) * t);
            let (r, c) = g.to_cell(x, y);
            let z = s.grid.sample_bilinear(r, c);
            out.push(TransectPoint {
                survey_id: s.id.clone(),
                date: date.clone(),
                distance_m: len * t * unit_m,
                x_crs: x,
                y_crs: y,
                elevation_m: z.is_finite().then_some(z as f64),
            });
        }
    }
    Ok(out)
}

/// Draws the record's transect profiles on one chart (960 × 540 pixels); a blank chart with its
/// title when the record has no transect.
pub fn transect_chart(record: &ChangeRecord, opts: &ChangeOptions) -> Frame {
    let (width, height) = (960u32, 540u32);
    let mut f = draw::blank(width, height);
    let per = 1.0 / opts.display_unit.metres();
    let sym = opts.display_unit.symbol();
    let (pl, pr, pt, pb) = (84.0f32, 740.0f32, 56.0f32, 470.0f32);
    let title = match opts.transect {
        Some([[x0, y0], [x1, y1]]) => {
            format!("Profiles from ({x0:.1}, {y0:.1}) to ({x1:.1}, {y1:.1})")
        }
        None => "Profiles (no transect given)".to_string(),
    };
    draw::text(&mut f, pl, 14.0, 20.0, Anchor::Left, BLACK, &title);

    let pts = &record.transect;
    let xmax = pts.iter().map(|p| p.distance_m).fold(0.0, f64::max) * per;
    let (mut ymin, mut ymax) = (f64::INFINITY, f64::NEG_INFINITY);
    for z in pts.iter().filter_map(|p| p.elevation_m) {
        ymin = ymin.min(z * per);
        ymax = ymax.max(z * per);
    }
    if !(ymin.is_finite() && xmax > 0.0) {
        draw::stroke_rect(&mut f, pl, pt, pr - pl, pb - pt, BLACK);
        return f;
    }
    let pad = ((ymax - ymin) * 0.05).max(0.5 * per);
    let ystep = draw::nice_step(ymax - ymin + 2.0 * pad, 6.0);
    let (ylo, yhi) = (
        ((ymin - pad) / ystep).floor() * ystep,
        ((ymax + pad) / ystep).ceil() * ystep,
    );
    let xstep = draw::nice_step(xmax, 8.0);
    let to_px = |d: f64, z: f64| -> (f32, f32) {
        (
            pl + ((d / xmax) as f32) * (pr - pl),
            pb - (((z - ylo) / (yhi - ylo)) as f32) * (pb - pt),
        )
    };
    let grid_rgba = [225, 225, 225, 255];
    let mut v = 0.0;
    while v <= xmax + 1e-9 {
        let (x, _) = to_px(v, ylo);
        draw::fill_rect(&mut f, x, pt, 1.0, pb - pt, grid_rgba);
        draw::fill_rect(&mut f, x, pb, 1.0, 6.0, BLACK);
        draw::text(
            &mut f,
            x,
            pb + 9.0,
            12.0,
            Anchor::Centre,
            BLACK,
            &draw::format_tick(v, xstep),
        );
        v += xstep;
    }
    let mut v = ylo;
    while v <= yhi + 1e-9 {
        let (_, y) = to_px(0.0, v);
        draw::fill_rect(&mut f, pl, y, pr - pl, 1.0, grid_rgba);
        draw::fill_rect(&mut f, pl - 6.0, y, 6.0, 1.0, BLACK);
        draw::text(
            &mut f,
            pl - 9.0,
            y - 6.0,
            12.0,
            Anchor::Right,
            BLACK,
            &draw::format_tick(v, ystep),
        );
        v += ystep;
    }
    draw::stroke_rect(&mut f, pl, pt, pr - pl + 1.0, pb - pt + 1.0, BLACK);
    draw::text(
        &mut f,
        (pl + pr) / 2.0,
        pb + 32.0,
        14.0,
        Anchor::Centre,
        BLACK,
        &format!("Distance along transect ({sym})"),
    );
    draw::text(
        &mut f,
        8.0,
        pt - 22.0,
        14.0,
        Anchor::Left,
        BLACK,
        &format!("Elevation ({sym})"),
    );

    let mut legend_y = pt;
    for (k, s) in record.surveys.iter().enumerate() {
        let colour = PALETTE[k % PALETTE.len()];
        let mut prev: Option<(f32, f32)> = None;
        for p in pts.iter().filter(|p| p.survey_id == s.survey_id) {
            match p.elevation_m {
                Some(z) => {
                    let here = to_px(p.distance_m * per, z * per);
                    if let Some(a) = prev {
                        draw::line(&mut f, a.0, a.1, here.0, here.1, 2.0, colour);
                    }
                    prev = Some(here);
                }
                None => prev = None,
            }
        }
        draw::fill_rect(&mut f, pr + 20.0, legend_y + 6.0, 24.0, 3.0, colour);
        draw::text(
            &mut f,
            pr + 50.0,
            legend_y,
            12.0,
            Anchor::Left,
            BLACK,
            &super::map::id_and_date(&s.survey_id, &s.date.to_string()),
        );
        legend_y += 20.0;
    }
    draw::text(
        &mut f,
        pr + 20.0,
        legend_y + 8.0,
        11.0,
        Anchor::Left,
        BLACK,
        "survey dates only;",
    );
    draw::text(
        &mut f,
        pr + 20.0,
        legend_y + 22.0,
        11.0,
        Anchor::Left,
        BLACK,
        "nothing between is measured",
    );
    f
}
