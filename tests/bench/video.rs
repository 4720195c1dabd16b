//! Bench: the MP4 video of the standard animation — the demo job at 1280×720 with 154 frames.
//!
//! Renders that animation once (GIF, PNG frames and MP4, as `render` does), then reports:
//! - encoding time per 1280×720 frame on one core (this thread's CPU time; colour conversion and
//!   H.264 encoding, not the PNG decoding that feeds it), median and mean over the 154 frames, by
//!   re-encoding the PNG frames with the default `VideoOptions` (target ≤ 15 ms);
//! - the colour conversion alone (median);
//! - MP4 and GIF sizes (targets: MP4 ≤ 8 MB and at most half the GIF);
//! - PSNR of every frame decoded by FFmpeg against its PNG (target ≥ 38 dB), for each quality
//!   setting with `-- --all-qualities` (default: only the default quality).
//!
//! Run with `cargo bench --bench video` (needs `ffmpeg` for the PSNR column; about a minute).

use std::io::Read;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::Instant;

use dunereel::encode::video::{rgba_to_yuv420_into, VideoOptions, VideoWriter};
use dunereel::render::Frame;

#[repr(C)]
struct Timespec {
    tv_sec: i64,
    tv_nsec: i64,
}

extern "C" {
    fn clock_gettime(clock: i32, tp: *mut Timespec) -> i32;
}

/// This thread's CPU time in ms (Linux CLOCK_THREAD_CPUTIME_ID = 3), or wall time elsewhere.
fn cpu_ms(wall: Instant) -> f64 {
    if cfg!(all(target_os = "linux", target_pointer_width = "64")) {
        let mut ts = Timespec {
            tv_sec: 0,
            tv_nsec: 0,
        };
        // SAFETY: `ts` is a valid, writable timespec with the 64-bit Linux layout (checked above).
        if unsafe { clock_gettime(3, &mut ts) } == 0 {
            return ts.tv_sec as f64 * 1e3 + ts.tv_nsec as f64 / 1e6;
        }
    }
    wall.elapsed().as_secs_f64() * 1e3
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn render_standard(out: &Path, quality: u8) -> PathBuf {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(root.join("jobs/demo.yaml")).unwrap();
    let mut lines: Vec<String> = Vec::new();
    for l in text.lines() {
        let t = l.trim_start();
        let indent = &l[..l.len() - t.len()];
        let l = if t.starts_with("frames_per_year:") {
            format!("{indent}total_frames: 154")
        } else if t.starts_with("width:") {
            format!("{indent}width: 1280")
        } else if t.starts_with("height:") {
            format!("{indent}height: 720")
        } else if t.starts_with("folder:") {
            format!(
                "{indent}folder: {}\n{indent}video: standard.mp4",
                out.display()
            )
        } else if t.starts_with("gif:") {
            format!("{indent}gif: standard.gif")
        } else {
            l.to_string()
        };
        lines.push(l);
    }
    lines.push(format!("video: {{ quality: {quality} }}"));
    let job = dunereel::job::parse(&root.join("jobs/bench-video.yaml"), lines.join("\n") + "\n")
        .expect("the bench job parses");
    dunereel::run_job(&job, &dunereel::RunOptions::default())
        .expect("the standard animation renders")
        .folder
}

fn frame_files(bag: &Path) -> Vec<PathBuf> {
    let text = std::fs::read_to_string(bag.join("data/frames/index.csv")).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = header.iter().position(|h| *h == "file").unwrap();
    lines
        .map(|l| bag.join("data/frames").join(l.split(',').nth(col).unwrap()))
        .collect()
}

fn load(path: &Path) -> Frame {
    let img = image::open(path).unwrap().to_rgba8();
    let mut f = Frame::new(img.width(), img.height());
    f.rgba.copy_from_slice(img.as_raw());
    f
}

/// Mean and minimum PSNR (dB, over RGB) of FFmpeg's decoding against the PNG frames.
fn psnr(bag: &Path, files: &[PathBuf]) -> Option<(f64, f64)> {
    let mut child = Command::new("ffmpeg")
        .args(["-v", "error", "-i"])
        .arg(bag.join("data/animation/standard.mp4"))
        .args(["-fps_mode", "passthrough", "-vf"])
        .arg("scale=in_color_matrix=bt709:in_range=tv:out_range=pc:flags=accurate_rnd+full_chroma_int,format=rgb24")
        .args(["-f", "rawvideo", "-"])
        .stdout(Stdio::piped())
        .spawn()
        .ok()?;
    let mut out = child.stdout.take()?;
    let mut buf = vec![0u8; 1280 * 720 * 3];
    let (mut sum, mut worst) = (0.0, f64::INFINITY);
    for f in files {
        out.read_exact(&mut buf).ok()?;
        let png = image::open(f).unwrap().to_rgb8();
        let se: f64 = buf
            .iter()
            .zip(png.as_raw())
            .map(|(&a, &b)| (a as f64 - b as f64).powi(2))
            .sum();
        let p = 10.0 * (255.0f64 * 255.0 / (se / buf.len() as f64).max(1e-12)).log10();
        sum += p;
        worst = worst.min(p);
    }
    child.wait().ok()?;
    Some((sum / files.len() as f64, worst))
}

fn main() {
    let all = std::env::args().any(|a| a == "--all-qualities");
    let scratch = tempfile::tempdir().unwrap();
    let bag = render_standard(&scratch.path().join("std7"), 7);
    let files = frame_files(&bag);
    assert_eq!(files.len(), 154);

    // Encoding time per frame, one core (the encoder runs on this thread only).
    let p = scratch.path().join("re-encoded.mp4");
    let mut w = VideoWriter::create(&p, 1280, 720, 12.0, &VideoOptions::default(), false).unwrap();
    let (mut times, mut conv) = (Vec::new(), Vec::new());
    let (mut y, mut u, mut v) = (vec![0; 1280 * 720], vec![0; 640 * 360], vec![0; 640 * 360]);
    for (i, f) in files.iter().enumerate() {
        let frame = load(f);
        let wall = Instant::now();
        let t0 = cpu_ms(wall);
        rgba_to_yuv420_into(&frame, (1280, 720), &mut y, &mut u, &mut v);
        conv.push(cpu_ms(wall) - t0);
        let t0 = cpu_ms(wall);
        w.write_frame(&frame, 1.0 / 12.0, i % 31 == 0).unwrap();
        times.push(cpu_ms(wall) - t0);
    }
    w.finish().unwrap();
    let mean = times.iter().sum::<f64>() / times.len() as f64;
    println!(
        "video encode, 1280x720, 1 core: median {:.2} ms/frame, mean {:.2} ms/frame (target <= 15)",
        median(times),
        mean
    );
    println!(
        "colour conversion alone: median {:.2} ms/frame",
        median(conv)
    );

    let gif = std::fs::metadata(bag.join("data/animation/standard.gif"))
        .unwrap()
        .len();
    let report = |quality: u8, bag: &Path| {
        let mp4 = std::fs::metadata(bag.join("data/animation/standard.mp4"))
            .unwrap()
            .len();
        let q = match psnr(bag, &frame_files(bag)) {
            Some((m, w)) => format!("PSNR mean {m:.2} dB, worst frame {w:.2} dB"),
            None => "PSNR not measured (ffmpeg missing)".into(),
        };
        println!(
            "quality {quality:>2}: MP4 {:.2} MB = {:.0} % of the GIF ({:.2} MB); {q}",
            mp4 as f64 / 1e6,
            100.0 * mp4 as f64 / gif as f64,
            gif as f64 / 1e6
        );
    };
    report(7, &bag);
    if all {
        for q in [1u8, 3, 5, 9, 10] {
            let b = render_standard(&scratch.path().join(format!("std{q}")), q);
            report(q, &b);
        }
    }
}
