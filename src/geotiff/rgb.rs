//! RGB(A) GeoTIFF (an orthophoto) -> (`GridGeometry`, sRGB bytes of shape rows x cols x 3).
//!
//! Shares the opening, layout checks and georeferencing with the elevation reader (`read`); only
//! the band handling differs: 3 or 4 bands (alpha ignored) of uint8, or uint16 scaled to 8 bits,
//! stored pixel by pixel (chunky) or band by band (planar).

use std::path::Path;

use ndarray::Array3;
use tiff::decoder::DecodingResult;
use tiff::tags::Tag;

use super::read::{georeference, open, short_tag, tiff_message, Layout};
use crate::error::{Error, Result};
use crate::grid::GridGeometry;

/// Reads an RGB or RGBA GeoTIFF as sRGB bytes, rows north to south, 3 values a cell.
///
/// 16-bit images are scaled to 8 bits by keeping the high byte; a fourth band (alpha) is ignored.
///
/// # Errors
/// `Error::Input` naming the file, what was found and the fix: missing file, not a TIFF, no or
/// unsupported georeferencing (as [`super::read_grid`]), a band count other than 3 or 4, a sample
/// type other than uint8 or uint16, a palette or other non-RGB colour model. `Error::Io` when the
/// operating system refuses to open an existing file.
pub fn read_rgb(path: &Path) -> Result<(GridGeometry, Array3<u8>)> {
    let bad = |msg: String| Error::input(path, msg);
    let mut dec = open(path, "check colour.drape in the job file")?;
    let layout = Layout::read(&mut dec).map_err(&bad)?;
    let photometric = short_tag(&mut dec, Tag::PhotometricInterpretation).map_err(&bad)?;
    check_rgb(&layout, photometric).map_err(&bad)?;
    let planar = short_tag(&mut dec, Tag::PlanarConfiguration).map_err(&bad)? == Some(2);
    let (geometry, _) = georeference(&mut dec, &layout).map_err(&bad)?;

    let mut decoded = DecodingResult::U8(Vec::new());
    let want = dec
        .read_image_to_buffer(&mut decoded)
        .map_err(|e| bad(tiff_message(e)))?;
    let bytes: Vec<u8> = match decoded {
        DecodingResult::U8(v) => v,
        DecodingResult::U16(v) => v.into_iter().map(|s| (s >> 8) as u8).collect(),
        _ => {
            return Err(bad(
                "decoded samples are not uint8 or uint16; export the image again as 8-bit RGB"
                    .into(),
            ))
        }
    };
    let (rows, cols, bands) = (layout.rows, layout.cols, layout.bands);
    let cells = rows * cols;
    let sample_bytes = if layout.sample_type == "uint16" { 2 } else { 1 };
    if bytes.len() != cells * bands || want.complete_len != cells * bands * sample_bytes {
        return Err(bad(format!(
            "decoded {} samples where {cols} x {rows} cells x {bands} bands need {}; the file is damaged \
             or too large to decode, export it again",
            bytes.len(),
            cells * bands
        )));
    }
    let rgb = Array3::from_shape_fn((rows, cols, 3), |(r, c, k)| {
        let cell = r * cols + c;
        if planar {
            bytes[k * cells + cell]
        } else {
            bytes[cell * bands + k]
        }
    });
    log::debug!(
        "{}: {cols} x {rows} {} RGB cells, {}, {}",
        path.display(),
        layout.sample_type,
        layout.compression,
        if planar { "planar" } else { "chunky" }
    );
    Ok((geometry, rgb))
}

/// Accepts 3 or 4 bands of uint8 or uint16 with an RGB (or unstated grey-level) colour model.
fn check_rgb(layout: &Layout, photometric: Option<u16>) -> std::result::Result<(), String> {
    if !matches!(layout.bands, 3 | 4) {
        return Err(format!(
            "has {} band(s) (SamplesPerPixel, tag 277); a drape needs an RGB image of 3 bands (or 4 \
             with alpha); export the orthophoto as 8-bit RGB",
            layout.bands
        ));
    }
    if !matches!(layout.sample_type, "uint8" | "uint16") {
        return Err(format!(
            "holds {} samples; a drape needs uint8 (or uint16) colour values; export the orthophoto as \
             8-bit RGB",
            layout.sample_type
        ));
    }
    match photometric {
        // 2 = RGB; 1 (BlackIsZero) with extra samples is how some writers store plain band stacks.
        None | Some(1 | 2) => Ok(()),
        Some(code) => Err(format!(
            "PhotometricInterpretation (tag 262) = {code}{}; a drape needs RGB (2); export the \
             orthophoto as 8-bit RGB",
            match code {
                3 => " (palette)",
                5 => " (CMYK)",
                6 => " (YCbCr)",
                8 => " (CIE L*a*b*)",
                _ => "",
            }
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::grid::LinearUnit;
    use std::fs::File;
    use std::io::BufWriter;
    use tiff::encoder::{colortype, TiffEncoder};

    const GEO_KEYS: [u16; 12] = [1, 1, 0, 2, 1024, 0, 1, 1, 3072, 0, 1, 32631];

    /// Pixel (r, c) of the test pattern: red rises along rows, green along columns, blue fixed.
    fn pattern(r: usize, c: usize) -> [u8; 3] {
        [(r * 40) as u8, (c * 30) as u8, 200]
    }

    fn geo_tags<W: std::io::Write + std::io::Seek, K: tiff::encoder::TiffKind>(
        dir: &mut tiff::encoder::DirectoryEncoder<'_, W, K>,
    ) {
        dir.write_tag(Tag::ModelPixelScaleTag, &[0.5, 0.5, 0.0][..])
            .unwrap();
        dir.write_tag(
            Tag::ModelTiepointTag,
            &[0.0, 0.0, 0.0, 400_000.0, 6_000_000.0, 0.0][..],
        )
        .unwrap();
        dir.write_tag(Tag::GeoKeyDirectoryTag, &GEO_KEYS[..])
            .unwrap();
    }

    /// Writes a chunky image of colour type `C` whose samples are made by `sample(r, c, band)`.
    fn write_chunky<C: colortype::ColorType>(
        path: &Path,
        rows: usize,
        cols: usize,
        bands: usize,
        sample: impl Fn(usize, usize, usize) -> C::Inner,
    ) where
        [C::Inner]: tiff::encoder::TiffValue,
    {
        let data: Vec<C::Inner> = (0..rows * cols * bands)
            .map(|i| sample(i / bands / cols, i / bands % cols, i % bands))
            .collect();
        let mut out = BufWriter::new(File::create(path).unwrap());
        let mut enc = TiffEncoder::new(&mut out).unwrap();
        let mut image = enc.new_image::<C>(cols as u32, rows as u32).unwrap();
        geo_tags(image.encoder());
        image.write_data(&data).unwrap();
    }

    /// Writes a planar (one plane per band) 3-band uint8 image by hand: the encoder writes chunky only.
    fn write_planar(path: &Path, rows: usize, cols: usize) {
        let mut out = BufWriter::new(File::create(path).unwrap());
        let mut enc = TiffEncoder::new(&mut out).unwrap();
        let mut dir = enc.image_directory().unwrap();
        let mut offsets = Vec::new();
        for k in 0..3 {
            let plane: Vec<u8> = (0..rows * cols)
                .map(|i| pattern(i / cols, i % cols)[k])
                .collect();
            offsets.push(dir.write_data(&plane[..]).unwrap() as u32);
        }
        dir.write_tag(Tag::ImageWidth, cols as u32).unwrap();
        dir.write_tag(Tag::ImageLength, rows as u32).unwrap();
        dir.write_tag(Tag::BitsPerSample, &[8u16, 8, 8][..])
            .unwrap();
        dir.write_tag(Tag::Compression, 1u16).unwrap();
        dir.write_tag(Tag::PhotometricInterpretation, 2u16).unwrap();
        dir.write_tag(Tag::SamplesPerPixel, 3u16).unwrap();
        dir.write_tag(Tag::RowsPerStrip, rows as u32).unwrap();
        dir.write_tag(Tag::PlanarConfiguration, 2u16).unwrap();
        dir.write_tag(Tag::StripOffsets, &offsets[..]).unwrap();
        dir.write_tag(Tag::StripByteCounts, &[(rows * cols) as u32; 3][..])
            .unwrap();
        geo_tags(&mut dir);
        dir.finish().unwrap();
    }

    fn assert_pattern(rgb: &Array3<u8>) {
        for ((r, c, k), &v) in rgb.indexed_iter() {
            assert_eq!(v, pattern(r, c)[k], "cell ({r}, {c}) band {k}");
        }
    }

    #[test]
    fn chunky_rgb_reads_with_its_georeferencing() {
        let d = tempfile::tempdir().unwrap();
        let path = d.path().join("rgb.tif");
        write_chunky::<colortype::RGB8>(&path, 5, 7, 3, |r, c, k| pattern(r, c)[k]);
        let (g, rgb) = read_rgb(&path).unwrap();
        assert_eq!(rgb.dim(), (5, 7, 3));
        assert_pattern(&rgb);
        // Check: analytic — tiepoint (0,0) at (400000, 6000000), 0.5 m cells, PixelIsArea corners
        assert_eq!((g.cols, g.rows), (7, 5));
        assert_eq!((g.origin_x, g.origin_y), (400_000.0, 6_000_000.0));
        assert_eq!((g.cell_x, g.cell_y), (0.5, 0.5));
        assert_eq!(g.epsg, Some(32631));
        assert_eq!(g.horizontal_unit, LinearUnit::Metre);
    }

    #[test]
    fn rgba_drops_alpha_and_planar_matches_chunky() {
        let d = tempfile::tempdir().unwrap();
        let rgba = d.path().join("rgba.tif");
        write_chunky::<colortype::RGBA8>(&rgba, 4, 6, 4, |r, c, k| {
            if k == 3 {
                17
            } else {
                pattern(r, c)[k]
            }
        });
        assert_pattern(&read_rgb(&rgba).unwrap().1);
        let planar = d.path().join("planar.tif");
        write_planar(&planar, 4, 6);
        assert_pattern(&read_rgb(&planar).unwrap().1);
    }

    #[test]
    fn sixteen_bit_keeps_the_high_byte() {
        let d = tempfile::tempdir().unwrap();
        let path = d.path().join("rgb16.tif");
        // The low byte (0xAB) must be dropped, not rounded.
        write_chunky::<colortype::RGB16>(&path, 3, 4, 3, |r, c, k| {
            u16::from(pattern(r, c)[k]) << 8 | 0xAB
        });
        assert_pattern(&read_rgb(&path).unwrap().1);
    }

    #[test]
    fn other_layouts_are_refused_with_a_fix() {
        let d = tempfile::tempdir().unwrap();
        let grey = d.path().join("grey.tif");
        write_chunky::<colortype::Gray8>(&grey, 3, 3, 1, |_, _, _| 9);
        let float = d.path().join("float.tif");
        write_chunky::<colortype::RGB32Float>(&float, 3, 3, 3, |_, _, _| 0.5);
        let text = d.path().join("text.tif");
        std::fs::write(&text, b"not an image").unwrap();
        let cases = [
            (grey, "1 band"),
            (float, "float32"),
            (text, "not a TIFF"),
            (d.path().join("absent.tif"), "colour.drape"),
        ];
        for (path, found) in cases {
            let e = read_rgb(&path).unwrap_err();
            let msg = e.to_string();
            assert!(matches!(e, Error::Input { .. }), "{msg}");
            assert!(msg.contains(&*path.to_string_lossy()), "{msg}");
            assert!(msg.contains(found), "expected `{found}` in: {msg}");
        }
        assert!(check_rgb(
            &Layout {
                rows: 1,
                cols: 1,
                bands: 3,
                sample_type: "uint8",
                compression: "none"
            },
            Some(3)
        )
        .unwrap_err()
        .contains("palette"));
    }

    #[test]
    fn without_georeferencing_is_refused() {
        let d = tempfile::tempdir().unwrap();
        let path = d.path().join("plain.tif");
        let mut out = BufWriter::new(File::create(&path).unwrap());
        TiffEncoder::new(&mut out)
            .unwrap()
            .write_image::<colortype::RGB8>(2, 2, &[0u8; 12])
            .unwrap();
        drop(out);
        let msg = read_rgb(&path).unwrap_err().to_string();
        assert!(msg.contains("no georeferencing"), "{msg}");
    }
}
