//! Bench: the standard job end to end, as issue 11 defines it: five 1024² surveys (made by the demo
//! generator with `--cells 1024`) over 25 years, 6 frames a year (154 frames) at 1280×720,
//! supersample 2, shadows, morph, the first survey as the earlier surface, GIF + PNG frames + record.
//! Targets: ≤ 12 s on the 2-core machine, ≥ 180 % CPU; 2 threads ≥ 1.8× faster than 1.
//!
//! The one- and two-thread runs are taken in turn (order swapped every round), so that drift in
//! the machine's speed over the bench falls on both. Prints, per supersample (2, then 1) and
//! thread count, the median wall time of several runs and
//! the process CPU share (CPU seconds / wall seconds, from /proc/self/stat), then the stage table
//! (`RunReport::timings`) of the median two-thread run at supersample 2. Run with
//! `cargo bench --bench job`; `JOB_BENCH_RUNS=1` for a quick look, `JOB_BENCH_SS=2` for one
//! supersample only.

use std::path::Path;
use std::process::Command;
use std::time::Instant;

use dunereel::{job, run_job, RunOptions};

/// User + system CPU seconds of this process so far (Linux; clock ticks of 1/100 s). None elsewhere.
fn process_cpu_s() -> Option<f64> {
    let s = std::fs::read_to_string("/proc/self/stat").ok()?;
    let after = s.rsplit_once(')')?.1;
    let f: Vec<&str> = after.split_whitespace().collect();
    let ticks: f64 = f.get(11)?.parse::<f64>().ok()? + f.get(12)?.parse::<f64>().ok()?;
    Some(ticks / 100.0)
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

const JOB: &str = "format_version: 1
title: Standard bench job (invented)
surveys:
  - { date: 2026-04-14, grid: grids/quellan-2026-04-14.tif, sigma_z_m: 0.10 }
  - { date: 2032-10-02, grid: grids/quellan-2027-10-02.tif, sigma_z_m: 0.05 }
  - { date: 2038-09-19, grid: grids/quellan-2028-09-19.tif, sigma_z_m: 0.12 }
  - { date: 2045-03-27, grid: grids/quellan-2031-03-27.tif, sigma_z_m: 0.15 }
  - { date: 2051-05-08, grid: grids/quellan-2034-05-08.tif, sigma_z_m: 0.08 }
timeline: { frames_per_year: 6, fps: 12, hold_s: 1.0 }
in_between: { method: morph }
view: { width: 1280, height: 720, supersample: SS }
sun: { shadows: true }
shell: { survey: first }
output: { folder: out, gif: bench.gif, png_frames: true, poster: true, overwrite: true }
";

/// One run: wall seconds, CPU share, and the stage table.
type Run = (f64, f64, Vec<(&'static str, f64)>);

fn run_once(job: &job::Job, threads: usize) -> Run {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap();
    let cpu0 = process_cpu_s().unwrap_or(0.0);
    let t0 = Instant::now();
    let report = pool.install(|| {
        run_job(
            job,
            &RunOptions {
                overwrite: true,
                ..Default::default()
            },
        )
    });
    let wall = t0.elapsed().as_secs_f64();
    let cpu = process_cpu_s().unwrap_or(0.0) - cpu0;
    let report = report.expect("the bench job runs");
    assert!(report.frames >= 150, "{} frames", report.frames);
    (wall, cpu / wall, report.timings)
}

fn main() {
    let dir = tempfile::tempdir().unwrap();
    let grids = dir.path().join("grids");
    let status = Command::new(env!("CARGO_BIN_EXE_make-demo-data"))
        .args([grids.to_str().unwrap(), "--cells", "1024"])
        .stdout(std::process::Stdio::null())
        .status()
        .unwrap();
    assert!(status.success(), "the demo generator failed");
    let runs: usize = std::env::var("JOB_BENCH_RUNS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(3);
    let supersamples: Vec<u32> = match std::env::var("JOB_BENCH_SS")
        .ok()
        .and_then(|v| v.parse().ok())
    {
        Some(ss) => vec![ss],
        None => vec![2, 1],
    };
    println!("standard job: 5 surveys of 1024², 25 years, 6 frames/yr, 1280x720, shadows, morph, shell, GIF + PNG + record");
    let mut table = None;
    for ss in supersamples {
        let path = dir.path().join(format!("job-ss{ss}.yaml"));
        std::fs::write(&path, JOB.replace("SS", &ss.to_string())).unwrap();
        let job = job::load(Path::new(&path)).unwrap();
        // One- and two-thread runs taken in turn, the order swapped every round, so that a
        // machine whose speed drifts during the bench (shared hosts do) slows both alike.
        let mut results: [Vec<Run>; 2] = [Vec::new(), Vec::new()];
        for round in 0..runs {
            let order = if round % 2 == 0 { [1, 2] } else { [2, 1] };
            for threads in order {
                results[threads - 1].push(run_once(&job, threads));
            }
        }
        let mut medians = Vec::new();
        for (k, mut results) in results.into_iter().enumerate() {
            let threads = k + 1;
            results.sort_by(|a, b| a.0.total_cmp(&b.0));
            let share = median(results.iter().map(|r| r.1).collect());
            let (wall, _, timings) = results.swap_remove(results.len() / 2);
            println!(
                "  supersample {ss}, {threads} thread(s): median {wall:6.2} s over {runs} runs, CPU {:4.0} %",
                100.0 * share
            );
            medians.push(wall);
            if threads == 2 && (ss == 2 || table.is_none()) {
                table = Some((ss, timings));
            }
        }
        println!(
            "  supersample {ss}: 2 threads vs 1: {:.2}x faster",
            medians[0] / medians[1]
        );
    }
    if let Some((ss, timings)) = table {
        println!("stages of the median 2-thread run at supersample {ss} (wall seconds):");
        for (stage, s) in timings {
            println!("  {stage:<40} {s:7.2}");
        }
    }
}
