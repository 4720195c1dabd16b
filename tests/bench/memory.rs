//! Bench: peak memory of a long series of large grids, as issue 11 sets it: twelve surveys of
//! 4096² cells (the grids alone are 768 MiB as f32). The demo generator makes five 4096² grids
//! (`--cells 4096`); the job lists them twelve times over, two years apart, so every survey is a
//! full-size grid. Frames are kept small (640×360, one a year, GIF + PNG frames + record) because
//! the frames' memory is bounded separately; what this measures is what grows with the surveys.
//!
//! Prints the stage table and the process's peak resident memory (VmHWM from /proc/self/status).
//! Target: ≤ 1 GiB. Run with `cargo bench --bench memory` (about 4 minutes on two cores, plus
//! half a minute to make the grids).

use std::path::Path;
use std::process::Command;
use std::time::Instant;

use dunereel::{job, run_job, RunOptions};

const GRIDS: [&str; 5] = [
    "quellan-2026-04-14.tif",
    "quellan-2027-10-02.tif",
    "quellan-2028-09-19.tif",
    "quellan-2031-03-27.tif",
    "quellan-2034-05-08.tif",
];

fn main() {
    let dir = tempfile::tempdir().unwrap();
    let grids = dir.path().join("grids");
    let status = Command::new(env!("CARGO_BIN_EXE_make-demo-data"))
        .args([grids.to_str().unwrap(), "--cells", "4096"])
        .stdout(std::process::Stdio::null())
        .status()
        .unwrap();
    assert!(status.success(), "the demo generator failed");
    let mut text = String::from("format_version: 1\ntitle: Memory bench (invented)\nsurveys:\n");
    for i in 0..12 {
        text.push_str(&format!(
            "  - {{ date: {}-06-01, grid: grids/{}, sigma_z_m: 0.10 }}\n",
            2030 + 2 * i,
            GRIDS[i % GRIDS.len()]
        ));
    }
    text.push_str(
        "timeline: { frames_per_year: 1, fps: 12, hold_s: 0.5 }\n\
         view: { width: 640, height: 360, supersample: 1 }\n\
         output: { folder: out, gif: series.gif, png_frames: true, overwrite: true }\n",
    );
    let path = dir.path().join("job.yaml");
    std::fs::write(&path, text).unwrap();
    let job = job::load(Path::new(&path)).unwrap();
    let before = dunereel::run::peak_resident_mib().unwrap_or(f64::NAN);
    let t0 = Instant::now();
    let report = run_job(
        &job,
        &RunOptions {
            overwrite: true,
            ..Default::default()
        },
    )
    .expect("the memory bench job runs");
    let wall = t0.elapsed().as_secs_f64();
    println!(
        "12 surveys of 4096² (768 MiB of grids), {} frames of 640x360",
        report.frames
    );
    for (stage, s) in &report.timings {
        println!("  {stage:<40} {s:7.2} s");
    }
    println!("  total {wall:.1} s");
    println!(
        "peak resident memory: {:.0} MiB (before the job: {before:.0} MiB); target 1024 MiB",
        dunereel::run::peak_resident_mib().unwrap_or(f64::NAN)
    );
}
