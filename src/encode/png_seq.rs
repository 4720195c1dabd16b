//! Frames -> a numbered PNG sequence (`frame_0000.png`, …) in a folder, with an index CSV that says
//! for every frame its time, whether it is surveyed or interpolated, the bracketing surveys and the
//! crest figures; and a poster: one PNG with several frames side by side, captioned.
//!
//! Every file is written atomically (temporary name, then rename). Nothing already in the folder is
//! replaced unless overwrite is asked; the check covers the whole sequence before the first frame is
//! written, so a refused run leaves the folder as it was.

use std::io::Write;
use std::path::{Path, PathBuf};

use image::ImageEncoder;

use super::atomic::{check_target, write_atomic, AtomicFile};
use crate::annotate::text::{draw_text, draw_text_bold, measure_text, measure_text_bold};
use crate::error::{Error, Result};
use crate::render::Frame;

/// Whether a frame shows a survey or an interpolation, for the index.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RowStatus {
    /// The frame shows a survey as measured.
    Surveyed,
    /// The frame is made between two surveys; not a measurement.
    Interpolated,
}

impl RowStatus {
    fn as_str(self) -> &'static str {
        match self {
            RowStatus::Surveyed => "surveyed",
            RowStatus::Interpolated => "interpolated",
        }
    }
}

/// One line of the index CSV, filled by the caller per frame.
#[derive(Debug, Clone, PartialEq)]
pub struct IndexRow {
    /// The instant the frame stands for (ISO 8601 text).
    pub time: String,
    /// Surveyed or interpolated.
    pub status: RowStatus,
    /// How the surface was made: `survey`, or the interpolation method (e.g. `morph`).
    pub method: String,
    /// The earlier bracketing survey (its date or label).
    pub from_survey: String,
    /// The later bracketing survey (equal to `from_survey` on a survey frame).
    pub to_survey: String,
    /// Crest elevation (on the grids' vertical datum) of the frame's surface, in `unit`; NaN when
    /// the surface has no data.
    pub crest_elevation: f64,
    /// Crest height above the reference elevation, in `unit`.
    pub crest_height_above_reference: f64,
    /// Elevation of the single highest cell of the frame's surface, in `unit` (rides on noise).
    pub highest_cell_elevation: f64,
    /// Unit symbol of the three figures.
    pub unit: String,
}

/// Name of the index file written beside the frames.
pub const INDEX_FILE: &str = "index.csv";

/// Header line of the index CSV.
pub const INDEX_HEADER: &str =
    "frame,file,time,status,method,from_survey,to_survey,crest_elevation,crest_height_above_reference,highest_cell_elevation,unit";

/// Writes the frames of one animation as numbered PNGs; see the module doc.
#[derive(Debug)]
pub struct PngSequence {
    folder: PathBuf,
    prefix: String,
    digits: usize,
    expected: usize,
    overwrite: bool,
    rows: Vec<(String, IndexRow)>,
    scratch: Vec<u8>,
}

fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// Encodes an opaque frame as RGB PNG bytes (RGBA if any pixel is not opaque) into `w`.
fn encode_png(
    frame: &Frame,
    scratch: &mut Vec<u8>,
    w: impl Write,
) -> std::result::Result<(), image::ImageError> {
    let enc = image::codecs::png::PngEncoder::new(w);
    if frame.rgba.chunks_exact(4).all(|p| p[3] == 255) {
        scratch.clear();
        scratch.extend(frame.rgba.chunks_exact(4).flat_map(|p| [p[0], p[1], p[2]]));
        enc.write_image(
            scratch,
            frame.width,
            frame.height,
            image::ExtendedColorType::Rgb8,
        )
    } else {
        enc.write_image(
            &frame.rgba,
            frame.width,
            frame.height,
            image::ExtendedColorType::Rgba8,
        )
    }
}

/// Writes one frame as a PNG file, atomically.
///
/// # Errors
/// [`Error::Output`] if the path may not be written or the frame is malformed; [`Error::Io`] on a
/// write failure.
pub fn write_png(path: &Path, frame: &Frame, overwrite: bool) -> Result<()> {
    if frame.width == 0
        || frame.height == 0
        || frame.rgba.len() != frame.width as usize * frame.height as usize * 4
    {
        return Err(Error::output(path, "the frame is empty or its pixel buffer has the wrong length; this is a bug in dunereel"));
    }
    let mut scratch = Vec::new();
    write_atomic(path, overwrite, |f| {
        encode_png(frame, &mut scratch, f)
            .map_err(|e| Error::output(path, format!("PNG encoding failed: {e}")))
    })
}

impl PngSequence {
    /// Prepares `folder` (created if missing) for `expected_frames` frames named
    /// `{prefix}{number}.png`, numbers zero-padded to at least 4 digits.
    ///
    /// # Errors
    /// [`Error::Output`] if any of those files or the index already exists and `overwrite` is false,
    /// or the prefix is not a plain file-name part; [`Error::Io`] if the folder cannot be made.
    pub fn create(
        folder: &Path,
        prefix: &str,
        expected_frames: usize,
        overwrite: bool,
    ) -> Result<PngSequence> {
        if prefix.contains(['/', '\\']) || prefix.starts_with('.') {
            return Err(Error::output(
                folder,
                format!("the frame name prefix {prefix:?} must be a plain name (no slashes, not starting with a dot)"),
            ));
        }
        std::fs::create_dir_all(folder).map_err(|e| Error::io(folder, e))?;
        let digits = expected_frames
            .saturating_sub(1)
            .max(1)
            .to_string()
            .len()
            .max(4);
        let seq = PngSequence {
            folder: folder.to_path_buf(),
            prefix: prefix.to_string(),
            digits,
            expected: expected_frames,
            overwrite,
            rows: Vec::with_capacity(expected_frames),
            scratch: Vec::new(),
        };
        for i in 0..expected_frames {
            check_target(&seq.folder.join(seq.file_name(i)), overwrite)?;
        }
        check_target(&seq.folder.join(INDEX_FILE), overwrite)?;
        Ok(seq)
    }

    /// File name of frame `i`.
    pub fn file_name(&self, i: usize) -> String {
        format!("{}{:0width$}.png", self.prefix, i, width = self.digits)
    }

    /// Writes the next frame and remembers its index row. Returns the file written.
    ///
    /// # Errors
    /// As [`write_png`]; also [`Error::Output`] if more frames come than announced.
    pub fn write_frame(&mut self, frame: &Frame, row: IndexRow) -> Result<PathBuf> {
        let i = self.rows.len();
        if i >= self.expected {
            return Err(Error::output(
                &self.folder,
                format!(
                    "more than the {} announced frames; this is a bug in dunereel",
                    self.expected
                ),
            ));
        }
        let name = self.file_name(i);
        let path = self.folder.join(&name);
        if frame.width == 0
            || frame.height == 0
            || frame.rgba.len() != frame.width as usize * frame.height as usize * 4
        {
            return Err(Error::output(
                &path,
                "the frame is empty or malformed; this is a bug in dunereel",
            ));
        }
        let mut f = AtomicFile::create(&path, self.overwrite)?;
        encode_png(frame, &mut self.scratch, &mut f)
            .map_err(|e| Error::output(&path, format!("PNG encoding failed: {e}")))?;
        f.commit()?;
        self.rows.push((name, row));
        Ok(path)
    }

    /// Writes the index CSV and returns its path.
    ///
    /// # Errors
    /// [`Error::Io`] on a write failure.
    pub fn finish(self) -> Result<PathBuf> {
        let path = self.folder.join(INDEX_FILE);
        let mut text = String::with_capacity(64 * (self.rows.len() + 1));
        text.push_str(INDEX_HEADER);
        text.push('\n');
        for (i, (file, r)) in self.rows.iter().enumerate() {
            let fig = |v: f64| {
                if v.is_finite() {
                    format!("{v:.3}")
                } else {
                    String::new()
                }
            };
            let fields = [
                i.to_string(),
                csv_field(file),
                csv_field(&r.time),
                r.status.as_str().to_string(),
                csv_field(&r.method),
                csv_field(&r.from_survey),
                csv_field(&r.to_survey),
                fig(r.crest_elevation),
                fig(r.crest_height_above_reference),
                fig(r.highest_cell_elevation),
                csv_field(&r.unit),
            ];
            text.push_str(&fields.join(","));
            text.push('\n');
        }
        write_atomic(&path, self.overwrite, |f| {
            f.write_all(text.as_bytes())
                .map_err(|e| Error::io(&path, e))
        })?;
        Ok(path)
    }
}

/// One panel of a poster.
#[derive(Debug, Clone, Copy)]
pub struct PosterTile<'a> {
    /// The frame to show (scaled to the tile width).
    pub frame: &'a Frame,
    /// Caption under the frame (e.g. the survey date and peak height).
    pub caption: &'a str,
}

/// Layout of a poster.
#[derive(Debug, Clone, PartialEq, serde::Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct PosterOptions {
    /// Tiles per row; 0 = choose (up to 3). Default: 0.
    pub columns: usize,
    /// Width of each tile in pixels. Default: 480.
    pub tile_width: u32,
    /// Heading across the top; empty = none. Default: empty.
    pub title: String,
}

impl Default for PosterOptions {
    fn default() -> Self {
        PosterOptions {
            columns: 0,
            tile_width: 480,
            title: String::new(),
        }
    }
}

/// Draws `tiles` side by side (small multiples) with captions into one frame.
pub fn poster_frame(tiles: &[PosterTile<'_>], opts: &PosterOptions) -> Frame {
    let n = tiles.len().max(1);
    let cols = if opts.columns == 0 {
        n.min(3)
    } else {
        opts.columns.min(n)
    }
    .max(1);
    let rows = n.div_ceil(cols);
    let tw = opts.tile_width.clamp(32, 4096);
    // Every tile keeps the first frame's aspect ratio so the panels line up.
    let aspect = tiles.first().map_or(9.0 / 16.0, |t| {
        t.frame.height.max(1) as f32 / t.frame.width.max(1) as f32
    });
    let th = ((tw as f32 * aspect).round() as u32).max(1);
    let unit = (tw as f32 / 480.0).max(0.5);
    let margin = (16.0 * unit).round() as u32;
    let caption_px = 16.0 * unit;
    let caption_h = (caption_px * 1.6).ceil() as u32;
    let title_px = 26.0 * unit;
    let title_h = if opts.title.trim().is_empty() {
        0
    } else {
        (title_px * 1.5).ceil() as u32
    };
    let width = margin + cols as u32 * (tw + margin);
    let height = margin + title_h + rows as u32 * (th + caption_h + margin);
    let mut out = Frame::new(width, height);
    for p in out.rgba.chunks_exact_mut(4) {
        p.copy_from_slice(&[22, 26, 32, 255]);
    }
    if title_h > 0 {
        let mut size = title_px;
        while size > 8.0 && measure_text_bold(size, &opts.title).0 > (width - 2 * margin) as f32 {
            size *= 0.92;
        }
        draw_text_bold(
            &mut out,
            margin as f32,
            margin as f32,
            size,
            [255, 255, 255, 255],
            opts.title.trim(),
        );
    }
    for (k, t) in tiles.iter().enumerate() {
        let (c, r) = ((k % cols) as u32, (k / cols) as u32);
        let x0 = margin + c * (tw + margin);
        let y0 = margin + title_h + r * (th + caption_h + margin);
        if let Some(img) =
            image::RgbaImage::from_raw(t.frame.width, t.frame.height, t.frame.rgba.clone())
        {
            let small =
                image::imageops::resize(&img, tw, th, image::imageops::FilterType::Triangle);
            for (y, row) in small.as_raw().chunks_exact(tw as usize * 4).enumerate() {
                let dst = ((y0 as usize + y) * width as usize + x0 as usize) * 4;
                out.rgba[dst..dst + row.len()].copy_from_slice(row);
            }
        }
        // Caption, shrunk (never cut) to the tile width.
        let mut size = caption_px;
        while size > 7.0 && measure_text(size, t.caption).0 > tw as f32 {
            size *= 0.92;
        }
        draw_text(
            &mut out,
            x0 as f32,
            (y0 + th) as f32 + caption_px * 0.3,
            size,
            [235, 238, 242, 255],
            t.caption,
        );
    }
    out
}

/// Writes a poster PNG of `tiles`; see [`poster_frame`].
///
/// # Errors
/// [`Error::Output`] if there are no tiles or the path may not be written; [`Error::Io`] on a write failure.
pub fn write_poster(
    path: &Path,
    tiles: &[PosterTile<'_>],
    opts: &PosterOptions,
    overwrite: bool,
) -> Result<()> {
    if tiles.is_empty() {
        return Err(Error::output(path, "a poster needs at least one frame"));
    }
    check_target(path, overwrite)?;
    write_png(path, &poster_frame(tiles, opts), overwrite)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn csv_fields_are_quoted_when_needed() {
        // Check: RFC 4180 (from memory) — fields with commas or quotes are quoted, quotes doubled.
        assert_eq!(csv_field("plain"), "plain");
        assert_eq!(csv_field("a,b"), "\"a,b\"");
        assert_eq!(csv_field("say \"hi\""), "\"say \"\"hi\"\"\"");
    }

    #[test]
    fn names_are_zero_padded() {
        let dir = tempfile::tempdir().unwrap();
        let s = PngSequence::create(dir.path(), "frame_", 12, false).unwrap();
        assert_eq!(s.file_name(3), "frame_0003.png");
        let big = PngSequence::create(dir.path(), "f", 12_345, false).unwrap();
        assert_eq!(big.file_name(7), "f00007.png");
    }
}
