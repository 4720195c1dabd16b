//! Bench: encoding 1280x720 frames into the animated GIF on one core (target ≤ 15 ms a frame).
//!
//! Reports medians of several runs (thread CPU time, so other work on the machine matters less)
//! for: adding a frame to the palette histogram; mapping a frame to the palette; LZW alone (the gif
//! crate's and ours); a whole first frame; a difference frame where every pixel moved (an orbiting
//! camera); a difference frame where only the labels changed (a fixed camera on a still survey);
//! and a table of file sizes per frame at 960x540 for a few option sets. Run with
//! `cargo bench --bench encode` (`-- --map-only` runs only the mapping, for an
//! instruction-counting profiler).
//!
//! The size target (a 120-frame 960x540 orbit of the demo at most 12 MB) is checked on the real
//! demo, not here: copy `jobs/demo.yaml`, make the grid paths absolute, replace `frames_per_year`
//! by `total_frames: 120`, point `output.folder` to a scratch folder, run
//! `cargo run --release -- render <copy>` and read the size of `data/animation/*.gif`. With the
//! default `GifOptions` (256 colours, ordered dither 8) that gave 4 558 889 bytes.

use std::time::Instant;

use dunereel::annotate::{draw_overlay, FrameStatus, LabelOptions, Overlay};
use dunereel::encode::gif::{write_gif, Dither, GifOptions, GifWriter};
use dunereel::encode::quantize::PaletteBuilder;
use dunereel::render::Frame;

/// A shaded, colour-ramped synthetic terrain seen at an offset `shift_px` (a stand-in for an orbit).
fn terrain(w: u32, h: u32, shift_px: f32, date: &str) -> Frame {
    let mut f = Frame::new(w, h);
    for y in 0..h as usize {
        for x in 0..w as usize {
            let (fx, fy) = ((x as f32 + shift_px) * 0.012, y as f32 * 0.017);
            let z =
                (fx.sin() * fy.cos() + 0.5 * (2.3 * fx + 0.7).sin() * (1.7 * fy).sin() + 1.5) / 3.0;
            let shade = 0.55 + 0.45 * ((fx * 1.3).cos() * (fy * 0.9).sin());
            let i = (y * w as usize + x) * 4;
            let ramp = [40.0 + 200.0 * z, 70.0 + 150.0 * z, 110.0 + 90.0 * (1.0 - z)];
            for (dst, v) in f.rgba[i..i + 3].iter_mut().zip(ramp) {
                *dst = (v * shade).clamp(0.0, 255.0) as u8;
            }
        }
    }
    let ov = Overlay {
        title: "Bench dune".into(),
        date_text: date.into(),
        status: FrameStatus::Interpolated {
            method: "linear blend".into(),
            from_date: "2026-01-01".into(),
            to_date: "2028-01-01".into(),
        },
        crest: dunereel::annotate::CrestLabel {
            name: "Crest elevation".into(),
            value: 17.3,
            unit: "m".into(),
        },
        crest_px: Some((640.0, 300.0)),
        ..Default::default()
    };
    draw_overlay(&mut f, &ov, &LabelOptions::default());
    f
}

/// A stopwatch of this thread's CPU time (POSIX `clock_gettime(CLOCK_THREAD_CPUTIME_ID)`, ns
/// resolution), so the figures stay meaningful while other work shares the machine.
struct CpuClock {
    start_ns: Option<u64>,
    wall: Instant,
}

#[repr(C)]
struct Timespec {
    tv_sec: i64,
    tv_nsec: i64,
}

extern "C" {
    fn clock_gettime(clock: i32, tp: *mut Timespec) -> i32;
}

/// Linux value of CLOCK_THREAD_CPUTIME_ID.
const CLOCK_THREAD_CPUTIME_ID: i32 = 3;

fn thread_cpu_ns() -> Option<u64> {
    if !cfg!(all(target_os = "linux", target_pointer_width = "64")) {
        return None;
    }
    let mut ts = Timespec {
        tv_sec: 0,
        tv_nsec: 0,
    };
    // SAFETY: `ts` is a valid, writable timespec with the 64-bit Linux layout (checked above).
    let rc = unsafe { clock_gettime(CLOCK_THREAD_CPUTIME_ID, &mut ts) };
    (rc == 0).then(|| ts.tv_sec as u64 * 1_000_000_000 + ts.tv_nsec as u64)
}

impl CpuClock {
    fn now() -> Self {
        CpuClock {
            start_ns: thread_cpu_ns(),
            wall: Instant::now(),
        }
    }
    /// Milliseconds on the CPU since `now()` (wall time if the CPU clock is unavailable).
    fn ms(&self) -> f64 {
        match (self.start_ns, thread_cpu_ns()) {
            (Some(a), Some(b)) => (b - a) as f64 / 1e6,
            _ => self.wall.elapsed().as_secs_f64() * 1e3,
        }
    }
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn min(v: &[f64]) -> f64 {
    v.iter().copied().fold(f64::MAX, f64::min)
}

fn main() {
    // Encoding is single-threaded; pin rayon anyway so nothing else runs in parallel.
    let _ = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build_global();
    let (w, h) = (1280u32, 720u32);
    let frames: Vec<Frame> = (0..4)
        .map(|k| terrain(w, h, k as f32 * 6.0, &format!("2027-0{}-15", k + 1)))
        .collect();
    let labels_only = terrain(w, h, 0.0, "2027-09-30");
    let dir = tempfile::tempdir().expect("temp dir");
    let runs = if std::env::args().any(|a| a == "--map-only") {
        1
    } else {
        21
    };

    let mut t_hist = Vec::new();
    let mut builder = PaletteBuilder::new();
    for _ in 0..runs {
        let t = CpuClock::now();
        builder.add_rgba(&frames[0].rgba, 1);
        t_hist.push(t.ms());
    }
    for f in &frames[1..] {
        builder.add_rgba(&f.rgba, 1);
    }
    let t = CpuClock::now();
    let palette = builder.build(256);
    let t_build = t.ms();

    if std::env::args().any(|a| a == "--map-only") {
        // For instruction counting under a profiler: just the palette mapping, three times.
        let mut mapper = dunereel::encode::quantize::Mapper::new(&palette);
        let mut idx = vec![0u8; (w * h) as usize];
        for f in &frames[..3] {
            mapper.map_frame(&f.rgba, w as usize, 8.0, &mut idx);
        }
        return;
    }
    let opts = GifOptions::default();
    let mut mapper = dunereel::encode::quantize::Mapper::new(&palette);
    let mut idx = vec![0u8; (w * h) as usize];
    let mut t_map = Vec::new();
    let mut t_map_plain = Vec::new();
    for _ in 0..runs {
        let t = CpuClock::now();
        mapper.map_frame(&frames[1].rgba, w as usize, 8.0, &mut idx);
        t_map.push(t.ms());
        let t = CpuClock::now();
        mapper.map_frame(&frames[1].rgba, w as usize, 0.0, &mut idx);
        t_map_plain.push(t.ms());
    }
    let mut t_lzw = Vec::new();
    let mut gif_len = 0;
    for _ in 0..runs {
        let mut gf = gif::Frame {
            width: w as u16,
            height: h as u16,
            buffer: std::borrow::Cow::Borrowed(&idx),
            ..Default::default()
        };
        let t = CpuClock::now();
        gf.make_lzw_pre_encoded();
        t_lzw.push(t.ms());
        gif_len = gf.buffer.len();
    }
    let mut lzw = dunereel::encode::lzw::LzwEncoder::new();
    let mut t_lzw_own = Vec::new();
    let mut own_len = 0;
    for _ in 0..runs {
        let t = CpuClock::now();
        own_len = lzw.encode(&idx, 8).len();
        t_lzw_own.push(t.ms());
    }
    println!(
        "  answer cells filled          : {:7}",
        mapper.filled_cells()
    );
    println!(
        "  map to palette, dithered     : {:7.2} ms (min {:.2})",
        median(t_map.clone()),
        min(&t_map)
    );
    println!(
        "  map to palette, plain        : {:7.2} ms (min {:.2})",
        median(t_map_plain.clone()),
        min(&t_map_plain)
    );
    println!(
        "  LZW of a whole frame (gif)   : {:7.2} ms (min {:.2}), {} bytes",
        median(t_lzw.clone()),
        min(&t_lzw),
        gif_len
    );
    println!(
        "  LZW of a whole frame (ours)  : {:7.2} ms (min {:.2}), {} bytes",
        median(t_lzw_own.clone()),
        min(&t_lzw_own),
        own_len
    );
    let mut t_first_cold = Vec::new();
    let mut t_orbit = Vec::new();
    let mut t_labels = Vec::new();
    let mut bytes = Vec::new();
    for r in 0..runs {
        let path = dir.path().join(format!("bench-{r}.gif"));
        let mut gw = GifWriter::create(&path, w, h, &palette, &opts, true).expect("create");
        let t = CpuClock::now();
        gw.write_frame(&frames[0], 4).expect("write");
        t_first_cold.push(t.ms());
        for f in &frames[1..] {
            let t = CpuClock::now();
            gw.write_frame(f, 4).expect("write");
            t_orbit.push(t.ms());
        }
        // Back to the first view, then only the date changes.
        gw.write_frame(&frames[0], 4).expect("write");
        let t = CpuClock::now();
        gw.write_frame(&labels_only, 4).expect("write");
        t_labels.push(t.ms());
        let stats = gw.finish().expect("finish");
        bytes.push(stats.bytes as f64 / stats.frames as f64);
        if r == 0 {
            println!(
                "gif stats: {} frames, {} bytes, mean colour error {:.2} levels, changed fraction {:.3}",
                stats.frames, stats.bytes, stats.mean_colour_error, stats.changed_fraction
            );
        }
    }
    let mpx = (w * h) as f64 / 1e6;
    println!("encode {w}x{h}, 1 thread, median of {runs} runs, thread CPU time:");
    println!("  palette histogram, one frame : {:7.2} ms", median(t_hist));
    println!(
        "  palette build (median cut)   : {:7.2} ms (once per animation)",
        t_build
    );
    let orbit_min = min(&t_orbit);
    let first = median(t_first_cold);
    let orbit = median(t_orbit);
    let labels = median(t_labels);
    println!(
        "  first frame (cold lookup)    : {:7.2} ms ({:.0} Mpx/s)",
        first,
        mpx / first * 1e3
    );
    println!(
        "  difference frame, all moved  : {:7.2} ms ({:.0} Mpx/s)  target <= 15 ms; min {:.2}",
        orbit,
        mpx / orbit * 1e3,
        orbit_min
    );
    println!("  difference frame, labels only: {:7.2} ms", labels);
    println!("  mean bytes per frame          : {:7.0}", median(bytes));

    // File size per frame at 960x540 (the orbit size target: 120 frames <= 12 MB, 100 kB a frame),
    // for a few option sets. Sizes, not times: one run each.
    let small: Vec<Frame> = (0..6)
        .map(|k| terrain(960, 540, k as f32 * 6.0, "2027-05-01"))
        .collect();
    println!("size at 960x540, 6 orbit-like frames, bytes per frame after the first:");
    for (name, opts) in [
        (
            "256 colours, ordered dither 8 (default)",
            GifOptions::default(),
        ),
        (
            "256 colours, ordered dither 6",
            GifOptions {
                dither: Dither::Ordered { spread: 6.0 },
                ..Default::default()
            },
        ),
        (
            "256 colours, no dither",
            GifOptions {
                dither: Dither::None,
                ..Default::default()
            },
        ),
        (
            "128 colours, no dither",
            GifOptions {
                colours: 128,
                dither: Dither::None,
                ..Default::default()
            },
        ),
    ] {
        let path = dir.path().join("size.gif");
        let one = write_gif(&path, &small[..1], &[4], &opts, true).expect("write");
        let all = write_gif(&path, &small, &[4; 6], &opts, true).expect("write");
        println!(
            "  {name:40}: first {:7} B, then {:7.0} B/frame, mean error {:.2} levels",
            one.bytes,
            (all.bytes - one.bytes) as f64 / 5.0,
            all.mean_colour_error
        );
    }
}
