//! Overlay layout on whole frames: marker placement, text inside the frame, measured vs interpolated,
//! tiny frames. Also writes preview PNGs to target/annotate-preview/ for a person to look at.

use dunereel::annotate::layout::{BOTTOM_BAND, SMALLEST_TEXT, TOP_BAND};
use dunereel::annotate::{
    draw_overlay, plan, CrestLabel, FrameStatus, InsetChart, LabelOptions, Legend, Optional,
    Overlay, Plan, Rect,
};
use dunereel::render::Frame;

/// A terrain-like background: sand-coloured gradient with bright and dark patches, so the panels
/// are tested against both.
fn background(w: u32, h: u32) -> Frame {
    let mut f = Frame::new(w, h);
    for y in 0..h as usize {
        for x in 0..w as usize {
            let i = (y * w as usize + x) * 4;
            let t = x as f32 / w as f32;
            let s = y as f32 / h as f32;
            let wave = ((x as f32 * 0.02).sin() * (y as f32 * 0.03).cos() * 0.5 + 0.5) * 60.0;
            f.rgba[i] = (150.0 + 90.0 * t - 40.0 * s + wave * 0.3) as u8;
            f.rgba[i + 1] = (120.0 + 70.0 * t + wave * 0.5 - 30.0 * s) as u8;
            f.rgba[i + 2] = (80.0 + 40.0 * s + wave * 0.2) as u8;
            f.rgba[i + 3] = 255;
        }
    }
    f
}

fn full_overlay(interpolated: bool, peak_px: (f32, f32)) -> Overlay {
    let series: Vec<(f64, f64)> = (0..40)
        .map(|i| {
            (
                2024.0 + i as f64 * 0.2,
                18.0 + (i as f64 * 0.3).sin() * 2.5 + i as f64 * 0.05,
            )
        })
        .collect();
    let survey_points = vec![series[0], series[13], series[26], series[39]];
    Overlay {
        title: "Test dune A — a long title that must wrap, surveys 2024 to 2031".into(),
        date_text: if interpolated {
            "2027-08-19".into()
        } else {
            "2029-03-02".into()
        },
        status: if interpolated {
            FrameStatus::Interpolated {
                method: "linear blend".into(),
                from_date: "2026-10-01".into(),
                to_date: "2029-03-02".into(),
            }
        } else {
            FrameStatus::Surveyed {
                label: Some("spring lidar flight".into()),
            }
        },
        crest: CrestLabel {
            name: "Crest elevation".into(),
            value: 21.37,
            unit: "m".into(),
        },
        crest_px: Some(peak_px),
        vertical_exaggeration: 2.0,
        legend: Some(Legend {
            title: "Elevation".into(),
            stops: vec![
                [40, 60, 120],
                [60, 150, 140],
                [200, 190, 120],
                [240, 235, 220],
            ],
            min: 0.0,
            max: 24.0,
            unit: "m".into(),
        }),
        north_angle_rad: Some(0.6),
        metres_per_px: Some(0.8),
        scale_unit: (1.0, "m".into()),
        inset: Some(InsetChart {
            title: "Crest elevation".into(),
            unit: "m".into(),
            survey_points,
            current: (2027.6, series[18].1),
            survey_sigma: vec![0.1; 4],
            min_span: 1.0,
        }),
        credit: Some("Survey data: invented coastal agency, airborne lidar; demo only".into()),
    }
}

/// Every box the plan placed, the marker's word included.
fn rects(p: &Plan) -> Vec<Rect> {
    [
        p.date,
        p.badge,
        p.detail,
        p.title,
        p.crest,
        p.chart,
        p.credit,
        p.legend,
        p.scale,
        p.north,
        p.marker_label,
    ]
    .iter()
    .flatten()
    .copied()
    .collect()
}

fn out_dir() -> std::path::PathBuf {
    let d = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("target/annotate-preview");
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn save(f: &Frame, name: &str) {
    image::save_buffer(
        out_dir().join(name),
        &f.rgba,
        f.width,
        f.height,
        image::ExtendedColorType::Rgba8,
    )
    .unwrap();
}

#[test]
fn previews_at_three_sizes_and_text_stays_inside() {
    for (w, h) in [(640u32, 360u32), (1280, 720), (1920, 1080), (960, 540)] {
        for interp in [false, true] {
            let ov = full_overlay(interp, (w as f32 * 0.55, h as f32 * 0.52));
            let opts = LabelOptions::default();
            let p = plan(w, h, &ov, &opts);
            // Nothing is dropped from 640x360 upwards.
            assert!(p.dropped.is_empty(), "{w}x{h}: dropped {:?}", p.dropped);
            for r in &rects(&p) {
                assert!(
                    r.inside(w as f32, h as f32),
                    "{w}x{h}: {r:?} leaves the frame"
                );
            }
            let mut f = background(w, h);
            draw_overlay(&mut f, &ov, &opts);
            save(
                &f,
                &format!(
                    "overlay-{w}x{h}-{}.png",
                    if interp { "interpolated" } else { "surveyed" }
                ),
            );
        }
    }
}

#[test]
fn crest_marker_lands_on_the_given_pixel() {
    // Check: common practice, no source — the marker dot is centred on the projected crest; tolerance 2 px.
    for (w, h, x, y) in [
        (640u32, 360u32, 300.5f32, 200.25f32),
        (1280, 720, 901.0, 377.0),
        (320, 180, 40.0, 150.0),
    ] {
        let mut f = Frame::new(w, h);
        let ov = Overlay {
            crest_px: Some((x, y)),
            ..Default::default()
        };
        let opts = LabelOptions {
            crest_marker: true,
            ..LabelOptions::none()
        };
        draw_overlay(&mut f, &ov, &opts);
        // The dot is the only red thing drawn: centroid of strongly red pixels.
        let (mut sx, mut sy, mut n) = (0.0f64, 0.0f64, 0.0f64);
        for py in 0..h as usize {
            for px in 0..w as usize {
                let p = &f.rgba[(py * w as usize + px) * 4..][..3];
                if p[0] > 150 && p[1] < 100 && p[2] < 100 {
                    sx += px as f64 + 0.5;
                    sy += py as f64 + 0.5;
                    n += 1.0;
                }
            }
        }
        assert!(n > 0.0, "no marker drawn");
        let (cx, cy) = (sx / n, sy / n);
        assert!(
            (cx - x as f64).abs() <= 2.0 && (cy - y as f64).abs() <= 2.0,
            "marker at ({cx},{cy}), wanted ({x},{y})"
        );
    }
}

#[test]
fn interpolated_and_measured_status_areas_differ() {
    let (w, h) = (640, 360);
    let mut a = background(w, h);
    let mut b = background(w, h);
    let ov_m = full_overlay(false, (300.0, 200.0));
    let mut ov_i = full_overlay(true, (300.0, 200.0));
    ov_i.date_text = ov_m.date_text.clone();
    let opts = LabelOptions::default();
    draw_overlay(&mut a, &ov_m, &opts);
    draw_overlay(&mut b, &ov_i, &opts);
    let badge = plan(w, h, &ov_m, &opts).badge.expect("badge placed");
    let mut differing = 0;
    for y in badge.y as usize..(badge.y + badge.h) as usize {
        for x in badge.x as usize..(badge.x + badge.w.min(40.0)) as usize {
            let i = (y * w as usize + x) * 4;
            if a.rgba[i..i + 3] != b.rgba[i..i + 3] {
                differing += 1;
            }
        }
    }
    // The badge colour differs, so most of the badge's first 40 columns differ.
    let area = (badge.h as usize) * 40;
    assert!(differing * 2 > area, "{differing} of {area} pixels differ");
}

#[test]
fn tiny_frames_drop_in_order_and_never_panic() {
    for (w, h) in [
        (64u32, 48u32),
        (160, 90),
        (320, 180),
        (1, 1),
        (2, 300),
        (300, 2),
    ] {
        let ov = full_overlay(true, (w as f32 / 2.0, h as f32 / 2.0));
        let opts = LabelOptions::default();
        let p = plan(w, h, &ov, &opts);
        for r in &rects(&p) {
            assert!(
                r.inside(w as f32, h as f32),
                "{w}x{h}: {r:?} leaves the frame"
            );
        }
        // Dropped elements follow the documented order (a prefix of it, skipping absent ones is not needed here).
        let order: Vec<usize> = p
            .dropped
            .iter()
            .map(|d| {
                dunereel::annotate::DROP_ORDER
                    .iter()
                    .position(|e| e == d)
                    .unwrap()
            })
            .collect();
        assert!(order.windows(2).all(|w| w[0] < w[1]), "{order:?}");
        let mut f = background(w, h);
        draw_overlay(&mut f, &ov, &opts);
        if (w, h) == (64, 48) {
            assert!(p.dropped.contains(&Optional::InsetChart) || ov.inset.is_none());
            let big = image::imageops::resize(
                &image::RgbaImage::from_raw(w, h, f.rgba.clone()).unwrap(),
                w * 6,
                h * 6,
                image::imageops::FilterType::Nearest,
            );
            big.save(out_dir().join("overlay-64x48-zoom6.png")).unwrap();
        }
        if (w, h) == (320, 180) {
            save(&f, "overlay-320x180.png");
        }
    }
}

#[test]
fn every_element_can_be_turned_off() {
    let (w, h) = (640, 360);
    let bg = background(w, h);
    let mut f = bg.clone();
    draw_overlay(
        &mut f,
        &full_overlay(true, (300.0, 200.0)),
        &LabelOptions::none(),
    );
    assert_eq!(f, bg);
    // In a job the status mark (and with it the exaggeration) cannot be turned off: the job check
    // refuses `labels.status: false`; `LabelOptions::none()` is for the library's own bare frames.
    let opts: LabelOptions = serde_yaml::from_str("legend: false\ninset_chart: false\n").unwrap();
    assert!(!opts.legend && !opts.inset_chart && opts.title);
    assert!(serde_yaml::from_str::<LabelOptions>("legnd: false\n").is_err());
}

#[test]
fn panels_cover_at_most_a_tenth_stay_in_their_bands_and_read_from_the_back() {
    for (w, h) in [(1280u32, 720u32), (960, 540)] {
        for interp in [false, true] {
            // The crest in the middle of the landform's rectangle, as the renderer frames it.
            let ov = full_overlay(interp, (w as f32 * 0.5, h as f32 * 0.45));
            let opts = LabelOptions::default();
            let p = plan(w, h, &ov, &opts);
            assert!(p.dropped.is_empty(), "{w}x{h}: dropped {:?}", p.dropped);
            let (fw, fh) = (w as f32, h as f32);
            // Layout contract with the renderer: panels only in the top 11 % or the bottom 9 %;
            // the landform keeps the rectangle from 12 % to 90 % of the height.
            for r in rects(&p) {
                if Some(r) == p.marker_label {
                    continue;
                }
                let in_top = r.y >= 0.0 && r.bottom() <= TOP_BAND * fh + 0.01;
                let in_bottom = r.y >= fh - BOTTOM_BAND * fh - 0.01 && r.bottom() <= fh + 0.01;
                assert!(in_top || in_bottom, "{w}x{h}: {r:?} outside both bands");
                assert!(r.x >= 0.0 && r.right() <= fw, "{w}x{h}: {r:?}");
            }
            // Measured as the issue asks: render with and without the panels, count changed pixels.
            let bare = background(w, h);
            let mut f = bare.clone();
            draw_overlay(&mut f, &ov, &opts);
            let changed = f
                .rgba
                .chunks_exact(4)
                .zip(bare.rgba.chunks_exact(4))
                .filter(|(a, b)| a != b)
                .count();
            let share = changed as f64 / (w as f64 * h as f64);
            eprintln!(
                "{w}x{h} {}: panels change {:.1} % of the frame; smallest text {:.1} px = {:.2} % of the height",
                if interp { "interpolated" } else { "surveyed" },
                share * 100.0,
                p.smallest_text_px,
                p.smallest_text_px / fh * 100.0
            );
            // Check: issue #9 item 6 — all panels together at most 10 % of the frame
            assert!(share <= 0.10, "{w}x{h}: panels change {share}");
            // Check: common practice, no source — text of about 1/40 of the screen height reads
            // from the back of a meeting room; nothing smaller is drawn
            assert!(
                p.smallest_text_px >= SMALLEST_TEXT * fh - 0.01,
                "{}",
                p.smallest_text_px
            );
            // The frame states the vertical exaggeration, and the status mark is there.
            assert!(p.scale.is_some() && p.badge.is_some());
        }
    }
}
