//! A line in map coordinates -> every survey's elevation profile along it, and a chart of them.
//!
//! Profiles are sampled bilinearly (`Grid::sample_bilinear`) every cell width along the line (at most
//! `MAX_SAMPLES` samples); a sample touching nodata stays empty.
//!
//! The chart plots distance against elevation in the display unit. Its title names the ends by
//! compass direction and gives the length; the vertical exaggeration of the drawing is stated. The
//! surveys are one hue stepping from pale (oldest) to dark (latest) in CIE L*a*b* lightness
//! (`change::colour`), each line labelled with its date at its right end instead of a legend; with
//! more surveys than the lightness steps allow, the first, the last and evenly spaced ones between
//! are drawn and the chart says which are left out. Each profile's crest (its highest sample) is
//! marked, and a band above the plot shows the crest's shift along the transect for each drawn
//! interval.

use std::path::Path;

use super::draw::{self, Anchor, BLACK};
use super::{ChangeOptions, ChangeRecord, TransectPoint};
use crate::align::AlignedStack;
use crate::error::{Error, Result};
use crate::render::Frame;

/// Most samples along one profile.
pub const MAX_SAMPLES: usize = 4096;

/// Chart size in pixels.
pub const CHART_SIZE: (u32, u32) = (1280, 720);
/// Smallest text on the chart: 2.5 % of its height.
pub const TEXT_PX: f32 = 18.0;

/// The 8-point compass word for an azimuth in degrees clockwise from north.
pub fn compass8(azimuth_deg: f64) -> &'static str {
    const WORDS: [&str; 8] = ["N", "NE", "E", "SE", "S", "SW", "W", "NW"];
    WORDS[((azimuth_deg.rem_euclid(360.0) + 22.5) / 45.0) as usize % 8]
}

/// The two ends of a transect named by where each lies from the other (`SW`, `NE`, …); when both
/// would get one word (never for a straight line) the start is `start`.
pub fn end_names(line: [[f64; 2]; 2]) -> (&'static str, &'static str) {
    let [[x0, y0], [x1, y1]] = line;
    let a = compass8(crate::grid::azimuth_deg(x0 - x1, y0 - y1));
    let b = compass8(crate::grid::azimuth_deg(x1 - x0, y1 - y0));
    if a == b {
        ("start", "end")
    } else {
        (a, b)
    }
}

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
    for (i, s) in stack.surveys().iter().enumerate() {
        let date = s.date.to_string();
        let zs = stack.z(i);
        for k in 0..count {
            let t = k as f64 / (count - 1) as f64;
            let (x, y) = (x0 + (x1 - x0) * t, y0 + (y1 - y0) * t);
            let (r, c) = g.to_cell(x, y);
            let z = crate::grid::sample_bilinear(&zs, r, c);
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
    stack.let_go();
    Ok(out)
}

/// The crest of one profile: (distance, elevation) of its highest sample, metres.
pub fn profile_crest(points: &[&TransectPoint]) -> Option<(f64, f64)> {
    points
        .iter()
        .filter_map(|p| p.elevation_m.map(|z| (p.distance_m, z)))
        .fold(None, |best: Option<(f64, f64)>, (d, z)| match best {
            Some((_, bz)) if bz >= z => best,
            _ => Some((d, z)),
        })
}

/// Where the chart put things, for the tests.
#[derive(Debug, Clone, PartialEq)]
pub struct ChartLayout {
    /// Size of the smallest text.
    pub text_px: f32,
    /// Plot area: left, top, right, bottom.
    pub plot: (f32, f32, f32, f32),
    /// Width of the column of end labels right of the plot (the only "legend").
    pub labels_w: f32,
    /// Vertical exaggeration of the drawing (pixels per unit up over pixels per unit along).
    pub vertical_exaggeration: f64,
    /// Colours of the drawn surveys, oldest first.
    pub colours: Vec<[u8; 4]>,
}

/// Draws the record's transect profiles on one chart ([`CHART_SIZE`]); a blank chart with its
/// title when the record has no transect.
pub fn transect_chart(record: &ChangeRecord, opts: &ChangeOptions) -> Frame {
    transect_chart_with_layout(record, opts).0
}

/// As [`transect_chart`], with where its parts were put.
pub fn transect_chart_with_layout(
    record: &ChangeRecord,
    opts: &ChangeOptions,
) -> (Frame, ChartLayout) {
    let (width, height) = CHART_SIZE;
    let fs = TEXT_PX;
    let line_h = (fs * 1.3).ceil();
    let mut f = draw::blank(width, height);
    let per = 1.0 / opts.display_unit.metres();
    let sym = opts.display_unit.symbol();
    let pts = &record.transect;
    let length = pts.iter().map(|p| p.distance_m).fold(0.0, f64::max);
    let (start, end) = opts.transect.map_or(("start", "end"), end_names);
    let title = match opts.transect {
        Some(_) => format!(
            "Profiles along the transect from {start} to {end}, {} {sym} long",
            draw::format_tick(length * per, 0.1)
        ),
        None => "Profiles (no transect given)".to_string(),
    };
    draw::text_bold(&mut f, 20.0, 12.0, 1.3 * fs, Anchor::Left, BLACK, &title);

    let drawn = super::colour::series_subset(record.surveys.len());
    let colours = super::colour::date_series(drawn.len());
    let n_shift = drawn.len().saturating_sub(1);
    let labels_w = record
        .surveys
        .iter()
        .map(|s| draw::text_width(fs, &s.date))
        .fold(0.0f32, f32::max)
        + 1.2 * fs;
    let (pl, pr) = (5.0 * fs, width as f32 - 1.5 * fs - labels_w);
    let pt = 12.0 + 1.6 * fs + 2.0 * line_h + (n_shift + 1) as f32 * line_h + 0.8 * fs;
    let pb = height as f32 - 3.6 * line_h;
    let mut layout = ChartLayout {
        text_px: fs,
        plot: (pl, pt, pr, pb),
        labels_w,
        vertical_exaggeration: f64::NAN,
        colours: colours.clone(),
    };

    let xmax = length * per;
    let (mut ymin, mut ymax) = (f64::INFINITY, f64::NEG_INFINITY);
    for z in pts.iter().filter_map(|p| p.elevation_m) {
        ymin = ymin.min(z * per);
        ymax = ymax.max(z * per);
    }
    if !(ymin.is_finite() && xmax > 0.0) {
        draw::stroke_rect(&mut f, pl, pt, pr - pl, pb - pt, BLACK);
        return (f, layout);
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
    let ve = ((pb - pt) as f64 / (yhi - ylo)) / ((pr - pl) as f64 / xmax);
    layout.vertical_exaggeration = ve;
    let omitted = record.surveys.len() - drawn.len();
    let mut sub = format!(
        "Vertical exaggeration ×{}: slopes look {} times as steep as they are. Survey dates only; nothing between them was measured.",
        draw::format_tick(ve, if ve >= 10.0 { 1.0 } else { 0.1 }),
        draw::format_tick(ve, if ve >= 10.0 { 1.0 } else { 0.1 })
    );
    if omitted > 0 {
        sub.push_str(&format!(
            " {omitted} of {} surveys not drawn (see tables/transect.csv).",
            record.surveys.len()
        ));
    }
    let sub_lines = draw::wrap(&sub, fs, width as f32 - 40.0);
    for (k, l) in sub_lines.iter().take(2).enumerate() {
        draw::text(
            &mut f,
            20.0,
            12.0 + 1.6 * fs + k as f32 * line_h,
            fs,
            Anchor::Left,
            BLACK,
            l,
        );
    }

    let grid_rgba = [228, 228, 228, 255];
    let mut v = 0.0;
    while v <= xmax + 1e-9 {
        let (x, _) = to_px(v, ylo);
        draw::fill_rect(&mut f, x, pt, 1.0, pb - pt, grid_rgba);
        draw::fill_rect(&mut f, x, pb, 1.0, 0.4 * fs, BLACK);
        draw::text(
            &mut f,
            x,
            pb + 0.5 * fs,
            fs,
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
        draw::fill_rect(&mut f, pl - 0.4 * fs, y, 0.4 * fs, 1.0, BLACK);
        draw::text(
            &mut f,
            pl - 0.6 * fs,
            y - 0.6 * fs,
            fs,
            Anchor::Right,
            BLACK,
            &draw::format_tick(v, ystep),
        );
        v += ystep;
    }
    draw::stroke_rect(&mut f, pl, pt, pr - pl + 1.0, pb - pt + 1.0, BLACK);
    // The ends, named where the axis starts and stops.
    let axis_y = pb + 0.5 * fs + line_h;
    draw::text_bold(
        &mut f,
        pl,
        axis_y,
        fs,
        Anchor::Left,
        BLACK,
        &format!("◀ {start}"),
    );
    draw::text_bold(
        &mut f,
        pr,
        axis_y,
        fs,
        Anchor::Right,
        BLACK,
        &format!("{end} ▶"),
    );
    draw::text(
        &mut f,
        (pl + pr) / 2.0,
        axis_y,
        fs,
        Anchor::Centre,
        BLACK,
        &format!("Distance from the {start} end ({sym})"),
    );
    draw::text(
        &mut f,
        20.0,
        pt - 1.5 * fs,
        fs,
        Anchor::Left,
        BLACK,
        &format!("Elevation ({sym})"),
    );

    // Profiles, oldest (palest) first so the latest lies on top; crest marks; end labels.
    let mut ends: Vec<(f32, [u8; 4], String)> = Vec::new();
    let mut crests: Vec<Option<(f64, f64)>> = Vec::new();
    for (k, &i) in drawn.iter().enumerate() {
        let s = &record.surveys[i];
        let colour = colours[k];
        let profile: Vec<&TransectPoint> =
            pts.iter().filter(|p| p.survey_id == s.survey_id).collect();
        let mut runs: Vec<Vec<(f32, f32)>> = vec![Vec::new()];
        for p in &profile {
            match p.elevation_m {
                Some(z) => runs
                    .last_mut()
                    .unwrap_or(&mut Vec::new())
                    .push(to_px(p.distance_m * per, z * per)),
                None => runs.push(Vec::new()),
            }
        }
        draw::polylines(&mut f, &runs, 2.5, colour, None);
        let last = profile
            .iter()
            .rev()
            .find_map(|p| p.elevation_m.map(|z| to_px(p.distance_m * per, z * per)));
        if let Some((_, y)) = last {
            ends.push((y, colour, s.date.clone()));
        }
        let crest = profile_crest(&profile);
        if let Some((d, z)) = crest {
            let (x, y) = to_px(d * per, z * per);
            let r = 0.45 * fs;
            draw::fill_triangle(
                &mut f,
                (x - r - 1.5, y - 2.0 * r - 3.0),
                (x + r + 1.5, y - 2.0 * r - 3.0),
                (x, y - 1.0),
                BLACK,
            );
            draw::fill_triangle(
                &mut f,
                (x - r, y - 2.0 * r - 2.0),
                (x + r, y - 2.0 * r - 2.0),
                (x, y - 3.0),
                colour,
            );
        }
        crests.push(crest);
    }
    // End labels in date order, latest on top (the lines often meet at the ends, so their heights
    // cannot order the labels), centred on the lines' mean end height and joined by leader lines.
    if !ends.is_empty() {
        let mean = ends.iter().map(|e| e.0).sum::<f32>() / ends.len() as f32;
        let block = ends.len() as f32 * line_h;
        let first = (mean - block / 2.0).clamp(pt, (pb - block).max(pt));
        for (slot, (ly, colour, date)) in ends.iter().rev().enumerate() {
            let y = first + slot as f32 * line_h;
            let tx = pr + 1.2 * fs;
            draw::line(&mut f, pr + 2.0, *ly, tx - 4.0, y + 0.6 * fs, 1.5, *colour);
            draw::text_bold(&mut f, tx, y, fs, Anchor::Left, *colour, date);
        }
    }
    // Crest shift along the transect for each drawn interval, in a band above the plot.
    draw::text(
        &mut f,
        20.0,
        pt - (n_shift as f32 + 2.0) * line_h - 0.4 * fs,
        fs,
        Anchor::Left,
        BLACK,
        "Crest (▼, the highest point of each profile) moved along the transect:",
    );
    for k in 0..n_shift {
        let y = pt - (n_shift - k + 1) as f32 * line_h - 0.3 * fs;
        let (a, b) = (&record.surveys[drawn[k]], &record.surveys[drawn[k + 1]]);
        let mut span = None;
        let text = match (crests[k], crests[k + 1]) {
            (Some((da, _)), Some((db, _))) => {
                let shift = (db - da) * per;
                let toward = if shift >= 0.0 { end } else { start };
                let (xa, _) = to_px(da * per, ylo);
                let (xb, _) = to_px(db * per, ylo);
                let ay = y + 0.6 * fs;
                draw::line(&mut f, xa, ay, xb, ay, 2.5, colours[k + 1]);
                let dir = if xb >= xa { 1.0 } else { -1.0 };
                draw::fill_triangle(
                    &mut f,
                    (xb + dir * 0.3 * fs, ay),
                    (xb - dir * 0.4 * fs, ay - 0.35 * fs),
                    (xb - dir * 0.4 * fs, ay + 0.35 * fs),
                    colours[k + 1],
                );
                span = Some((xa.min(xb) - 0.5 * fs, xa.max(xb) + 0.5 * fs));
                format!(
                    "{} to {}: {} {sym} toward {toward}",
                    a.date,
                    b.date,
                    draw::format_tick(shift.abs(), 0.1)
                )
            }
            _ => format!("{} to {}: no crest on one profile", a.date, b.date),
        };
        let tw = draw::text_width(fs, &text);
        let (tx, anchor) = match span {
            Some((_, right)) if right + 0.5 * fs + tw <= width as f32 - 10.0 => {
                (right + 0.5 * fs, Anchor::Left)
            }
            Some((left, _)) => (left - 0.5 * fs, Anchor::Right),
            None => (pl, Anchor::Left),
        };
        draw::text(&mut f, tx, y, fs, anchor, BLACK, &text);
    }
    (f, layout)
}
