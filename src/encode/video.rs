//! RGBA frames -> an H.264 video in an MP4 file, for slide software, browsers and phones.
//!
//! Each frame is converted to Y′CbCr 4:2:0 with the BT.709 matrix in limited range (16–235 luma,
//! 16–240 chroma; ITU-R BT.709-6, REFERENCES.md §15), the colour space every HD player assumes, and
//! encoded by OpenH264 (the `openh264` crate, built from its bundled source; Constrained Baseline
//! profile, which every browser and slide program decodes). The stream says so twice: in the SPS
//! (VUI colour description) and in the MP4 `colr` box. [`mp4`](super::mp4) does the container.
//!
//! Size: 4:2:0 chroma needs an even width and height. A frame with an odd side loses its last pixel
//! column (or row) in the video only; the GIF and the PNG frames keep every pixel.
//!
//! Timing: each frame lasts its time on the timeline (1/fps, plus the hold on survey frames), as a
//! sample duration in 1/90 000 s; ends are rounded from the running total, so no error builds up
//! and a 12 fps animation gets exactly 7 500 ticks a frame. The GIF shows the same timeline in
//! hundredths of a second, so the two differ by less than one frame over the whole animation.
//!
//! Quality: [`VideoOptions::quality`] pins the H.264 quantiser (no rate control, no dropped frames),
//! so every frame gets the same fidelity whatever its content. Survey frames are coded as IDR
//! pictures (a player can jump straight to them), plus one every [`KEYFRAME_EVERY_S`] seconds.
//!
//! Determinism: one encoder thread and fixed settings; the same frames give the same bytes.

use std::io::Write;
use std::path::{Path, PathBuf};

use openh264::encoder::{
    Complexity, Encoder, EncoderConfig, FrameType, IntraFramePeriod, Profile, QpRange,
    RateControlMode, UsageType, VuiConfig,
};
use openh264::formats::YUVSlices;
use openh264::OpenH264API;

use super::atomic::{check_target, write_atomic};
use super::mp4::{ColourInfo, Mp4Muxer, MEDIA_TIMESCALE};
use crate::error::{Error, Result};
use crate::render::Frame;

/// Longest stretch between two IDR pictures, in seconds of playing time. Four seconds keeps seeking
/// in slide software quick; shorter costs size (each IDR picture is 5–10 times a P picture).
pub const KEYFRAME_EVERY_S: f64 = 4.0;

/// Lowest and highest accepted [`VideoOptions::quality`].
pub const QUALITY_RANGE: std::ops::RangeInclusive<u8> = 1..=10;

/// How the video is made.
#[derive(Debug, Clone, PartialEq, serde::Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct VideoOptions {
    /// Fidelity from 1 (smallest file, visible blocks) to 10 (largest file, finest picture). Each
    /// step lowers the H.264 quantiser by 3 and grows the file by about a third. Measured on the
    /// standard animation (demo, 154 frames of 1280 × 720, `cargo bench --bench video`): quality
    /// 1 gives 0.29 MB at 31 dB PSNR, 5 gives 0.85 MB at 38 dB, 7 gives 1.46 MB at 40 dB, 9 gives
    /// 2.35 MB at 42 dB (the GIF: 5.64 MB). Default: 7.
    pub quality: u8,
}

impl Default for VideoOptions {
    fn default() -> Self {
        VideoOptions { quality: 7 }
    }
}

impl VideoOptions {
    /// Checks the ranges.
    ///
    /// # Errors
    /// A message starting with the key at fault (`video.quality: …`).
    pub fn validate(&self) -> std::result::Result<(), String> {
        if !QUALITY_RANGE.contains(&self.quality) {
            return Err(format!(
                "video.quality: {} is out of range; use 1 (smallest file) to 10 (best picture), e.g. 7",
                self.quality
            ));
        }
        Ok(())
    }

    /// The H.264 quantisation parameter (0–51, lower = finer) for this quality.
    pub fn qp(&self) -> u8 {
        let q = self
            .quality
            .clamp(*QUALITY_RANGE.start(), *QUALITY_RANGE.end());
        42 - 3 * q
    }
}

/// What the video writer produced.
#[derive(Debug, Clone, PartialEq)]
pub struct VideoStats {
    /// Frames written.
    pub frames: usize,
    /// File size in bytes.
    pub bytes: u64,
    /// Encoded width and height (the frame size rounded down to even numbers).
    pub size: (u32, u32),
    /// Total playing time in seconds.
    pub duration_s: f64,
    /// IDR pictures (points a player can start from).
    pub keyframes: usize,
}

/// Streams frames into an MP4 file; see the module doc. Nothing is written until
/// [`VideoWriter::finish`], which writes the whole file atomically.
pub struct VideoWriter {
    encoder: Encoder,
    mux: Mp4Muxer,
    path: PathBuf,
    overwrite: bool,
    source: (u32, u32),
    size: (u32, u32),
    y: Vec<u8>,
    u: Vec<u8>,
    v: Vec<u8>,
    /// Ideal end time of the last frame, seconds, and the ticks written so far.
    elapsed_s: f64,
    elapsed_ticks: u64,
    since_key_s: f64,
    keyframes: usize,
    annex_b: Vec<u8>,
}

fn encoder_error(path: &Path, what: &str, e: impl std::fmt::Display) -> Error {
    Error::output(
        path,
        format!("the H.264 encoder failed while {what}: {e}; nothing was written (set output.video to null to skip the video)"),
    )
}

impl VideoWriter {
    /// Prepares a video of `width` × `height` frames playing at about `fps` frames per second.
    ///
    /// # Errors
    /// [`Error::Output`] if the path may not be written (exists without `overwrite`, folder
    /// missing), a side is below 2 or above the encoder's limit (3840 × 2160 either way round), or
    /// the encoder cannot start.
    pub fn create(
        path: &Path,
        width: u32,
        height: u32,
        fps: f64,
        opts: &VideoOptions,
        overwrite: bool,
    ) -> Result<VideoWriter> {
        check_target(path, overwrite)?;
        opts.validate().map_err(|m| Error::output(path, m))?;
        let size = (width & !1, height & !1);
        let (long, short) = (size.0.max(size.1), size.0.min(size.1));
        if short < 2 || long > 3840 || short > 2160 {
            return Err(Error::output(
                path,
                format!("a {width} x {height} video is outside what the H.264 encoder takes (2 to 3840 x 2160); change view.width/view.height or set output.video to null"),
            ));
        }
        let fps = if fps.is_finite() && fps > 0.0 {
            fps
        } else {
            12.0
        };
        let qp = opts.qp();
        let config = EncoderConfig::new()
            .profile(Profile::Baseline)
            .usage_type(UsageType::CameraVideoRealTime)
            .rate_control_mode(RateControlMode::Quality)
            // A pinned quantiser: the rate controller may not trade fidelity for size.
            .qp(QpRange::new(qp, qp))
            .adaptive_quantization(false)
            // Frame skipping stays on only because OpenH264 prints a warning to stderr when it is
            // off in this mode; with a budget of 20 Mbit/s (about 10 times what the pinned
            // quantiser spends on 1280 × 720) it never triggers, and a skipped frame is an error
            // below rather than a silently shorter video.
            .skip_frames(true)
            .bitrate(openh264::encoder::BitRate::from_bps(20_000_000))
            .max_frame_rate(openh264::encoder::FrameRate::from_hz(fps as f32))
            .complexity(Complexity::Medium)
            .intra_frame_period(IntraFramePeriod::from_num_frames(0))
            .num_threads(1)
            .vui(VuiConfig::bt709());
        let encoder = Encoder::with_api_config(OpenH264API::from_source(), config)
            .map_err(|e| encoder_error(path, "starting", e))?;
        let mux = Mp4Muxer::new(size.0, size.1, ColourInfo::BT709_LIMITED)
            .map_err(|e| Error::output(path, e.0))?;
        let (w, h) = (size.0 as usize, size.1 as usize);
        Ok(VideoWriter {
            encoder,
            mux,
            path: path.to_path_buf(),
            overwrite,
            source: (width, height),
            size,
            y: vec![0; w * h],
            u: vec![0; w * h / 4],
            v: vec![0; w * h / 4],
            elapsed_s: 0.0,
            elapsed_ticks: 0,
            since_key_s: 0.0,
            keyframes: 0,
            annex_b: Vec::new(),
        })
    }

    /// The encoded width and height (even).
    pub fn size(&self) -> (u32, u32) {
        self.size
    }

    /// Encodes `frame`, shown for `duration_s` seconds. With `keyframe` the frame is coded as an
    /// IDR picture (survey frames, so players can jump to them).
    ///
    /// # Errors
    /// [`Error::Output`] if the frame's size differs from the announced one, the duration is not
    /// positive, or the encoder fails.
    pub fn write_frame(&mut self, frame: &Frame, duration_s: f64, keyframe: bool) -> Result<()> {
        if !(duration_s.is_finite() && duration_s > 0.0) {
            return Err(Error::output(
                &self.path,
                format!("a frame lasting {duration_s} s; this is a bug in dunereel"),
            ));
        }
        if (frame.width, frame.height) != self.source
            || frame.rgba.len() != frame.width as usize * frame.height as usize * 4
        {
            return Err(Error::output(
                &self.path,
                format!(
                    "a {} x {} frame in a {} x {} video; this is a bug in dunereel",
                    frame.width, frame.height, self.source.0, self.source.1
                ),
            ));
        }
        rgba_to_yuv420_into(frame, self.size, &mut self.y, &mut self.u, &mut self.v);
        let first = self.mux.is_empty();
        if first || keyframe || self.since_key_s >= KEYFRAME_EVERY_S - 1e-9 {
            self.encoder.force_intra_frame();
        }
        let (w, h) = (self.size.0 as usize, self.size.1 as usize);
        let yuv = YUVSlices::new((&self.y, &self.u, &self.v), (w, h), (w, w / 2, w / 2));
        let bits = self
            .encoder
            .encode(&yuv)
            .map_err(|e| encoder_error(&self.path, "encoding a frame", e))?;
        let kind = bits.frame_type();
        if !matches!(kind, FrameType::IDR | FrameType::I | FrameType::P) {
            return Err(encoder_error(
                &self.path,
                "encoding a frame",
                format!("it returned a {kind:?} frame instead of a picture (lower video.quality)"),
            ));
        }
        self.annex_b.clear();
        bits.write_vec(&mut self.annex_b);
        let is_sync = kind == FrameType::IDR;
        self.elapsed_s += duration_s;
        let end = (self.elapsed_s * MEDIA_TIMESCALE as f64).round() as u64;
        let ticks = end.saturating_sub(self.elapsed_ticks).max(1);
        self.elapsed_ticks += ticks;
        let ticks = u32::try_from(ticks).map_err(|_| {
            Error::output(
                &self.path,
                "a frame lasting over 13 hours; shorten timeline.hold_s",
            )
        })?;
        self.mux
            .push(&self.annex_b, ticks, is_sync)
            .map_err(|e| encoder_error(&self.path, "packing a frame", e))?;
        if is_sync {
            self.keyframes += 1;
            self.since_key_s = 0.0;
        }
        self.since_key_s += duration_s;
        Ok(())
    }

    /// Writes the MP4 file (temporary name, then renamed into place).
    ///
    /// # Errors
    /// [`Error::Output`] with no frames or when the container cannot be made; [`Error::Io`] on a
    /// write failure. Nothing is left behind on error.
    pub fn finish(self) -> Result<VideoStats> {
        let frames = self.mux.len();
        let duration_s = self.mux.duration_ticks() as f64 / MEDIA_TIMESCALE as f64;
        let path = self.path;
        let mut bytes = 0;
        let mux = self.mux;
        write_atomic(&path, self.overwrite, |f| {
            bytes = mux
                .finish(f)
                .map_err(|e| encoder_error(&path, "writing the MP4 container", e))?;
            f.flush().map_err(|e| Error::io(&path, e))
        })?;
        Ok(VideoStats {
            frames,
            bytes,
            size: self.size,
            duration_s,
            keyframes: self.keyframes,
        })
    }
}

/// Fixed-point (16 fractional bits) coefficients of the BT.709 limited-range matrix for 8-bit
/// sRGB-coded values: rows Y, Cb, Cr; columns R, G, B.
///
/// From ITU-R BT.709-6 Kr = 0.2126, Kb = 0.0722: Y = 16 + 219/255·(Kr·R + Kg·G + Kb·B),
/// Cb = 128 + 224/255·(B − Y′)/(2(1 − Kb)), Cr = 128 + 224/255·(R − Y′)/(2(1 − Kr)).
/// Each row is rounded so that its sum is exact (grey stays exactly neutral).
fn coefficients() -> [[i32; 3]; 3] {
    let (kr, kb) = (0.2126f64, 0.0722f64);
    let kg = 1.0 - kr - kb;
    let sy = 219.0 / 255.0;
    let sc = 224.0 / 255.0;
    let rows = [
        [sy * kr, sy * kg, sy * kb],
        [
            -sc * kr / (2.0 * (1.0 - kb)),
            -sc * kg / (2.0 * (1.0 - kb)),
            sc * 0.5,
        ],
        [
            sc * 0.5,
            -sc * kg / (2.0 * (1.0 - kr)),
            -sc * kb / (2.0 * (1.0 - kr)),
        ],
    ];
    let mut out = [[0i32; 3]; 3];
    for (o, r) in out.iter_mut().zip(rows) {
        let scale = 65536.0;
        let sum = ((r[0] + r[1] + r[2]) * scale).round() as i32;
        o[0] = (r[0] * scale).round() as i32;
        o[2] = (r[2] * scale).round() as i32;
        o[1] = sum - o[0] - o[2];
    }
    out
}

/// Converts the top-left `size` (even) of an RGBA frame to planar Y′CbCr 4:2:0, BT.709 limited
/// range; chroma is the matrix applied to the mean of each 2 × 2 block (sited at the block's
/// centre). A left-sited [1 2 1] filter, the H.264 default siting, was tried and measured 0.6 dB
/// lower PSNR through FFmpeg 5.1's decoder and converter (`tests/video_ffmpeg.rs`, 960 × 540), so
/// the plain block mean stays.
///
/// # Panics
/// If the planes do not match `size` or the frame is smaller than `size` (a bug in the caller).
pub fn rgba_to_yuv420_into(
    frame: &Frame,
    size: (u32, u32),
    y: &mut [u8],
    u: &mut [u8],
    v: &mut [u8],
) {
    let (w, h) = (size.0 as usize, size.1 as usize);
    let stride = frame.width as usize * 4;
    assert!(w % 2 == 0 && h % 2 == 0 && w <= frame.width as usize && h <= frame.height as usize);
    assert!(y.len() == w * h && u.len() == w * h / 4 && v.len() == w * h / 4);
    let c = coefficients();
    const ROUND: i32 = 1 << 15;
    for (row2, ((yy, uu), vv)) in y
        .chunks_exact_mut(2 * w)
        .zip(u.chunks_exact_mut(w / 2))
        .zip(v.chunks_exact_mut(w / 2))
        .enumerate()
    {
        let top = &frame.rgba[2 * row2 * stride..][..w * 4];
        let bottom = &frame.rgba[(2 * row2 + 1) * stride..][..w * 4];
        let (y_top, y_bottom) = yy.split_at_mut(w);
        for (src, dst) in [(top, y_top), (bottom, y_bottom)] {
            for (p, o) in src.chunks_exact(4).zip(dst.iter_mut()) {
                let (r, g, b) = (p[0] as i32, p[1] as i32, p[2] as i32);
                *o = (16 + ((c[0][0] * r + c[0][1] * g + c[0][2] * b + ROUND) >> 16)) as u8;
            }
        }
        for (k, (cb, cr)) in uu.iter_mut().zip(vv.iter_mut()).enumerate() {
            let a = &top[k * 8..k * 8 + 8];
            let d = &bottom[k * 8..k * 8 + 8];
            // Sums of four pixels; the coefficients are divided by 4 through the shift (>> 18).
            let r = a[0] as i32 + a[4] as i32 + d[0] as i32 + d[4] as i32;
            let g = a[1] as i32 + a[5] as i32 + d[1] as i32 + d[5] as i32;
            let b = a[2] as i32 + a[6] as i32 + d[2] as i32 + d[6] as i32;
            let round = 1 << 17;
            *cb = (128 + ((c[1][0] * r + c[1][1] * g + c[1][2] * b + round) >> 18)).clamp(0, 255)
                as u8;
            *cr = (128 + ((c[2][0] * r + c[2][1] * g + c[2][2] * b + round) >> 18)).clamp(0, 255)
                as u8;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn solid(w: u32, h: u32, rgb: [u8; 3]) -> Frame {
        let mut f = Frame::new(w, h);
        for p in f.rgba.chunks_exact_mut(4) {
            p.copy_from_slice(&[rgb[0], rgb[1], rgb[2], 255]);
        }
        f
    }

    fn yuv_of(rgb: [u8; 3]) -> (u8, u8, u8) {
        let f = solid(4, 2, rgb);
        let (mut y, mut u, mut v) = (vec![0; 8], vec![0; 2], vec![0; 2]);
        rgba_to_yuv420_into(&f, (4, 2), &mut y, &mut u, &mut v);
        assert!(y.iter().all(|&a| a == y[0]));
        (y[0], u[0], v[0])
    }

    #[test]
    fn bt709_limited_range_matrix() {
        // Check: ITU-R BT.709-6 (Kr 0.2126, Kb 0.0722), 8-bit limited range — white (235,128,128),
        // black (16,128,128); red: Y = 16 + 219·0.2126 = 62.56 → 63, Cb = 128 − 112·0.2126/0.9278 =
        // 102.34 → 102, Cr = 240; hand-computed, REFERENCES.md §15.
        assert_eq!(yuv_of([255, 255, 255]), (235, 128, 128));
        assert_eq!(yuv_of([0, 0, 0]), (16, 128, 128));
        assert_eq!(yuv_of([255, 0, 0]), (63, 102, 240));
        // Check: same source — blue: Y = 16 + 219·0.0722 = 31.81 → 32, Cb = 240, Cr = 128 − 112·0.0722/0.7874 = 117.73 → 118.
        assert_eq!(yuv_of([0, 0, 255]), (32, 240, 118));
        // Check: grey stays neutral at every level (rows of the chroma matrix sum to exactly 0); analytic.
        for g in [1u8, 77, 128, 200, 254] {
            let (_, u, v) = yuv_of([g, g, g]);
            assert_eq!((u, v), (128, 128), "grey {g}");
        }
    }

    #[test]
    fn chroma_is_the_mean_of_each_two_by_two_block() {
        // Left 2x2 block red, right 2x2 block blue: chroma of each block is that colour's.
        let mut f = solid(4, 2, [255, 0, 0]);
        for row in 0..2 {
            for col in 2..4 {
                f.rgba[(row * 4 + col) * 4..][..3].copy_from_slice(&[0, 0, 255]);
            }
        }
        let (mut y, mut u, mut v) = (vec![0; 8], vec![0; 2], vec![0; 2]);
        rgba_to_yuv420_into(&f, (4, 2), &mut y, &mut u, &mut v);
        assert_eq!((u[0], v[0]), (102, 240));
        assert_eq!((u[1], v[1]), (240, 118));
        assert_eq!(&y[..4], &[63, 63, 32, 32]);
    }

    #[test]
    fn quality_maps_to_a_pinned_quantiser() {
        let q = |quality| VideoOptions { quality }.qp();
        assert_eq!((q(1), q(7), q(10)), (39, 21, 12));
        assert!(VideoOptions { quality: 0 }
            .validate()
            .unwrap_err()
            .starts_with("video.quality"));
        assert!(VideoOptions { quality: 11 }.validate().is_err());
        assert!(VideoOptions::default().validate().is_ok());
    }

    #[test]
    fn encodes_a_short_clip_deterministically() {
        let dir = tempfile::tempdir().unwrap();
        // An odd width: the video keeps 46 of 47 columns.
        let frames: Vec<Frame> = (0..6)
            .map(|k| {
                let mut f = Frame::new(47, 32);
                for (i, p) in f.rgba.chunks_exact_mut(4).enumerate() {
                    let (x, y) = (i % 47, i / 47);
                    p.copy_from_slice(&[(x * 5 + k * 7) as u8, (y * 7) as u8, 128, 255]);
                }
                f
            })
            .collect();
        let write = |name: &str| {
            let p = dir.path().join(name);
            let mut w =
                VideoWriter::create(&p, 47, 32, 12.0, &VideoOptions::default(), false).unwrap();
            assert_eq!(w.size(), (46, 32));
            for (i, f) in frames.iter().enumerate() {
                w.write_frame(
                    f,
                    if i == 3 { 1.0 + 1.0 / 12.0 } else { 1.0 / 12.0 },
                    i == 3,
                )
                .unwrap();
            }
            let stats = w.finish().unwrap();
            (std::fs::read(&p).unwrap(), stats)
        };
        let (a, stats) = write("a.mp4");
        let (b, _) = write("b.mp4");
        assert_eq!(a, b, "same frames, same bytes");
        assert_eq!(stats.frames, 6);
        assert_eq!(stats.keyframes, 2, "the first frame and the survey frame");
        // Six frames at 12 fps plus a one-second hold: 1.5 s exactly (7500 ticks a frame).
        assert!(
            (stats.duration_s - 1.5).abs() < 1e-12,
            "{}",
            stats.duration_s
        );
        assert_eq!(stats.bytes as usize, a.len());
        // Nothing but the two files is left in the folder.
        let mut names: Vec<_> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().into_string().unwrap())
            .collect();
        names.sort();
        assert_eq!(names, vec!["a.mp4", "b.mp4"]);
    }

    #[test]
    fn a_refused_video_leaves_nothing_and_existing_files_stay() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("v.mp4");
        std::fs::write(&p, b"old").unwrap();
        let e = VideoWriter::create(&p, 64, 48, 12.0, &VideoOptions::default(), false)
            .err()
            .unwrap();
        assert!(e.to_string().contains("overwrite"), "{e}");
        assert_eq!(std::fs::read(&p).unwrap(), b"old");
        // A writer that is dropped before finish writes nothing.
        let q = dir.path().join("w.mp4");
        let mut w = VideoWriter::create(&q, 64, 48, 12.0, &VideoOptions::default(), false).unwrap();
        w.write_frame(&solid(64, 48, [10, 200, 30]), 0.1, false)
            .unwrap();
        drop(w);
        assert!(!q.exists());
        // A wrong-sized frame is an error, and finish with no frames writes nothing.
        let mut w = VideoWriter::create(&q, 64, 48, 12.0, &VideoOptions::default(), false).unwrap();
        assert!(w
            .write_frame(&solid(32, 48, [0, 0, 0]), 0.1, false)
            .is_err());
        assert!(w.finish().is_err());
        assert!(!q.exists());
        let names: Vec<_> = std::fs::read_dir(dir.path()).unwrap().collect();
        assert_eq!(names.len(), 1);
    }
}
