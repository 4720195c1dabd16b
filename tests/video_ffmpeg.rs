//! The MP4 video checked by an independent decoder: Debian's `ffprobe`/`ffmpeg` (FFmpeg's own
//! H.264 decoder and MP4 demuxer, nothing shared with OpenH264 or our muxer).
//!
//! These tests need `ffmpeg` installed (`apt-get install -y ffmpeg`; `.ci/run` does it) and fail,
//! rather than skip, without it.

mod common;

use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;

/// The path of a program on PATH, or a failure saying how to install it.
fn tool(name: &str) -> PathBuf {
    let path = std::env::var_os("PATH").unwrap_or_default();
    std::env::split_paths(&path)
        .map(|d| d.join(name))
        .find(|p| p.is_file())
        .unwrap_or_else(|| {
            panic!("`{name}` is not installed; the video tests need FFmpeg as an independent decoder: run `apt-get install -y ffmpeg` (as .ci/run does)")
        })
}

/// Renders the moving-dune job at `w` × `h` with a GIF and an MP4; returns the record folder.
fn record(dir: &Path, w: u32, h: u32, extra: &str) -> PathBuf {
    let job = common::moving_dune_job(dir, extra);
    let text = std::fs::read_to_string(&job)
        .unwrap()
        .replace(
            "view: { width: 128, height: 96 }",
            &format!("view: {{ width: {w}, height: {h}, supersample: 1 }}"),
        )
        .replace(
            "output: { folder: out }",
            "output: { folder: out, gif: dune.gif, video: dune.mp4 }",
        );
    std::fs::write(&job, text).unwrap();
    let job = dunereel::job::load(&job).unwrap();
    let report = dunereel::run_job(&job, &dunereel::RunOptions::default()).unwrap();
    report.folder
}

fn ffprobe(file: &Path) -> Value {
    let out = Command::new(tool("ffprobe"))
        .args(["-v", "error", "-count_frames", "-select_streams", "v:0"])
        .args(["-show_entries", "stream=codec_name,profile,pix_fmt,width,height,nb_read_frames,color_space,color_transfer,color_primaries,color_range,duration"])
        .args(["-show_entries", "format=format_name,duration"])
        .args(["-of", "json"])
        .arg(file)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "ffprobe failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

/// Total playing time of a GIF from its frame delays, decoded by the `image` crate.
fn gif_duration_s(path: &Path) -> (f64, usize) {
    use image::AnimationDecoder;
    let f = std::io::BufReader::new(std::fs::File::open(path).unwrap());
    let frames = image::codecs::gif::GifDecoder::new(f)
        .unwrap()
        .into_frames()
        .collect_frames()
        .unwrap();
    let total: f64 = frames
        .iter()
        .map(|fr| {
            let (n, d) = fr.delay().numer_denom_ms();
            n as f64 / d as f64 / 1000.0
        })
        .sum();
    (total, frames.len())
}

fn index_rows(bag: &Path) -> Vec<String> {
    let text = std::fs::read_to_string(bag.join("data/frames/index.csv")).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let file_col = header.iter().position(|h| *h == "file").unwrap();
    lines
        .map(|l| l.split(',').nth(file_col).unwrap().to_string())
        .collect()
}

#[test]
fn ffprobe_reads_a_browser_ready_h264_mp4_with_the_gifs_timing() {
    let d = tempfile::tempdir().unwrap();
    let bag = record(d.path(), 320, 180, "");
    let mp4 = bag.join("data/animation/dune.mp4");
    let info = ffprobe(&mp4);
    let s = &info["streams"][0];
    // Check: REFERENCES.md §15 — browsers and slide software play H.264 Constrained Baseline/Main/High,
    // yuv420p, limited range; BT.709 code points (ITU-T H.273 value 1); FFmpeg run, not derived.
    assert_eq!(s["codec_name"], "h264", "{info}");
    let profile = s["profile"].as_str().unwrap();
    assert!(
        ["Constrained Baseline", "Baseline", "Main", "High"].contains(&profile),
        "{profile}"
    );
    assert_eq!(s["pix_fmt"], "yuv420p");
    assert_eq!(
        (s["width"].as_u64(), s["height"].as_u64()),
        (Some(320), Some(180))
    );
    assert_eq!(s["color_primaries"], "bt709");
    assert_eq!(s["color_transfer"], "bt709");
    assert_eq!(s["color_space"], "bt709");
    assert_eq!(s["color_range"], "tv");
    assert!(info["format"]["format_name"]
        .as_str()
        .unwrap()
        .contains("mp4"));

    let frames = index_rows(&bag);
    let decoded: usize = s["nb_read_frames"].as_str().unwrap().parse().unwrap();
    assert_eq!(
        decoded,
        frames.len(),
        "every frame of the index is in the video"
    );

    let (gif_s, gif_frames) = gif_duration_s(&bag.join("data/animation/dune.gif"));
    assert_eq!(gif_frames, frames.len());
    let mp4_s: f64 = info["format"]["duration"]
        .as_str()
        .unwrap()
        .parse()
        .unwrap();
    // The job plays at 10 fps: one frame is 0.1 s.
    assert!(
        (mp4_s - gif_s).abs() <= 0.1 + 1e-6,
        "video {mp4_s} s, GIF {gif_s} s"
    );
}

/// PSNR in dB over the RGB samples of two equally sized images.
fn psnr(a: &[u8], b: &[u8]) -> f64 {
    assert_eq!(a.len(), b.len());
    let se: f64 = a
        .iter()
        .zip(b)
        .map(|(&x, &y)| {
            let d = x as f64 - y as f64;
            d * d
        })
        .sum();
    let mse = se / a.len() as f64;
    // Check: REFERENCES.md §15 — PSNR = 10·log10(255² / MSE); analytic.
    10.0 * (255.0f64 * 255.0 / mse.max(1e-12)).log10()
}

/// Decodes every frame with FFmpeg into 8-bit RGB, reading the stream as BT.709 limited range.
fn decode_rgb(mp4: &Path, w: usize, h: usize) -> Vec<Vec<u8>> {
    let out = Command::new(tool("ffmpeg"))
        .args(["-v", "error", "-i"])
        .arg(mp4)
        .args(["-fps_mode", "passthrough", "-vf"])
        .arg("scale=in_color_matrix=bt709:in_range=tv:out_range=pc:flags=accurate_rnd+full_chroma_int,format=rgb24")
        .args(["-f", "rawvideo", "-"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "ffmpeg failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert_eq!(out.stdout.len() % (w * h * 3), 0);
    out.stdout.chunks(w * h * 3).map(<[u8]>::to_vec).collect()
}

fn png_rgb(path: &Path, w: usize, h: usize) -> Vec<u8> {
    let img = image::open(path).unwrap().to_rgb8();
    // Odd-sized frames lose their last column/row in the video: compare the top-left part.
    let mut out = Vec::with_capacity(w * h * 3);
    for y in 0..h as u32 {
        for x in 0..w as u32 {
            out.extend_from_slice(&img.get_pixel(x, y).0);
        }
    }
    out
}

#[test]
fn decoded_frames_match_the_png_frames_at_38_db_or_better() {
    let d = tempfile::tempdir().unwrap();
    let bag = record(d.path(), 960, 540, "");
    let frames = index_rows(&bag);
    let decoded = decode_rgb(&bag.join("data/animation/dune.mp4"), 960, 540);
    assert_eq!(decoded.len(), frames.len());
    let mut worst = f64::INFINITY;
    for (k, (rgb, file)) in decoded.iter().zip(&frames).enumerate() {
        let png = png_rgb(&bag.join("data/frames").join(file), 960, 540);
        let p = psnr(rgb, &png);
        worst = worst.min(p);
        // Check: issue target — decoded frames at least 38 dB PSNR against the PNG frames at the default quality.
        assert!(p >= 38.0, "frame {k}: PSNR {p:.2} dB");
    }
    assert!(worst.is_finite());
}

#[test]
fn odd_frame_sizes_lose_one_column_in_the_video_only() {
    let d = tempfile::tempdir().unwrap();
    let bag = record(d.path(), 321, 181, "video: { quality: 9 }\n");
    let info = ffprobe(&bag.join("data/animation/dune.mp4"));
    let s = &info["streams"][0];
    assert_eq!(
        (s["width"].as_u64(), s["height"].as_u64()),
        (Some(320), Some(180))
    );
    let png = image::open(bag.join("data/frames").join(&index_rows(&bag)[0])).unwrap();
    assert_eq!((png.width(), png.height()), (321, 181));
    let decoded = decode_rgb(&bag.join("data/animation/dune.mp4"), 320, 180);
    let first = png_rgb(
        &bag.join("data/frames").join(&index_rows(&bag)[0]),
        320,
        180,
    );
    assert!(psnr(&decoded[0], &first) >= 38.0);
}

#[test]
fn higher_quality_means_a_larger_file_and_a_closer_picture() {
    let d1 = tempfile::tempdir().unwrap();
    let d2 = tempfile::tempdir().unwrap();
    let low = record(d1.path(), 320, 180, "video: { quality: 3 }\n");
    let high = record(d2.path(), 320, 180, "video: { quality: 9 }\n");
    let size = |b: &Path| {
        std::fs::metadata(b.join("data/animation/dune.mp4"))
            .unwrap()
            .len()
    };
    assert!(
        size(&high) > size(&low),
        "{} vs {}",
        size(&high),
        size(&low)
    );
    let first = |b: &Path| {
        let png = png_rgb(&b.join("data/frames").join(&index_rows(b)[0]), 320, 180);
        psnr(
            &decode_rgb(&b.join("data/animation/dune.mp4"), 320, 180)[0],
            &png,
        )
    };
    assert!(first(&high) > first(&low) + 3.0);
}

#[test]
fn check_refuses_bad_video_keys_with_exit_2_and_writes_nothing() {
    let d = tempfile::tempdir().unwrap();
    let job = common::moving_dune_job(d.path(), "");
    let text = std::fs::read_to_string(&job).unwrap();
    for (edit, key) in [
        (
            text.replace(
                "output: { folder: out }",
                "output: { folder: out, video: clips/dune.mp4 }",
            ),
            "output.video",
        ),
        (
            text.replace(
                "output: { folder: out }",
                "output: { folder: out, video: dune.avi }",
            ),
            "output.video",
        ),
        (
            text.replace(
                "output: { folder: out }",
                "output: { folder: out, video: dune.mp4 }",
            ) + "video: { quality: 12 }\n",
            "video.quality",
        ),
    ] {
        std::fs::write(&job, &edit).unwrap();
        let out = Command::new(env!("CARGO_BIN_EXE_dunereel"))
            .args(["check", "job.yaml"])
            .current_dir(d.path())
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{err}");
        assert!(
            err.contains("job.yaml") && err.contains(key),
            "expected `{key}` in: {err}"
        );
        assert!(!d.path().join("out").exists());
    }
}

#[test]
fn video_and_viewer_are_byte_identical_on_one_and_two_threads() {
    let d = tempfile::tempdir().unwrap();
    let path = common::moving_dune_job(d.path(), "in_between: { method: morph }\n");
    let text = std::fs::read_to_string(&path).unwrap().replace(
        "output: { folder: out }",
        "output: { folder: out, video: dune.mp4 }",
    );
    std::fs::write(&path, text).unwrap();
    let job = dunereel::job::load(&path).unwrap();
    let run_in = |threads: usize, name: &str| {
        let out = d.path().join(name);
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            dunereel::run_job(
                &job,
                &dunereel::RunOptions {
                    output_folder: Some(out.clone()),
                    ..Default::default()
                },
            )
        })
        .unwrap();
        let read = |rel: &str| std::fs::read(out.join(rel)).unwrap();
        (
            read("data/animation/dune.mp4"),
            read("data/viewer/index.html"),
        )
    };
    // Check: common practice, no source — same job, same build: same bytes on any thread count.
    assert!(run_in(1, "one") == run_in(2, "two"));
}
