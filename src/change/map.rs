//! (AlignedStack, PairRecord) -> `Frame`: a DEM-of-difference map a report can print as it is.
//!
//! What is drawn, bottom to top:
//! - a hillshade of the later survey (Horn 1981 gradient, light from the north-west at 45°, heights
//!   ×2 so low dunes read; the cartographic convention of light from the upper left, Imhof 1982), in
//!   light greys: it locates the change on the landform;
//! - detected change (`change::detect`: beyond ±LoD and in a patch of at least the smallest patch)
//!   in a diverging ramp, warm for lowering and cool for raising, multiplied with the hillshade so
//!   the relief still shows through. Change inside ±LoD, or in smaller patches, is not coloured at
//!   all: the hillshade shows through (no flat grey that could read as a hole). The ramp starts a
//!   fifth of the way out from its pale middle, so the faintest detected change is still a colour;
//! - no data: a light hatch;
//! - the outline of the landform at both dates: one contour of the relief above a local base, the
//!   same level for both (solid for the later survey, dashed for the earlier); the rule is in
//!   `change::outline`. Loops shorter than two text heights are left out as noise;
//! - the transect, with its ends named by compass direction as on the transect chart;
//! - map coordinates (CRS units) on the bottom and left edges, a scale bar and a north arrow.
//!
//! Text is at least 2.5 % of the figure's height (`text_px`). The grid is north-up by construction
//! (`GridGeometry` has no rotation), so the arrow points up. Cells are drawn nearest-neighbour.

use rayon::prelude::*;

use super::detect::{self, Detection};
use super::draw::{self, Anchor, BLACK};
use super::{ChangeOptions, PairRecord};
use crate::align::AlignedStack;
use crate::grid::GridGeometry;
use crate::render::{shade, Frame};

/// Entries of the ramp; odd, so entry `RAMP_MID` is exactly zero change.
pub const RAMP_LEN: usize = 255;
/// The ramp entry of zero change.
pub const RAMP_MID: usize = RAMP_LEN / 2;
/// Share of the ramp's half skipped next to its pale middle (detected change starts there).
const RAMP_SKIP: f64 = 0.2;
const HATCH_LIGHT: [u8; 4] = [236, 236, 236, 255];
const HATCH_DARK: [u8; 4] = [196, 196, 196, 255];
/// Outline colour of the landform (both dates).
const OUTLINE: [u8; 4] = [20, 20, 20, 255];
/// The transect line.
const TRANSECT: [u8; 4] = [110, 20, 120, 255];

/// Longest side of the map area in pixels.
const MAP_PX: f64 = 720.0;
/// Hillshade sun and exaggeration (module doc).
const SUN_AZIMUTH_DEG: f64 = 315.0;
const SUN_ALTITUDE_DEG: f64 = 45.0;
const SHADE_EXAGGERATION: f64 = 2.0;

/// The diverging ramp: index 0 = strongest erosion, `RAMP_MID` = no change, last = strongest deposition.
pub fn ramp() -> [[u8; 4]; RAMP_LEN] {
    // Own stops, warm (orange to dark red) for lowering and cool (light to dark blue) for raising
    // (REFERENCES.md §10 guidance for a DoD); no green, so no red–green pair.
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

/// Ramp index of a detected change `d` (|d| >= lod) with limits ±`limit`: the LoD maps to
/// [`RAMP_SKIP`] of the way out from the middle, the limit to the end.
pub fn ramp_index(d: f64, lod: f64, limit: f64) -> usize {
    let span = (limit - lod).max(1e-9);
    let f = ((d.abs() - lod) / span).clamp(0.0, 1.0);
    let t = (RAMP_SKIP + (1.0 - RAMP_SKIP) * f) * d.signum();
    (RAMP_MID as f64 + (t * RAMP_MID as f64).round()) as usize
}

/// Colour limit for a pair: the largest absolute change, above the LoD (so a pair with no
/// detectable change still gets a readable legend) and never zero.
pub fn colour_limit(pair: &PairRecord) -> f64 {
    let m = pair.min_change_m.abs().max(pair.max_change_m.abs());
    let m = if m.is_finite() { m } else { 0.0 };
    m.max(pair.lod_m * 1.25).max(1e-3)
}

/// The hillshade grey of a shade value in [0, 1]: a light range (150 to 250) so colours stay clear.
fn shade_grey(s: f32) -> f32 {
    if s.is_finite() {
        150.0 + 100.0 * s.clamp(0.0, 1.0)
    } else {
        200.0
    }
}

/// The colour of one map cell: detected change over the hillshade, or the hillshade alone.
fn cell_rgba(code: i8, d: f32, s: f32, lod: f64, limit: f64, lut: &[[u8; 4]; RAMP_LEN]) -> [u8; 4] {
    let g = shade_grey(s);
    match code {
        detect::EROSION | detect::DEPOSITION => {
            let c = lut[ramp_index(d as f64, lod, limit)];
            // Multiply with the shade (normalised so lit slopes keep the ramp colour).
            let k = 0.55 + 0.45 * (g - 150.0) / 100.0;
            [
                (c[0] as f32 * k).round() as u8,
                (c[1] as f32 * k).round() as u8,
                (c[2] as f32 * k).round() as u8,
                255,
            ]
        }
        _ => {
            let v = g.round() as u8;
            [v, v, v, 255]
        }
    }
}

/// Where everything sits on a DoD map, in pixels; the tests read it to check the figure.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MapLayout {
    /// Size of the smallest text.
    pub text_px: f32,
    /// Map area: left, top, width, height.
    pub map: (u32, u32, u32, u32),
    /// Legend column: left edge and width.
    pub legend: (f32, f32),
    /// Top of the row of easting labels under the map.
    pub easting_labels_y: f32,
}

/// Draws the DEM of difference of `pair` (later minus earlier) as a map.
///
/// # Allocations
/// One frame of about 1100 × 900 pixels at most, a hillshade and a detection mask of the grid.
pub fn dod_map(stack: &AlignedStack, pair: &PairRecord, opts: &ChangeOptions) -> Frame {
    dod_map_with_layout(stack, pair, opts).0
}

/// As [`dod_map`], with where its parts were put.
pub fn dod_map_with_layout(
    stack: &AlignedStack,
    pair: &PairRecord,
    opts: &ChangeOptions,
) -> (Frame, MapLayout) {
    let g = stack.geometry();
    let scale = (MAP_PX / g.cols.max(g.rows) as f64).min(8.0);
    let mw = ((g.cols as f64 * scale).round() as u32).max(1);
    let mh = ((g.rows as f64 * scale).round() as u32).max(1);
    // Text size: at least 2.5 % of the figure's height (which grows with the text), never below
    // 16 px; a few rounds settle it.
    let mut fs = 16.0f32;
    let mut frame_layout = plan(stack, pair, opts, (mw, mh), fs);
    for _ in 0..20 {
        let need = (0.025 * frame_layout.height as f32).ceil();
        if fs >= need {
            break;
        }
        fs = need;
        frame_layout = plan(stack, pair, opts, (mw, mh), fs);
    }
    let Plan {
        left,
        top,
        width,
        height,
        legend_x,
        legend_w,
        lines,
        ticks_x,
        ticks_y,
    } = frame_layout;
    let line_h = (fs * 1.3).ceil();
    let pad = fs.round();
    let unit = opts.display_unit;
    let per = 1.0 / unit.metres();
    let sym = unit.symbol();
    let (w, s, e, n) = g.extent();
    let mut frame = draw::blank(width, height);

    let lut = ramp();
    let limit = colour_limit(pair);
    let lod = pair.lod_m;
    let (z0, z1) = (&stack.z(pair.from_index), &stack.z(pair.to_index));
    let det: Detection = super::pair_detection(stack, pair);
    let hs = hillshade(z1, g);
    let row_bytes = width as usize * 4;
    let map_rows = &mut frame.rgba[top as usize * row_bytes..(top + mh) as usize * row_bytes];
    map_rows
        .par_chunks_mut(row_bytes)
        .enumerate()
        .for_each(|(py, row)| {
            let r = (((py as f64 + 0.5) / scale) as usize).min(g.rows - 1);
            for px in 0..mw as usize {
                let c = (((px as f64 + 0.5) / scale) as usize).min(g.cols - 1);
                let code = det.codes[[r, c]];
                let colour = if code == detect::NODATA {
                    if (px + py) % 8 < 2 {
                        HATCH_DARK
                    } else {
                        HATCH_LIGHT
                    }
                } else {
                    cell_rgba(code, z1[[r, c]] - z0[[r, c]], hs[[r, c]], lod, limit, &lut)
                };
                let i = (left as usize + px) * 4;
                row[i..i + 4].copy_from_slice(&colour);
            }
        });

    let to_px = |x: f64, y: f64| -> (f32, f32) {
        (
            left as f32 + ((x - w) / (e - w) * mw as f64) as f32,
            top as f32 + ((n - y) / (n - s) * mh as f64) as f32,
        )
    };
    // Outlines of the landform at both dates, one level above one local base.
    // The outline needs no more than one sample per map pixel.
    let step = ((1.0 / scale).ceil() as usize).max(1);
    let outline = super::outline::outline(z0, z1, lod, step);
    if let Some(o) = &outline {
        let stroke = (fs / 8.0).max(1.5);
        for (z, dash) in [
            (&o.earlier, Some((1.6 * fs / 3.0, fs / 3.0))),
            (&o.later, None),
        ] {
            let mut lines =
                draw::contour_lines(z, o.level_m, o.step, scale, (left as f32, top as f32));
            // Loops shorter than two text heights are survey noise, not a landform.
            lines.retain(|l| polyline_length(l) >= 2.0 * fs);
            draw::polylines(&mut frame, &lines, stroke, OUTLINE, dash);
        }
    }
    // The transect with its ends named.
    let ends = opts.transect.map(|[[x0, y0], [x1, y1]]| {
        let (a, b) = (to_px(x0, y0), to_px(x1, y1));
        draw::line(
            &mut frame,
            a.0,
            a.1,
            b.0,
            b.1,
            (fs / 5.0).max(2.0) + 2.0,
            [255, 255, 255, 255],
        );
        draw::line(
            &mut frame,
            a.0,
            a.1,
            b.0,
            b.1,
            (fs / 5.0).max(2.0),
            TRANSECT,
        );
        let (na, nb) = super::transect::end_names([[x0, y0], [x1, y1]]);
        for ((px, py), name, (ox, oy)) in [
            (a, na, (a.0 - b.0, a.1 - b.1)),
            (b, nb, (b.0 - a.0, b.1 - a.1)),
        ] {
            let len = ox.hypot(oy).max(1e-3);
            let (lx, ly) = (px + ox / len * 0.9 * fs, py + oy / len * 0.9 * fs);
            draw::fill_circle(&mut frame, px, py, fs / 4.0, TRANSECT);
            draw::text_halo(
                &mut frame,
                lx,
                ly - 0.6 * fs,
                fs,
                Anchor::Centre,
                TRANSECT,
                name,
            );
        }
        (na, nb)
    });
    draw::stroke_rect(
        &mut frame,
        left as f32 - 1.0,
        top as f32 - 1.0,
        mw as f32 + 2.0,
        mh as f32 + 2.0,
        BLACK,
    );

    // Map coordinates on the bottom and left edges.
    let tick = 0.5 * fs;
    let label_y = (top + mh) as f32 + tick + 0.2 * fs;
    for &x in &ticks_x {
        let (px, _) = to_px(x, s);
        draw::fill_rect(&mut frame, px, (top + mh) as f32, 1.0, tick, BLACK);
        draw::text(
            &mut frame,
            px,
            label_y,
            fs,
            Anchor::Centre,
            BLACK,
            &coordinate_text(x),
        );
    }
    for &y in &ticks_y {
        let (_, py) = to_px(w, y);
        draw::fill_rect(&mut frame, left as f32 - tick, py, tick, 1.0, BLACK);
        draw::text(
            &mut frame,
            left as f32 - tick - 0.2 * fs,
            py - 0.6 * fs,
            fs,
            Anchor::Right,
            BLACK,
            &coordinate_text(y),
        );
    }
    let crs = match g.epsg {
        Some(code) => format!("EPSG:{code}"),
        None => "the grids' CRS".into(),
    };
    draw::text(
        &mut frame,
        left as f32,
        label_y + line_h,
        fs,
        Anchor::Left,
        BLACK,
        &format!(
            "Map coordinates: easting (bottom), northing (left), {crs}, {}",
            g.horizontal_unit.symbol()
        ),
    );

    // Title and the budget, with its range and whether its sign is established.
    let title = format!(
        "Elevation change {} to {}",
        id_and_date(&pair.from_id, &pair.from_date),
        id_and_date(&pair.to_id, &pair.to_date)
    );
    draw::text_bold(
        &mut frame,
        left as f32,
        pad,
        1.3 * fs,
        Anchor::Left,
        BLACK,
        &title,
    );
    let y1 = pad + 1.6 * fs + 0.2 * fs;
    for (k, l) in lines.iter().enumerate() {
        draw::text(
            &mut frame,
            left as f32,
            y1 + k as f32 * line_h,
            fs,
            Anchor::Left,
            BLACK,
            l,
        );
    }

    legend(
        &mut frame,
        (legend_x, top as f32),
        fs,
        line_h,
        (limit, lod),
        (per, sym),
        &lut,
        outline
            .as_ref()
            .map(|o| (o.level_m, pair.from_date.as_str(), pair.to_date.as_str())),
        ends,
        mh,
    );
    scale_bar(
        &mut frame,
        g,
        (left, mw),
        label_y + 2.0 * line_h + 0.2 * fs,
        fs,
        (per, sym),
    );
    north_arrow(
        &mut frame,
        (left + mw) as f32 - 1.4 * fs,
        top as f32 + 0.8 * fs,
        fs,
    );
    let layout = MapLayout {
        text_px: fs,
        map: (left, top, mw, mh),
        legend: (legend_x, legend_w),
        easting_labels_y: label_y,
    };
    (frame, layout)
}

/// Hillshade `max(0, n·s)` of the later survey (Horn 1981 normals, `render::shade`), rows in
/// parallel; NaN where there is no data. Same values as `shade::hillshade`, which runs in one thread.
fn hillshade(z: &ndarray::ArrayRef2<f32>, g: &GridGeometry) -> ndarray::Array2<f32> {
    let (rows, cols) = z.dim();
    let k = SHADE_EXAGGERATION as f32;
    let zk: Vec<f32> = z.iter().map(|v| v * k).collect();
    let sun = shade::sun_vector(SUN_AZIMUTH_DEG, SUN_ALTITUDE_DEG);
    let (dx, dy) = (g.cell_x_m() as f32, g.cell_y_m() as f32);
    let mut out = ndarray::Array2::from_elem((rows, cols), f32::NAN);
    ndarray::Zip::indexed(&mut out).par_for_each(|(r, c), o| {
        if zk[r * cols + c].is_finite() {
            let (p, q) = shade::horn_gradient(&zk, rows, cols, r, c, dx, dy);
            *o = shade::lambert(shade::normal(p, q), sun);
        }
    });
    out
}

/// Height of the legend's colour bar: 40 % of the map's, at least 6 text heights.
fn legend_bar_h(fs: f32, map_h: u32) -> f32 {
    (0.4 * map_h as f32).max(6.0 * fs).round()
}

fn polyline_length(l: &[(f32, f32)]) -> f32 {
    l.windows(2)
        .map(|w| (w[1].0 - w[0].0).hypot(w[1].1 - w[0].1))
        .sum()
}

/// Sizes that depend on the text size.
struct Plan {
    left: u32,
    top: u32,
    width: u32,
    height: u32,
    legend_x: f32,
    legend_w: f32,
    lines: Vec<String>,
    ticks_x: Vec<f64>,
    ticks_y: Vec<f64>,
}

/// Lays the figure out around a map of `mw` × `mh` pixels with text `fs` pixels high.
fn plan(
    stack: &AlignedStack,
    pair: &PairRecord,
    opts: &ChangeOptions,
    (mw, mh): (u32, u32),
    fs: f32,
) -> Plan {
    let g = stack.geometry();
    let line_h = (fs * 1.3).ceil();
    let pad = fs.round();
    let (w, s, e, n) = g.extent();
    let ticks_x = coordinate_ticks(w, e);
    let ticks_y = coordinate_ticks(s, n);
    let label_w = ticks_y
        .iter()
        .map(|&v| draw::text_width(fs, &coordinate_text(v)))
        .fold(0.0f32, f32::max);
    let left = (pad + label_w + 0.6 * fs).ceil() as u32;
    let legend_x = (left + mw) as f32 + 1.5 * fs;
    let legend_w = 13.0 * fs;
    let width = (legend_x + legend_w + pad).ceil() as u32;
    let unit = opts.display_unit;
    let per = 1.0 / unit.metres();
    let sym = unit.symbol();
    let sentences = [
        format!(
            "Later minus earlier. Coloured: detected change, beyond ±{:.2} {sym} (the LoD, t = {}) in patches of at least {} {sym}²; it covers {:.1} % of the area.",
            pair.lod_m * per,
            pair.lod_t,
            draw::format_tick(pair.min_patch_m2 * per * per, 0.1),
            100.0 * pair.detected_share
        ),
        format!(
            "Net detected change {}; range {} if errors are independent, {} if all alike: {}.",
            volume_text(pair.net_volume_m3, unit, true),
            range_text(pair.net_volume_low_independent_m3, pair.net_volume_high_independent_m3, unit),
            range_text(pair.net_volume_low_correlated_m3, pair.net_volume_high_correlated_m3, unit),
            pair.net_volume_sign
        ),
        "Grey relief: hillshade of the later survey, lit from the north-west; change inside the LoD is not coloured.".to_string(),
    ];
    let text_w = width as f32 - left as f32 - pad;
    let lines: Vec<String> = sentences
        .iter()
        .flat_map(|t| draw::wrap(t, fs, text_w))
        .collect();
    let top = (pad + 1.6 * fs + lines.len() as f32 * line_h + 0.4 * fs).ceil() as u32;
    let bottom = (0.5 * fs + 2.0 * line_h + 2.6 * fs + pad).ceil() as u32;
    let legend_h = legend_bar_h(fs, mh) + 10.5 * line_h + 0.3 * fs;
    let height = (top + mh + bottom).max((top as f32 + legend_h + pad).ceil() as u32);
    Plan {
        left,
        top,
        width,
        height,
        legend_x,
        legend_w,
        lines,
        ticks_x,
        ticks_y,
    }
}

/// The compass words of the map's coordinates: about five round values inside [lo, hi].
fn coordinate_ticks(lo: f64, hi: f64) -> Vec<f64> {
    let step = draw::nice_step(hi - lo, 4.0);
    let mut v = (lo / step).ceil() * step;
    let mut out = Vec::new();
    while v <= hi + 1e-9 && out.len() < 20 {
        out.push(v);
        v += step;
    }
    out
}

/// A map coordinate as text, in whole CRS units with thin groups of three digits.
fn coordinate_text(v: f64) -> String {
    let s = format!("{:.0}", v.abs());
    let mut out = String::new();
    for (i, ch) in s.chars().enumerate() {
        if i > 0 && (s.len() - i) % 3 == 0 {
            out.push('\u{2009}');
        }
        out.push(ch);
    }
    if v < 0.0 {
        format!("−{out}")
    } else {
        out
    }
}

/// A volume in the display unit (and cubic yards with feet), signed.
pub(super) fn volume_text(m3: f64, unit: crate::grid::LinearUnit, signed: bool) -> String {
    let v = m3 / unit.metres().powi(3);
    let sign = if signed && v > 0.0 { "+" } else { "" };
    let main = format!("{sign}{}\u{a0}{}³", group(v), unit.symbol());
    if unit == crate::grid::LinearUnit::Metre {
        main
    } else {
        let yd = m3 / crate::archive::table::CUBIC_YARD_M3;
        format!("{main} ({sign}{}\u{a0}yd³)", group(yd))
    }
}

fn range_text(lo_m3: f64, hi_m3: f64, unit: crate::grid::LinearUnit) -> String {
    let k = unit.metres().powi(3);
    let main = format!(
        "{}\u{a0}to\u{a0}{}\u{a0}{}³",
        group(lo_m3 / k),
        group(hi_m3 / k),
        unit.symbol()
    );
    if unit == crate::grid::LinearUnit::Metre {
        main
    } else {
        let yd = crate::archive::table::CUBIC_YARD_M3;
        format!(
            "{main} ({}\u{a0}to\u{a0}{}\u{a0}yd³)",
            group(lo_m3 / yd),
            group(hi_m3 / yd)
        )
    }
}

/// A number rounded to a whole unit with thin spaces between groups of three and a true minus.
fn group(v: f64) -> String {
    let t = coordinate_text(v.round());
    if t == "−0" {
        "0".into()
    } else {
        t
    }
}

#[allow(clippy::too_many_arguments)]
fn legend(
    frame: &mut Frame,
    (x, y): (f32, f32),
    fs: f32,
    line_h: f32,
    (limit, lod): (f64, f64),
    (per, sym): (f64, &str),
    lut: &[[u8; 4]; RAMP_LEN],
    outline: Option<(f64, &str, &str)>,
    ends: Option<(&str, &str)>,
    map_h: u32,
) {
    let bar_w = 1.4 * fs;
    let bar_h = legend_bar_h(fs, map_h);
    draw::text_bold(
        frame,
        x,
        y,
        fs,
        Anchor::Left,
        BLACK,
        &format!("Change ({sym})"),
    );
    draw::text(
        frame,
        x,
        y + line_h,
        fs,
        Anchor::Left,
        BLACK,
        "raised (deposition)",
    );
    let top = y + 2.0 * line_h + 0.3 * fs;
    for k in 0..bar_h as u32 {
        // Top of the bar is +limit, bottom is -limit; inside ±LoD the plain relief grey.
        let v = limit * (1.0 - 2.0 * (k as f64 + 0.5) / bar_h as f64);
        let c = if v.abs() < lod {
            let g = shade_grey(0.7) as u8;
            [g, g, g, 255]
        } else {
            lut[ramp_index(v, lod, limit)]
        };
        draw::fill_rect(frame, x, top + k as f32, bar_w, 1.0, c);
    }
    draw::stroke_rect(frame, x - 1.0, top - 1.0, bar_w + 2.0, bar_h + 2.0, BLACK);
    let to_y = |v: f64| top + bar_h * (1.0 - ((v / limit + 1.0) / 2.0)) as f32;
    let step = draw::nice_step(limit * per, 2.0);
    let mut v = -(limit * per / step).floor() * step;
    while v <= limit * per + 1e-9 {
        let ty = to_y(v / per);
        draw::fill_rect(frame, x + bar_w, ty, 0.4 * fs, 1.0, BLACK);
        let label = if v > 0.0 {
            format!("+{}", draw::format_tick(v, step))
        } else {
            draw::format_tick(v, step).replace('-', "−")
        };
        draw::text(
            frame,
            x + bar_w + 0.6 * fs,
            ty - 0.6 * fs,
            fs,
            Anchor::Left,
            BLACK,
            &label,
        );
        v += step;
    }
    // The not-detected band, named beside the bar.
    let mid = to_y(0.0);
    draw::text(
        frame,
        x + bar_w + 4.2 * fs,
        mid - 0.6 * fs,
        fs,
        Anchor::Left,
        BLACK,
        &format!("±{:.2} = LoD", lod * per),
    );
    draw::text(
        frame,
        x,
        top + bar_h + 0.4 * fs,
        fs,
        Anchor::Left,
        BLACK,
        "lowered (erosion)",
    );
    let mut ky = top + bar_h + 0.4 * fs + 1.5 * line_h;
    let key_w = 2.2 * fs;
    // Relief without detected change.
    let g = shade_grey(0.7) as u8;
    draw::fill_rect(frame, x, ky, key_w, fs, [g, g, g, 255]);
    draw::stroke_rect(frame, x - 1.0, ky - 1.0, key_w + 2.0, fs + 2.0, BLACK);
    draw::text(
        frame,
        x + key_w + 0.5 * fs,
        ky - 0.1 * fs,
        fs,
        Anchor::Left,
        BLACK,
        "no detected change",
    );
    ky += line_h;
    for k in 0..fs as u32 {
        for j in 0..key_w as u32 {
            let c = if (j + k) % 8 < 2 {
                HATCH_DARK
            } else {
                HATCH_LIGHT
            };
            draw::fill_rect(frame, x + j as f32, ky + k as f32, 1.0, 1.0, c);
        }
    }
    draw::stroke_rect(frame, x - 1.0, ky - 1.0, key_w + 2.0, fs + 2.0, BLACK);
    draw::text(
        frame,
        x + key_w + 0.5 * fs,
        ky - 0.1 * fs,
        fs,
        Anchor::Left,
        BLACK,
        "no data",
    );
    ky += line_h;
    if let Some((level, from, to)) = outline {
        let stroke = (fs / 8.0).max(1.5);
        draw::text(frame, x, ky, fs, Anchor::Left, BLACK, "Landform outline,");
        ky += line_h;
        draw::text(
            frame,
            x,
            ky,
            fs,
            Anchor::Left,
            BLACK,
            &format!("{:.1} {sym} above local base:", level * per),
        );
        ky += line_h;
        draw::polylines(
            frame,
            &[vec![(x, ky + 0.5 * fs), (x + key_w, ky + 0.5 * fs)]],
            stroke,
            OUTLINE,
            Some((1.6 * fs / 3.0, fs / 3.0)),
        );
        draw::text(
            frame,
            x + key_w + 0.5 * fs,
            ky - 0.1 * fs,
            fs,
            Anchor::Left,
            BLACK,
            from,
        );
        ky += line_h;
        draw::polylines(
            frame,
            &[vec![(x, ky + 0.5 * fs), (x + key_w, ky + 0.5 * fs)]],
            stroke,
            OUTLINE,
            None,
        );
        draw::text(
            frame,
            x + key_w + 0.5 * fs,
            ky - 0.1 * fs,
            fs,
            Anchor::Left,
            BLACK,
            to,
        );
        ky += line_h;
    }
    if let Some((a, b)) = ends {
        draw::line(
            frame,
            x,
            ky + 0.5 * fs,
            x + key_w,
            ky + 0.5 * fs,
            (fs / 5.0).max(2.0),
            TRANSECT,
        );
        draw::text(
            frame,
            x + key_w + 0.5 * fs,
            ky - 0.1 * fs,
            fs,
            Anchor::Left,
            BLACK,
            &format!("transect {a} to {b}"),
        );
    }
}

fn scale_bar(
    frame: &mut Frame,
    g: &GridGeometry,
    (left, map_px): (u32, u32),
    y: f32,
    fs: f32,
    (per, sym): (f64, &str),
) {
    let map_width_units = g.cols as f64 * g.cell_x_m() * per;
    let len = draw::nice_floor(map_width_units / 4.0);
    let px = (len / map_width_units * map_px as f64) as f32;
    let x0 = left as f32;
    let h = 0.4 * fs;
    draw::fill_rect(frame, x0, y, px / 2.0, h, BLACK);
    draw::stroke_rect(frame, x0, y, px, h, BLACK);
    draw::text(frame, x0, y + h + 0.2 * fs, fs, Anchor::Centre, BLACK, "0");
    draw::text(
        frame,
        x0 + px,
        y + h + 0.2 * fs,
        fs,
        Anchor::Centre,
        BLACK,
        &format!("{} {sym}", draw::format_tick(len, len)),
    );
}

fn north_arrow(frame: &mut Frame, x: f32, y: f32, fs: f32) {
    let (a, b) = (1.0 * fs, 2.4 * fs);
    draw::fill_circle(frame, x, y + 1.3 * fs, 1.5 * fs, [255, 255, 255, 200]);
    draw::fill_triangle(
        frame,
        (x, y + a),
        (x - 0.5 * fs, y + b),
        (x, y + 0.8 * b),
        BLACK,
    );
    draw::fill_triangle(
        frame,
        (x, y + a),
        (x + 0.5 * fs, y + b),
        (x, y + 0.8 * b),
        [90, 90, 90, 255],
    );
    draw::text_bold(frame, x, y - 0.1 * fs, fs, Anchor::Centre, BLACK, "N");
}

/// "id (date)", or just the date when the id is the date.
pub(crate) fn id_and_date(id: &str, date: &str) -> String {
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
        // Check: common practice, no source (REFERENCES.md §10) — symmetric limits, zero change in the middle
        assert_eq!(ramp_index(2.0, 0.2, 2.0), RAMP_LEN - 1);
        assert_eq!(ramp_index(-2.0, 0.2, 2.0), 0);
        // The faintest detected change starts a fifth of the way out, never at the pale middle.
        let at_lod = ramp_index(0.2, 0.2, 2.0);
        assert_eq!(
            at_lod - RAMP_MID,
            (RAMP_SKIP * RAMP_MID as f64).round() as usize
        );
        assert_eq!(
            RAMP_MID - ramp_index(-0.7, 0.2, 2.0),
            ramp_index(0.7, 0.2, 2.0) - RAMP_MID
        );
        // Erosion warm (red above blue), deposition cool (blue above red).
        assert!(lut[0][0] > lut[0][2]);
        assert!(lut[RAMP_LEN - 1][2] > lut[RAMP_LEN - 1][0]);
        // Not detected: the relief grey, whatever the change.
        let c = cell_rgba(detect::NONE, 0.1, 1.0, 0.2, 2.0, &lut);
        assert_eq!(c[0], c[1]);
        assert_eq!(c[1], c[2]);
        let d = cell_rgba(detect::DEPOSITION, 0.3, 1.0, 0.2, 2.0, &lut);
        assert!(d[2] > d[0]);
    }

    #[test]
    fn parallel_hillshade_matches_the_renderers() {
        let g = super::super::testkit::geometry(40, 2.0);
        let z = ndarray::Array2::from_shape_fn((40, 40), |(r, c)| {
            ((r as f32 * 0.3).sin() * 3.0 + c as f32 * 0.1)
                * if r == 7 && c == 9 { f32::NAN } else { 1.0 }
        });
        let a = hillshade(&z, &g);
        let b = shade::hillshade(
            &z,
            2.0,
            2.0,
            SUN_AZIMUTH_DEG,
            SUN_ALTITUDE_DEG,
            SHADE_EXAGGERATION,
        );
        for (x, y) in a.iter().zip(b.iter()) {
            assert!(x == y || (x.is_nan() && y.is_nan()), "{x} {y}");
        }
    }

    #[test]
    fn coordinates_read_as_numbers() {
        assert_eq!(coordinate_text(5_800_200.0), "5\u{2009}800\u{2009}200");
        assert_eq!(coordinate_text(-1200.0), "−1\u{2009}200");
        assert_eq!(
            coordinate_ticks(100.0, 420.0),
            vec![100.0, 200.0, 300.0, 400.0]
        );
        assert_eq!(group(-0.3), "0");
    }
}
