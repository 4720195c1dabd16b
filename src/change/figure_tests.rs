//! The record's figures checked as images: text height, legend width, colours (no red–green pair,
//! lightness steps in CIE L*a*b*), and that change within the LoD lets the relief show through.

use super::colour::{hue_chroma, srgb_to_lab, MIN_LIGHTNESS_STEP};
use super::map::{dod_map_with_layout, ramp};
use super::testkit::{geometry, stack, survey};
use super::transect::{transect_chart_with_layout, CHART_SIZE};
use super::{record, ChangeOptions};
use crate::render::Frame;

/// A dune moving east over a gently sloping plain, surveyed three times, with seeded noise.
fn sample() -> (
    crate::align::AlignedStack,
    super::ChangeRecord,
    ChangeOptions,
) {
    let g = geometry(160, 1.0);
    let noisy = |seed: u64, cx: f64, h: f64| {
        move |x: f64, y: f64| {
            // A hash of the position and seed as noise of about ±0.1 m (uniform), reproducible.
            let k = ((x * 7919.0 + y * 104_729.0) as i64 as u64)
                .wrapping_mul(6_364_136_223_846_793_005)
                ^ seed;
            let u = ((k >> 33) % 1000) as f64 / 1000.0 - 0.5;
            2.0 + 0.01 * x + h * (-((x - cx).powi(2) + y * y) / 300.0).exp() + 0.2 * u
        }
    };
    let st = stack(vec![
        survey("a", "2030-03-01", &g, Some(0.06), noisy(1, -20.0, 8.0)),
        survey("b", "2031-03-01", &g, Some(0.06), noisy(2, -8.0, 7.6)),
        survey("c", "2033-03-01", &g, Some(0.06), noisy(3, 12.0, 7.2)),
    ]);
    let opts = ChangeOptions {
        transect: Some([[-70.0, -10.0], [70.0, 10.0]]),
        ..Default::default()
    };
    let rec = record(&st, &opts).unwrap();
    (st, rec, opts)
}

fn px(f: &Frame, x: u32, y: u32) -> [u8; 4] {
    let i = (y as usize * f.width as usize + x as usize) * 4;
    [f.rgba[i], f.rgba[i + 1], f.rgba[i + 2], f.rgba[i + 3]]
}

fn is_ink(p: [u8; 4]) -> bool {
    (p[0] as u32 + p[1] as u32 + p[2] as u32) < 300
}

/// Rows between `y0` and `y1` holding ink within columns `x0..x1`: (first, last).
fn ink_rows(f: &Frame, (x0, x1): (u32, u32), (y0, y1): (u32, u32)) -> Option<(u32, u32)> {
    let rows: Vec<u32> = (y0..y1.min(f.height))
        .filter(|&y| (x0..x1.min(f.width)).any(|x| is_ink(px(f, x, y))))
        .collect();
    Some((*rows.first()?, *rows.last()?))
}

#[test]
fn dod_map_text_is_readable_and_stable_ground_shows_the_relief() {
    let (st, rec, opts) = sample();
    let pair = rec.pairs.last().unwrap();
    let (f, l) = dod_map_with_layout(&st, pair, &opts);
    // Check: issue requirement — text at least 2.5 % of the figure's height
    assert!(
        l.text_px >= 0.025 * f.height as f32,
        "{} px on {}",
        l.text_px,
        f.height
    );
    // In the picture: the text size is the font's ascent-to-descent height (ab_glyph's scale, as
    // on the frames), in which DejaVu Sans digits stand 0.63 tall (0.729 em of 1.164 em; from
    // memory); the easting labels' ink must be at least 0.6 of 2.5 % of the height.
    let (left, _, mw, _) = l.map;
    let y = l.easting_labels_y as u32;
    let (a, b) =
        ink_rows(&f, (left, left + mw), (y, y + (1.4 * l.text_px) as u32)).expect("labels drawn");
    assert!(
        (b - a + 1) as f32 >= 0.6 * 0.025 * f.height as f32,
        "ink {a}..{b}, text {} px, height {}",
        l.text_px,
        f.height
    );
    // Stable ground: plain relief greys (r = g = b) that vary with the hillshade, never one flat grey.
    let (_, top, _, mh) = l.map;
    let mut greys = std::collections::BTreeSet::new();
    for yy in top + 2..top + mh / 6 {
        for xx in left + 2..left + mw / 6 {
            let p = px(&f, xx, yy);
            if p[0] == p[1] && p[1] == p[2] {
                greys.insert(p[0]);
            }
        }
    }
    assert!(greys.len() > 10, "{greys:?}");
    // The ramp has no green: every saturated entry's hue lies outside 100°–180° h_ab.
    for c in ramp() {
        let (h, chroma) = hue_chroma(srgb_to_lab([c[0], c[1], c[2]]));
        // Check: CIE 15 L*a*b* hue angle — greens lie near h_ab 130–160°; no entry there
        assert!(
            chroma < 15.0 || !(100.0..180.0).contains(&h),
            "{c:?}: h {h:.0}, C {chroma:.0}"
        );
    }
}

#[test]
fn transect_chart_orders_dates_by_lightness_and_keeps_the_labels_narrow() {
    let (_, rec, opts) = sample();
    let (f, l) = transect_chart_with_layout(&rec, &opts);
    assert_eq!((f.width, f.height), CHART_SIZE);
    // Check: issue requirement — text at least 2.5 % of the chart's height
    assert!(l.text_px >= 0.025 * f.height as f32);
    // Check: CIE 15 L* — neighbouring dates at least 15 L* apart, oldest palest
    let lab: Vec<[f64; 3]> = l
        .colours
        .iter()
        .map(|c| srgb_to_lab([c[0], c[1], c[2]]))
        .collect();
    assert_eq!(lab.len(), 3);
    for w in lab.windows(2) {
        assert!(w[0][0] - w[1][0] >= MIN_LIGHTNESS_STEP, "{w:?}");
    }
    // The lines really carry those colours: each is found in the plot.
    let (pl, pt, pr, pb) = l.plot;
    for c in &l.colours {
        let found =
            (pt as u32..pb as u32).any(|y| (pl as u32..pr as u32).any(|x| px(&f, x, y) == *c));
        assert!(found, "{c:?} not drawn");
    }
    // Labels instead of a legend: what lies right of the plot is at most 15 % of the width
    // (a quarter before), measured on the picture.
    let right = pr as u32 + 3;
    let used = (right..f.width)
        .filter(|&x| (pt as u32..pb as u32).any(|y| px(&f, x, y) != [255, 255, 255, 255]))
        .count();
    assert!((used as f32) <= 0.15 * f.width as f32, "{used} columns");
    assert!(l.labels_w <= 0.15 * f.width as f32);
    // The exaggeration is measured on the drawing, and stated.
    assert!(l.vertical_exaggeration.is_finite() && l.vertical_exaggeration > 1.0);
}

#[test]
fn record_flags_a_net_whose_range_includes_zero() {
    let (_, rec, _) = sample();
    for p in &rec.pairs {
        let zero_inside =
            p.net_volume_low_correlated_m3 <= 0.0 && p.net_volume_high_correlated_m3 >= 0.0;
        assert_eq!(
            zero_inside,
            p.net_volume_sign.contains("sign not established"),
            "{p:?}"
        );
        // Independent range inside the correlated one.
        assert!(p.net_volume_low_correlated_m3 <= p.net_volume_low_independent_m3);
        assert!(p.net_volume_high_independent_m3 <= p.net_volume_high_correlated_m3);
        assert!(p.detected_share > 0.0 && p.detected_share < 1.0);
    }
    // Check: Brasington et al. (2003) bound and independent σ — with t = 1.96: net ± 1.96·A·σ·√n
    let p = &rec.pairs[0];
    let half = 1.96 * p.sigma_dod_m * (p.detected_cells as f64).sqrt();
    assert!((p.net_volume_high_independent_m3 - p.net_volume_m3 - half).abs() < 1e-6);
    assert_eq!(
        super::record::net_sign(-1.0, 1.0, 20.0, 1.96),
        "sign not established"
    );
    assert!(super::record::net_sign(-10.0, 1.0, 20.0, 1.96)
        .starts_with("loss if errors are independent"));
    assert_eq!(super::record::net_sign(-10.0, 1.0, 5.0, 1.96), "loss");
    assert!(super::record::net_sign(10.0, 1.0, 20.0, 1.96)
        .starts_with("gain if errors are independent"));
}

#[test]
fn figures_are_the_same_on_any_thread_count() {
    let (st, rec, opts) = sample();
    let one = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let four = rayon::ThreadPoolBuilder::new()
        .num_threads(4)
        .build()
        .unwrap();
    let a = one.install(|| super::figures(&st, &rec, &opts));
    let b = four.install(|| super::figures(&st, &rec, &opts));
    assert_eq!(a.len(), b.len());
    for (x, y) in a.iter().zip(&b) {
        assert_eq!(x.file_name, y.file_name);
        assert!(x.frame.rgba == y.frame.rgba, "{} differs", x.file_name);
    }
}
