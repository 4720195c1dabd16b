//! RGBA frames -> an animated GIF89a file: one global palette for the whole animation, difference
//! frames, per-frame delays, looping.
//!
//! Two passes keep memory small: first every frame (or a sample of frames) goes through a
//! [`PaletteBuilder`]; then [`GifWriter`] maps each frame to the palette and writes it at once.
//! Only the previous frame's indices are kept (width x height bytes), never a list of RGBA frames.
//! [`write_gif`] does both passes for frames already in memory.
//!
//! Difference encoding: after the first frame, each frame covers only the smallest rectangle
//! holding every pixel whose palette index changed; inside it, unchanged pixels take a transparent
//! index (one no changed pixel uses) and every frame says "leave in place" (disposal 1), so a viewer
//! shows the previous frame through them. If all 256 indices occur among the changed pixels, the
//! rectangle is written opaque. LZW coding is ours (`lzw`, same bytes as the `gif` crate's, faster);
//! byte layout (GIF89a, CompuServe 1990; NETSCAPE2.0 looping block) and block splitting are done by
//! the `gif` crate.

use std::path::Path;
use std::sync::Mutex;

use rayon::prelude::*;

use gif::{DisposalMethod, Encoder, Repeat};

use super::atomic::AtomicFile;
use super::lzw::LzwEncoder;
use super::quantize::{Mapper, Palette, PaletteBuilder};
use crate::error::{Error, Result};
use crate::render::Frame;

/// Dithering applied when mapping frames to the palette.
#[derive(Debug, Clone, Copy, PartialEq, serde::Deserialize, serde::Serialize)]
#[serde(rename_all = "snake_case", tag = "kind", deny_unknown_fields)]
pub enum Dither {
    /// Nearest colour only (bands on smooth ramps, smallest files).
    None,
    /// Ordered 4x4 Bayer offsets of `spread` colour levels peak to peak; stable from frame to frame.
    Ordered {
        /// Peak-to-peak offset in colour levels (0–254). About the palette's colour spacing works best.
        spread: f32,
    },
}

/// How the GIF is made.
#[derive(Debug, Clone, PartialEq, serde::Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct GifOptions {
    /// Number of colours in the global palette, 2–256. Default: 256.
    pub colours: u16,
    /// Dithering. Default: ordered with a spread of 8 levels (a compromise: wider spreads hide more
    /// banding but cost LZW compression; see the size table of `cargo bench --bench encode`).
    pub dither: Dither,
    /// Times the animation repeats after the first play, as written in the NETSCAPE2.0 block; 0 loops
    /// forever. Default: 0.
    pub loop_count: u16,
    /// Encode only what changed from the previous frame. Default: true.
    pub difference_frames: bool,
    /// Use every n-th pixel of each frame when building the palette (1 = all). Default: 1.
    pub palette_sample_step: usize,
}

impl Default for GifOptions {
    fn default() -> Self {
        GifOptions {
            colours: 256,
            dither: Dither::Ordered { spread: 8.0 },
            loop_count: 0,
            difference_frames: true,
            palette_sample_step: 1,
        }
    }
}

impl GifOptions {
    /// Small and quick: 128 colours, no dithering, palette from every 4th pixel.
    pub fn preview() -> Self {
        GifOptions {
            colours: 128,
            dither: Dither::None,
            palette_sample_step: 4,
            ..Default::default()
        }
    }
    fn spread(&self) -> f32 {
        match self.dither {
            Dither::None => 0.0,
            Dither::Ordered { spread } => spread,
        }
    }
}

/// What the writer produced.
#[derive(Debug, Clone, PartialEq)]
pub struct GifStats {
    /// Frames written.
    pub frames: usize,
    /// File size in bytes.
    pub bytes: u64,
    /// Colours in the global palette.
    pub palette_colours: usize,
    /// Mean Euclidean distance, in 8-bit RGB levels, between each input pixel and its palette colour
    /// (dithering noise included), over all frames.
    pub mean_colour_error: f64,
    /// Share of pixels written after the first frame (1.0 = every frame written whole).
    pub changed_fraction: f64,
}

/// Streams frames into a GIF file; see the module doc.
pub struct GifWriter {
    encoder: Option<Encoder<AtomicFile>>,
    /// One mapper per rayon thread (found by the thread's index), so frames map side by side
    /// without sharing an answer table; every mapper gives the same indices.
    mappers: Vec<Mutex<Mapper>>,
    width: usize,
    height: usize,
    spread: f32,
    difference: bool,
    palette_len: usize,
    /// Palette indices of the last frame written (empty before the first).
    previous: Vec<u8>,
    /// Index buffers of one batch, kept from batch to batch.
    batch: Vec<Vec<u8>>,
    /// LZW minimum code size: bits of the (power-of-two) colour table, at least 2.
    min_code_size: u8,
    frames: usize,
    err_sum: f64,
    changed_px: u64,
    path: std::path::PathBuf,
}

fn gif_err(path: &Path, e: gif::EncodingError) -> Error {
    match e {
        gif::EncodingError::Io(io) => Error::io(path, io),
        other => Error::output(
            path,
            format!("GIF encoding failed: {other}; this is a bug in dunereel, please report it"),
        ),
    }
}

impl GifWriter {
    /// Opens `path` (under a temporary name) for a `width` x `height` animation with `palette`.
    ///
    /// # Errors
    /// [`Error::Output`] if the size is 0 or above 65535 (GIF limit), or the path may not be written
    /// (exists without `overwrite`, folder missing); [`Error::Io`] if the OS refuses.
    pub fn create(
        path: &Path,
        width: u32,
        height: u32,
        palette: &Palette,
        opts: &GifOptions,
        overwrite: bool,
    ) -> Result<GifWriter> {
        if width == 0 || height == 0 || width > u16::MAX as u32 || height > u16::MAX as u32 {
            return Err(Error::output(
                path,
                format!("a GIF frame must be 1 to 65535 pixels each way, not {width}x{height}; change the frame size"),
            ));
        }
        let file = AtomicFile::create(path, overwrite)?;
        let mut encoder = Encoder::new(file, width as u16, height as u16, &palette.to_rgb_bytes())
            .map_err(|e| gif_err(path, e))?;
        let repeat = if opts.loop_count == 0 {
            Repeat::Infinite
        } else {
            Repeat::Finite(opts.loop_count)
        };
        encoder.set_repeat(repeat).map_err(|e| gif_err(path, e))?;
        let threads = rayon::current_num_threads().max(1);
        Ok(GifWriter {
            encoder: Some(encoder),
            mappers: (0..threads)
                .map(|_| Mutex::new(Mapper::new(palette)))
                .collect(),
            width: width as usize,
            height: height as usize,
            spread: opts.spread(),
            difference: opts.difference_frames,
            palette_len: palette.len(),
            previous: Vec::new(),
            batch: Vec::new(),
            min_code_size: (palette.len().max(2).next_power_of_two().trailing_zeros() as u8).max(2),
            frames: 0,
            err_sum: 0.0,
            changed_px: 0,
            path: path.to_path_buf(),
        })
    }

    /// Maps `frame` to the palette and appends it, shown for `delay_cs` hundredths of a second.
    ///
    /// # Errors
    /// [`Error::Output`] if the frame size differs from the animation's; [`Error::Io`] on a write failure.
    pub fn write_frame(&mut self, frame: &Frame, delay_cs: u16) -> Result<()> {
        self.write_frames(&[frame], &[delay_cs])
    }

    /// Appends `frames` in order, `frames[i]` shown for `delays_cs[i]` hundredths of a second.
    /// A batch of frames is mapped to the palette, cut to its changed rectangle and LZW-coded on
    /// the rayon pool, then written one after another: the file is the same byte for byte as
    /// [`GifWriter::write_frame`] frame by frame, on any number of threads.
    ///
    /// # Errors
    /// [`Error::Output`] if a frame's size differs from the animation's or the counts differ;
    /// [`Error::Io`] on a write failure.
    pub fn write_frames(&mut self, frames: &[&Frame], delays_cs: &[u16]) -> Result<()> {
        if frames.len() != delays_cs.len() {
            return Err(Error::output(
                &self.path,
                format!(
                    "{} frames but {} delays; give one delay per frame (a bug in the caller)",
                    frames.len(),
                    delays_cs.len()
                ),
            ));
        }
        if let Some((k, f)) = frames.iter().enumerate().find(|(_, f)| {
            f.width as usize != self.width
                || f.height as usize != self.height
                || f.rgba.len() != self.width * self.height * 4
        }) {
            return Err(Error::output(
                &self.path,
                format!(
                    "frame {} is {}x{} but the animation is {}x{}; every frame must have one size",
                    self.frames + k,
                    f.width,
                    f.height,
                    self.width,
                    self.height
                ),
            ));
        }
        // A batch of a few frames per thread: enough to keep every core busy, little memory.
        let batch_len = 4 * self.mappers.len();
        for (frames, delays) in frames.chunks(batch_len).zip(delays_cs.chunks(batch_len)) {
            self.write_batch(frames, delays)?;
        }
        Ok(())
    }

    /// One batch of [`GifWriter::write_frames`] (sizes checked).
    fn write_batch(&mut self, frames: &[&Frame], delays_cs: &[u16]) -> Result<()> {
        let n = self.width * self.height;
        self.batch.resize_with(frames.len(), Vec::new);
        let (width, spread, mappers) = (self.width, self.spread, &self.mappers);
        // 1. Palette indices, frame by frame side by side.
        let errors: Vec<f64> = self.batch[..frames.len()]
            .par_iter_mut()
            .zip(frames.par_iter())
            .map(|(indices, frame)| {
                indices.resize(n, 0);
                let slot = rayon::current_thread_index().unwrap_or(0) % mappers.len();
                let mut mapper = mappers[slot].lock().unwrap_or_else(|p| p.into_inner());
                mapper.map_frame(&frame.rgba, width, spread, indices)
            })
            .collect();
        // 2. Each frame's rectangle against the frame before it, LZW-coded side by side.
        let (difference, palette_len, min_code_size) =
            (self.difference, self.palette_len, self.min_code_size);
        let (previous, batch) = (&self.previous, &self.batch[..frames.len()]);
        let coded: Vec<(Rect, Vec<u8>)> = (0..frames.len())
            .into_par_iter()
            .map_init(
                || (LzwEncoder::new(), Vec::new()),
                |(lzw, rect_buf), j| {
                    let current = &batch[j];
                    let before = if j > 0 {
                        Some(&batch[j - 1])
                    } else {
                        Some(previous)
                    }
                    .filter(|p| !p.is_empty());
                    let rect = match before {
                        Some(p) if difference => {
                            difference_rect(current, p, width, palette_len, rect_buf)
                        }
                        _ => {
                            rect_buf.clear();
                            rect_buf.extend_from_slice(current);
                            Rect {
                                left: 0,
                                top: 0,
                                width,
                                height: current.len() / width,
                                transparent: None,
                                first: before.is_none(),
                            }
                        }
                    };
                    (rect, lzw.encode(rect_buf, min_code_size).to_vec())
                },
            )
            .collect();
        // 3. Written in order.
        for ((rect, code), (&delay, err)) in coded.into_iter().zip(delays_cs.iter().zip(errors)) {
            self.err_sum += err;
            if !rect.first {
                self.changed_px += (rect.width * rect.height) as u64;
            }
            let gframe = gif::Frame {
                delay,
                dispose: DisposalMethod::Keep,
                transparent: rect.transparent,
                left: rect.left as u16,
                top: rect.top as u16,
                width: rect.width as u16,
                height: rect.height as u16,
                buffer: std::borrow::Cow::Owned(code),
                ..Default::default()
            };
            let path = &self.path;
            let enc = self.encoder.as_mut().ok_or_else(|| {
                Error::output(path, "written after finish; this is a bug in dunereel")
            })?;
            enc.write_lzw_pre_encoded_frame(&gframe)
                .map_err(|e| gif_err(path, e))?;
            self.frames += 1;
        }
        if let Some(last) = frames.len().checked_sub(1) {
            std::mem::swap(&mut self.previous, &mut self.batch[last]);
        }
        Ok(())
    }

    /// Writes the trailer, renames the file into place and reports.
    ///
    /// # Errors
    /// [`Error::Output`] if no frame was written; [`Error::Io`] if flushing or renaming fails.
    pub fn finish(mut self) -> Result<GifStats> {
        if self.frames == 0 {
            return Err(Error::output(
                &self.path,
                "no frames were written; the animation needs at least one frame",
            ));
        }
        let path = self.path.clone();
        let enc = self
            .encoder
            .take()
            .ok_or_else(|| Error::output(&path, "finished twice; this is a bug in dunereel"))?;
        let file = enc.into_inner().map_err(|e| gif_err(&path, e))?;
        file.commit()?;
        let bytes = std::fs::metadata(&path)
            .map_err(|e| Error::io(&path, e))?
            .len();
        let px = (self.width * self.height) as f64;
        Ok(GifStats {
            frames: self.frames,
            bytes,
            palette_colours: self.palette_len,
            mean_colour_error: self.err_sum / (px * self.frames as f64),
            changed_fraction: if self.frames > 1 {
                self.changed_px as f64 / (px * (self.frames - 1) as f64)
            } else {
                1.0
            },
        })
    }
}

/// Where one frame goes on the canvas and what it covers.
#[derive(Debug, Clone, Copy)]
struct Rect {
    left: usize,
    top: usize,
    width: usize,
    height: usize,
    /// The index that shows the frame before through this one, if any.
    transparent: Option<u8>,
    /// The animation's first frame (written whole, not counted as changed).
    first: bool,
}

/// Fills `rect_buf` with the smallest rectangle of `current`'s indices that differ from
/// `previous` (rows of `w`); unchanged pixels inside become a transparent index if one is free.
fn difference_rect(
    current: &[u8],
    previous: &[u8],
    w: usize,
    palette_len: usize,
    rect_buf: &mut Vec<u8>,
) -> Rect {
    let (mut x0, mut x1, mut y0, mut y1) = (usize::MAX, 0usize, usize::MAX, 0usize);
    for (y, (c, p)) in current
        .chunks_exact(w)
        .zip(previous.chunks_exact(w))
        .enumerate()
    {
        if c == p {
            continue;
        }
        let first = c.iter().zip(p).position(|(a, b)| a != b).unwrap_or(0);
        let last = w
            - 1
            - c.iter()
                .rev()
                .zip(p.iter().rev())
                .position(|(a, b)| a != b)
                .unwrap_or(0);
        x0 = x0.min(first);
        x1 = x1.max(last);
        y0 = y0.min(y);
        y1 = y1.max(y);
    }
    rect_buf.clear();
    if x0 == usize::MAX {
        // Nothing changed: one pixel, rewritten with the index it already has.
        rect_buf.push(current[0]);
        return Rect {
            left: 0,
            top: 0,
            width: 1,
            height: 1,
            transparent: None,
            first: false,
        };
    }
    let (rw, rh) = (x1 - x0 + 1, y1 - y0 + 1);
    let (cur_px, prev_px) = (&current, &previous);
    let rows = (y0..=y1).map(|y| {
        let r = y * w + x0..=y * w + x1;
        (&cur_px[r.clone()], &prev_px[r])
    });
    // Prefer a padding entry of the table (it is padded to a power of two, and no pixel uses
    // it), else any palette index no changed pixel uses.
    let table_len = palette_len.max(2).next_power_of_two();
    let free = if palette_len < table_len {
        Some(palette_len as u8)
    } else {
        // Four mark tables, one per pixel phase, so consecutive marks do not wait on each
        // other; branch-free, since in a moving view nearly every pixel changes.
        let mut marks = [[0u8; 256]; 4];
        for (cur, prev) in rows.clone() {
            let (mut c4, mut p4) = (cur.chunks_exact(4), prev.chunks_exact(4));
            for (c, p) in (&mut c4).zip(&mut p4) {
                for k in 0..4 {
                    marks[k][c[k] as usize] |= (c[k] != p[k]) as u8;
                }
            }
            for (c, p) in c4.remainder().iter().zip(p4.remainder()) {
                marks[0][*c as usize] |= (c != p) as u8;
            }
        }
        (0..palette_len)
            .find(|&i| marks.iter().all(|m| m[i] == 0))
            .map(|i| i as u8)
    };
    rect_buf.resize(rw * rh, 0);
    for ((cur, prev), out) in rows.zip(rect_buf.chunks_exact_mut(rw)) {
        match free {
            Some(t) => {
                for ((o, &c), &p) in out.iter_mut().zip(cur).zip(prev) {
                    *o = if c == p { t } else { c };
                }
            }
            None => out.copy_from_slice(cur),
        }
    }
    Rect {
        left: x0,
        top: y0,
        width: rw,
        height: rh,
        transparent: free,
        first: false,
    }
}

/// Builds one palette from `frames` and writes them as a GIF; `delays_cs[i]` is frame i's delay.
///
/// # Errors
/// [`Error::Output`] if there are no frames, the delays do not match the frames, the sizes differ
/// or the path may not be written; [`Error::Io`] on a write failure. Nothing is left at `path`
/// on error.
pub fn write_gif(
    path: &Path,
    frames: &[Frame],
    delays_cs: &[u16],
    opts: &GifOptions,
    overwrite: bool,
) -> Result<GifStats> {
    if frames.is_empty() {
        return Err(Error::output(
            path,
            "no frames to write; the animation needs at least one frame",
        ));
    }
    if delays_cs.len() != frames.len() {
        return Err(Error::output(
            path,
            format!(
                "{} frames but {} delays; give one delay per frame (a bug in the caller)",
                frames.len(),
                delays_cs.len()
            ),
        ));
    }
    let mut builder = PaletteBuilder::new();
    for f in frames {
        builder.add_rgba(&f.rgba, opts.palette_sample_step);
    }
    write_gif_sampled(path, frames, delays_cs, &builder, opts, overwrite)
}

/// [`write_gif`] with the palette's samples already taken (`builder` has seen the frames, for
/// example one by one as they were painted).
///
/// # Errors
/// As [`write_gif`].
pub fn write_gif_sampled(
    path: &Path,
    frames: &[Frame],
    delays_cs: &[u16],
    builder: &PaletteBuilder,
    opts: &GifOptions,
    overwrite: bool,
) -> Result<GifStats> {
    let Some(first) = frames.first() else {
        return Err(Error::output(
            path,
            "no frames to write; the animation needs at least one frame",
        ));
    };
    let palette = builder.build(opts.colours.clamp(2, 256) as usize);
    let mut w = GifWriter::create(path, first.width, first.height, &palette, opts, overwrite)?;
    let frames: Vec<&Frame> = frames.iter().collect();
    w.write_frames(&frames, delays_cs)?;
    w.finish()
}

/// Delays in 1/100 s for frames at `fps`, with `hold_cs` added on frames where `is_hold` is true.
///
/// Fractional delays are carried forward so the total time stays right: 30 fps gives 3, 3, 4, …
/// (REFERENCES.md §10). Delays are at least 2 cs, since many viewers slow 0–1 cs frames down.
pub fn delays_cs(
    frame_count: usize,
    fps: f64,
    hold_cs: u16,
    is_hold: impl Fn(usize) -> bool,
) -> Vec<u16> {
    let per = if fps.is_finite() && fps > 0.0 {
        100.0 / fps
    } else {
        10.0
    };
    let mut out = Vec::with_capacity(frame_count);
    let mut emitted = 0i64;
    for i in 0..frame_count {
        // End time of frame i in whole cs, computed from i (not summed) so errors do not build up.
        let target = ((i + 1) as f64 * per + 1e-9).floor() as i64;
        let mut d = (target - emitted).max(2);
        emitted += d;
        if is_hold(i) {
            d += hold_cs as i64;
        }
        out.push(d.min(u16::MAX as i64) as u16);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn batches_on_many_threads_write_the_bytes_of_one_frame_at_a_time() {
        // Check: analytic — mapping and coding frames side by side in batches must not change a
        // byte: 21 moving-gradient frames (more than one batch on 3 threads, with an unchanged
        // frame among them) written all at once on 3 threads equal frame by frame on 1 thread.
        let frames: Vec<Frame> = (0..21u32)
            .map(|i| {
                let mut f = Frame::new(64, 40);
                let shift = if i == 7 { 6 } else { i };
                for (k, p) in f.rgba.chunks_exact_mut(4).enumerate() {
                    let (x, y) = ((k % 64) as u32, (k / 64) as u32);
                    p[0] = ((x * 4 + shift * 9) % 256) as u8;
                    p[1] = ((y * 6 + shift * 3) % 256) as u8;
                    p[2] = (((x + y) * 2) % 256) as u8;
                }
                f
            })
            .collect();
        let delays = vec![4u16; frames.len()];
        let dir = std::env::temp_dir().join(format!("dunereel-gif-batch-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let write = |name: &str, threads: usize, one_by_one: bool| {
            let path = dir.join(name);
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap();
            pool.install(|| {
                let mut builder = PaletteBuilder::new();
                for f in &frames {
                    builder.add_rgba(&f.rgba, 1);
                }
                let palette = builder.build(256);
                let opts = GifOptions::default();
                let mut w = GifWriter::create(&path, 64, 40, &palette, &opts, true).unwrap();
                if one_by_one {
                    for (f, &d) in frames.iter().zip(&delays) {
                        w.write_frame(f, d).unwrap();
                    }
                } else {
                    let all: Vec<&Frame> = frames.iter().collect();
                    w.write_frames(&all, &delays).unwrap();
                }
                w.finish().unwrap();
            });
            std::fs::read(&path).unwrap()
        };
        let single = write("single.gif", 1, true);
        let batched = write("batched.gif", 3, false);
        std::fs::remove_dir_all(&dir).ok();
        assert!(single.len() > 1000);
        assert!(single == batched, "batched GIF differs from frame-by-frame");
    }

    #[test]
    fn delays_follow_the_frame_rate() {
        // Check: GIF89a (CompuServe 1990) delays are in 1/100 s — 25 fps = 4 cs exactly; REFERENCES.md §10.
        assert_eq!(delays_cs(5, 25.0, 0, |_| false), vec![4; 5]);
        // Check: REFERENCES.md §10 — 30 fps needs a 3,3,4 cs pattern (sum 10 cs per 3 frames).
        let d = delays_cs(6, 30.0, 0, |_| false);
        assert_eq!(d, vec![3, 3, 4, 3, 3, 4]);
        let held = delays_cs(4, 25.0, 150, |i| i == 2);
        assert_eq!(held, vec![4, 4, 154, 4]);
    }
}
