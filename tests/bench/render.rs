//! Bench: frame time of the renderer at 1280 × 720 on synthetic dune grids.
//!
//! Run with `cargo bench --bench render`. Reports medians of several frames (each at a different
//! point of an orbit, so caches do not flatter the figures) and pixels per second.
//! The machine this was written on is shared with other builds, so besides wall-clock time the
//! bench reports the CPU time of the rayon worker threads (from /proc/thread-self/schedstat, Linux),
//! which other processes do not inflate. For two threads, the estimated speed-up is the one-thread
//! CPU time over the busier worker's CPU time (rayon workers spin while waiting, so a worker's CPU
//! time is close to the wall time it would take on an idle machine).
//! Cases: 1024² and 4096² grids covering the same ground (1 m and 0.25 m cells), with and without
//! cast shadows, no supersampling and the default 2×2 supersampling, on 1 thread; then a 60-frame
//! orbit on 1 and 2 threads.

use std::time::Instant;

use dunereel::interp::Surface;
use dunereel::render::bench_api::synthetic_dunes;
use dunereel::render::{Frame, LightOptions, Renderer, ViewOptions};

const W: u32 = 1280;
const H: u32 = 720;

fn renderer(s: &Surface, supersample: u32, shadows: bool) -> Renderer {
    let view = ViewOptions {
        width: W,
        height: H,
        supersample,
        orbit_deg: 360.0,
        ..Default::default()
    };
    let light = LightOptions {
        shadows,
        ..Default::default()
    };
    Renderer::new(&s.geometry, &view, &light, (0.0, 16.0)).unwrap()
}

/// CPU time of the calling thread in milliseconds (Linux), or NaN elsewhere.
fn thread_cpu_ms() -> f64 {
    std::fs::read_to_string("/proc/thread-self/schedstat")
        .ok()
        .and_then(|t| {
            t.split_whitespace()
                .next()
                .and_then(|v| v.parse::<f64>().ok())
        })
        .map_or(f64::NAN, |ns| ns / 1e6)
}

/// CPU milliseconds of every worker of `pool`.
fn pool_cpu_ms(pool: &rayon::ThreadPool) -> Vec<f64> {
    pool.broadcast(|_| thread_cpu_ms())
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(|a, b| a.partial_cmp(b).unwrap());
    v[v.len() / 2]
}

/// Median (wall, CPU) milliseconds per frame over `runs` runs of 6 frames spread along the orbit,
/// on the current (one-thread) pool. CPU time is taken per run, not per frame, because the kernel
/// updates a thread's CPU clock only at scheduler ticks (a few ms).
fn frame_ms(r: &mut Renderer, s: &Surface, runs: usize) -> (f64, f64) {
    let mut f = Frame::new(W, H);
    r.render_into(s, 0.0, &mut f); // warm up
    let (wall, cpu): (Vec<f64>, Vec<f64>) = (0..runs)
        .map(|k| {
            let (t, c) = (Instant::now(), thread_cpu_ms());
            for i in 0..6 {
                r.render_into(s, (k * 6 + i) as f64 / (runs * 6) as f64, &mut f);
            }
            (
                t.elapsed().as_secs_f64() * 1e3 / 6.0,
                (thread_cpu_ms() - c) / 6.0,
            )
        })
        .unzip();
    (median(wall), median(cpu))
}

/// (wall, busiest worker's CPU) milliseconds for a whole 60-frame orbit on `pool`; medians of `runs`.
fn orbit_ms(pool: &rayon::ThreadPool, r: &mut Renderer, s: &Surface, runs: usize) -> (f64, f64) {
    let mut f = Frame::new(W, H);
    let (wall, cpu): (Vec<f64>, Vec<f64>) = (0..runs)
        .map(|_| {
            let c0 = pool_cpu_ms(pool);
            let t = Instant::now();
            pool.install(|| {
                for i in 0..60 {
                    r.render_into(s, i as f64 / 59.0, &mut f);
                }
            });
            let wall = t.elapsed().as_secs_f64() * 1e3;
            let c1 = pool_cpu_ms(pool);
            (
                wall,
                c1.iter().zip(&c0).map(|(a, b)| a - b).fold(0.0, f64::max),
            )
        })
        .unzip();
    (median(wall), median(cpu))
}

fn main() {
    let one = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let two = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .unwrap();
    let small = synthetic_dunes(1024, 1024, 1.0);
    // `cargo bench --bench render -- orbit` runs only the thread-scaling part.
    let orbit_only = std::env::args().any(|a| a == "orbit");
    let large = synthetic_dunes(4096, 4096, 0.25);
    let px = f64::from(W * H);
    println!("render bench, {W}x{H}, medians");
    for ss in if orbit_only { vec![] } else { vec![1, 2] } {
        for shadows in [false, true] {
            let mut row = Vec::new();
            for (name, s) in [("1024^2", &small), ("4096^2", &large)] {
                let mut r = renderer(s, ss, shadows);
                let (wall, cpu) = one.install(|| frame_ms(&mut r, s, 7));
                println!(
                    "  1 thread  {name} supersample {ss} shadows {shadows:5}: {cpu:6.1} ms CPU/frame ({:.1} Mpx/s; wall {wall:.1} ms), level {}",
                    px / cpu / 1e3,
                    r.level_of_detail()
                );
                row.push(cpu);
            }
            println!("    4096^2 / 1024^2 = {:.2}", row[1] / row[0]);
        }
    }
    if !orbit_only {
        // Default supersampling with a finer level of detail (cells of 1 output px).
        let view = ViewOptions {
            width: W,
            height: H,
            lod_min_cell_px: 1.0,
            ..Default::default()
        };
        let mut r = Renderer::new(
            &small.geometry,
            &view,
            &LightOptions::default(),
            (0.0, 16.0),
        )
        .unwrap();
        let (wall, cpu) = one.install(|| frame_ms(&mut r, &small, 7));
        println!(
            "  1 thread  1024^2 supersample 2 shadows true  lod_min_cell_px 1: {cpu:6.1} ms CPU/frame (wall {wall:.1} ms), level {}",
            r.level_of_detail()
        );
    }
    // Orbit: 1-thread and 2-thread runs alternate, so both see the same background load; the
    // speed-up is the median of the per-pair wall-time ratios (and the ratio of the best runs).
    for ss in [1, 2] {
        let mut r = renderer(&small, ss, true);
        let (mut w1s, mut w2s, mut ratios, mut cpu_ratios) = (vec![], vec![], vec![], vec![]);
        for _ in 0..5 {
            let (w1, c1) = orbit_ms(&one, &mut r, &small, 1);
            let (w2, c2) = orbit_ms(&two, &mut r, &small, 1);
            w1s.push(w1);
            w2s.push(w2);
            ratios.push(w1 / w2);
            cpu_ratios.push(c1 / c2);
        }
        let best = |v: &[f64]| v.iter().copied().fold(f64::INFINITY, f64::min);
        println!(
            "  60-frame orbit 1024^2 supersample {ss} shadows: 1 thread {:.0} ms, 2 threads {:.0} ms (medians); speed-up median of pairs {:.2}x, best runs {:.2}x, by worker CPU {:.2}x",
            median(w1s.clone()),
            median(w2s.clone()),
            median(ratios),
            best(&w1s) / best(&w2s),
            median(cpu_ratios)
        );
    }
}
