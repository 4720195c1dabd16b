//! Bench: what a larger grid costs a whole run, as issue 11 sets it. One survey pair of the demo
//! (the first and the last survey, made by the demo generator) at 1024² and at 4096² cells over
//! the same ground, the same 49 frames at 1280×720 (supersample 2, morph, shadows, the first
//! survey as shell, GIF + PNG frames + poster + record). The two jobs run alternately as separate
//! processes of the release binary, three times each, so a busy spell of the machine falls on
//! both; the medians and their ratio are printed. Target: the 4096² pair ≤ 2× the 1024² pair.
//!
//! Also prints each pair's peak resident memory (`wait4`). Run with `cargo bench --bench pair` (about two minutes on two cores, half
//! of it making the grids).

use std::path::Path;
use std::process::{Command, Stdio};
use std::time::Instant;

const FIRST: &str = "quellan-2026-04-14.tif";
const LAST: &str = "quellan-2034-05-08.tif";
const RUNS: usize = 3;

fn main() {
    let dir = tempfile::tempdir().unwrap();
    let mut jobs = Vec::new();
    for cells in [1024, 4096] {
        let grids = dir.path().join(format!("grids{cells}"));
        let status = Command::new(env!("CARGO_BIN_EXE_make-demo-data"))
            .args([grids.to_str().unwrap(), "--cells", &cells.to_string()])
            .stdout(Stdio::null())
            .status()
            .unwrap();
        assert!(status.success(), "the demo generator failed");
        let text = format!(
            "format_version: 1\n\
             title: Pair bench {cells} (invented)\n\
             surveys:\n\
             \x20 - {{ date: 2026-04-14, grid: grids{cells}/{FIRST}, sigma_z_m: 0.10 }}\n\
             \x20 - {{ date: 2034-05-08, grid: grids{cells}/{LAST}, sigma_z_m: 0.08 }}\n\
             timeline: {{ frames_per_year: 6, fps: 12, hold_s: 1.0 }}\n\
             in_between: {{ method: morph }}\n\
             view: {{ width: 1280, height: 720, supersample: 2 }}\n\
             sun: {{ shadows: true }}\n\
             shell: {{ survey: first }}\n\
             output: {{ folder: out{cells}, gif: pair.gif, png_frames: true, poster: true, overwrite: true }}\n"
        );
        let path = dir.path().join(format!("pair{cells}.yaml"));
        std::fs::write(&path, text).unwrap();
        jobs.push((cells, path));
    }
    let mut times: Vec<Vec<f64>> = vec![Vec::new(); jobs.len()];
    let mut peaks = vec![0.0f64; jobs.len()];
    for _ in 0..RUNS {
        for (k, (cells, path)) in jobs.iter().enumerate() {
            let (s, mib) = run(path);
            println!("  {cells}² pair: {s:.2} s, peak {mib:.0} MiB");
            times[k].push(s);
            peaks[k] = peaks[k].max(mib);
        }
    }
    let median = |v: &mut Vec<f64>| {
        v.sort_by(f64::total_cmp);
        v[v.len() / 2]
    };
    let (small, large) = (median(&mut times[0]), median(&mut times[1]));
    println!(
        "median of {RUNS}: 1024² pair {small:.2} s, 4096² pair {large:.2} s, ratio {:.2} (target ≤ 2)",
        large / small
    );
    println!(
        "peak resident memory: 1024² pair {:.0} MiB, 4096² pair {:.0} MiB",
        peaks[0], peaks[1]
    );
}

/// Runs one job with the release binary (no `-v`, which resets the high-water mark per stage) and
/// returns its wall time in seconds and its peak resident memory in MiB (from `wait4`).
fn run(job: &Path) -> (f64, f64) {
    let t0 = Instant::now();
    // Reaped by the wait4 below, which also gives its peak memory.
    #[allow(clippy::zombie_processes)]
    let child = Command::new(env!("CARGO_BIN_EXE_dunereel"))
        .args(["render", job.to_str().unwrap()])
        .current_dir(job.parent().unwrap())
        .stdout(Stdio::null())
        .spawn()
        .unwrap();
    let mut status = 0;
    // SAFETY: wait4 on our own child, writing only the status and the struct it is given.
    let usage = unsafe {
        let mut u: libc::rusage = std::mem::zeroed();
        let pid = libc::wait4(child.id() as libc::pid_t, &mut status, 0, &mut u);
        assert_eq!(pid, child.id() as libc::pid_t, "wait4 failed");
        u
    };
    let s = t0.elapsed().as_secs_f64();
    assert!(
        libc::WIFEXITED(status) && libc::WEXITSTATUS(status) == 0,
        "{} failed",
        job.display()
    );
    (s, usage.ru_maxrss as f64 / 1024.0)
}
