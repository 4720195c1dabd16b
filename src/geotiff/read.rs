//! GeoTIFF file -> (`Grid`, `GridSource`): band 1 as f32 metres, nodata as NaN, corners as origin.
//!
//! The `tiff` crate decodes the pixels (strips or tiles, none/LZW/DEFLATE/PackBits, predictors 1–3,
//! classic TIFF or BigTIFF); the GeoTIFF tags are read here (`keys`, `georef`). The conversion to
//! metres and the nodata test run once per cell in one pass over a slice, with no allocation per
//! cell: float32 files in metres are converted in place in the decoded buffer.

use std::fs::File;
use std::io::{BufReader, ErrorKind, Seek};
use std::path::Path;

use ndarray::Array2;
use tiff::decoder::{ifd::Value, Decoder, Limits};
use tiff::tags::Tag;
use tiff::{TiffError, TiffFormatError};

use super::georef::{self, ModelTags};
use super::keys::GeoKeys;
use super::sample::to_metres;
use super::structure;
use super::units::{self, Units};
use crate::error::{Error, Result};
use crate::grid::{Grid, GridGeometry, LinearUnit, UnitSource};
use crate::survey::GridSource;

/// Largest decoded raster accepted, in bytes (all bands as stored). 4 GiB holds a
/// 32768 x 32768 float32 grid; larger surveys should be tiled or resampled first.
const MAX_DECODED_BYTES: u64 = 4 << 30;

/// Reads one elevation grid: band 1 of the first image in the file.
///
/// Elevations are converted to metres (the file's vertical unit goes into
/// [`GridSource::vertical_unit`]); cells equal to the GDAL_NODATA value (tag 42113) and non-finite
/// cells become NaN; a PixelIsPoint raster is shifted half a cell so the geometry describes corners.
///
/// # Errors
/// `Error::Input` naming the file, the tag or key at fault, and the fix: missing file, not a TIFF,
/// truncated or corrupt data, no georeferencing, rotated grid, unsupported sample type or
/// compression, zero-size raster, non-positive cell size, unknown unit, unreadable nodata text.
/// `Error::Io` when the operating system refuses to open an existing file.
///
/// # Allocations
/// The decoded raster (all bands as stored) plus, unless the file is single-band float32 in metres,
/// one f32 array of rows x cols.
pub fn read_grid(path: &Path) -> Result<(Grid, GridSource)> {
    read_grid_as(path, StatedUnits::default())
}

/// Units a job states for a grid, for files that do not say (or to confirm what they say).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct StatedUnits {
    /// Unit of the map coordinates, if the job states it.
    pub horizontal: Option<LinearUnit>,
    /// Unit of the stored elevations, if the job states it.
    pub vertical: Option<LinearUnit>,
}

/// Picks a grid's unit from what the file and the job say: they must agree when both speak; the
/// one that speaks wins; metres (assumed) when neither does.
fn settle_unit(
    from_file: LinearUnit,
    file_source: UnitSource,
    stated: Option<LinearUnit>,
    what: &str,
) -> Result<(LinearUnit, UnitSource), String> {
    match (file_source, stated) {
        (UnitSource::File, Some(job)) if job != from_file => Err(format!(
            "the file states its {what} unit is {} but the job says {}; correct the job's \
             {what}_unit (or remove it to use the file's), or fix the file's GeoKeys",
            unit_word(from_file),
            unit_word(job)
        )),
        (UnitSource::File, _) => Ok((from_file, UnitSource::File)),
        (_, Some(job)) => Ok((job, UnitSource::Job)),
        (_, None) => Ok((LinearUnit::Metre, UnitSource::Assumed)),
    }
}

/// The job-file spelling of a unit, as users write it: `metre`, `foot`, `us-survey-foot`.
pub fn unit_word(u: LinearUnit) -> &'static str {
    match u {
        LinearUnit::Metre => "metre",
        LinearUnit::Foot => "foot",
        LinearUnit::UsSurveyFoot => "us-survey-foot",
    }
}

/// As [`read_grid`], with the units the job states: a file that states no unit takes the job's; a
/// file whose unit differs from the job's is refused. The chosen units and where they came from are
/// in the returned [`GridSource`].
///
/// # Errors
/// As [`read_grid`], and `Error::Input` naming both units when file and job disagree.
pub fn read_grid_as(path: &Path, stated: StatedUnits) -> Result<(Grid, GridSource)> {
    let bad = |msg: String| Error::input(path, msg);
    let mut dec = open(path, "check the grid path in the job file")?;
    let layout = Layout::read(&mut dec).map_err(&bad)?;
    if layout.bands >= 3 && layout.sample_type.ends_with("int8") {
        return Err(bad(format!(
            "holds {} bands of 8-bit samples (SamplesPerPixel, tag 277): that is a picture (an orthophoto \
             or a shaded-relief image), not an elevation grid; give the DEM itself, or use this image as \
             colour.drape",
            layout.bands
        )));
    }
    if layout.bands > 1 {
        log::warn!(
            "file has {} bands; reading band 1 as elevation",
            layout.bands
        );
    }
    let (mut geometry, mut units) = georeference(&mut dec, &layout).map_err(&bad)?;
    (units.horizontal, units.horizontal_source) = settle_unit(
        units.horizontal,
        units.horizontal_source,
        stated.horizontal,
        "horizontal",
    )
    .map_err(&bad)?;
    (units.vertical, units.vertical_source) = settle_unit(
        units.vertical,
        units.vertical_source,
        stated.vertical,
        "vertical",
    )
    .map_err(&bad)?;
    geometry.horizontal_unit = units.horizontal;
    let nodata = read_nodata(&mut dec).map_err(&bad)?;

    let cells = layout.rows * layout.cols;
    let decoded = dec.read_image().map_err(|e| bad(tiff_message(e)))?;
    let factor = units.vertical.metres();
    let nd = nodata.unwrap_or(f64::NAN);
    let z = to_metres(decoded, cells, factor, nd).map_err(&bad)?;
    let z = Array2::from_shape_vec((layout.rows, layout.cols), z).map_err(|e| {
        bad(format!(
            "decoded raster does not fit {} x {} cells ({e})",
            layout.rows, layout.cols
        ))
    })?;

    let source = GridSource {
        path: path.to_path_buf(),
        sample_type: layout.sample_type.to_string(),
        compression: layout.compression.to_string(),
        nodata,
        vertical_unit: units.vertical,
        vertical_unit_source: units.vertical_source,
        horizontal_unit: units.horizontal,
        horizontal_unit_source: units.horizontal_source,
        pixel_is_point: units.pixel_is_point,
    };
    log::debug!(
        "{}: {} x {} {} cells, {}, {} band(s)",
        path.display(),
        layout.cols,
        layout.rows,
        layout.sample_type,
        layout.compression,
        layout.bands
    );
    Ok((Grid { geometry, z }, source))
}

/// The decoder type shared by the readers.
pub(super) type Reader = Decoder<BufReader<File>>;

/// Opens a TIFF with this reader's size limits; `fix_missing` ends the message for a missing file.
///
/// The header and first IFD are checked against the file's length first (`structure`), so the
/// decoder never reserves more than the file's stored bytes can expand to.
pub(super) fn open(path: &Path, fix_missing: &str) -> Result<Reader> {
    let mut file = File::open(path).map_err(|e| match e.kind() {
        ErrorKind::NotFound => Error::input(path, format!("file not found; {fix_missing}")),
        _ => Error::io(path, e),
    })?;
    let len = file.metadata().map_err(|e| Error::io(path, e))?.len();
    {
        let mut probe = BufReader::with_capacity(8 << 10, &mut file);
        if let Some(c) = structure::check(&mut probe, len).map_err(|m| Error::input(path, m))? {
            log::debug!(
                "{}: {} bytes of pixel data for {} declared",
                path.display(),
                c.stored_bytes,
                c.declared_bytes
            );
        }
    }
    file.rewind().map_err(|e| Error::io(path, e))?;
    let limits = {
        let mut l = Limits::default();
        let max = usize::try_from(MAX_DECODED_BYTES).unwrap_or(usize::MAX);
        l.decoding_buffer_size = max;
        l.intermediate_buffer_size = max;
        l.ifd_value_size = 64 << 20;
        l
    };
    Ok(Decoder::new(BufReader::with_capacity(1 << 20, file))
        .map_err(|e| Error::input(path, tiff_message(e)))?
        .with_limits(limits))
}

/// Where the first image lies (model tags, GeoKeys, units), as the geometry of its cells.
pub(super) fn georeference(
    dec: &mut Reader,
    layout: &Layout,
) -> Result<(GridGeometry, Units), String> {
    let model = ModelTags {
        pixel_scale: f64_tag(dec, Tag::ModelPixelScaleTag, "ModelPixelScale (tag 33550)")?,
        tiepoints: f64_tag(dec, Tag::ModelTiepointTag, "ModelTiepoint (tag 33922)")?,
        transformation: f64_tag(
            dec,
            Tag::ModelTransformationTag,
            "ModelTransformation (tag 34264)",
        )?,
    };
    let keys = read_keys(dec)?;
    let units = units::units(&keys)?;
    let placement = georef::place(&model, units.pixel_is_point)?;
    // A cell size far outside what any elevation grid uses, or an extent that overflows, is damage
    // (found by the mutation test: a cell height of 1e308 made the grid's south edge -infinity).
    // 1 µm to 1000 km in CRS units: common practice, no source.
    let (east, south) = (
        placement.origin_x + layout.cols as f64 * placement.cell_x,
        placement.origin_y - layout.rows as f64 * placement.cell_y,
    );
    let plausible = [placement.cell_x, placement.cell_y]
        .iter()
        .all(|c| (1e-6..=1e6).contains(c));
    if !(plausible && east.is_finite() && south.is_finite()) {
        return Err(format!(
            "georeferencing gives cells of {} x {} CRS units, which no elevation grid has (1e-6 to \
             1e6 are accepted); the pixel scale or transformation (tags 33550, 34264) is damaged, \
             write the GeoTIFF again with the true cell size",
            georef::number(placement.cell_x),
            georef::number(placement.cell_y)
        ));
    }
    let geometry = GridGeometry {
        cols: layout.cols,
        rows: layout.rows,
        origin_x: placement.origin_x,
        origin_y: placement.origin_y,
        cell_x: placement.cell_x,
        cell_y: placement.cell_y,
        epsg: units.epsg,
        horizontal_unit: units.horizontal,
    };
    Ok((geometry, units))
}

/// Size, sample type and compression of the first image, checked before any pixel is decoded.
pub(super) struct Layout {
    pub(super) rows: usize,
    pub(super) cols: usize,
    pub(super) bands: usize,
    pub(super) sample_type: &'static str,
    pub(super) compression: &'static str,
}

impl Layout {
    pub(super) fn read<R: std::io::Read + std::io::Seek>(
        dec: &mut Decoder<R>,
    ) -> Result<Self, String> {
        let (width, height) = dec.dimensions().map_err(tiff_message)?;
        if width == 0 || height == 0 {
            return Err(format!(
                "raster is {width} x {height} cells (ImageWidth tag 256, ImageLength tag 257); a grid \
                 needs at least one cell, export it again"
            ));
        }
        let bands = short_tag(dec, Tag::SamplesPerPixel)?.unwrap_or(1).max(1);
        let bits = short_tag(dec, Tag::BitsPerSample)?.unwrap_or(1);
        let format = short_tag(dec, Tag::SampleFormat)?.unwrap_or(1);
        let sample_type = match (format, bits) {
            (1, 8) => "uint8",
            (2, 8) => "int8",
            (1, 16) => "uint16",
            (2, 16) => "int16",
            (1, 32) => "uint32",
            (2, 32) => "int32",
            (1, 64) => "uint64",
            (2, 64) => "int64",
            (3, 32) => "float32",
            (3, 64) => "float64",
            _ => {
                return Err(format!(
                    "sample type SampleFormat (tag 339) = {format}, BitsPerSample (tag 258) = {bits} is \
                     not supported; write the grid as float32 (or int16, uint16, int32, float64)"
                ))
            }
        };
        let compression = match short_tag(dec, Tag::Compression)?.unwrap_or(1) {
            1 => "none",
            5 => "lzw",
            8 | 32946 => "deflate",
            32773 => "packbits",
            code => {
                return Err(format!(
                    "Compression (tag 259) = {code}{} is not supported; write the grid uncompressed or \
                     with LZW or DEFLATE compression",
                    compression_name(code)
                ))
            }
        };
        // The decoder would return 1 − v (or the bit complement) for WhiteIsZero, which is not an
        // elevation; GDAL-written grids use BlackIsZero (1).
        if short_tag(dec, Tag::PhotometricInterpretation)? == Some(0) {
            return Err("PhotometricInterpretation (tag 262) = 0 (WhiteIsZero) inverts the stored values; \
                        write the grid with BlackIsZero (1), the usual setting for elevation rasters"
                .into());
        }
        let bytes = u64::from(width) * u64::from(height) * u64::from(bands) * u64::from(bits / 8);
        if bytes > MAX_DECODED_BYTES {
            return Err(format!(
                "raster of {width} x {height} cells x {bands} band(s) of {sample_type} needs {} MiB to \
                 decode, over the {} MiB this reader allows; crop or resample the grid",
                bytes >> 20,
                MAX_DECODED_BYTES >> 20
            ));
        }
        Ok(Layout {
            rows: height as usize,
            cols: width as usize,
            bands: usize::from(bands),
            sample_type,
            compression,
        })
    }
}

fn compression_name(code: u16) -> &'static str {
    match code {
        2..=4 => " (fax)",
        6 | 7 => " (JPEG)",
        34887 => " (LERC)",
        34925 => " (LZMA)",
        50000 => " (ZSTD)",
        50001 => " (WebP)",
        _ => "",
    }
}

/// First value of an integer tag (all values must agree for BitsPerSample and SampleFormat).
pub(super) fn short_tag<R: std::io::Read + std::io::Seek>(
    dec: &mut Decoder<R>,
    tag: Tag,
) -> Result<Option<u16>, String> {
    let values: Option<Vec<u16>> = dec.find_tag_unsigned_vec(tag).map_err(|e| {
        format!(
            "tag {tag:?} cannot be read ({}); the file is damaged, export or copy it again",
            brief(e)
        )
    })?;
    match values.as_deref() {
        None | Some([]) => Ok(None),
        Some([first, rest @ ..]) => {
            if rest.iter().any(|v| v != first)
                && matches!(tag, Tag::BitsPerSample | Tag::SampleFormat)
            {
                return Err(format!(
                    "bands differ in {tag:?} ({}); write band 1 alone as a single-band GeoTIFF",
                    brief(format!("{values:?}"))
                ));
            }
            Ok(Some(*first))
        }
    }
}

fn f64_tag<R: std::io::Read + std::io::Seek>(
    dec: &mut Decoder<R>,
    tag: Tag,
    name: &str,
) -> Result<Option<Vec<f64>>, String> {
    let bad = |e: TiffError| {
        format!(
            "{name} cannot be read ({}); write the GeoTIFF again",
            brief(e)
        )
    };
    match dec.find_tag(tag).map_err(bad)? {
        None => Ok(None),
        Some(v) => v.into_f64_vec().map(Some).map_err(bad),
    }
}

fn read_keys<R: std::io::Read + std::io::Seek>(dec: &mut Decoder<R>) -> Result<GeoKeys, String> {
    let dir = match dec.find_tag(Tag::GeoKeyDirectoryTag) {
        Ok(None) => {
            log::debug!("no GeoKeyDirectory (tag 34735): CRS and units unknown");
            return Ok(GeoKeys::default());
        }
        Ok(Some(v)) => v.into_u16_vec(),
        Err(e) => Err(e),
    }
    .map_err(|e| {
        format!(
            "GeoKeyDirectory (tag 34735) cannot be read ({}); write the GeoTIFF again",
            brief(e)
        )
    })?;
    let doubles =
        f64_tag(dec, Tag::GeoDoubleParamsTag, "GeoDoubleParams (tag 34736)")?.unwrap_or_default();
    let ascii = match dec.find_tag(Tag::GeoAsciiParamsTag) {
        Ok(Some(Value::Ascii(s))) => s,
        _ => String::new(),
    };
    GeoKeys::parse(&dir, &doubles, &ascii)
}

fn read_nodata<R: std::io::Read + std::io::Seek>(
    dec: &mut Decoder<R>,
) -> Result<Option<f64>, String> {
    let text = match dec.find_tag(Tag::GdalNodata) {
        Ok(None) => return Ok(None),
        Ok(Some(Value::Ascii(s))) => s,
        Ok(Some(other)) => {
            let what = match other {
                Value::List(v) => format!("a list of {} binary values", v.len()),
                _ => "a binary value".to_string(),
            };
            return Err(format!(
                "GDAL_NODATA (tag 42113) holds {what} instead of text; write the nodata value as ASCII \
                 text such as \"-9999\""
            ));
        }
        Err(e) => {
            return Err(format!(
                "GDAL_NODATA (tag 42113) cannot be read ({}); write the GeoTIFF again",
                brief(e)
            ))
        }
    };
    parse_nodata(&text).map(Some)
}

/// Parses GDAL_NODATA text: a decimal number, `nan`, `inf` or `-inf` in any case.
fn parse_nodata(text: &str) -> Result<f64, String> {
    let t = text.trim_matches(|c: char| c.is_whitespace() || c == '\0');
    t.parse::<f64>().map_err(|_| {
        format!(
            "GDAL_NODATA (tag 42113) holds \"{}\", which is not a number; set the nodata value to a number \
             such as -9999",
            brief(t)
        )
    })
}

/// At most `BRIEF_CHARS` characters of a text a file holds or a decoder reports, so a message
/// stays a sentence or two whatever the file contains.
const BRIEF_CHARS: usize = 100;

/// `text` cut to `BRIEF_CHARS` characters, with "…" where it was cut.
pub(super) fn brief(text: impl std::fmt::Display) -> String {
    let t = text.to_string();
    match t.char_indices().nth(BRIEF_CHARS) {
        Some((i, _)) => format!("{}…", &t[..i]),
        None => t,
    }
}

/// Turns a decoder error into a message with a fix.
pub(super) fn tiff_message(e: TiffError) -> String {
    match e {
        TiffError::FormatError(TiffFormatError::TiffSignatureNotFound | TiffFormatError::TiffSignatureInvalid) => {
            "not a TIFF file (no II*/MM* signature at the start); give a GeoTIFF elevation grid".into()
        }
        TiffError::FormatError(TiffFormatError::InvalidDimensions(w, h)) => format!(
            "raster is {w} x {h} cells (ImageWidth tag 256, ImageLength tag 257); a grid needs at least one \
             cell, export it again"
        ),
        TiffError::FormatError(f) => {
            format!(
                "corrupt TIFF structure ({}); the file is damaged, export or copy it again",
                brief(f)
            )
        }
        TiffError::IoError(io) if io.kind() == ErrorKind::UnexpectedEof => {
            "the file ends early (truncated); copy or export it again".into()
        }
        TiffError::IoError(io) => format!(
            "cannot read the TIFF data ({}); copy or export the file again",
            brief(io)
        ),
        TiffError::UnsupportedError(u) => format!(
            "uses a TIFF feature this reader does not support ({}); write the grid as a single-band \
             float32 GeoTIFF, uncompressed or with LZW or DEFLATE",
            brief(u)
        ),
        TiffError::LimitsExceeded | TiffError::IntSizeError => format!(
            "the raster or one of its tags is too large to decode ({}); crop or resample the grid",
            brief(&e)
        ),
        other => format!(
            "cannot decode the TIFF ({}); export the grid again as a GeoTIFF",
            brief(other)
        ),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nodata_text_forms() {
        // Check: GDAL_NODATA tag 42113 is ASCII text such as "-9999" or "nan"; REFERENCES.md §9
        assert_eq!(parse_nodata("-9999").unwrap(), -9999.0);
        assert_eq!(
            parse_nodata(" -3.4028234663852886e+38\0").unwrap(),
            f32::MIN as f64
        );
        assert!(parse_nodata("nan").unwrap().is_nan());
        assert!(parse_nodata("NaN").unwrap().is_nan());
        assert_eq!(parse_nodata("-inf").unwrap(), f64::NEG_INFINITY);
        assert!(parse_nodata("none").unwrap_err().contains("42113"));
    }

    /// A 3 x 2 float32 GeoTIFF with a GDAL_NODATA tag of whole numbers instead of text.
    fn nodata_as_numbers(path: &Path) {
        use tiff::encoder::{colortype::Gray32Float, TiffEncoder};
        let mut out = std::io::BufWriter::new(File::create(path).unwrap());
        let mut enc = TiffEncoder::new(&mut out).unwrap();
        let mut image = enc.new_image::<Gray32Float>(3, 2).unwrap();
        let dir = image.encoder();
        dir.write_tag(Tag::ModelPixelScaleTag, &[1.0, 1.0, 0.0][..])
            .unwrap();
        dir.write_tag(Tag::ModelTiepointTag, &[0.0, 0.0, 0.0, 10.0, 20.0, 0.0][..])
            .unwrap();
        dir.write_tag(Tag::GdalNodata, &[45u16, 57, 57, 57, 57][..])
            .unwrap();
        image.write_data(&[1.0f32; 6]).unwrap();
    }

    #[test]
    fn nodata_of_the_wrong_type_is_named_in_words() {
        // Found by the mutation test: the message showed the decoder's value dump
        // ("List([Short(45), …])").
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("nodata-numbers.tif");
        nodata_as_numbers(&path);
        let err = read_grid(&path).unwrap_err().to_string();
        assert!(
            err.contains("holds a list of 5 binary values instead of text"),
            "{err}"
        );
        assert!(!err.contains("Short("), "{err}");
    }

    #[test]
    fn decoder_details_are_kept_brief() {
        // Found by the mutation test: an unsupported sample format listed all 65 535 values
        // of the tag in the message (1.5 kB and more).
        let long = "Unknown(42), ".repeat(500);
        let b = brief(&long);
        assert_eq!(b.chars().count(), BRIEF_CHARS + 1);
        assert!(b.ends_with('…'));
        assert_eq!(brief("short"), "short");
        // Cut on a character boundary, never inside a multi-byte character.
        assert!(brief("é".repeat(300)).starts_with("éé"));
        let msg = parse_nodata(&"x".repeat(5000)).unwrap_err();
        assert!(msg.len() < 300, "{msg}");
    }

    #[test]
    fn absurd_cell_sizes_are_refused() {
        // Found by the mutation test: ModelPixelScale Sy = 1e308 was accepted, and the grid's south
        // edge became -infinity.
        use tiff::encoder::{colortype::Gray32Float, TiffEncoder};
        let dir = tempfile::tempdir().unwrap();
        for (sy, ok) in [
            (1e308, false),
            (1e-9, false),
            (2e6, false),
            (0.5, true),
            (1e5, true),
        ] {
            let path = dir.path().join("scale.tif");
            {
                let mut out = std::io::BufWriter::new(File::create(&path).unwrap());
                let mut enc = TiffEncoder::new(&mut out).unwrap();
                let mut image = enc.new_image::<Gray32Float>(3, 2).unwrap();
                let d = image.encoder();
                d.write_tag(Tag::ModelPixelScaleTag, &[1.0, sy, 0.0][..])
                    .unwrap();
                d.write_tag(Tag::ModelTiepointTag, &[0.0, 0.0, 0.0, 10.0, 20.0, 0.0][..])
                    .unwrap();
                image.write_data(&[1.0f32; 6]).unwrap();
            }
            match read_grid(&path) {
                Ok(_) => assert!(ok, "Sy = {sy} accepted"),
                Err(e) => {
                    assert!(!ok, "Sy = {sy}: {e}");
                    assert!(e.to_string().contains("which no elevation grid has"), "{e}");
                }
            }
        }
    }
}
