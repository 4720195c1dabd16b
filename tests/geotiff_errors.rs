//! Bad GeoTIFF input -> `read_grid` errors that name the file, the tag or key at fault and the fix;
//! and no panic on damaged bytes.
//!
//! The damaged files are made here from the committed GDAL fixture `f32_strip_none.tif`
//! (little-endian classic TIFF) by patching single tag values in a temporary copy.

use std::path::{Path, PathBuf};

use dunereel::geotiff::read_grid;
use dunereel::Error;

fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/geotiff")
        .join(name)
}

/// Position of the 4-byte value/offset field of `tag` in a little-endian classic TIFF's first IFD.
fn value_field(bytes: &[u8], tag: u16) -> usize {
    assert_eq!(&bytes[..4], b"II*\0", "little-endian classic TIFF expected");
    let ifd = u32::from_le_bytes(bytes[4..8].try_into().unwrap()) as usize;
    let n = u16::from_le_bytes(bytes[ifd..ifd + 2].try_into().unwrap()) as usize;
    (0..n)
        .map(|i| ifd + 2 + 12 * i)
        .find(|&e| u16::from_le_bytes(bytes[e..e + 2].try_into().unwrap()) == tag)
        .map(|e| e + 8)
        .unwrap_or_else(|| panic!("tag {tag} not in the fixture"))
}

/// Where the out-of-line values of `tag` start.
fn value_offset(bytes: &[u8], tag: u16) -> usize {
    let at = value_field(bytes, tag);
    u32::from_le_bytes(bytes[at..at + 4].try_into().unwrap()) as usize
}

/// Writes `bytes` to a temporary file and reads it; returns the error message.
fn read_err(dir: &Path, name: &str, bytes: &[u8]) -> String {
    let path = dir.join(name);
    std::fs::write(&path, bytes).unwrap();
    let err = read_grid(&path).expect_err("damaged input must be refused");
    assert!(matches!(err, Error::Input { .. }), "{err:?}");
    let msg = err.to_string();
    assert!(msg.contains(name), "message must name the file: {msg}");
    msg
}

fn base() -> Vec<u8> {
    std::fs::read(fixture("f32_strip_none.tif")).unwrap()
}

#[test]
fn missing_file() {
    let err = read_grid(Path::new("/no/such/folder/dune-2031.tif")).unwrap_err();
    let msg = err.to_string();
    assert!(
        matches!(err, Error::Input { .. })
            && msg.contains("dune-2031.tif")
            && msg.contains("not found"),
        "{msg}"
    );
}

#[test]
fn not_a_tiff_and_empty_file() {
    let tmp = tempfile::tempdir().unwrap();
    let msg = read_err(
        tmp.path(),
        "notes.tif",
        b"elevations,in,a,text,file\n1,2,3\n",
    );
    assert!(msg.contains("not a TIFF"), "{msg}");
    let msg = read_err(tmp.path(), "empty.tif", b"");
    assert!(msg.contains("not a TIFF"), "{msg}");
}

#[test]
fn truncated_file() {
    let tmp = tempfile::tempdir().unwrap();
    let bytes = base();
    let strip = value_offset(&bytes, 273);
    // Cut in the middle of the pixel data: the IFD is intact, the strip is short.
    let msg = read_err(tmp.path(), "cut.tif", &bytes[..strip + 100]);
    assert!(msg.contains("truncated"), "{msg}");
    // Every shorter length is refused with the file named, and none panics. (A fresh file per
    // length: rewriting one file with truncation is slow on some file systems.)
    for len in 0..bytes.len() {
        read_err(tmp.path(), &format!("short-{len}.tif"), &bytes[..len]);
    }
}

#[test]
fn zero_size_raster() {
    let tmp = tempfile::tempdir().unwrap();
    let mut bytes = base();
    let at = value_field(&bytes, 256);
    bytes[at..at + 4].copy_from_slice(&[0, 0, 0, 0]);
    let msg = read_err(tmp.path(), "zero.tif", &bytes);
    assert!(msg.contains("0 x 7") && msg.contains("256"), "{msg}");
}

#[test]
fn non_positive_pixel_scale() {
    let tmp = tempfile::tempdir().unwrap();
    for (name, sx) in [
        ("zero-scale.tif", 0.0f64),
        ("negative-scale.tif", -2.0),
        ("nan-scale.tif", f64::NAN),
    ] {
        let mut bytes = base();
        let at = value_offset(&bytes, 33550);
        bytes[at..at + 8].copy_from_slice(&sx.to_le_bytes());
        let msg = read_err(tmp.path(), name, &bytes);
        assert!(
            msg.contains("ModelPixelScale (tag 33550)") && msg.contains("positive"),
            "{msg}"
        );
    }
}

#[test]
fn unsupported_sample_format_and_compression() {
    let tmp = tempfile::tempdir().unwrap();
    let mut bytes = base();
    let at = value_field(&bytes, 339);
    bytes[at..at + 2].copy_from_slice(&6u16.to_le_bytes()); // complex float
    let msg = read_err(tmp.path(), "complex.tif", &bytes);
    assert!(
        msg.contains("SampleFormat (tag 339) = 6") && msg.contains("float32"),
        "{msg}"
    );

    let mut bytes = base();
    let at = value_field(&bytes, 259);
    bytes[at..at + 2].copy_from_slice(&34887u16.to_le_bytes());
    let msg = read_err(tmp.path(), "lerc.tif", &bytes);
    assert!(
        msg.contains("Compression (tag 259) = 34887 (LERC)") && msg.contains("DEFLATE"),
        "{msg}"
    );
}

#[test]
fn white_is_zero_is_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let mut bytes = base();
    let at = value_field(&bytes, 262);
    bytes[at..at + 2].copy_from_slice(&0u16.to_le_bytes());
    let msg = read_err(tmp.path(), "white.tif", &bytes);
    assert!(
        msg.contains("PhotometricInterpretation (tag 262) = 0"),
        "{msg}"
    );
}

#[test]
fn nodata_text_that_is_not_a_number() {
    let tmp = tempfile::tempdir().unwrap();
    let mut bytes = base();
    let at = value_offset(&bytes, 42113);
    assert_eq!(bytes[at], b'-');
    bytes[at] = b'x';
    let msg = read_err(tmp.path(), "nodata.tif", &bytes);
    assert!(
        msg.contains("GDAL_NODATA (tag 42113)") && msg.contains("x3.40"),
        "{msg}"
    );
}

#[test]
fn geographic_model_is_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let mut bytes = base();
    let at = value_offset(&bytes, 34735);
    // First key after the 4-value header: GTModelTypeGeoKey 1024, inline, count 1, value 1.
    let key: Vec<u16> = (0..4)
        .map(|i| u16::from_le_bytes([bytes[at + 8 + 2 * i], bytes[at + 9 + 2 * i]]))
        .collect();
    assert_eq!(key, [1024, 0, 1, 1]);
    bytes[at + 14..at + 16].copy_from_slice(&2u16.to_le_bytes());
    let msg = read_err(tmp.path(), "degrees.tif", &bytes);
    assert!(
        msg.contains("GTModelTypeGeoKey (1024)") && msg.contains("reproject"),
        "{msg}"
    );
}

#[test]
fn damaged_bytes_never_panic() {
    // Flip every byte of several fixtures, one at a time; each read must return (Ok or Err), never
    // panic. Sizes stay small because a damaged size tag is refused above 4 GiB before decoding.
    // The copy is patched in place without truncating: rewriting a whole file each time is ~50x
    // slower on this file system.
    use std::io::{Seek, SeekFrom, Write};
    let tmp = tempfile::tempdir().unwrap();
    for name in [
        "f32_strip_none.tif",
        "i16_tile_lzw_pred2.tif",
        "f64_deflate_pred3.tif",
        "bigtiff_tile_deflate.tif",
    ] {
        let bytes = std::fs::read(fixture(name)).unwrap();
        let path = tmp.path().join(name);
        std::fs::write(&path, &bytes).unwrap();
        let mut file = std::fs::OpenOptions::new().write(true).open(&path).unwrap();
        let mut put = |at: usize, b: u8| {
            file.seek(SeekFrom::Start(at as u64)).unwrap();
            file.write_all(&[b]).unwrap();
        };
        for (i, &byte) in bytes.iter().enumerate() {
            for mask in [0xFFu8, 0x01, 0x80] {
                put(i, byte ^ mask);
                if let Ok((grid, _)) = read_grid(&path) {
                    assert_eq!(
                        grid.z.dim(),
                        (grid.geometry.rows, grid.geometry.cols),
                        "{name} byte {i}"
                    );
                }
            }
            put(i, byte);
        }
    }
}
