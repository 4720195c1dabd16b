//! Bench: displacement field of a pair and one morph frame, at 256², 512² and 1024² cells.
//! Targets (issue 4): field for 1024² on one core <= 2 s; morph of one 1024² frame <= 20 ms.
//! Prints medians of several runs and throughput. Run with `cargo bench --bench flow`.

use std::hint::black_box;
use std::time::Instant;

use dunereel::interp::flow::{estimate, FlowOptions};
use dunereel::interp::morph::morph_into;
use ndarray::Array2;

/// A field of mounds on a sloping beach, every mound moved by (east, south) cells in `b`.
fn dune_field(n: usize, east: f64, south: f64, seed: u64) -> Array2<f32> {
    let spacing = 96.0;
    Array2::from_shape_fn((n, n), |(r, c)| {
        let (y, x) = (r as f64 - south, c as f64 - east);
        // Nearest mound centre on a staggered lattice.
        let row_i = (y / spacing).round();
        let off = if (row_i as i64) % 2 == 0 {
            0.0
        } else {
            spacing / 2.0
        };
        let col_i = ((x - off) / spacing).round();
        let (dy, dx) = (y - row_i * spacing, x - off - col_i * spacing);
        let s = if dx < 0.0 { 14.0 } else { 7.0 };
        let h = 6.0 * (-0.5 * (dx / s).powi(2) - 0.5 * (dy / 11.0).powi(2)).exp();
        let mut k = (r as u64 * 1_000_003 + c as u64) ^ seed;
        k = k.wrapping_mul(0x9E37_79B9_7F4A_7C15);
        let noise = ((k >> 40) as f64 / (1u64 << 24) as f64 - 0.5) * 0.04;
        (2.0 + 0.01 * r as f64 + h + noise) as f32
    })
}

/// CPU time (s) the calling thread has run, from /proc/thread-self/schedstat (Linux); None elsewhere.
/// Reported beside wall time because the bench machine may be shared.
fn thread_cpu_s() -> Option<f64> {
    let s = std::fs::read_to_string("/proc/thread-self/schedstat").ok()?;
    Some(s.split_whitespace().next()?.parse::<f64>().ok()? * 1e-9)
}

/// Wall and thread-CPU seconds of `f`, run on the calling thread.
fn timed<T>(f: impl FnOnce() -> T) -> (T, f64, f64) {
    let c0 = thread_cpu_s();
    let t = Instant::now();
    let out = f();
    let wall = t.elapsed().as_secs_f64();
    let cpu = match (c0, thread_cpu_s()) {
        (Some(a), Some(b)) => b - a,
        _ => f64::NAN,
    };
    (out, wall, cpu)
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    let one = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .expect("thread pool");
    let opts = FlowOptions::default();
    for n in [256usize, 512, 1024] {
        let a = dune_field(n, 0.0, 0.0, 1);
        let b = dune_field(n, 17.0, 6.0, 2);
        let runs = if n == 1024 { 5 } else { 7 };
        let (mut walls, mut cpus) = (Vec::new(), Vec::new());
        let mut last = None;
        for _ in 0..runs {
            let (r, wall, cpu) =
                one.install(|| timed(|| estimate(black_box(&a), black_box(&b), 1.0, &opts)));
            walls.push(wall);
            cpus.push(cpu);
            last = Some(r);
        }
        let r = last.expect("ran");
        let (med, cpu) = (median(walls), median(cpus));
        let dom = r
            .dominant
            .map(|d| format!("{:.3} m east, {:.3} m north", d.east_m, d.north_m))
            .unwrap_or_default();
        println!(
            "flow/estimate {n}x{n}, 1 thread: median {:.1} ms wall, {:.1} ms CPU over {runs} runs ({:.2} Mcells/s CPU); \
             verdict {:?}; dominant {dom}",
            med * 1e3,
            cpu * 1e3,
            (n * n) as f64 / cpu / 1e6,
            r.verdict
        );

        if n == 1024 {
            let mut walls = Vec::new();
            for _ in 0..3 {
                let ((), wall, _) = timed(|| {
                    black_box(estimate(black_box(&a), black_box(&b), 1.0, &opts));
                });
                walls.push(wall);
            }
            println!(
                "flow/estimate {n}x{n}, all threads: median {:.1} ms wall over 3 runs",
                median(walls) * 1e3
            );
        }

        let mut out = Array2::zeros((n, n));
        for (label, threads) in [("1 thread", Some(&one)), ("all threads", None)] {
            let (mut walls, mut cpus) = (Vec::new(), Vec::new());
            for k in 0..21 {
                let w = 0.05 + 0.9 * k as f32 / 20.0;
                let ((), wall, cpu) = match threads {
                    Some(pool) => {
                        pool.install(|| timed(|| morph_into(&mut out, &a, &b, &r.field, w)))
                    }
                    None => timed(|| morph_into(&mut out, &a, &b, &r.field, w)),
                };
                black_box(&out);
                walls.push(wall);
                cpus.push(cpu);
            }
            let med = median(walls);
            // CPU time of the calling thread only means something on the one-thread pool.
            let cpu = if threads.is_some() {
                format!(", {:.2} ms CPU", median(cpus) * 1e3)
            } else {
                String::new()
            };
            println!(
                "morph/frame {n}x{n}, {label}: median {:.2} ms wall{cpu} over 21 frames ({:.0} Mcells/s wall)",
                med * 1e3,
                (n * n) as f64 / med / 1e6
            );
        }
    }
}
