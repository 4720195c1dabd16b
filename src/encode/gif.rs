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
    mapper: Mapper,
    width: usize,
    height: usize,
    spread: f32,
    difference: bool,
    palette_len: usize,
    current: Vec<u8>,
    previous: Vec<u8>,
    rect_buf: Vec<u8>,
    lzw: LzwEncoder,
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
        let n = width as usize * height as usize;
        Ok(GifWriter {
            encoder: Some(encoder),
            mapper: Mapper::new(palette),
            width: width as usize,
            height: height as usize,
            spread: opts.spread(),
            difference: opts.difference_frames,
            palette_len: palette.len(),
            current: vec![0; n],
            previous: vec![0; n],
            rect_buf: Vec::with_capacity(n),
            lzw: LzwEncoder::new(),
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
        if frame.width as usize != self.width
            || frame.height as usize != self.height
            || frame.rgba.len() != self.width * self.height * 4
        {
            return Err(Error::output(
                &self.path,
                format!(
                    "frame {} is {}x{} but the animation is {}x{}; every frame must have one size",
                    self.frames, frame.width, frame.height, self.width, self.height
                ),
            ));
        }
        self.err_sum +=
            self.mapper
                .map_frame(&frame.rgba, self.width, self.spread, &mut self.current);
        let first = self.frames == 0;
        let (left, top, w, h, transparent) = if first || !self.difference {
            self.rect_buf.clear();
            self.rect_buf.extend_from_slice(&self.current);
            (0, 0, self.width, self.height, None)
        } else {
            self.difference_rect()
        };
        if !first {
            self.changed_px += (w * h) as u64;
        }
        let gframe = gif::Frame {
            delay: delay_cs,
            dispose: DisposalMethod::Keep,
            transparent,
            left: left as u16,
            top: top as u16,
            width: w as u16,
            height: h as u16,
            buffer: std::borrow::Cow::Borrowed(self.lzw.encode(&self.rect_buf, self.min_code_size)),
            ..Default::default()
        };
        let path = &self.path;
        let enc = self.encoder.as_mut().ok_or_else(|| {
            Error::output(path, "written after finish; this is a bug in dunereel")
        })?;
        enc.write_lzw_pre_encoded_frame(&gframe)
            .map_err(|e| gif_err(path, e))?;
        std::mem::swap(&mut self.current, &mut self.previous);
        self.frames += 1;
        Ok(())
    }

    /// Fills `rect_buf` with the smallest rectangle of changed indices; unchanged pixels inside
    /// become a transparent index if one is free. Returns (left, top, width, height, transparent).
    fn difference_rect(&mut self) -> (usize, usize, usize, usize, Option<u8>) {
        let w = self.width;
        let (mut x0, mut x1, mut y0, mut y1) = (usize::MAX, 0usize, usize::MAX, 0usize);
        for (y, (c, p)) in self
            .current
            .chunks_exact(w)
            .zip(self.previous.chunks_exact(w))
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
        self.rect_buf.clear();
        if x0 == usize::MAX {
            // Nothing changed: one pixel, rewritten with the index it already has.
            self.rect_buf.push(self.current[0]);
            return (0, 0, 1, 1, None);
        }
        let (rw, rh) = (x1 - x0 + 1, y1 - y0 + 1);
        let (cur_px, prev_px) = (&self.current, &self.previous);
        let rows = (y0..=y1).map(|y| {
            let r = y * w + x0..=y * w + x1;
            (&cur_px[r.clone()], &prev_px[r])
        });
        // Prefer a padding entry of the table (it is padded to a power of two, and no pixel uses
        // it), else any palette index no changed pixel uses.
        let table_len = self.palette_len.max(2).next_power_of_two();
        let free = if self.palette_len < table_len {
            Some(self.palette_len as u8)
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
            (0..self.palette_len)
                .find(|&i| marks.iter().all(|m| m[i] == 0))
                .map(|i| i as u8)
        };
        self.rect_buf.resize(rw * rh, 0);
        for ((cur, prev), out) in rows.zip(self.rect_buf.chunks_exact_mut(rw)) {
            match free {
                Some(t) => {
                    for ((o, &c), &p) in out.iter_mut().zip(cur).zip(prev) {
                        *o = if c == p { t } else { c };
                    }
                }
                None => out.copy_from_slice(cur),
            }
        }
        (x0, y0, rw, rh, free)
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
    let Some(first) = frames.first() else {
        return Err(Error::output(
            path,
            "no frames to write; the animation needs at least one frame",
        ));
    };
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
    let palette = builder.build(opts.colours.clamp(2, 256) as usize);
    let mut w = GifWriter::create(path, first.width, first.height, &palette, opts, overwrite)?;
    for (f, &d) in frames.iter().zip(delays_cs) {
        w.write_frame(f, d)?;
    }
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
