//! A survey series with stable relief, a mis-registered survey and two moving dunes: the
//! co-registration recovers the offsets, the volumes match the unshifted truth, and migration
//! follows each dune rather than the relief that stood still.

mod common;

use chrono::NaiveDate;
use dunereel::align::{self, AlignedStack};
use dunereel::change::{self, ChangeOptions};
use dunereel::coregister::{self, CoregOptions};
use dunereel::grid::{Grid, LinearUnit};
use dunereel::interp::flow::FlowOptions;
use dunereel::survey::{GridSource, Survey};
use ndarray::Array2;

use common::{series_survey, SERIES_DUNES};

fn survey(k: usize, z: Array2<f32>) -> Survey {
    Survey {
        id: format!("s{k}"),
        date: NaiveDate::from_ymd_opt(2040 + 2 * k as i32, 6, 1).unwrap(),
        label: None,
        sigma_z_m: Some(0.05),
        grid: Grid {
            geometry: common::geometry(256, 256),
            z,
        },
        source: GridSource {
            path: format!("s{k}.tif").into(),
            sample_type: "float32".into(),
            compression: "none".into(),
            nodata: None,
            vertical_unit: LinearUnit::Metre,
            vertical_unit_source: dunereel::grid::UnitSource::File,
            horizontal_unit: LinearUnit::Metre,
            horizontal_unit_source: dunereel::grid::UnitSource::File,
            pixel_is_point: false,
        },
    }
}

/// The truth pair (no offset) and the mis-registered pair: survey 2 shows the ground 0.6 m further
/// east and 0.45 m further south, 0.20 m too high.
const NOISE: f64 = 0.03;
const OFFSET: (f64, f64, f64) = (0.6, -0.45, 0.20);

fn stacks() -> (AlignedStack, AlignedStack) {
    let a = series_survey(false, 0.0, 0.0, 0.0, NOISE, 1);
    let b_true = series_survey(true, 0.0, 0.0, 0.0, NOISE, 2);
    let b_off = series_survey(true, OFFSET.0, OFFSET.1, OFFSET.2, NOISE, 2);
    let truth = align::align(vec![survey(0, a.clone()), survey(1, b_true)], None).unwrap();
    let shifted = align::align(vec![survey(0, a), survey(1, b_off)], None).unwrap();
    (truth, shifted)
}

fn lods(opts: &ChangeOptions) -> Vec<f64> {
    vec![0.0, opts.lod_t * 0.05f64.hypot(0.05)]
}

#[test]
fn co_registration_recovers_the_offset_and_the_volume() {
    let (truth, mut shifted) = stacks();
    let opts = ChangeOptions::default();
    let before = change::record(&shifted, &opts).unwrap();
    let want = change::record(&truth, &opts).unwrap().pairs[0].net_volume_raw_m3;
    let regs = coregister::coregister(&mut shifted, None, &lods(&opts), &CoregOptions::default());
    let r = &regs[1];
    // Check: Nuth & Kääb (2011), REFERENCES.md §14 — offsets of a generator-made pair recovered
    // within 0.1 m horizontally and 0.02 m vertically (the acceptance bounds)
    assert!(
        (r.east_m - OFFSET.0).hypot(r.north_m - OFFSET.1) < 0.1,
        "{r:?}"
    );
    assert!((r.vertical_m - OFFSET.2).abs() < 0.02, "{r:?}");
    assert!(r.applied_horizontal && r.applied_vertical, "{r:?}");
    assert!(r.stable_area_m2 > 30_000.0, "{r:?}");
    assert!(
        r.horizontal_sigma_m > 0.0 && r.horizontal_sigma_m < 0.05,
        "{r:?}"
    );
    let after = change::record(&shifted, &opts).unwrap().pairs[0].net_volume_raw_m3;
    eprintln!("recovered {r:?}; net volume {after} m3 vs unshifted {want} m3");
    // Check: analytic — a 0.20 m bias over 65 536 m² adds about 13 100 m³ of false deposition
    // (REFERENCES.md §14); uncorrected, the net change is far off
    assert!((before.pairs[0].net_volume_raw_m3 - want).abs() > 10_000.0);
    // Check: issue acceptance — corrected net volume within 2 % of the unshifted pair's
    assert!(
        (after - want).abs() < 0.02 * want.abs(),
        "net {after} vs truth {want}"
    );
    // The dune lost a quarter of its height: 2π·H·σ² of the Gaussian, times -0.25.
    // Check: analytic — Gaussian mound volume 2π·A·σ², REFERENCES.md §6
    let model = -2.0 * std::f64::consts::PI * 2.5 * 16.0 * 16.0;
    assert!(
        (want - model).abs() < 0.05 * model.abs(),
        "{want} vs {model}"
    );
}

#[test]
fn turned_off_or_without_stable_ground_nothing_changes() {
    let (_, mut shifted) = stacks();
    let z1 = shifted.z(1).to_owned();
    let opts = ChangeOptions::default();
    let off = CoregOptions {
        enabled: false,
        ..Default::default()
    };
    let regs = coregister::coregister(&mut shifted, None, &lods(&opts), &off);
    assert!(regs[1].status.contains("turned off"));
    assert_eq!(shifted.z(1), z1);
    // A job mask covering one small patch: too little ground, warned and left uncorrected.
    let mut mask = Array2::from_elem((256, 256), false);
    for r in 0..10 {
        for c in 0..10 {
            mask[[r, c]] = true;
        }
    }
    let regs = coregister::coregister(
        &mut shifted,
        Some((&mask, coregister::StableSource::JobMask)),
        &lods(&opts),
        &CoregOptions::default(),
    );
    assert!(
        regs[1].status.contains("stable cells"),
        "{}",
        regs[1].status
    );
    assert!(!regs[1].applied_vertical);
    assert_eq!(shifted.z(1), z1);
}

#[test]
fn given_polygons_are_used() {
    let (_, mut shifted) = stacks();
    let opts = ChangeOptions::default();
    let g = shifted.geometry().clone();
    // The western third (the fixed ridge) and the south-east corner (the knoll), in CRS units.
    let (x0, y0) = (g.origin_x, g.origin_y);
    let polys = vec![
        vec![
            [x0, y0],
            [x0 + 80.0, y0],
            [x0 + 80.0, y0 - 256.0],
            [x0, y0 - 256.0],
        ],
        vec![
            [x0 + 170.0, y0 - 170.0],
            [x0 + 256.0, y0 - 170.0],
            [x0 + 256.0, y0 - 256.0],
            [x0 + 170.0, y0 - 256.0],
        ],
    ];
    let mask = coregister::mask_from_polygons(&polys, &g);
    let regs = coregister::coregister(
        &mut shifted,
        Some((&mask, coregister::StableSource::JobPolygons)),
        &lods(&opts),
        &CoregOptions::default(),
    );
    let r = &regs[1];
    // Check: Nuth & Kääb (2011) — same bounds as above, on the ground the job names
    assert!(
        (r.east_m - OFFSET.0).hypot(r.north_m - OFFSET.1) < 0.1,
        "{r:?}"
    );
    assert!((r.vertical_m - OFFSET.2).abs() < 0.02, "{r:?}");
    assert!(r.stable_area_m2 <= 80.0 * 256.0 + 86.0 * 86.0 + 1.0);
}

#[test]
fn migration_follows_each_moving_dune() {
    let (truth, _) = stacks();
    let opts = ChangeOptions::default();
    let mut record = change::record(&truth, &opts).unwrap();
    let pair = &mut record.pairs[0];
    let rows = change::landforms(&truth, pair, &FlowOptions::default(), 10.0, 100.0, 1024);
    assert_eq!(rows.len(), 3, "{rows:#?}");
    for (row, dune) in rows.iter().zip(SERIES_DUNES) {
        let (e, n) = dune.shift();
        let (ge, gn) = (
            row.migration_east_m.unwrap(),
            row.migration_north_m.unwrap(),
        );
        // Check: generator truth (analytic translation) — within 0.5 m and 2° (issue acceptance)
        assert!((ge - e).hypot(gn - n) < 0.5, "{row:?} vs ({e}, {n})");
        let az = row.migration_azimuth_deg.unwrap();
        assert!(
            (az - dune.azimuth_deg).abs() < 2.0,
            "{az} vs {}",
            dune.azimuth_deg
        );
        // The centroid of the detected change lies between the dune's two positions.
        let g = truth.geometry();
        let mid_x = g.origin_x + dune.start.0 + 0.5 * e;
        let mid_y = g.origin_y - dune.start.1 + 0.5 * n;
        assert!(
            (row.centroid_x_crs - mid_x).hypot(row.centroid_y_crs - mid_y)
                < 0.5 * dune.sigma_m + 2.0,
            "{row:?}"
        );
    }
    assert_eq!(rows[2].landform_id, "all");
    // The site-wide figure is dominated by the big dune, and the pair row carries it.
    let site = pair.migration_azimuth_deg.unwrap();
    assert!((site - 67.5).abs() < 10.0, "{site}");
}

#[test]
fn a_stack_in_a_scratch_file_gives_the_figures_of_one_in_memory() {
    // The same mis-registered pair plus a third survey, kept in memory and in a scratch file
    // (which hands its pages back after every pair): co-registration, the record and the
    // landforms must come out the same, value for value.
    // Check: common practice — a change of storage must not change a figure
    let a = series_survey(false, 0.0, 0.0, 0.0, NOISE, 1);
    let b = series_survey(true, OFFSET.0, OFFSET.1, OFFSET.2, NOISE, 2);
    let c = series_survey(true, 0.0, 0.0, 0.0, NOISE, 3);
    let surveys = || {
        vec![
            survey(0, a.clone()),
            survey(1, b.clone()),
            survey(2, c.clone()),
        ]
    };
    let opts = ChangeOptions::default();
    let figures = |keep: align::Keep| {
        let mut stack = align::align_kept(surveys(), None, keep).unwrap();
        assert_eq!(stack.is_in_scratch_file(), keep == align::Keep::ScratchFile);
        let lods = vec![
            0.0,
            opts.lod_t * 0.05f64.hypot(0.05),
            opts.lod_t * 0.05f64.hypot(0.05),
        ];
        let regs = coregister::coregister(&mut stack, None, &lods, &CoregOptions::default());
        let mut record = change::record(&stack, &opts).unwrap();
        let landforms: Vec<_> = record
            .pairs
            .iter_mut()
            .map(|p| change::landforms(&stack, p, &FlowOptions::default(), 10.0, 100.0, 1024))
            .collect();
        // Bit for bit (nodata is NaN, which never equals itself).
        let grids: Vec<Vec<u32>> = (0..stack.len())
            .map(|i| stack.z(i).iter().map(|v| v.to_bits()).collect())
            .collect();
        (
            format!("{regs:?}"),
            format!("{record:?}"),
            format!("{landforms:?}"),
            grids,
        )
    };
    let (memory, mapped) = (
        figures(align::Keep::Memory),
        figures(align::Keep::ScratchFile),
    );
    assert!(
        memory.0.contains("applied"),
        "the offset was corrected: {}",
        memory.0
    );
    assert_eq!(memory.0, mapped.0, "co-registration");
    assert_eq!(memory.1, mapped.1, "record");
    assert_eq!(memory.2, mapped.2, "landforms");
    assert_eq!(memory.3, mapped.3, "corrected grids");
}

/// Writes the moving-dune job in `dir`, runs it and returns its tables as text.
fn tables_of(dir: &std::path::Path, extra: &str) -> Vec<(String, String)> {
    run_tables(&common::moving_dune_job(dir, extra))
}

/// Runs a job (without frames) and returns its tables as text.
fn run_tables(job_path: &std::path::Path) -> Vec<(String, String)> {
    let dir = job_path.parent().unwrap();
    let mut job = dunereel::job::load(job_path).unwrap();
    job.output.png_frames = false;
    job.output.poster = false;
    job.output.gif = None;
    let out = dir.join("out");
    dunereel::run_job(
        &job,
        &dunereel::RunOptions {
            output_folder: Some(out.clone()),
            ..Default::default()
        },
    )
    .unwrap();
    [
        "surveys.csv",
        "surveys.json",
        "pairs.csv",
        "landforms.csv",
        "landforms.json",
    ]
    .iter()
    .map(|n| {
        let text = std::fs::read_to_string(out.join("data/tables").join(n)).unwrap();
        (n.to_string(), text)
    })
    .collect()
}

#[test]
fn the_same_job_in_two_folders_gives_identical_tables() {
    let one = tempfile::tempdir().unwrap();
    let two = tempfile::tempdir().unwrap();
    let deeper = two.path().join("elsewhere/on/another/machine");
    std::fs::create_dir_all(&deeper).unwrap();
    let a = tables_of(one.path(), "");
    let b = tables_of(&deeper, "");
    for ((name, x), (_, y)) in a.iter().zip(&b) {
        assert_eq!(x, y, "{name} differs between the two folders");
    }
    // Source files are named relative to the job file, and keep their checksum.
    let surveys = &a[0].1;
    assert!(surveys.contains(",2030-03-01.tif,"), "{surveys}");
    assert!(!surveys.contains(&one.path().display().to_string()));
}

#[test]
fn a_datum_offset_is_applied_and_recorded() {
    let d = tempfile::tempdir().unwrap();
    let plain = tables_of(d.path(), "");
    let d2 = tempfile::tempdir().unwrap();
    let job = common::moving_dune_job(d2.path(), "");
    let text = std::fs::read_to_string(&job).unwrap().replace(
        "grid: 2031-03-01.tif, sigma_z_m: 0.1 }",
        "grid: 2031-03-01.tif, sigma_z_m: 0.1, vertical_offset_m: -0.35 }",
    ) + "coregister: false\n";
    std::fs::write(&job, text).unwrap();
    let shifted = run_tables(&job);
    let json = |t: &str| -> serde_json::Value { serde_json::from_str(t).unwrap() };
    let (p, s) = (json(&plain[1].1), json(&shifted[1].1));
    assert_eq!(s[1]["vertical_offset_m"], -0.35);
    assert_eq!(s[0]["vertical_offset_m"], 0.0);
    // Check: analytic — adding −0.35 m to every cell lowers the mean elevation by 0.35 m
    let dm =
        s[1]["mean_elevation_m"].as_f64().unwrap() - p[1]["mean_elevation_m"].as_f64().unwrap();
    assert!((dm + 0.35).abs() < 1e-4, "{dm}");
    assert!(s[1]["coreg_status"]
        .as_str()
        .unwrap()
        .contains("turned off"));
}

#[test]
fn a_survey_in_us_survey_feet_of_another_crs_is_reprojected() {
    use dunereel::grid::GridGeometry;
    use dunereel::reproject::transform_point;
    // The analysis grid in WGS 84 / UTM 18N (EPSG:32618); the second survey delivered in NAD83 /
    // North Carolina (EPSG:2264, US survey feet), 3 ft cells.
    let base = GridGeometry {
        cols: 256,
        rows: 256,
        origin_x: 400_000.0,
        origin_y: 4_100_256.0,
        cell_x: 1.0,
        cell_y: 1.0,
        epsg: Some(32618),
        horizontal_unit: LinearUnit::Metre,
    };
    let (w, s, e, n) = base.extent();
    let corners: Vec<(f64, f64)> = [(w, s), (w, n), (e, s), (e, n)]
        .iter()
        .map(|&(x, y)| transform_point(32618, 2264, x, y).unwrap())
        .collect();
    let min_x = corners.iter().map(|c| c.0).fold(f64::INFINITY, f64::min) - 30.0;
    let max_x = corners
        .iter()
        .map(|c| c.0)
        .fold(f64::NEG_INFINITY, f64::max)
        + 30.0;
    let min_y = corners.iter().map(|c| c.1).fold(f64::INFINITY, f64::min) - 30.0;
    let max_y = corners
        .iter()
        .map(|c| c.1)
        .fold(f64::NEG_INFINITY, f64::max)
        + 30.0;
    let feet = GridGeometry {
        cols: ((max_x - min_x) / 3.0).ceil() as usize,
        rows: ((max_y - min_y) / 3.0).ceil() as usize,
        origin_x: min_x,
        origin_y: max_y,
        cell_x: 3.0,
        cell_y: 3.0,
        epsg: Some(2264),
        horizontal_unit: LinearUnit::UsSurveyFoot,
    };
    let model = |g: &GridGeometry, after: bool| {
        Array2::from_shape_fn((g.rows, g.cols), |(r, c)| {
            let (x, y) = g.cell_center(r, c);
            let (x, y) = if g.epsg == Some(2264) {
                transform_point(2264, 32618, x, y).unwrap()
            } else {
                (x, y)
            };
            common::series_surface(x - base.origin_x, y - base.origin_y, after) as f32
        })
    };
    let mut first = survey(0, model(&base, false));
    first.grid.geometry = base.clone();
    let mut second = survey(1, model(&feet, true));
    second.grid.geometry = feet.clone();
    let (stack, reports) = align::align_with_report(vec![first, second], None).unwrap();
    let report = reports[1]
        .as_ref()
        .expect("the second survey was reprojected");
    assert_eq!(report.source_crs, "EPSG:2264");
    assert!(report.datum_caution.as_deref().unwrap().contains("NAD83"));
    let truth = model(&base, true);
    let mut worst = 0f32;
    for r in 2..254 {
        for c in 2..254 {
            worst = worst.max((stack.z(1)[[r, c]] - truth[[r, c]]).abs());
        }
    }
    // Check: REFERENCES.md §13 (inverse mapping, bilinear) — against the model evaluated on the
    // analysis grid, within 0.02 m: bilinear error on 0.91 m cells of slopes curving by at most
    // ~0.1 /m is (h²/8)·z'' ≈ 0.01 m; analytic bound
    assert!(worst < 0.02, "largest difference {worst} m");
}
