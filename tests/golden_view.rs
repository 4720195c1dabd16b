//! Golden images of the renderer: small views compared with a per-channel tolerance.
//!
//! Each reference under tests/golden/view/ tests one behaviour. On a mismatch, expected | diff |
//! actual is written to target/golden-diff/. `UPDATE_GOLDEN=1` rewrites the reference and still
//! fails, so every new reference gets looked at before it is committed.

use std::path::PathBuf;

use dunereel::render::bench_api::synthetic_dunes;
use dunereel::render::{Frame, LightOptions, Renderer, ViewOptions, WaterOptions};

/// Largest allowed difference per channel (STYLE.md "Testing a renderer").
const TOLERANCE: u8 = 2;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn to_image(f: &Frame) -> image::RgbaImage {
    image::RgbaImage::from_raw(f.width, f.height, f.rgba.clone()).unwrap()
}

fn compare(name: &str, f: &Frame) {
    let path = root().join("tests/golden/view").join(format!("{name}.png"));
    let actual = to_image(f);
    if std::env::var_os("UPDATE_GOLDEN").is_some() {
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        actual.save(&path).unwrap();
        panic!(
            "{}: reference rewritten; look at it, then run again without UPDATE_GOLDEN",
            path.display()
        );
    }
    let expected = image::open(&path)
        .unwrap_or_else(|e| {
            panic!(
                "{}: {e}; run with UPDATE_GOLDEN=1 to create it",
                path.display()
            )
        })
        .to_rgba8();
    assert_eq!(
        expected.dimensions(),
        actual.dimensions(),
        "{name}: size differs"
    );
    let (w, h) = actual.dimensions();
    let mut diff = image::RgbaImage::new(w, h);
    let mut differing = 0usize;
    for (x, y, a) in actual.enumerate_pixels() {
        let e = expected.get_pixel(x, y);
        let d = (0..3).map(|k| a[k].abs_diff(e[k])).max().unwrap();
        if d > TOLERANCE {
            differing += 1;
        }
        let v = if d > TOLERANCE { 255 } else { d * 40 };
        diff.put_pixel(x, y, image::Rgba([v, 0, 0, 255]));
    }
    if differing > 0 {
        let dir = root().join("target/golden-diff");
        std::fs::create_dir_all(&dir).unwrap();
        let mut side = image::RgbaImage::new(w * 3, h);
        image::imageops::overlay(&mut side, &expected, 0, 0);
        image::imageops::overlay(&mut side, &diff, i64::from(w), 0);
        image::imageops::overlay(&mut side, &actual, 2 * i64::from(w), 0);
        let out = dir.join(format!("{name}.png"));
        side.save(&out).unwrap();
        panic!(
            "{name}: {differing} pixels differ by more than {TOLERANCE}; see {}",
            out.display()
        );
    }
}

fn render(view: &ViewOptions, light: &LightOptions, water: Option<f64>, orbit: f64) -> Frame {
    let s = synthetic_dunes(72, 96, 2.0);
    let mut r = Renderer::new(&s.geometry, view, light, (0.0, 16.0)).unwrap();
    if let Some(level) = water {
        r.set_water(&WaterOptions {
            level_m: Some(level),
            ..Default::default()
        })
        .unwrap();
    }
    let mut f = Frame::new(view.width, view.height);
    r.render_into(&s, orbit, &mut f);
    f
}

#[test]
fn low_sun_east() {
    // Low sun from the east: long shadows to the west of the crests, block sides lit on the east.
    let view = ViewOptions {
        width: 128,
        height: 96,
        facing_deg: 330.0,
        ..Default::default()
    };
    let light = LightOptions {
        azimuth_deg: Some(90.0),
        altitude_deg: 15.0,
        ..Default::default()
    };
    compare("low-sun-east", &render(&view, &light, None, 0.0));
}

#[test]
fn water_plane_quarter_orbit() {
    // A quarter of the way through a half-turn orbit, with water at 4 m over the troughs.
    let view = ViewOptions {
        width: 128,
        height: 96,
        orbit_deg: 180.0,
        ..Default::default()
    };
    compare(
        "water-quarter-orbit",
        &render(&view, &LightOptions::default(), Some(4.0), 0.25),
    );
}

/// Writes larger previews to target/render-preview/ for a human to look at (not a check).
#[test]
#[ignore]
fn write_previews() {
    let dir = root().join("target/render-preview");
    std::fs::create_dir_all(&dir).unwrap();
    let s = synthetic_dunes(512, 640, 1.0);
    let save = |name: &str, f: &Frame| to_image(f).save(dir.join(name)).unwrap();
    let view = ViewOptions {
        width: 960,
        height: 540,
        ..Default::default()
    };
    let light = LightOptions::default();
    let mut r = Renderer::new(&s.geometry, &view, &light, (0.0, 16.0)).unwrap();
    let mut f = Frame::new(960, 540);
    r.render_into(&s, 0.0, &mut f);
    save("default.png", &f);
    r.set_water(&WaterOptions {
        level_m: Some(4.5),
        ..Default::default()
    })
    .unwrap();
    let mut earlier = s.clone();
    earlier.z = synthetic_dunes(512, 640, 1.0).z.mapv(|v| v * 0.7 + 3.0);
    r.render_scene_into(
        &s,
        Some(&earlier),
        dunereel::render::Colouring::Elevation,
        0.0,
        &mut f,
    );
    save("shell-water.png", &f);
    let c = dunereel::render::Colouring::Change {
        reference: &earlier.z,
        limit_m: 4.0,
        lod_m: 0.3,
    };
    r.render_scene_into(&s, None, c, 0.0, &mut f);
    save("change.png", &f);
    let low = LightOptions {
        azimuth_deg: Some(90.0),
        altitude_deg: 15.0,
        ..Default::default()
    };
    let view = ViewOptions {
        width: 640,
        height: 480,
        facing_deg: 330.0,
        ..Default::default()
    };
    let mut r = Renderer::new(&s.geometry, &view, &low, (0.0, 16.0)).unwrap();
    let mut f = Frame::new(640, 480);
    r.render_into(&s, 0.0, &mut f);
    save("low-sun-east.png", &f);
    let west = LightOptions {
        azimuth_deg: Some(260.0),
        altitude_deg: 12.0,
        ..Default::default()
    };
    let mut r = Renderer::new(&s.geometry, &view, &west, (0.0, 16.0)).unwrap();
    r.render_into(&s, 0.0, &mut f);
    save("low-sun-west.png", &f);
    let hollows = LightOptions {
        hollow_darkening: 0.8,
        ..Default::default()
    };
    let mut r = Renderer::new(&s.geometry, &view, &hollows, (0.0, 16.0)).unwrap();
    r.render_into(&s, 0.0, &mut f);
    save("hollows.png", &f);
    let orbit = ViewOptions {
        width: 480,
        height: 270,
        orbit_deg: 360.0,
        ..Default::default()
    };
    let mut r = Renderer::new(&s.geometry, &orbit, &LightOptions::default(), (0.0, 16.0)).unwrap();
    let mut f = Frame::new(480, 270);
    for (i, t) in [0.25, 0.5, 0.75].iter().enumerate() {
        r.render_into(&s, *t, &mut f);
        save(&format!("orbit-{i}.png"), &f);
    }
}
