//! Whole-renderer checks: lighting on planes, visibility, nodata, option checks, determinism.
#![allow(clippy::needless_range_loop)]

use ndarray::Array2;

use super::synthetic::synthetic_dunes;
use super::*;
use crate::grid::LinearUnit;
use crate::timeline::FrameKind;

fn geometry(rows: usize, cols: usize, cell: f64) -> GridGeometry {
    GridGeometry {
        cols,
        rows,
        origin_x: 1000.0,
        origin_y: 5000.0,
        cell_x: cell,
        cell_y: cell,
        epsg: None,
        horizontal_unit: LinearUnit::Metre,
    }
}

fn surface(z: Array2<f32>, cell: f64) -> Surface {
    let (rows, cols) = z.dim();
    Surface {
        geometry: geometry(rows, cols, cell),
        z,
        kind: FrameKind::Measured { survey: 0 },
        samples: None,
    }
}

fn plain_view() -> ViewOptions {
    ViewOptions {
        width: 96,
        height: 64,
        supersample: 1,
        block_sides: false,
        ..Default::default()
    }
}

fn px(f: &Frame, x: usize, y: usize) -> [u8; 3] {
    let i = (y * f.width as usize + x) * 4;
    [f.rgba[i], f.rgba[i + 1], f.rgba[i + 2]]
}

#[test]
fn flat_plane_shades_to_sine_of_altitude_from_any_azimuth() {
    let s = surface(Array2::from_elem((40, 40), 10.0), 1.0);
    let view = ViewOptions {
        elevation_deg: 90.0,
        ..plain_view()
    };
    let mut seen = Vec::new();
    for az in [0.0, 90.0, 200.0, 315.0] {
        let light = LightOptions {
            azimuth_deg: Some(az),
            altitude_deg: 30.0,
            ambient: 0.0,
            diffuse: 1.0,
            specular: 0.0,
            ..Default::default()
        };
        let mut r = Renderer::new(&s.geometry, &view, &light, (0.0, 20.0)).unwrap();
        let mut f = Frame::new(96, 64);
        r.render_into(&s, 0.0, &mut f);
        let albedo = r.buffers_elevation_colour(10.0);
        let enc = ramp::Encoder::default();
        // Check: Lambert (1760) — flat ground under a sun at 30° receives sin(30°) = 0.5 of full light,
        // whatever the azimuth; analytic, REFERENCES.md §1; exact after the same sRGB encode (±1 level)
        let want = albedo.map(|c| enc.byte(c * 0.5));
        let got = px(&f, 48, 32);
        for k in 0..3 {
            assert!(
                (got[k] as i32 - want[k] as i32).abs() <= 1,
                "az {az}: {got:?} vs {want:?}"
            );
        }
        seen.push(got);
    }
    assert!(seen.windows(2).all(|w| w[0] == w[1]));
}

#[test]
fn tall_block_hides_what_is_behind_it() {
    let n = 60;
    let mut z = Array2::from_elem((n, n), 0.0f32);
    for r in 25..35 {
        for c in 25..35 {
            z[[r, c]] = 30.0;
        }
    }
    let s = surface(z.clone(), 1.0);
    let flat = surface(Array2::from_elem((n, n), 0.0), 1.0);
    // Looking north: the ground just north of the block is behind it.
    let view = ViewOptions {
        facing_deg: 0.0,
        elevation_deg: 30.0,
        vertical_exaggeration: Some(1.0),
        ..plain_view()
    };
    let light = LightOptions::default();
    let mut r = Renderer::new(&s.geometry, &view, &light, (0.0, 30.0)).unwrap();
    let mut f = Frame::new(96, 64);
    // Ground point behind the block: row 20 (north of rows 25..35), column 30.
    let (gx, gy) = s.geometry.cell_center(20, 30);
    let fv = r.render_into(&flat, 0.0, &mut f);
    let (c, rr) = fv.project(gx, gy, 0.0).unwrap();
    let (pc, pr) = (c as usize, rr as usize);
    let ground_iz = r.depth_at(pc, pr);
    let eye = fv.camera().eye;
    let p = [gx - 1030.0, gy - 4970.0, 0.0];
    let zc = crate::render::camera::dot(crate::render::camera::sub(p, eye), fv.camera().fwd);
    // Check: analytic — on open ground the depth buffer holds the ground point's own depth (1/zc), 1 %
    assert!((ground_iz as f64 * zc - 1.0).abs() < 0.01);
    r.render_into(&s, 0.0, &mut f);
    // Check: analytic — the 30 m block stands between the camera and that ground point, so the pixel
    // now holds something nearer (larger 1/zc).
    assert!(
        r.depth_at(pc, pr) > ground_iz * 1.05,
        "{} vs {}",
        r.depth_at(pc, pr),
        ground_iz
    );
}

#[test]
fn nodata_is_not_drawn() {
    let mut z = Array2::from_elem((40, 40), 5.0f32);
    for r in 15..25 {
        for c in 15..25 {
            z[[r, c]] = f32::NAN;
        }
    }
    let s = surface(z, 1.0);
    let view = ViewOptions {
        elevation_deg: 90.0,
        ..plain_view()
    };
    let mut r = Renderer::new(&s.geometry, &view, &LightOptions::default(), (0.0, 10.0)).unwrap();
    let mut f = Frame::new(96, 64);
    let fv = r.render_into(&s, 0.0, &mut f);
    let at = |row: usize, col: usize| {
        let (x, y) = s.geometry.cell_center(row, col);
        let (c, r) = fv.project(x, y, 5.0).unwrap();
        (c as usize, r as usize)
    };
    let (hole, north, west) = (at(20, 20), at(5, 20), at(20, 5));
    assert_eq!(r.depth_at(hole.0, hole.1), 0.0, "the hole shows the sky");
    assert!(
        r.depth_at(north.0, north.1) > 0.0 && r.depth_at(west.0, west.1) > 0.0,
        "the ground around it is drawn"
    );
}

#[test]
fn frame_view_gives_target_north_and_scale() {
    let s = synthetic_dunes(64, 64, 2.0);
    let (w, so, e, n) = s.geometry.extent();
    // A target given in the job is looked at as given (not slid to the free area's middle).
    let view = ViewOptions {
        facing_deg: 0.0,
        target: Some([(w + e) / 2.0, (so + n) / 2.0]),
        ..plain_view()
    };
    let mut r = Renderer::new(&s.geometry, &view, &LightOptions::default(), (0.0, 15.0)).unwrap();
    let mut f = Frame::new(96, 64);
    let fv = r.render_into(&s, 0.0, &mut f);
    // Check: analytic — the target (grid centre at mid elevation ×k) projects to the frame centre.
    let (c, row) = fv.project((w + e) / 2.0, (so + n) / 2.0, 7.5).unwrap();
    assert!((c - 48.0).abs() < 1e-3 && (row - 32.0).abs() < 1e-3);
    // Facing north, north is straight up the screen.
    let (dx, dy) = fv.north_px().unwrap();
    assert!(dx.abs() < 1e-6 && (dy + 1.0).abs() < 1e-6);
    // A horizontal metre across the line of sight at the target spans 1/metres_per_px pixels.
    let (c1, _) = fv
        .project((w + e) / 2.0 + 10.0, (so + n) / 2.0, 7.5)
        .unwrap();
    assert!(((c1 - c) as f64 * fv.metres_per_px() - 10.0).abs() < 1e-3);
    // Facing east, north points left.
    let view = ViewOptions {
        facing_deg: 90.0,
        ..plain_view()
    };
    let mut r = Renderer::new(&s.geometry, &view, &LightOptions::default(), (0.0, 15.0)).unwrap();
    let (dx, _) = r.render_into(&s, 0.0, &mut f).north_px().unwrap();
    assert!(dx < -0.9);
}

#[test]
fn bad_options_are_refused_with_the_option_named() {
    let g = geometry(50, 50, 1.0);
    let ok = (0.0, 10.0);
    let l = LightOptions::default();
    let v = ViewOptions::default();
    let cases: Vec<(ViewOptions, LightOptions, &str)> = vec![
        (
            ViewOptions {
                width: 0,
                ..v.clone()
            },
            l.clone(),
            "view.width",
        ),
        (
            ViewOptions {
                height: 9000,
                ..v.clone()
            },
            l.clone(),
            "view.height",
        ),
        (
            ViewOptions {
                fov_deg: 170.0,
                ..v.clone()
            },
            l.clone(),
            "view.fov_deg",
        ),
        (
            ViewOptions {
                vertical_exaggeration: Some(0.0),
                ..v.clone()
            },
            l.clone(),
            "view.vertical_exaggeration",
        ),
        (
            ViewOptions {
                vertical_exaggeration: Some(-1.0),
                ..v.clone()
            },
            l.clone(),
            "view.vertical_exaggeration",
        ),
        (
            ViewOptions {
                elevation_deg: -10.0,
                ..v.clone()
            },
            l.clone(),
            "view.elevation_deg",
        ),
        (
            ViewOptions {
                distance_m: Some(2.0),
                ..v.clone()
            },
            l.clone(),
            "inside the terrain",
        ),
        (
            ViewOptions {
                supersample: 0,
                ..v.clone()
            },
            l.clone(),
            "view.supersample",
        ),
        (
            ViewOptions {
                target: Some([0.0, 0.0]),
                ..v.clone()
            },
            l.clone(),
            "view.target",
        ),
        (
            ViewOptions {
                base_m: Some(5.0),
                ..v.clone()
            },
            l.clone(),
            "view.base_m",
        ),
        (
            v.clone(),
            LightOptions {
                altitude_deg: -5.0,
                ..l.clone()
            },
            "below the horizon",
        ),
        (
            v.clone(),
            LightOptions {
                altitude_deg: 0.0,
                ..l.clone()
            },
            "sun.altitude_deg",
        ),
        (
            v.clone(),
            LightOptions {
                azimuth_deg: Some(360.0),
                ..l.clone()
            },
            "sun.azimuth_deg",
        ),
        (
            v.clone(),
            LightOptions {
                ambient: 1.5,
                ..l.clone()
            },
            "sun.ambient",
        ),
    ];
    for (view, light, want) in cases {
        let err = Renderer::new(&g, &view, &light, ok).unwrap_err();
        assert!(err.contains(want), "{want}: {err}");
    }
    assert!(Renderer::new(&g, &v, &l, (f32::NAN, 1.0)).is_err());
    // Under the terrain: a camera lower than the lowest ground.
    let far_below = ViewOptions {
        distance_m: Some(1.0),
        elevation_deg: 5.0,
        ..v.clone()
    };
    assert!(Renderer::new(&g, &far_below, &l, (0.0, 1000.0))
        .unwrap_err()
        .contains("distance_m"));
    let mut r = Renderer::new(&g, &v, &l, ok).unwrap();
    assert!(r
        .set_water(&WaterOptions {
            opacity: 2.0,
            ..Default::default()
        })
        .unwrap_err()
        .contains("water.opacity"));
}

#[test]
fn eye_position_sets_the_view() {
    let s = synthetic_dunes(64, 64, 2.0);
    let (w, so, e, n) = s.geometry.extent();
    let (cx, cy) = ((w + e) / 2.0, (so + n) / 2.0);
    // Eye 300 m south of the centre and 300 m above the target (mid elevation 7.5 m × k 2 = 15 m).
    let view = ViewOptions {
        eye: Some([cx, cy - 300.0, (300.0 + 15.0) / 2.0]),
        vertical_exaggeration: Some(2.0),
        ..plain_view()
    };
    let mut r = Renderer::new(&s.geometry, &view, &LightOptions::default(), (0.0, 15.0)).unwrap();
    let mut f = Frame::new(96, 64);
    let fv = r.render_into(&s, 0.0, &mut f);
    let eye = fv.camera().eye;
    // Check: analytic — the camera stands where asked (local metres; z exaggerated ×2), looking north
    // at 45°.
    assert!(eye[0].abs() < 1e-6 && (eye[1] + 300.0).abs() < 1e-6 && (eye[2] - 315.0).abs() < 1e-6);
    let (dx, dy) = fv.north_px().unwrap();
    assert!(dx.abs() < 1e-6 && dy < -0.99);
    let low = ViewOptions {
        eye: Some([cx, cy - 300.0, 0.0]),
        ..plain_view()
    };
    let err = Renderer::new(&s.geometry, &low, &LightOptions::default(), (0.0, 15.0)).unwrap_err();
    assert!(err.contains("view.eye"), "{err}");
}

#[test]
fn level_of_detail_never_exceeds_the_samples_on_screen() {
    let g = geometry(512, 512, 1.0);
    let view = ViewOptions {
        width: 64,
        height: 32,
        supersample: 1,
        lod_min_cell_px: 0.5,
        ..Default::default()
    };
    let r = Renderer::new(&g, &view, &LightOptions::default(), (0.0, 10.0)).unwrap();
    let (lr, lc) = lod::level_shape(512, 512, r.level_of_detail());
    assert!(lr * lc <= 64 * 32, "level {}", r.level_of_detail());
}

#[test]
fn hollows_are_darkened_only_when_asked() {
    // A plain with a narrow, deep pit in the middle, seen from straight above, lit by ambient only.
    let mut z = Array2::from_elem((41, 41), 10.0f32);
    for r in 18..23 {
        for c in 18..23 {
            z[[r, c]] = 0.0;
        }
    }
    let s = surface(z, 1.0);
    let view = ViewOptions {
        elevation_deg: 90.0,
        vertical_exaggeration: Some(1.0),
        ..plain_view()
    };
    let ambient_only = LightOptions {
        ambient: 1.0,
        diffuse: 0.0,
        specular: 0.0,
        ..Default::default()
    };
    let dark = LightOptions {
        hollow_darkening: 1.0,
        ..ambient_only.clone()
    };
    let mut f0 = Frame::new(96, 64);
    let mut f1 = Frame::new(96, 64);
    Renderer::new(&s.geometry, &view, &ambient_only, (0.0, 10.0))
        .unwrap()
        .render_into(&s, 0.0, &mut f0);
    Renderer::new(&s.geometry, &view, &dark, (0.0, 10.0))
        .unwrap()
        .render_into(&s, 0.0, &mut f1);
    let sum = |p: [u8; 3]| p.iter().map(|&v| v as u32).sum::<u32>();
    // The pit floor loses light; the open plain far from it does not.
    assert!(
        sum(px(&f1, 48, 32)) + 20 < sum(px(&f0, 48, 32)),
        "{:?} {:?}",
        px(&f1, 48, 32),
        px(&f0, 48, 32)
    );
    assert_eq!(px(&f1, 30, 12), px(&f0, 30, 12));
}

#[test]
fn options_read_from_yaml_with_defaults_and_reject_unknown_keys() {
    let v: ViewOptions = serde_yaml::from_str("orbit_deg: 90\nsupersample: 3\n").unwrap();
    assert_eq!((v.orbit_deg, v.supersample, v.width), (90.0, 3, 960));
    assert!(serde_yaml::from_str::<LightOptions>("azimuth: 3").is_err());
    let w: WaterOptions = serde_yaml::from_str("level_m: 1.5").unwrap();
    assert_eq!(w.level_m, Some(1.5));
}

fn busy_scene(threads: usize) -> Frame {
    let s = synthetic_dunes(97, 131, 1.0);
    let mut earlier = s.clone();
    earlier.z.mapv_inplace(|v| v * 0.8 + 1.0);
    earlier.z[[10, 10]] = f32::NAN;
    let view = ViewOptions {
        width: 120,
        height: 80,
        supersample: 2,
        orbit_deg: 200.0,
        ..Default::default()
    };
    let mut r = Renderer::new(
        &s.geometry,
        &view,
        &LightOptions {
            hollow_darkening: 0.5,
            ..Default::default()
        },
        (0.0, 15.0),
    )
    .unwrap();
    r.set_water(&WaterOptions {
        level_m: Some(4.0),
        ..Default::default()
    })
    .unwrap();
    let mut f = Frame::new(120, 80);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap();
    pool.install(|| {
        r.render_scene_into(&s, Some(&earlier), Colouring::Elevation, 0.37, &mut f);
    });
    f
}

#[test]
fn one_thread_and_two_threads_give_identical_frames() {
    let a = busy_scene(1);
    let b = busy_scene(2);
    // Check: project invariant (STYLE.md) — 1 thread == N threads, bit-identical.
    assert!(a.rgba == b.rgba);
    assert_eq!(a.rgba, busy_scene(3).rgba);
    // The frame is not trivially uniform.
    let distinct: std::collections::BTreeSet<[u8; 3]> = (0..80)
        .flat_map(|y| (0..120).map(move |x| (x, y)))
        .map(|(x, y)| px(&a, x, y))
        .collect();
    assert!(distinct.len() > 200);
}

#[test]
fn orbit_moves_the_camera_and_eases() {
    let s = synthetic_dunes(64, 64, 2.0);
    let view = ViewOptions {
        orbit_deg: 360.0,
        ..plain_view()
    };
    let r = Renderer::new(&s.geometry, &view, &LightOptions::default(), (0.0, 15.0)).unwrap();
    let e0 = r.frame_view(0.0).camera().eye;
    let e1 = r.frame_view(1.0).camera().eye;
    let eh = r.frame_view(0.5).camera().eye;
    let ee = r.frame_view(0.01).camera().eye;
    let d = |a: [f64; 3], b: [f64; 3]| camera::dot(camera::sub(a, b), camera::sub(a, b)).sqrt();
    // A full turn comes back to the start; half way is on the far side.
    assert!(d(e0, e1) < 1e-6 && d(e0, eh) > 1.9 * (e0[0].powi(2) + e0[1].powi(2)).sqrt());
    // Check: easing (smoothstep, common practice, no source) — at 1 % of the time the turn is 0.03 %
    // of 360° = 0.1°, far less than the 3.6° of a linear orbit.
    let radius = (e0[0].powi(2) + e0[1].powi(2)).sqrt();
    assert!(d(e0, ee) < radius * 0.2f64.to_radians());
}

#[test]
fn change_colouring_is_neutral_without_change() {
    let s = synthetic_dunes(48, 48, 1.0);
    let view = ViewOptions {
        elevation_deg: 90.0,
        ..plain_view()
    };
    let light = LightOptions {
        ambient: 1.0,
        diffuse: 0.0,
        specular: 0.0,
        shadows: false,
        ..Default::default()
    };
    let mut r = Renderer::new(&s.geometry, &view, &light, (0.0, 15.0)).unwrap();
    let mut f = Frame::new(96, 64);
    let c = Colouring::Change {
        reference: &s.z,
        limit_m: 2.0,
        lod_m: 0.1,
    };
    r.render_scene_into(&s, None, c, 0.0, &mut f);
    let p = px(&f, 48, 32);
    // Check: ColorBrewer RdBu midpoint (Harrower & Brewer 2003; from memory) — zero change is near white.
    assert!(p.iter().all(|&v| v >= 240), "{p:?}");
    let mut raised = s.clone();
    raised.z.mapv_inplace(|v| v + 1.5);
    r.render_scene_into(&raised, None, c, 0.0, &mut f);
    let p = px(&f, 48, 32);
    assert!(p[2] > p[0] + 40, "deposition is blue: {p:?}");
}

impl Renderer {
    /// Linear albedo of an elevation on this renderer's ramp (test helper).
    fn buffers_elevation_colour(&self, z_m: f32) -> [f32; 3] {
        let (lo, hi) = self.range_m;
        ramp::Ramp::elevation().at((z_m - lo) / (hi - lo))
    }
}

#[test]
fn supersampling_is_the_box_mean_of_a_finer_render() {
    let s = synthetic_dunes(60, 80, 1.0);
    let light = LightOptions::default();
    // Same level of detail in both: it is chosen from the cell size in output pixels.
    let small = ViewOptions {
        width: 64,
        height: 48,
        supersample: 2,
        lod_min_cell_px: 1.0,
        ..Default::default()
    };
    let big = ViewOptions {
        width: 128,
        height: 96,
        supersample: 1,
        ..Default::default()
    };
    let (mut a, mut b) = (Frame::new(64, 48), Frame::new(128, 96));
    Renderer::new(&s.geometry, &small, &light, (0.0, 16.0))
        .unwrap()
        .render_into(&s, 0.0, &mut a);
    Renderer::new(&s.geometry, &big, &light, (0.0, 16.0))
        .unwrap()
        .render_into(&s, 0.0, &mut b);
    let enc = ramp::Encoder::default();
    let dec = |v: u8| ramp::srgb_to_linear(v as f32 / 255.0);
    let mut mixed = 0;
    for y in 0..48 {
        for x in 0..64 {
            let got = px(&a, x, y);
            for k in 0..3 {
                let m = [(0, 0), (1, 0), (0, 1), (1, 1)]
                    .iter()
                    .map(|&(dx, dy)| dec(px(&b, 2 * x + dx, 2 * y + dy)[k]))
                    .sum::<f32>()
                    / 4.0;
                // Check: analytic — a 2×2 supersampled pixel is the linear-light mean of the four
                // samples a render at twice the size draws; ±2 levels for the 8-bit round trip
                assert!((got[k] as i32 - enc.byte(m) as i32).abs() <= 2, "({x},{y})");
            }
            let corners: Vec<[u8; 3]> = [(0, 0), (1, 1)]
                .iter()
                .map(|&(d, e)| px(&b, 2 * x + d, 2 * y + e))
                .collect();
            mixed +=
                usize::from(corners[0] != corners[1] && got != corners[0] && got != corners[1]);
        }
    }
    assert!(mixed > 50, "edges are blended: {mixed}");
}

#[test]
fn water_covers_low_ground_only_and_shell_shows_above_the_surface() {
    // West half at 1 m, east half at 9 m; water at 5 m.
    let z = Array2::from_shape_fn((40, 40), |(_, c)| if c < 20 { 1.0f32 } else { 9.0 });
    let s = surface(z, 1.0);
    let view = ViewOptions {
        elevation_deg: 90.0,
        ..plain_view()
    };
    let light = LightOptions {
        shadows: false,
        specular: 0.0,
        ..Default::default()
    };
    let mut r = Renderer::new(&s.geometry, &view, &light, (0.0, 10.0)).unwrap();
    let mut dry = Frame::new(96, 64);
    r.render_into(&s, 0.0, &mut dry);
    r.set_water(&WaterOptions {
        level_m: Some(5.0),
        ..Default::default()
    })
    .unwrap();
    let mut wet = Frame::new(96, 64);
    r.render_into(&s, 0.0, &mut wet);
    let (west, east) = ((38, 32), (58, 32));
    assert_ne!(
        px(&dry, west.0, west.1),
        px(&wet, west.0, west.1),
        "low ground is under water"
    );
    assert_eq!(
        px(&dry, east.0, east.1),
        px(&wet, east.0, east.1),
        "high ground stays dry"
    );
    // A shell 2 m above everything tints every ground pixel; one 2 m below shows nowhere.
    r.set_water(&WaterOptions::default()).unwrap();
    let mut above = s.clone();
    above.z.mapv_inplace(|v| v + 2.0);
    let mut below = s.clone();
    below.z.mapv_inplace(|v| v - 2.0);
    let mut f = Frame::new(96, 64);
    r.render_scene_into(&s, Some(&below), Colouring::Elevation, 0.0, &mut f);
    assert_eq!(f, dry);
    r.render_scene_into(&s, Some(&above), Colouring::Elevation, 0.0, &mut f);
    assert_ne!(px(&f, east.0, east.1), px(&dry, east.0, east.1));
    assert_ne!(px(&f, west.0, west.1), px(&dry, west.0, west.1));
    // Sky pixels are untouched by the shell.
    assert_eq!(px(&f, 1, 1), px(&dry, 1, 1));
}

#[test]
fn wrong_sized_frame_and_surface_do_not_panic() {
    let s = synthetic_dunes(30, 30, 1.0);
    let mut r = Renderer::new(
        &s.geometry,
        &plain_view(),
        &LightOptions::default(),
        (0.0, 16.0),
    )
    .unwrap();
    let mut f = Frame::new(10, 10);
    r.render_into(&s, 0.0, &mut f);
    assert_eq!((f.width, f.height), (96, 64));
    let other = synthetic_dunes(20, 30, 1.0);
    r.render_into(&other, 0.0, &mut f);
    assert_eq!(r.depth_at(48, 32), 0.0, "sky only");
}

#[test]
fn drape_colours_the_surface_and_must_overlap() {
    let s = surface(Array2::from_elem((40, 40), 5.0), 1.0);
    // A drape of the same area: west half red, east half blue, at 4 m pixels.
    let dg = GridGeometry {
        rows: 10,
        cols: 10,
        cell_x: 4.0,
        cell_y: 4.0,
        ..s.geometry.clone()
    };
    let rgb = ndarray::Array3::from_shape_fn((10, 10, 3), |(_, c, k)| match (c < 5, k) {
        (true, 0) | (false, 2) => 230u8,
        _ => 20,
    });
    let drape = Drape::new(&dg, &rgb, &s.geometry).unwrap();
    let view = ViewOptions {
        elevation_deg: 90.0,
        ..plain_view()
    };
    let light = LightOptions {
        ambient: 1.0,
        diffuse: 0.0,
        specular: 0.0,
        ..Default::default()
    };
    let mut r = Renderer::new(&s.geometry, &view, &light, (0.0, 10.0)).unwrap();
    let mut f = Frame::new(96, 64);
    r.render_scene_into(&s, None, Colouring::Drape(&drape), 0.0, &mut f);
    let (w, e) = (px(&f, 36, 32), px(&f, 60, 32));
    // Check: analytic — with ambient light 1 and no diffuse term the drape's own colour shows (±2).
    assert!(
        (w[0] as i32 - 230).abs() <= 2 && (w[2] as i32 - 20).abs() <= 2,
        "{w:?}"
    );
    assert!(
        (e[2] as i32 - 230).abs() <= 2 && (e[0] as i32 - 20).abs() <= 2,
        "{e:?}"
    );
    let far = GridGeometry {
        origin_x: 90_000.0,
        ..dg.clone()
    };
    assert!(Drape::new(&far, &rgb, &s.geometry)
        .unwrap_err()
        .contains("does not overlap"));
    let wrong = ndarray::Array3::<u8>::zeros((10, 9, 3));
    assert!(Drape::new(&dg, &wrong, &s.geometry).is_err());
}
