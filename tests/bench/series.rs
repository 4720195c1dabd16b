//! Bench: the survey-series stages on two threads — reprojecting a grid from one UTM zone to the
//! next (EPSG:32631 -> EPSG:32630) onto 1024² and 4096² analysis grids, and co-registering a 1024²
//! survey pair with a known offset on stable relief. Medians of several runs; inputs are built
//! outside the timed part.

use std::time::{Duration, Instant};

use dunereel::align;
use dunereel::coregister::{coregister, CoregOptions};
use dunereel::grid::{Grid, GridGeometry, LinearUnit};
use dunereel::reproject::reproject;
use dunereel::survey::{GridSource, Survey};
use ndarray::Array2;

const RUNS: usize = 5;

fn geometry(n: usize, epsg: u32, origin_x: f64, origin_y: f64) -> GridGeometry {
    GridGeometry {
        cols: n,
        rows: n,
        origin_x,
        origin_y,
        cell_x: 1.0,
        cell_y: 1.0,
        epsg: Some(epsg),
        horizontal_unit: LinearUnit::Metre,
    }
}

fn relief(x: f64, y: f64) -> f32 {
    (5.0 + 3.0 * (x * 0.013).sin() * (y * 0.011).cos() + 0.5 * (x * 0.07 + y * 0.05).sin()) as f32
}

fn median(mut v: Vec<Duration>) -> Duration {
    v.sort();
    v[v.len() / 2]
}

fn bench_reproject(n: usize) {
    // Target: EPSG:32631 near its western zone edge; source: the same ground in EPSG:32630.
    let target = geometry(n, 32631, 300_000.0, 5_800_000.0);
    let (sx, sy) =
        dunereel::reproject::transform_point(32631, 32630, 300_000.0, 5_800_000.0).unwrap();
    let m = n + n / 8;
    let src_g = geometry(m, 32630, sx - (n / 16) as f64, sy + (n / 16) as f64);
    let z = Array2::from_shape_fn((m, m), |(r, c)| relief(c as f64, r as f64));
    let src = Grid { geometry: src_g, z };
    let times: Vec<Duration> = (0..RUNS)
        .map(|_| {
            let t = Instant::now();
            let (out, report) = reproject(&src, &target).unwrap();
            let e = t.elapsed();
            assert!(out.iter().filter(|v| v.is_finite()).count() > n * n / 2);
            assert!(report.lattice_error_cells < 0.125);
            e
        })
        .collect();
    let t = median(times);
    println!(
        "reproject {n}x{n} (32630 -> 32631): {:.3} s, {:.1} Mcells/s",
        t.as_secs_f64(),
        (n * n) as f64 / t.as_secs_f64() / 1e6
    );
}

fn survey(k: usize, g: &GridGeometry, z: Array2<f32>) -> Survey {
    Survey {
        id: format!("s{k}"),
        date: chrono::NaiveDate::from_ymd_opt(2040 + k as i32, 1, 1).unwrap(),
        label: None,
        sigma_z_m: Some(0.05),
        grid: Grid {
            geometry: g.clone(),
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

fn bench_coregister() {
    let n = 1024;
    let g = geometry(n, 32631, 400_000.0, 6_000_000.0);
    let a = Array2::from_shape_fn((n, n), |(r, c)| relief(c as f64, r as f64));
    // Shown 0.6 m east, 0.4 m south, 0.15 m high.
    let b = Array2::from_shape_fn((n, n), |(r, c)| {
        relief(c as f64 - 0.6, r as f64 + 0.4) + 0.15
    });
    let times: Vec<Duration> = (0..RUNS)
        .map(|_| {
            let mut stack = align::align(
                vec![survey(0, &g, a.clone()), survey(1, &g, b.clone())],
                None,
            )
            .unwrap();
            let t = Instant::now();
            let regs = coregister(&mut stack, None, &[0.0, 0.14], &CoregOptions::default());
            let e = t.elapsed();
            assert!((regs[1].east_m - 0.6).abs() < 0.05, "{:?}", regs[1]);
            e
        })
        .collect();
    println!(
        "co-register 1024x1024 pair: {:.3} s",
        median(times).as_secs_f64()
    );
}

fn main() {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .unwrap();
    pool.install(|| {
        bench_coregister();
        bench_reproject(1024);
        bench_reproject(4096);
    });
}
