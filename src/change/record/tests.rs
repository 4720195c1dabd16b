use super::*;
use crate::change::testkit::{geometry, stack, survey};
use crate::change::ChangeOptions;
use chrono::{NaiveDate, NaiveTime};

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

fn mound_volume(f: impl Fn(f64, f64) -> f64 + Copy, n: usize, cell: f64) -> f64 {
    let g = geometry(n, cell);
    let shape = survey("a", "2030-01-01", &g, Some(0.1), f);
    let flat = survey("b", "2031-01-01", &g, Some(0.1), |_, _| 0.0);
    let rec = record(&stack(vec![shape, flat]), &ChangeOptions::default()).unwrap();
    // The earlier survey carries the shape; erosion to the flat one must match its volume too.
    assert!(
        rel(
            rec.pairs[0].erosion_volume_raw_m3,
            rec.surveys[0].volume_above_reference_m3
        ) < 1e-9
    );
    rec.surveys[0].volume_above_reference_m3
}

#[test]
fn volumes_match_closed_forms() {
    // Check: Gaussian mound volume 2*pi*A*sx*sy — A=3, sx=4, sy=2.5 → 188.49556 m3; REFERENCES.md §6, rel. error < 0.5 %
    let gauss = |x: f64, y: f64| 3.0 * (-(x * x) / (2.0 * 16.0) - (y * y) / (2.0 * 6.25)).exp();
    let v = mound_volume(gauss, 240, 0.5);
    assert!(rel(v, 188.49556) < 0.005, "{v}");
    // Check: cone volume pi*r^2*h/3 — r=10, h=3 → 314.15927 m3; REFERENCES.md §6, rel. error < 0.5 %
    let cone = |x: f64, y: f64| (3.0 * (1.0 - x.hypot(y) / 10.0)).max(0.0);
    let v = mound_volume(cone, 60, 0.5);
    assert!(rel(v, 314.15927) < 0.005, "{v}");
    // Check: paraboloid of revolution pi*r^2*h/2 — r=10, h=3 → 471.23890 m3; REFERENCES.md §6, rel. error < 0.5 %
    let para = |x: f64, y: f64| (3.0 * (1.0 - (x * x + y * y) / 100.0)).max(0.0);
    let v = mound_volume(para, 60, 0.5);
    assert!(rel(v, 471.23890) < 0.005, "{v}");
}

#[test]
fn lod_and_budget_on_worked_examples() {
    let g = geometry(100, 1.0);
    let opts = ChangeOptions::default();
    // Check: Brasington et al. (2003), Lane et al. (2003) LoD = 1.96*sqrt(s1^2+s2^2) — 0.10/0.15 m →
    // 0.3533440 m; hand-computed, REFERENCES.md §7, abs diff < 1e-7
    let a = survey("a", "2030-01-01", &g, Some(0.10), |_, _| 10.0);
    let b = survey("b", "2031-01-01", &g, Some(0.15), |_, _| 11.0);
    let rec = record(&stack(vec![a, b]), &opts).unwrap();
    let p = &rec.pairs[0];
    assert!((p.lod_m - 0.353_344_0).abs() < 1e-7, "{}", p.lod_m);
    assert!((p.sigma_dod_m - 0.180_277_6).abs() < 1e-7);
    // Check: volumetric uncertainty over n = 10 000 cells of 1 m2 — independent 18.03 m3, LoD-based
    // 3533.4 m3; hand-computed, REFERENCES.md §7, abs diff < 0.01 m3 / 0.1 m3
    assert_eq!(p.detected_cells, 10_000);
    assert!(
        (p.volume_sigma_independent_m3 - 18.03).abs() < 0.01,
        "{}",
        p.volume_sigma_independent_m3
    );
    assert!(
        (p.volume_bound_lod_m3 - 3533.4).abs() < 0.1,
        "{}",
        p.volume_bound_lod_m3
    );

    // Check: Wheaton et al. (2010) thresholded budget — flat 100x100 1 m grids at 10.0 and 10.5 m,
    // sigma 0.1 each → LoD95 0.277186 m, deposition 5000 m3, erosion 0; REFERENCES.md §7, rel. < 1e-6
    let a = survey("a", "2030-01-01", &g, Some(0.1), |_, _| 10.0);
    let b = survey("b", "2031-01-01", &g, Some(0.1), |_, _| 10.5);
    let rec = record(&stack(vec![a, b]), &opts).unwrap();
    let p = &rec.pairs[0];
    assert!((p.lod_m - 0.277_186).abs() < 1e-6);
    assert!(
        rel(p.deposition_volume_m3, 5000.0) < 1e-6,
        "{}",
        p.deposition_volume_m3
    );
    assert_eq!(p.erosion_volume_m3, 0.0);
    assert!(rel(p.net_volume_m3, 5000.0) < 1e-6);
    assert!(rel(p.deposition_area_m2, 10_000.0) < 1e-12);

    // Check: same grids raised by 0.2 m instead → thresholded 0 m3, raw 2000 m3; REFERENCES.md §7
    // (raw tolerance 1e-5 relative: 10.2 is not exact in f32)
    let a = survey("a", "2030-01-01", &g, Some(0.1), |_, _| 10.0);
    let b = survey("b", "2031-01-01", &g, Some(0.1), |_, _| 10.2);
    let rec = record(&stack(vec![a, b]), &opts).unwrap();
    let p = &rec.pairs[0];
    assert_eq!(p.deposition_volume_m3, 0.0);
    assert_eq!(p.detected_cells, 0);
    assert!(
        rel(p.deposition_volume_raw_m3, 2000.0) < 1e-5,
        "{}",
        p.deposition_volume_raw_m3
    );
    assert!(rel(p.net_volume_raw_m3, 2000.0) < 1e-5);
}

#[test]
fn pairs_are_consecutive_then_first_to_last() {
    let g = geometry(20, 1.0);
    let s: Vec<_> = ["2030-01-01", "2031-01-01", "2032-06-01"]
        .iter()
        .enumerate()
        .map(|(i, d)| {
            survey(&format!("s{i}"), d, &g, Some(0.05), move |_, _| {
                5.0 + i as f64
            })
        })
        .collect();
    let rec = record(&stack(s), &ChangeOptions::default()).unwrap();
    let plan: Vec<_> = rec
        .pairs
        .iter()
        .map(|p| (p.pair_kind, p.from_index, p.to_index))
        .collect();
    assert_eq!(
        plan,
        vec![
            (PairKind::Consecutive, 0, 1),
            (PairKind::Consecutive, 1, 2),
            (PairKind::FirstToLast, 0, 2)
        ]
    );
    assert!(rel(rec.pairs[2].net_volume_m3, 800.0) < 1e-6);
    assert!(rec.pairs.iter().all(|p| p
        .note
        .contains("only the two survey dates are measurements")));
}

#[test]
fn peak_position_height_and_shift() {
    let g = geometry(120, 0.5);
    let mound = |cx: f64, cy: f64, h: f64| {
        move |x: f64, y: f64| 2.0 + h * (-((x - cx).powi(2) + (y - cy).powi(2)) / (2.0 * 9.0)).exp()
    };
    let a = survey("a", "2030-01-01", &g, Some(0.1), mound(3.3, -2.2, 6.0));
    let b = survey("b", "2032-01-01", &g, Some(0.1), mound(6.3, 1.8, 5.0));
    let opts = ChangeOptions {
        reference_elevation_m: 2.0,
        ..Default::default()
    };
    let rec = record(&stack(vec![a, b]), &opts).unwrap();
    let (s0, s1) = (&rec.surveys[0], &rec.surveys[1]);
    // Check: analytic — peak of a Gaussian at (3.3, -2.2) found by parabolic sub-cell fit; abs diff < 0.05 m
    assert!(
        (s0.highest_cell_x_crs - 3.3).abs() < 0.05 && (s0.highest_cell_y_crs + 2.2).abs() < 0.05,
        "{} {}",
        s0.highest_cell_x_crs,
        s0.highest_cell_y_crs
    );
    // Highest cell's height above the reference: at most the analytic 6 m, within 2 %.
    let h = s0.highest_cell_height_above_reference_m;
    assert!(h <= 6.0 && h > 5.88, "{h}");
    // Check: analytic — the crest (quadratic fit) of the noise-free mound: 8 m elevation, 6 m above
    // the 2 m reference, at (3.3, -2.2); abs diff < 0.02 m (the fit's own bias on a Gaussian top)
    assert!(
        (s0.crest_elevation_m - 8.0).abs() < 0.02,
        "{}",
        s0.crest_elevation_m
    );
    assert!((s0.crest_height_above_reference_m - 6.0).abs() < 0.02);
    assert!((s0.crest_x_crs - 3.3).abs() < 0.02 && (s0.crest_y_crs + 2.2).abs() < 0.02);
    let p = &rec.pairs[0];
    assert!(
        (p.crest_elevation_change_m - (s1.crest_elevation_m - s0.crest_elevation_m)).abs() < 1e-12
    );
    assert!(
        (p.highest_cell_elevation_change_m - (s1.max_elevation_m - s0.max_elevation_m)).abs()
            < 1e-12
    );
    // Check: analytic — a move of (3, 4) m is 5 m at azimuth atan2(3, 4) = 36.8699°; abs diff < 0.05 m / 1°
    assert!(
        (p.crest_shift_distance_m - 5.0).abs() < 0.05,
        "{}",
        p.crest_shift_distance_m
    );
    assert!(
        (p.crest_shift_azimuth_deg - 36.869_898).abs() < 1.0,
        "{}",
        p.crest_shift_azimuth_deg
    );
}

#[test]
fn migration_rate_uses_decimal_years() {
    let g = geometry(10, 1.0);
    let a = survey("a", "2019-03-15", &g, Some(0.1), |_, _| 1.0);
    let b = survey("b", "2021-07-02", &g, Some(0.1), |_, _| 1.0);
    let mut rec = record(&stack(vec![a, b]), &ChangeOptions::default()).unwrap();
    let p = &mut rec.pairs[0];
    assert_eq!(p.migration_rate_m_per_yr, None);
    // The check uses 2021-07-02T12:00, so set the later time explicitly.
    let noon = NaiveDate::from_ymd_opt(2021, 7, 2)
        .unwrap()
        .and_time(NaiveTime::from_hms_opt(12, 0, 0).unwrap());
    p.to_decimal_year = decimal_year(noon);
    p.interval_years = p.to_decimal_year - p.from_decimal_year;
    p.set_migration(7.5, -10.0);
    // Check: migration rate = displacement / decimal-year interval — 12.5 m from 2019-03-15 (2019.2) to
    // 2021-07-02T12:00 (2021.5) → 5.434783 m/yr; REFERENCES.md §7-§8, abs diff < 1e-6
    assert!((p.migration_rate_m_per_yr.unwrap() - 5.434_783).abs() < 1e-6);
    assert!((p.migration_distance_m.unwrap() - 12.5).abs() < 1e-12);
    // Check: analytic — (east 7.5, north -10) points to azimuth 180 - atan(0.75) = 143.1301°; abs diff < 1e-4
    assert!((p.migration_azimuth_deg.unwrap() - 143.130_102).abs() < 1e-4);
}

#[test]
fn bad_input_gives_clear_messages() {
    let g = geometry(10, 1.0);
    let mk = || {
        stack(vec![
            survey("a", "2030-01-01", &g, Some(0.1), |x, _| 3.0 + x * 0.1),
            survey("b", "2031-01-01", &g, Some(0.1), |_, _| 2.0),
        ])
    };
    let opts = ChangeOptions {
        reference_elevation_m: 50.0,
        ..Default::default()
    };
    let err = record(&mk(), &opts).unwrap_err().to_string();
    assert!(
        err.contains("reference_elevation_m") && err.contains("above every cell"),
        "{err}"
    );
    let opts = ChangeOptions {
        transect: Some([[0.0, 0.0], [400.0, 0.0]]),
        ..Default::default()
    };
    let err = record(&mk(), &opts).unwrap_err().to_string();
    assert!(
        err.contains("change.transect") && err.contains("outside the analysis grid"),
        "{err}"
    );
    let opts = ChangeOptions {
        lod_t: -1.0,
        ..Default::default()
    };
    assert!(record(&mk(), &opts)
        .unwrap_err()
        .to_string()
        .contains("lod_t"));
    let opts = ChangeOptions {
        min_patch_m2: Some(-4.0),
        ..Default::default()
    };
    let err = record(&mk(), &opts).unwrap_err().to_string();
    assert!(
        err.contains("change.min_patch_m2") && err.contains("square metres"),
        "{err}"
    );
}

#[test]
fn default_uncertainty_is_flagged() {
    let g = geometry(10, 1.0);
    let a = survey("a", "2030-01-01", &g, None, |_, _| 1.0);
    let b = survey("b", "2031-01-01", &g, Some(0.05), |_, _| 1.0);
    let rec = record(&stack(vec![a, b]), &ChangeOptions::default()).unwrap();
    assert_eq!(rec.surveys[0].sigma_z_source, "default");
    assert_eq!(rec.surveys[0].sigma_z_m, 0.15);
    assert!(rec.surveys[0]
        .warnings
        .contains("no vertical uncertainty stated"));
    assert!(rec.pairs[0].warnings.contains("assumed default"));
    assert!(rec.warnings.iter().any(|w| w.contains("survey a")));
    assert_eq!(rec.surveys[1].sigma_z_source, "stated");
    // The fake source paths cannot be read: empty checksum and a warning, not a failure.
    assert!(
        rec.surveys[1].source_sha256.is_empty() && rec.surveys[1].warnings.contains("checksum")
    );
}

#[test]
fn source_checksum_and_transect_profile() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("a.tif");
    std::fs::write(&path, b"abc").unwrap();
    let g = geometry(40, 1.0);
    let plane = |x: f64, y: f64| 10.0 + 0.5 * x + 0.25 * y;
    let mut a = survey("a", "2030-01-01", &g, Some(0.1), plane);
    a.source.path = path;
    let b = survey("b", "2031-01-01", &g, Some(0.1), |x, y| plane(x, y) + 1.0);
    let opts = ChangeOptions {
        transect: Some([[-15.0, -10.0], [15.0, 10.0]]),
        ..Default::default()
    };
    let rec = record(&stack(vec![a, b]), &opts).unwrap();
    // Check: FIPS 180-4 SHA-256("abc") = ba7816bf…f20015ad; REFERENCES.md §11, exact
    assert_eq!(
        rec.surveys[0].source_sha256,
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    );
    let first: Vec<_> = rec.transect.iter().filter(|p| p.survey_id == "a").collect();
    assert_eq!(first.len() * 2, rec.transect.len());
    let last = first.last().unwrap();
    // Check: analytic — the transect is sqrt(30^2+20^2) = 36.0555 m long; bilinear sampling of a plane is exact
    assert!((last.distance_m - 36.055_513).abs() < 1e-5);
    for p in &first {
        assert!(
            (p.elevation_m.unwrap() - plane(p.x_crs, p.y_crs)).abs() < 1e-4,
            "{p:?}"
        );
    }
}

#[test]
fn same_record_on_any_thread_count() {
    let g = geometry(300, 1.0);
    let mk = || {
        stack(vec![
            survey("a", "2030-01-01", &g, Some(0.1), |x, y| {
                5.0 + (x * 0.05).sin() * (y * 0.03).cos()
            }),
            survey("b", "2031-01-01", &g, Some(0.1), |x, y| {
                5.0 + (x * 0.05 + 0.4).sin() * (y * 0.03).cos()
            }),
            survey("c", "2032-01-01", &g, Some(0.1), |x, y| {
                5.0 + (x * 0.05 + 0.9).sin() * (y * 0.03).cos()
            }),
        ])
    };
    let one = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let three = rayon::ThreadPoolBuilder::new()
        .num_threads(3)
        .build()
        .unwrap();
    let r1 = one.install(|| record(&mk(), &ChangeOptions::default()).unwrap());
    let r3 = three.install(|| record(&mk(), &ChangeOptions::default()).unwrap());
    assert_eq!(r1, r3);
}
