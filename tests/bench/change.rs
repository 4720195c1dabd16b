//! Bench: the change record of five 1024 × 1024 surveys on two threads, three ways — metrics only,
//! metrics plus every figure rendered (4 + 1 DoD maps, one transect chart), and the whole archive
//! written (PNG encoding, tables, BagIt checksums). Medians of several runs.

use std::time::{Duration, Instant};

use dunereel::archive::{write_archive, ArchiveOptions};
use dunereel::change::{record, record_with_figures, ChangeOptions};
use dunereel::grid::{Grid, GridGeometry, LinearUnit};
use dunereel::survey::{GridSource, Survey};

const N: usize = 1024;
const RUNS: usize = 7;

fn surveys(dir: &std::path::Path) -> Vec<Survey> {
    let g = GridGeometry {
        cols: N,
        rows: N,
        origin_x: 400_000.0,
        origin_y: 6_000_000.0,
        cell_x: 1.0,
        cell_y: 1.0,
        epsg: Some(32631),
        horizontal_unit: LinearUnit::Metre,
    };
    (0..5i32)
        .map(|k| {
            let shift = 12.0 * k as f64;
            let z = ndarray::Array2::from_shape_fn((N, N), |(r, c)| {
                let (x, y) = (c as f64 - 400.0 - shift, r as f64 - 512.0);
                let dune = 14.0
                    * (-(x * x) / (2.0 * 60.0f64.powi(2)) - (y * y) / (2.0 * 150.0f64.powi(2)))
                        .exp();
                let ripples =
                    0.3 * ((c as f64) * 0.21 + k as f64).sin() * ((r as f64) * 0.13).cos();
                (1.5 + dune + ripples) as f32
            });
            // A source file of realistic size (one f32 per cell) so the checksum is part of the work.
            let path = dir.join(format!("s{k}.tif"));
            let bytes: Vec<u8> = z.iter().flat_map(|v| v.to_le_bytes()).collect();
            std::fs::write(&path, bytes).unwrap();
            Survey {
                id: format!("s{k}"),
                date: chrono::NaiveDate::from_ymd_opt(2030 + k, 4, 1).unwrap(),
                label: None,
                sigma_z_m: Some(0.08),
                grid: Grid {
                    geometry: g.clone(),
                    z,
                },
                source: GridSource {
                    path,
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
        })
        .collect()
}

fn median(mut v: Vec<Duration>) -> Duration {
    v.sort();
    v[v.len() / 2]
}

fn time(runs: usize, mut f: impl FnMut()) -> Duration {
    f(); // warm-up
    median(
        (0..runs)
            .map(|_| {
                let t = Instant::now();
                f();
                t.elapsed()
            })
            .collect(),
    )
}

fn main() {
    let tmp = tempfile::tempdir().unwrap();
    let stack = dunereel::align::align(surveys(tmp.path()), None).unwrap();
    let opts = ChangeOptions {
        reference_elevation_m: 1.0,
        transect: Some([[400_010.0, 5_999_488.0], [401_010.0, 5_999_488.0]]),
        ..Default::default()
    };
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .unwrap();
    let cells = (5 * N * N) as f64;
    pool.install(|| {
        let t = time(RUNS, || {
            std::hint::black_box(record(&stack, &opts).unwrap());
        });
        println!(
            "change/record   5 x {N}x{N}, 2 threads, metrics only (with source SHA-256): median {:.1} ms ({:.0} Mcells/s)",
            t.as_secs_f64() * 1e3,
            cells / t.as_secs_f64() / 1e6
        );
        let t = time(RUNS, || {
            std::hint::black_box(record_with_figures(&stack, &opts).unwrap());
        });
        println!("change/figures  metrics + 5 DoD maps + transect chart (frames, no PNG): median {:.1} ms", t.as_secs_f64() * 1e3);
        let out = tmp.path().join("archive");
        let aopts = ArchiveOptions { overwrite: true, ..Default::default() };
        let t = time(RUNS, || {
            let (rec, figs) = record_with_figures(&stack, &opts).unwrap();
            write_archive(&out, &rec, &figs, &[], &aopts).unwrap();
        });
        println!("change/archive  metrics + figures + PNG + tables + BagIt written: median {:.1} ms", t.as_secs_f64() * 1e3);
        let t = time(RUNS, || {
            assert!(dunereel::archive::verify(&out).unwrap().is_intact());
        });
        println!("change/verify   archive checked: median {:.1} ms", t.as_secs_f64() * 1e3);
    });
}
