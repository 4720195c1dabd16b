//! End to end through the public API: surveys -> record -> figures -> archive -> verify.

use dunereel::archive::{verify, write_archive, ArchiveOptions, ExtraContent, ExtraFile};
use dunereel::change::{record_with_figures, ChangeOptions};
use dunereel::grid::{Grid, GridGeometry, LinearUnit};
use dunereel::survey::{GridSource, Survey};

fn survey(k: usize, dir: &std::path::Path) -> Survey {
    let g = GridGeometry {
        cols: 90,
        rows: 70,
        origin_x: 2000.0,
        origin_y: 8000.0,
        cell_x: 2.0,
        cell_y: 2.0,
        epsg: Some(32630),
        horizontal_unit: LinearUnit::Metre,
    };
    let z = ndarray::Array2::from_shape_fn((70, 90), |(r, c)| {
        if r > 60 && c > 80 {
            return f32::NAN;
        }
        let (x, y) = g.cell_center(r, c);
        let (dx, dy) = (x - 2060.0 - 8.0 * k as f64, y - 7930.0);
        (1.0 + 9.0 * (-(dx * dx) / 800.0 - dy * dy / 1800.0).exp()) as f32
    });
    let path = dir.join(format!("grid{k}.tif"));
    std::fs::write(&path, format!("grid {k}")).unwrap();
    Survey {
        id: format!("survey-{k}"),
        date: chrono::NaiveDate::from_ymd_opt(2040 + k as i32, 5, 20).unwrap(),
        label: Some(format!("spring {k}")),
        sigma_z_m: (k != 1).then_some(0.07),
        grid: Grid { geometry: g, z },
        source: GridSource {
            path,
            sample_type: "float32".into(),
            compression: "none".into(),
            nodata: Some(-9999.0),
            vertical_unit: LinearUnit::Metre,
            vertical_unit_source: dunereel::grid::UnitSource::File,
            horizontal_unit: LinearUnit::Metre,
            horizontal_unit_source: dunereel::grid::UnitSource::File,
            pixel_is_point: false,
        },
    }
}

fn run(threads: usize, out: &std::path::Path, inputs: &std::path::Path) {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap();
    pool.install(|| {
        let stack =
            dunereel::align::align((0..4).map(|k| survey(k, inputs)).collect(), None).unwrap();
        let opts = ChangeOptions {
            reference_elevation_m: 1.0,
            display_unit: LinearUnit::Foot,
            transect: Some([[2005.0, 7930.0], [2175.0, 7930.0]]),
            ..Default::default()
        };
        let (rec, figs) = record_with_figures(&stack, &opts).unwrap();
        assert_eq!(rec.pairs.len(), 4);
        assert_eq!(figs.len(), 5);
        let extra = [ExtraFile {
            name: "job/job-as-run.yaml".into(),
            content: ExtraContent::Bytes(b"x: 1\n".to_vec()),
        }];
        let aopts = ArchiveOptions {
            overwrite: false,
            bagging_date: chrono::NaiveDate::from_ymd_opt(2044, 1, 1),
            ..Default::default()
        };
        write_archive(out, &rec, &figs, &extra, &aopts).unwrap();
    });
}

#[test]
fn archive_is_identical_on_one_or_many_threads_and_verifies() {
    let tmp = tempfile::tempdir().unwrap();
    let (a, b) = (tmp.path().join("one"), tmp.path().join("many"));
    run(1, &a, tmp.path());
    run(3, &b, tmp.path());
    for f in [
        "manifest-sha256.txt",
        "tagmanifest-sha256.txt",
        "bag-info.txt",
    ] {
        assert_eq!(
            std::fs::read(a.join(f)).unwrap(),
            std::fs::read(b.join(f)).unwrap(),
            "{f}"
        );
    }
    let report = verify(&a).unwrap();
    assert!(report.is_intact(), "{report:?}");
    let surveys = std::fs::read_to_string(a.join("data/tables/surveys.csv")).unwrap();
    let header = surveys.lines().next().unwrap();
    assert!(
        header.contains("volume_above_reference_ft3") && header.contains("peak_height_ft"),
        "{header}"
    );
    // The survey without a stated uncertainty is flagged in its row and in the README.
    assert!(surveys.lines().nth(2).unwrap().contains("default"));
    let readme = std::fs::read_to_string(a.join("data/README.txt")).unwrap();
    assert!(
        readme.contains("survey survey-1: no vertical uncertainty stated"),
        "{readme}"
    );
}
