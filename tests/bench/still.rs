//! `dunereel still` on five 1024² surveys at 1280x720, reading included (target: under 2 s).
//! Run with `cargo bench --bench still`; reports the median of three runs, wall clock.

use std::time::Instant;

use dunereel::geotiff::{write_bands, WriteOptions};
use dunereel::grid::{GridGeometry, LinearUnit};
use dunereel::job;
use dunereel::run::{still, StillOptions};
use ndarray::Array2;

fn main() {
    let dir = tempfile::tempdir().unwrap();
    let n = 1024;
    let g = GridGeometry {
        cols: n,
        rows: n,
        origin_x: 400_000.0,
        origin_y: 6_000_000.0,
        cell_x: 1.0,
        cell_y: 1.0,
        epsg: Some(32631),
        horizontal_unit: LinearUnit::Metre,
    };
    let mut surveys = String::new();
    for k in 0..5 {
        // A 30 m dune moving east 8 m a year, two small ones, 0.1 m of deterministic roughness.
        let z = Array2::from_shape_fn((n, n), |(r, c)| {
            let (x, y) = (c as f64, r as f64);
            let dune = |cx: f64, cy: f64, h: f64, s: f64| {
                h * (-((x - cx).powi(2) + (y - cy).powi(2)) / (2.0 * s * s)).exp()
            };
            let rough = 0.1 * ((x * 0.37 + k as f64).sin() * (y * 0.41).cos());
            (2.0 + dune(400.0 + 8.0 * k as f64, 500.0, 30.0, 90.0)
                + dune(700.0, 300.0, 6.0, 30.0)
                + dune(750.0, 750.0, 5.0, 25.0)
                + rough) as f32
        });
        let name = format!("s{k}.tif");
        write_bands(&dir.path().join(&name), &g, &[&z], &WriteOptions::default()).unwrap();
        surveys.push_str(&format!(
            "  - {{ date: {}-06-01, grid: {name}, sigma_z_m: 0.1 }}\n",
            2030 + 2 * k
        ));
    }
    let job_path = dir.path().join("job.yaml");
    std::fs::write(
        &job_path,
        format!(
            "format_version: 1\ntitle: Bench dune\nsurveys:\n{surveys}in_between: {{ method: morph }}\n\
             view: {{ width: 1280, height: 720, orbit_deg: 30 }}\noutput: {{ folder: out }}\n"
        ),
    )
    .unwrap();
    let job = job::load(&job_path).unwrap();
    let mut times = Vec::new();
    let mut cpu = Vec::new();
    for i in 0..3 {
        let c0 = cpu_s();
        let out = dir.path().join(format!("still-{i}.png"));
        let t0 = Instant::now();
        still(
            &job,
            &StillOptions {
                at: chrono::NaiveDate::from_ymd_opt(2035, 2, 1).unwrap(),
                output: out,
                view: None,
                sheet: None,
                overwrite: false,
            },
        )
        .unwrap();
        times.push(t0.elapsed().as_secs_f64());
        cpu.push(cpu_s() - c0);
    }
    times.sort_by(f64::total_cmp);
    cpu.sort_by(f64::total_cmp);
    // On a shared machine the wall clock includes waiting for a core; the process's CPU time (all
    // threads) does not, and bounds the idle wall time from above.
    println!(
        "still, five 1024² surveys, 1280x720, morph, reading included: median {:.2} s wall, {:.2} s CPU (all threads) (wall runs {:?})",
        times[1], cpu[1], times
    );
}

/// CPU time (user + system) of this process so far, seconds, from /proc/self/stat (Linux; 0
/// elsewhere). Clock ticks assumed at 100 per second (the Linux USER_HZ; from memory).
fn cpu_s() -> f64 {
    let Ok(stat) = std::fs::read_to_string("/proc/self/stat") else {
        return 0.0;
    };
    // Fields after the command name in parentheses; utime and stime are fields 14 and 15.
    let rest = stat.rsplit_once(')').map_or("", |(_, r)| r);
    let f: Vec<&str> = rest.split_whitespace().collect();
    let ticks = |i: usize| f.get(i).and_then(|v| v.parse::<f64>().ok()).unwrap_or(0.0);
    (ticks(11) + ticks(12)) / 100.0
}
