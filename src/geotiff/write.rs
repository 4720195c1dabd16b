//! Float32 bands + `GridGeometry` -> one GeoTIFF file, written atomically (temporary file, then rename).
//!
//! Layout of what is written (checked by the tests below by decoding with the `tiff` crate):
//! - one image, `width = cols`, `height = rows`, one float32 sample per band, bands interleaved per
//!   pixel (band 2.. are "unspecified" extra samples, photometric min-is-black);
//! - DEFLATE compression, no predictor: the `tiff` 0.11 encoder refuses the horizontal predictor for
//!   float samples (`UsageError::PredictorIncompatible`) and does not offer the floating-point one;
//! - GeoTIFF 1.1 tags (OGC 19-008r4, REFERENCES.md §9): ModelPixelScale `(cell_x, cell_y, 0)`,
//!   ModelTiepoint raster `(0, 0, 0)` -> model `(origin_x, origin_y, 0)`, i.e. the outer north-west
//!   corner, and a GeoKeyDirectory declaring a projected model, pixel-is-area, the EPSG code of the
//!   projected CRS (when known), the horizontal unit and metres as vertical unit;
//! - when a nodata value is asked for, NaN cells are written as that value and the de-facto GDAL
//!   nodata tag 42113 holds its text (`"nan"` for NaN);
//! - when band descriptions are given, they go into the de-facto GDAL metadata tag 42112 as a small
//!   XML document, one `DESCRIPTION` item per band.
//!
//! Cross-check (library run, GDAL 3.6.2 `gdalinfo` and its Python bindings, done once by hand on the
//! demo surveys and on a 3-band file; the tests do not need GDAL): origin, pixel size, EPSG:32631,
//! `AREA_OR_POINT=Area`, DEFLATE, `NoData Value=-9999` (and `nan`), `Unit Type: metre`, the band
//! descriptions and the samples (NaN included) all read back as written. Because the vertical
//! units key is present without a vertical datum key, GDAL reports a compound CRS
//! "WGS 84 / UTM zone 31N + unknown" (vertical datum unknown, unit metre).

use std::fs::{self, File};
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use ndarray::Array2;
use tiff::encoder::{colortype::Gray32Float, Compression, DeflateLevel, TiffEncoder};
use tiff::tags::{ExtraSamples, Tag};

use crate::error::{Error, Result};
use crate::grid::{GridGeometry, LinearUnit};

/// Private TIFF tag holding per-dataset / per-band metadata as XML (GDAL convention).
const TAG_METADATA: u16 = 42112;

// GeoKey identifiers and values, OGC GeoTIFF 1.1 (OGC 19-008r4), REFERENCES.md §9.
const KEY_MODEL_TYPE: u16 = 1024;
const KEY_RASTER_TYPE: u16 = 1025;
const KEY_PROJECTED_CRS: u16 = 3072;
const KEY_PROJ_LINEAR_UNITS: u16 = 3076;
const KEY_VERTICAL_UNITS: u16 = 4099;
const MODEL_TYPE_PROJECTED: u16 = 1;
const RASTER_PIXEL_IS_AREA: u16 = 1;
const UNIT_METRE: u16 = 9001;

/// How to write a raster.
#[derive(Debug, Clone, Default)]
pub struct WriteOptions {
    /// Value that marks missing cells. NaN cells are written as this value and the nodata tag
    /// (42113) states it; `Some(f32::NAN)` keeps NaN in the cells and writes `"nan"` in the tag;
    /// `None` writes no tag (NaN cells stay NaN). Default: `None`.
    pub nodata: Option<f32>,
    /// Replace an existing file at the target path. Default: `false` (an existing file is an error).
    pub overwrite: bool,
    /// One short text per band (e.g. `"elevation 2027-04-03"`), stored in the metadata tag 42112;
    /// empty means none. Default: empty.
    pub band_descriptions: Vec<String>,
    /// DEFLATE effort: `Balanced` for grids people keep, `Fast` for large derived rasters (the
    /// displacement fields) where a few per cent of size are not worth seconds. Default: `Balanced`.
    pub effort: Effort,
}

/// How hard DEFLATE works.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum Effort {
    /// zlib's fast level.
    Fast,
    /// zlib's default level.
    #[default]
    Balanced,
}

/// Writes float32 bands as one GeoTIFF.
///
/// Everything is checked before the first byte is written; the file is written to a temporary
/// file in the target's folder and renamed onto the target when complete, so a failed write never
/// leaves a half-written target behind.
///
/// # Errors
/// `Error::Output` naming the path when there are no bands, a band's shape differs from the
/// geometry, the geometry cannot be stored (zero size, cells not > 0, EPSG code above 65535), the
/// number of band descriptions differs from the number of bands, the folder does not exist, or the
/// target exists and `opts.overwrite` is false. `Error::Io` when the system refuses the write.
///
/// # Allocations
/// One interleaved copy of all bands (rows × cols × bands × 4 bytes) plus the compressed strips.
pub fn write_bands(
    path: &Path,
    geometry: &GridGeometry,
    bands: &[&Array2<f32>],
    opts: &WriteOptions,
) -> Result<()> {
    let plan = check(path, geometry, bands, opts)?;
    let tmp = temporary_path(path);
    let outcome = write_file(&tmp, geometry, bands, opts, &plan)
        .and_then(|()| fs::rename(&tmp, path).map_err(|e| Error::io(path, e)));
    if outcome.is_err() {
        // Best effort: the temporary file is ours and incomplete.
        let _ = fs::remove_file(&tmp);
    }
    outcome
}

/// What `check` worked out for writing.
struct Plan {
    width: u32,
    height: u32,
    geo_keys: Vec<u16>,
    nodata_text: Option<String>,
    metadata_xml: Option<String>,
}

fn check(
    path: &Path,
    geometry: &GridGeometry,
    bands: &[&Array2<f32>],
    opts: &WriteOptions,
) -> Result<Plan> {
    if bands.is_empty() {
        return Err(Error::output(
            path,
            "no bands to write; pass at least one array",
        ));
    }
    let (rows, cols) = (geometry.rows, geometry.cols);
    if rows == 0 || cols == 0 {
        return Err(Error::output(
            path,
            format!(
                "the grid has {rows} rows and {cols} columns; a GeoTIFF needs at least one cell"
            ),
        ));
    }
    let (width, height) = match (u32::try_from(cols), u32::try_from(rows)) {
        (Ok(w), Ok(h)) => (w, h),
        _ => {
            return Err(Error::output(
                path,
                format!("{cols} x {rows} cells is too large for one TIFF image; crop the grid"),
            ))
        }
    };
    for (i, band) in bands.iter().enumerate() {
        if band.dim() != (rows, cols) {
            return Err(Error::output(
                path,
                format!(
                    "band {} has shape {} rows x {} columns but the geometry has {rows} x {cols}; \
                     pass arrays of the geometry's shape",
                    i + 1,
                    band.nrows(),
                    band.ncols()
                ),
            ));
        }
    }
    let valid = |v: f64| v.is_finite() && v > 0.0;
    if !valid(geometry.cell_x) || !valid(geometry.cell_y) {
        return Err(Error::output(
            path,
            format!(
                "cell size {} x {} cannot be stored; cell sizes must be finite and > 0",
                geometry.cell_x, geometry.cell_y
            ),
        ));
    }
    if !geometry.origin_x.is_finite() || !geometry.origin_y.is_finite() {
        return Err(Error::output(
            path,
            "the grid origin is not a finite coordinate; fix the geometry",
        ));
    }
    let mut geo_keys = vec![
        KEY_MODEL_TYPE,
        0,
        1,
        MODEL_TYPE_PROJECTED,
        KEY_RASTER_TYPE,
        0,
        1,
        RASTER_PIXEL_IS_AREA,
    ];
    if let Some(code) = geometry.epsg {
        let code = u16::try_from(code).ok().filter(|c| *c > 0).ok_or_else(|| {
            Error::output(
                path,
                format!("EPSG code {code} cannot be stored in a GeoTIFF key (1..=65535); use a standard EPSG code"),
            )
        })?;
        geo_keys.extend([KEY_PROJECTED_CRS, 0, 1, code]);
    }
    geo_keys.extend([
        KEY_PROJ_LINEAR_UNITS,
        0,
        1,
        unit_code(geometry.horizontal_unit),
    ]);
    // Values are metres once read (see grid.rs), so the vertical unit is always the metre.
    geo_keys.extend([KEY_VERTICAL_UNITS, 0, 1, UNIT_METRE]);
    let key_count = (geo_keys.len() / 4) as u16;
    // Header: directory version 1, revision 1.1, number of keys (OGC GeoTIFF 1.1, REFERENCES.md §9).
    let mut directory = vec![1, 1, 1, key_count];
    directory.extend(geo_keys);

    let metadata_xml = if opts.band_descriptions.is_empty() {
        None
    } else if opts.band_descriptions.len() != bands.len() {
        return Err(Error::output(
            path,
            format!(
                "{} band descriptions for {} bands; give one description per band or none",
                opts.band_descriptions.len(),
                bands.len()
            ),
        ));
    } else {
        Some(metadata_xml(&opts.band_descriptions))
    };

    crate::encode::atomic::check_target(path, opts.overwrite)?;
    Ok(Plan {
        width,
        height,
        geo_keys: directory,
        nodata_text: opts.nodata.map(nodata_text),
        metadata_xml,
    })
}

fn unit_code(unit: LinearUnit) -> u16 {
    // EPSG unit-of-measure codes, REFERENCES.md §9 (9001 verified; 9002, 9003 from memory).
    match unit {
        LinearUnit::Metre => 9001,
        LinearUnit::Foot => 9002,
        LinearUnit::UsSurveyFoot => 9003,
    }
}

/// Text of the nodata tag: shortest form that reads back as the same f32, `nan` for NaN.
fn nodata_text(v: f32) -> String {
    if v.is_nan() {
        "nan".to_string()
    } else {
        format!("{v}")
    }
}

/// Per-band descriptions as the small XML document kept in tag 42112.
///
/// The item text is escaped twice: GDAL (3.6.2, library run) decodes entities in this tag's item
/// text twice and cuts a description at a bare `&` after the first round, and itself writes `&` as
/// `&amp;amp;`. Text escaped twice reads back unchanged in GDAL; plain text is unaffected.
fn metadata_xml(descriptions: &[String]) -> String {
    let mut xml = String::from("<GDALMetadata>");
    for (i, d) in descriptions.iter().enumerate() {
        xml.push_str(&format!(
            "<Item name=\"DESCRIPTION\" sample=\"{i}\" role=\"description\">{}</Item>",
            xml_escape(&xml_escape(d))
        ));
    }
    xml.push_str("</GDALMetadata>");
    xml
}

/// Escapes XML specials and writes every non-ASCII or control character as a numeric reference,
/// so the text is plain ASCII as the TIFF ASCII type requires.
fn xml_escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for ch in s.chars() {
        match ch {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            c if c.is_ascii() && !c.is_ascii_control() => out.push(c),
            c => out.push_str(&format!("&#{};", c as u32)),
        }
    }
    out
}

/// `.<name>.<pid>.tmp` beside the target.
fn temporary_path(path: &Path) -> PathBuf {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    path.with_file_name(format!(".{name}.{}.tmp", std::process::id()))
}

fn write_file(
    tmp: &Path,
    geometry: &GridGeometry,
    bands: &[&Array2<f32>],
    opts: &WriteOptions,
    plan: &Plan,
) -> Result<()> {
    // Interleave bands per pixel, replacing NaN by the nodata value when one is set.
    let fill = opts.nodata.filter(|v| !v.is_nan());
    let n = bands.len();
    let mut samples = vec![0f32; geometry.rows * geometry.cols * n];
    for (b, band) in bands.iter().enumerate() {
        for (i, &v) in band.iter().enumerate() {
            samples[i * n + b] = match fill {
                Some(nd) if v.is_nan() => nd,
                _ => v,
            };
        }
    }
    if let Some(nd) = fill {
        let clashes = bands
            .iter()
            .flat_map(|b| b.iter())
            .filter(|&&v| v == nd)
            .count();
        if clashes > 0 {
            log::warn!(
                "{}: {clashes} cells hold the nodata value {nd} itself and will read back as missing",
                tmp.display()
            );
        }
    }

    let file = File::create(tmp).map_err(|e| Error::io(tmp, e))?;
    let mut out = BufWriter::new(file);
    let tiff_err = |e: tiff::TiffError| Error::output(tmp, format!("TIFF encoding failed: {e}"));
    {
        let mut encoder = TiffEncoder::new(&mut out)
            .map_err(tiff_err)?
            .with_compression(Compression::Deflate(match opts.effort {
                Effort::Fast => DeflateLevel::Fast,
                Effort::Balanced => DeflateLevel::Balanced,
            }));
        let mut image = encoder
            .new_image::<Gray32Float>(plan.width, plan.height)
            .map_err(tiff_err)?;
        if n > 1 {
            let extra = vec![ExtraSamples::Unspecified; n - 1];
            image.extra_samples(&extra).map_err(tiff_err)?;
        }
        let dir = image.encoder();
        dir.write_tag(
            Tag::ModelPixelScaleTag,
            &[geometry.cell_x, geometry.cell_y, 0.0][..],
        )
        .map_err(tiff_err)?;
        dir.write_tag(
            Tag::ModelTiepointTag,
            &[0.0, 0.0, 0.0, geometry.origin_x, geometry.origin_y, 0.0][..],
        )
        .map_err(tiff_err)?;
        dir.write_tag(Tag::GeoKeyDirectoryTag, &plan.geo_keys[..])
            .map_err(tiff_err)?;
        if let Some(text) = &plan.nodata_text {
            dir.write_tag(Tag::GdalNodata, text.as_str())
                .map_err(tiff_err)?;
        }
        if let Some(xml) = &plan.metadata_xml {
            dir.write_tag(Tag::Unknown(TAG_METADATA), xml.as_str())
                .map_err(tiff_err)?;
        }
        image.write_data(&samples).map_err(tiff_err)?;
    }
    out.flush().map_err(|e| Error::io(tmp, e))?;
    let file = out
        .into_inner()
        .map_err(|e| Error::io(tmp, e.into_error()))?;
    file.sync_all().map_err(|e| Error::io(tmp, e))?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use tiff::decoder::{Decoder, DecodingResult};

    fn geometry(rows: usize, cols: usize) -> GridGeometry {
        GridGeometry {
            cols,
            rows,
            origin_x: 431_200.0,
            origin_y: 5_702_640.0,
            cell_x: 1.0,
            cell_y: 0.5,
            epsg: Some(32631),
            horizontal_unit: LinearUnit::Metre,
        }
    }

    fn ramp(rows: usize, cols: usize, k: f32) -> Array2<f32> {
        Array2::from_shape_fn((rows, cols), |(r, c)| {
            k * (r as f32 * 1.37 + c as f32 * 0.011) - 3.25
        })
    }

    fn decode(path: &Path) -> Decoder<File> {
        Decoder::new(File::open(path).unwrap()).unwrap()
    }

    fn samples(dec: &mut Decoder<File>) -> Vec<f32> {
        match dec.read_image().unwrap() {
            DecodingResult::F32(v) => v,
            _ => panic!("not float32 samples"),
        }
    }

    #[test]
    fn tags_and_samples_round_trip() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("one.tif");
        let g = geometry(7, 11);
        let mut z = ramp(7, 11, 1.0);
        z[[2, 3]] = f32::NAN;
        let opts = WriteOptions {
            nodata: Some(-9999.0),
            ..Default::default()
        };
        write_bands(&path, &g, &[&z], &opts).unwrap();

        let mut dec = decode(&path);
        assert_eq!(dec.dimensions().unwrap(), (11, 7));
        // Check: TIFF 6.0 — compression 8 is Adobe DEFLATE; from memory
        assert_eq!(dec.get_tag_u32(Tag::Compression).unwrap(), 8);
        // Check: TIFF 6.0 — SampleFormat 3 is IEEE floating point, 32 bits; from memory
        assert_eq!(dec.get_tag_u32(Tag::SampleFormat).unwrap(), 3);
        assert_eq!(dec.get_tag_u32(Tag::BitsPerSample).unwrap(), 32);
        // Check: OGC GeoTIFF 1.1 §ModelPixelScale — (ScaleX, ScaleY, ScaleZ); REFERENCES.md §9, exact
        assert_eq!(
            dec.get_tag_f64_vec(Tag::ModelPixelScaleTag).unwrap(),
            vec![1.0, 0.5, 0.0]
        );
        // Check: OGC GeoTIFF 1.1 §ModelTiepoint — (I,J,K, X,Y,Z) with raster (0,0) at the NW corner
        // for PixelIsArea; REFERENCES.md §9, exact
        assert_eq!(
            dec.get_tag_f64_vec(Tag::ModelTiepointTag).unwrap(),
            vec![0.0, 0.0, 0.0, 431_200.0, 5_702_640.0, 0.0]
        );
        // Check: OGC GeoTIFF 1.1 GeoKeyDirectory — header {1,1,1,N}, keys 1024=1 (projected),
        // 1025=1 (PixelIsArea), 3072=EPSG, 3076=9001, 4099=9001 (metre); REFERENCES.md §9, exact
        assert_eq!(
            dec.get_tag_u16_vec(Tag::GeoKeyDirectoryTag).unwrap(),
            vec![
                1, 1, 1, 5, 1024, 0, 1, 1, 1025, 0, 1, 1, 3072, 0, 1, 32631, 3076, 0, 1, 9001,
                4099, 0, 1, 9001
            ]
        );
        // Check: GDAL nodata convention (tag 42113, ASCII text); REFERENCES.md §9
        assert_eq!(dec.get_tag_ascii_string(Tag::GdalNodata).unwrap(), "-9999");
        let got = samples(&mut dec);
        for (i, (&a, &b)) in z.iter().zip(&got).enumerate() {
            if a.is_nan() {
                assert_eq!(b, -9999.0, "cell {i}");
            } else {
                assert_eq!(a.to_bits(), b.to_bits(), "cell {i}");
            }
        }
        assert!(dec.find_tag(Tag::Unknown(TAG_METADATA)).unwrap().is_none());
    }

    #[test]
    fn several_bands_nan_nodata_and_descriptions() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("three.tif");
        let g = GridGeometry {
            epsg: None,
            horizontal_unit: LinearUnit::UsSurveyFoot,
            ..geometry(5, 4)
        };
        let mut a = ramp(5, 4, 1.0);
        a[[0, 0]] = f32::NAN;
        let b = ramp(5, 4, -2.0);
        let c = ramp(5, 4, 0.001);
        let opts = WriteOptions {
            nodata: Some(f32::NAN),
            band_descriptions: vec!["a <1>".into(), "b & b".into(), "dune – c".into()],
            ..Default::default()
        };
        write_bands(&path, &g, &[&a, &b, &c], &opts).unwrap();
        let mut dec = decode(&path);
        assert_eq!(dec.get_tag_u32(Tag::SamplesPerPixel).unwrap(), 3);
        assert_eq!(dec.get_tag_ascii_string(Tag::GdalNodata).unwrap(), "nan");
        // Check: OGC GeoTIFF 1.1 — without an EPSG code key 3072 is left out; EPSG unit 9003 = US survey
        // foot, from memory (REFERENCES.md §9); exact
        assert_eq!(
            dec.get_tag_u16_vec(Tag::GeoKeyDirectoryTag).unwrap(),
            vec![1, 1, 1, 4, 1024, 0, 1, 1, 1025, 0, 1, 1, 3076, 0, 1, 9003, 4099, 0, 1, 9001]
        );
        let xml = dec
            .get_tag_ascii_string(Tag::Unknown(TAG_METADATA))
            .unwrap();
        assert!(
            xml.contains("sample=\"0\" role=\"description\">a &amp;lt;1&amp;gt;</Item>"),
            "{xml}"
        );
        assert!(
            xml.contains("sample=\"1\" role=\"description\">b &amp;amp; b</Item>"),
            "{xml}"
        );
        assert!(xml.contains(">dune &amp;#8211; c</Item>"), "{xml}");
        let got = samples(&mut dec);
        assert_eq!(got.len(), 5 * 4 * 3);
        for (i, ((&x, &y), &w)) in a.iter().zip(&b).zip(&c).enumerate() {
            assert_eq!(got[3 * i].to_bits(), x.to_bits(), "band 1 cell {i}");
            assert_eq!(got[3 * i + 1].to_bits(), y.to_bits(), "band 2 cell {i}");
            assert_eq!(got[3 * i + 2].to_bits(), w.to_bits(), "band 3 cell {i}");
        }
        assert!(got[0].is_nan());
    }

    #[test]
    fn refuses_overwrite_and_leaves_the_old_file() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("keep.tif");
        fs::write(&path, b"precious").unwrap();
        let z = ramp(3, 3, 1.0);
        let err = write_bands(&path, &geometry(3, 3), &[&z], &WriteOptions::default()).unwrap_err();
        let msg = err.to_string();
        assert!(matches!(err, Error::Output { .. }));
        assert!(
            msg.contains("keep.tif") && msg.contains("overwrite"),
            "{msg}"
        );
        assert_eq!(fs::read(&path).unwrap(), b"precious");
        // With overwrite it is replaced, and no temporary file is left behind.
        let opts = WriteOptions {
            overwrite: true,
            ..Default::default()
        };
        write_bands(&path, &geometry(3, 3), &[&z], &opts).unwrap();
        assert_eq!(
            samples(&mut decode(&path)),
            z.iter().copied().collect::<Vec<_>>()
        );
        let names: Vec<_> = fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name())
            .collect();
        assert_eq!(names, vec![std::ffi::OsString::from("keep.tif")]);
    }

    #[test]
    fn refuses_bad_shapes_and_options_before_writing() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("bad.tif");
        let good = ramp(4, 6, 1.0);
        let wrong = ramp(6, 4, 1.0);
        let err = write_bands(
            &path,
            &geometry(4, 6),
            &[&good, &wrong],
            &WriteOptions::default(),
        )
        .unwrap_err();
        assert!(matches!(err, Error::Output { .. }));
        assert!(
            err.to_string()
                .contains("band 2 has shape 6 rows x 4 columns"),
            "{err}"
        );
        let err = write_bands(&path, &geometry(4, 6), &[], &WriteOptions::default()).unwrap_err();
        assert!(err.to_string().contains("no bands"), "{err}");
        let opts = WriteOptions {
            band_descriptions: vec!["x".into(), "y".into()],
            ..Default::default()
        };
        let err = write_bands(&path, &geometry(4, 6), &[&good], &opts).unwrap_err();
        assert!(
            err.to_string().contains("2 band descriptions for 1 bands"),
            "{err}"
        );
        let g = GridGeometry {
            epsg: Some(70_000),
            ..geometry(4, 6)
        };
        let err = write_bands(&path, &g, &[&good], &WriteOptions::default()).unwrap_err();
        assert!(err.to_string().contains("EPSG code 70000"), "{err}");
        let g = GridGeometry {
            cell_x: 0.0,
            ..geometry(4, 6)
        };
        assert!(write_bands(&path, &g, &[&good], &WriteOptions::default()).is_err());
        let missing = dir.path().join("no-such-folder").join("x.tif");
        let err = write_bands(
            &missing,
            &geometry(4, 6),
            &[&good],
            &WriteOptions::default(),
        )
        .unwrap_err();
        assert!(err.to_string().contains("does not exist"), "{err}");
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 0);
    }

    #[test]
    fn same_input_gives_same_bytes() {
        let dir = tempfile::tempdir().unwrap();
        let z = ramp(40, 30, 0.3);
        let opts = WriteOptions {
            nodata: Some(-9999.0),
            ..Default::default()
        };
        let p1 = dir.path().join("a.tif");
        let p2 = dir.path().join("b.tif");
        write_bands(&p1, &geometry(40, 30), &[&z], &opts).unwrap();
        write_bands(&p2, &geometry(40, 30), &[&z], &opts).unwrap();
        assert_eq!(fs::read(&p1).unwrap(), fs::read(&p2).unwrap());
    }
}
