//! What the audience sees, with the defaults: lit and shaded slopes, relief that never inverts, a
//! clean earlier surface and a smooth shoreline on surveys with ordinary noise (seeded 0.1 m).
//!
//! Frames of the noisy fixture are written to `target/pictures-preview/` to be looked at.

mod common;

use dunereel::interp::Surface;
use dunereel::render::{
    camera, Frame, LightOptions, Renderer, ShellOptions, ViewOptions, WaterOptions,
    SUN_FROM_VIEW_DEG,
};
use dunereel::timeline::FrameKind;
use ndarray::Array2;

fn surface(g: &dunereel::grid::GridGeometry, z: Array2<f32>) -> Surface {
    Surface {
        geometry: g.clone(),
        z,
        kind: FrameKind::Measured { survey: 0 },
        samples: None,
    }
}

fn range(z: &[&Array2<f32>]) -> (f32, f32) {
    z.iter()
        .flat_map(|a| a.iter())
        .fold((f32::MAX, f32::MIN), |(lo, hi), &v| (lo.min(v), hi.max(v)))
}

/// Relative luminance (Rec. 709 weights on linear light) of the pixel at (col, row).
fn luminance(f: &Frame, col: usize, row: usize) -> f64 {
    let i = (row * f.width as usize + col) * 4;
    let lin = |b: u8| {
        let c = b as f64 / 255.0;
        if c <= 0.04045 {
            c / 12.92
        } else {
            ((c + 0.055) / 1.055).powf(2.4)
        }
    };
    0.2126 * lin(f.rgba[i]) + 0.7152 * lin(f.rgba[i + 1]) + 0.0722 * lin(f.rgba[i + 2])
}

/// Largest per-channel difference of each pixel between two frames.
fn difference(a: &Frame, b: &Frame) -> Vec<u8> {
    a.rgba
        .chunks_exact(4)
        .zip(b.rgba.chunks_exact(4))
        .map(|(p, q)| (0..3).map(|k| p[k].abs_diff(q[k])).max().unwrap())
        .collect()
}

/// Sizes of the 4-connected components of `mask` (row-major, `w` wide).
fn components(mask: &[bool], w: usize) -> Vec<usize> {
    let h = mask.len() / w;
    let mut seen = vec![false; mask.len()];
    let mut sizes = Vec::new();
    for start in 0..mask.len() {
        if !mask[start] || seen[start] {
            continue;
        }
        let (mut stack, mut n) = (vec![start], 0);
        seen[start] = true;
        while let Some(i) = stack.pop() {
            n += 1;
            let (x, y) = (i % w, i / w);
            let mut push = |j: usize| {
                if mask[j] && !seen[j] {
                    seen[j] = true;
                    stack.push(j);
                }
            };
            if x > 0 {
                push(i - 1);
            }
            if x + 1 < w {
                push(i + 1);
            }
            if y > 0 {
                push(i - w);
            }
            if y + 1 < h {
                push(i + w);
            }
        }
        sizes.push(n);
    }
    sizes
}

fn preview(name: &str, f: &Frame) {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("target/pictures-preview");
    std::fs::create_dir_all(&dir).unwrap();
    image::RgbaImage::from_raw(f.width, f.height, f.rgba.clone())
        .unwrap()
        .save(dir.join(name))
        .unwrap();
}

/// Smallest connected patch, in pixels, that an audience sees as a shape rather than a speck.
const MIN_FRAGMENT_PX: usize = 12;

#[test]
fn lit_and_shaded_thirty_degree_slopes_differ_at_least_two_to_one() {
    // A straight ridge across the sun's direction, flanks at exactly 30° (true scale), on flat
    // ground: one flank faces the default sun, the other faces away.
    let g = common::geometry(240, 240);
    let view = ViewOptions {
        width: 320,
        height: 180,
        vertical_exaggeration: Some(1.0),
        ..Default::default()
    };
    let light = LightOptions::default();
    let sun_az = (view.facing_deg + SUN_FROM_VIEW_DEG).rem_euclid(360.0);
    let (sx, sy) = (sun_az.to_radians().sin(), sun_az.to_radians().cos());
    let tan30 = 30f64.to_radians().tan();
    let z = Array2::from_shape_fn((240, 240), |(r, c)| {
        // Distance toward the sun from the ridge line through the centre.
        let d = (c as f64 - 120.0) * sx + (120.0 - r as f64) * sy;
        (2.0 + (40.0 - tan30 * d.abs()).max(0.0)) as f32
    });
    let s = surface(&g, z);
    let mut r = Renderer::new(&g, &view, &light, (2.0, 42.0)).unwrap();
    let mut f = Frame::new(320, 180);
    let fv = r.render_into(&s, 0.0, &mut f);
    let (west, _, _, north) = g.extent();
    let mean_on_flank = |sign: f64| {
        let mut sum = 0.0;
        let mut n = 0;
        for along in [-40.0, -20.0, 0.0, 20.0, 40.0] {
            // Middle of the flank (d = ±35 m, 20 m up), `along` metres along the ridge.
            let (d, z) = (35.0 * sign, 2.0 + 40.0 - tan30 * 35.0);
            let (col, row) = (120.5 + d * sx + along * sy, 120.5 - d * sy + along * sx);
            let (c, rr) = fv.project(west + col, north - row, z).unwrap();
            sum += luminance(&f, c as usize, rr as usize);
            n += 1;
        }
        sum / n as f64
    };
    let (lit, shaded) = (mean_on_flank(1.0), mean_on_flank(-1.0));
    preview("ridge-30deg.png", &f);
    // Check: Lambert (1760), REFERENCES.md §1 — with the default sun (altitude 40°), a 30° slope
    // facing it gets n·s = cos 20° = 0.940 and one facing away cos 80° = 0.174; with ambient 0.25
    // and diffuse 0.85 that is 1.049 : 0.398 = 2.6 : 1 before the highlight; required at least
    // 2 : 1 in the rendered luminance (same albedo on both flanks).
    assert!(lit / shaded >= 2.0, "lit {lit:.4} shaded {shaded:.4}");
    assert!(lit / shaded < 4.0, "lit {lit:.4} shaded {shaded:.4}");
}

#[test]
fn default_light_comes_from_the_viewers_left_on_every_step_of_an_orbit() {
    let g = common::geometry(64, 64);
    let z = common::gaussian_dune(&g, 32.0, 32.0, 6.0, 8.0);
    let s = surface(&g, z);
    let view = ViewOptions {
        width: 64,
        height: 36,
        supersample: 1,
        orbit_deg: 360.0,
        ..Default::default()
    };
    let mut r = Renderer::new(&g, &view, &LightOptions::default(), (2.0, 8.0)).unwrap();
    let mut f = Frame::new(64, 36);
    for i in 0..=36 {
        let t = i as f64 / 36.0;
        let fv = r.render_into(&s, t, &mut f);
        let bearing = view.facing_deg + view.orbit_deg * camera::ease(t);
        let rel = (fv.sun_azimuth_deg() - bearing + 540.0).rem_euclid(360.0) - 180.0;
        // Check: Imhof (1982), REFERENCES.md §17 — light from the upper left of the picture or
        // behind the viewer's left shoulder keeps relief from inverting: the sun stays on the
        // viewer's left (bearing 30° to 150° left of the line of sight) on every frame.
        assert!(
            (-150.0..=-30.0).contains(&rel),
            "step {i}: sun {rel}° from the line of sight"
        );
    }
    // A job's own azimuth is kept fixed in the world.
    let fixed = LightOptions {
        azimuth_deg: Some(315.0),
        ..Default::default()
    };
    let mut r = Renderer::new(&g, &view, &fixed, (2.0, 8.0)).unwrap();
    assert_eq!(r.render_into(&s, 0.7, &mut f).sun_azimuth_deg(), 315.0);
}

/// Two seeded noisy surveys of a dune that moved 25 m east and lost a metre.
fn moved_dune() -> (dunereel::grid::GridGeometry, Array2<f32>, Array2<f32>) {
    let g = common::geometry(160, 120);
    let earlier = common::noisy_dune(&g, 60.0, 55.0, 10.0, 12.0, 0.1, 11);
    let later = common::noisy_dune(&g, 85.0, 55.0, 9.0, 12.0, 0.1, 12);
    (g, earlier, later)
}

#[test]
fn earlier_surface_on_noisy_surveys_leaves_no_specks() {
    let (g, earlier, later) = moved_dune();
    // Large enough that every cell of the grid is drawn (level of detail 0), as on a big survey
    // seen close up: noise reaches the screen unsoftened.
    let view = ViewOptions {
        width: 640,
        height: 360,
        ..Default::default()
    };
    let mut r = Renderer::new(
        &g,
        &view,
        &LightOptions::default(),
        range(&[&earlier, &later]),
    )
    .unwrap();
    r.set_shell(&ShellOptions::default()).unwrap();
    assert_eq!(r.level_of_detail(), 0);
    let now = surface(&g, later);
    let before = surface(&g, earlier);
    let (mut plain, mut with) = (Frame::new(640, 360), Frame::new(640, 360));
    r.render_into(&now, 0.0, &mut plain);
    r.render_scene_into(
        &now,
        Some(&before),
        dunereel::render::Colouring::Elevation,
        0.0,
        &mut with,
    );
    preview("shell-noisy.png", &with);
    let diff = difference(&plain, &with);
    let mask: Vec<bool> = diff.iter().map(|&d| d > 2).collect();
    let sizes = components(&mask, 640);
    let specks = sizes.iter().filter(|&&n| n < MIN_FRAGMENT_PX).count();
    // Check: common practice, no source — on a survey with 0.1 m random noise (seeded) the earlier
    // surface shows as whole shapes: no patch under 12 pixels, and one large patch where the dune
    // stood (the shell of the old dune west of the new one).
    assert_eq!(specks, 0, "fragments: {sizes:?}");
    assert!(sizes.iter().any(|&n| n > 6000), "fragments: {sizes:?}");
    assert!(sizes.len() <= 3, "fragments: {sizes:?}");
    // Soft edges: the shell fades in, so many of its pixels are only lightly tinted.
    let strong = *diff.iter().max().unwrap();
    let faint = diff
        .iter()
        .filter(|&&d| d > 2 && u32::from(d) * 2 < u32::from(strong))
        .count();
    let shown = mask.iter().filter(|&&m| m).count();
    assert!(
        faint * 5 > shown,
        "{faint} of {shown} shell pixels are faint (strongest {strong})"
    );
}

#[test]
fn shoreline_on_a_noisy_beach_is_smooth() {
    let (g, _, later) = moved_dune();
    let view = ViewOptions {
        width: 320,
        height: 180,
        ..Default::default()
    };
    let mut r = Renderer::new(&g, &view, &LightOptions::default(), range(&[&later])).unwrap();
    let now = surface(&g, later);
    let mut dry = Frame::new(320, 180);
    r.render_into(&now, 0.0, &mut dry);
    // The beach rises 1:40 from the south edge: 1.2 m water stands 48 m inland, crossing the noisy
    // beach in a band of about ±8 m where noise alone decides whether a cell is below it.
    r.set_water(&WaterOptions {
        level_m: Some(1.2),
        ..Default::default()
    })
    .unwrap();
    let mut wet = Frame::new(320, 180);
    r.render_into(&now, 0.0, &mut wet);
    preview("shoreline-noisy.png", &wet);
    let diff = difference(&dry, &wet);
    let water: Vec<bool> = diff.iter().map(|&d| d > 8).collect();
    let sizes = components(&water, 320);
    // Check: common practice, no source — the sea is one piece: no pools or specks of water
    // (under 12 px) on the beach, and no islands of sand left in the sea.
    assert_eq!(
        sizes.iter().filter(|&&n| n < MIN_FRAGMENT_PX).count(),
        0,
        "{sizes:?}"
    );
    assert_eq!(sizes.len(), 1, "{sizes:?}");
    let land: Vec<bool> = water.iter().map(|&w| !w).collect();
    assert!(
        components(&land, 320).iter().all(|&n| n >= MIN_FRAGMENT_PX),
        "islands of sand in the sea"
    );
    // The waterline: in each column the first water pixel from the top. A straight line on the
    // ground projects to a straight line (pinhole camera, REFERENCES.md §2); the contour of a
    // noisy beach must stay close to that: the line's bend (second difference) stays within 2 px
    // in every column and averages below half a pixel.
    let line: Vec<Option<usize>> = (0..320)
        .map(|x| (0..180).find(|&y| water[y * 320 + x]))
        .collect();
    let shore: Vec<(usize, f64)> = line
        .iter()
        .enumerate()
        .filter_map(|(x, y)| y.map(|y| (x, y as f64)))
        .collect();
    assert!(shore.len() > 100, "the waterline spans the beach");
    let inner = &shore[2..shore.len() - 2];
    let bends: Vec<f64> = inner
        .windows(3)
        .filter(|w| w[2].0 - w[0].0 == 2)
        .map(|w| (w[0].1 - 2.0 * w[1].1 + w[2].1).abs())
        .collect();
    let worst = bends.iter().cloned().fold(0.0, f64::max);
    let mean = bends.iter().sum::<f64>() / bends.len() as f64;
    assert!(
        worst <= 2.0 && mean < 0.5,
        "bend: worst {worst}, mean {mean}"
    );
    // Anti-aliased: along the waterline pixels are partly water, their tint between none and the
    // sea's (the median tint of water pixels).
    let mut tints: Vec<u8> = diff.iter().copied().filter(|&d| d > 8).collect();
    tints.sort_unstable();
    let full = tints[tints.len() / 2];
    let partial = (0..320)
        .filter(|&x| {
            (0..180).any(|y| {
                let d = diff[y * 320 + x];
                d > 2 && u32::from(d) * 4 < u32::from(full) * 3
            })
        })
        .count();
    assert!(
        partial * 2 > shore.len(),
        "{partial} of {} waterline columns have a partly covered pixel (sea tint {full})",
        shore.len()
    );
}
