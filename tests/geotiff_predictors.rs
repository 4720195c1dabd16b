//! Hand-built predictor-coded GeoTIFFs -> `read_grid`: the decoded values must invert the
//! predictor exactly (REFERENCES.md §9 check values).
//!
//! The files are written byte by byte here (little-endian classic TIFF, one uncompressed strip), so
//! the predictor encoding under test is this file's own, taken from the published descriptions.

use dunereel::geotiff::read_grid;

/// One IFD entry: tag, TIFF type, count, value bytes (little-endian).
struct Entry(u16, u16, u32, Vec<u8>);

fn shorts(v: &[u16]) -> Vec<u8> {
    v.iter().flat_map(|x| x.to_le_bytes()).collect()
}

fn doubles(v: &[f64]) -> Vec<u8> {
    v.iter().flat_map(|x| x.to_le_bytes()).collect()
}

/// A one-strip, uncompressed, georeferenced GeoTIFF of `width` x `height` samples.
fn build(width: u16, height: u16, bits: u16, format: u16, predictor: u16, strip: &[u8]) -> Vec<u8> {
    const SHORT: u16 = 3;
    const LONG: u16 = 4;
    const DOUBLE: u16 = 12;
    let keys = [1u16, 1, 0, 2, 1024, 0, 1, 1, 3072, 0, 1, 32633];
    let mut entries = vec![
        Entry(256, SHORT, 1, shorts(&[width])),
        Entry(257, SHORT, 1, shorts(&[height])),
        Entry(258, SHORT, 1, shorts(&[bits])),
        Entry(259, SHORT, 1, shorts(&[1])),
        Entry(262, SHORT, 1, shorts(&[1])),
        Entry(273, LONG, 1, vec![0; 4]), // patched below
        Entry(277, SHORT, 1, shorts(&[1])),
        Entry(278, SHORT, 1, shorts(&[height])),
        Entry(279, LONG, 1, (strip.len() as u32).to_le_bytes().to_vec()),
        Entry(284, SHORT, 1, shorts(&[1])),
        Entry(317, SHORT, 1, shorts(&[predictor])),
        Entry(339, SHORT, 1, shorts(&[format])),
        Entry(33550, DOUBLE, 3, doubles(&[1.0, 1.0, 0.0])),
        Entry(
            33922,
            DOUBLE,
            6,
            doubles(&[0.0, 0.0, 0.0, 1000.0, 2000.0, 0.0]),
        ),
        Entry(34735, SHORT, keys.len() as u32, shorts(&keys)),
    ];
    let ifd_len = 2 + 12 * entries.len() + 4;
    let mut blobs: Vec<u8> = Vec::new();
    let blob_start = 8 + ifd_len;
    let strip_at = {
        let outside: usize = entries
            .iter()
            .filter(|e| e.3.len() > 4)
            .map(|e| e.3.len())
            .sum();
        (blob_start + outside) as u32
    };
    entries[5].3 = strip_at.to_le_bytes().to_vec();
    let mut out = b"II*\0".to_vec();
    out.extend(8u32.to_le_bytes());
    out.extend((entries.len() as u16).to_le_bytes());
    for Entry(tag, ty, count, value) in &entries {
        out.extend(tag.to_le_bytes());
        out.extend(ty.to_le_bytes());
        out.extend(count.to_le_bytes());
        if value.len() <= 4 {
            let mut v = value.clone();
            v.resize(4, 0);
            out.extend(v);
        } else {
            out.extend(((blob_start + blobs.len()) as u32).to_le_bytes());
            blobs.extend(value);
        }
    }
    out.extend(0u32.to_le_bytes());
    out.extend(blobs);
    assert_eq!(out.len(), strip_at as usize);
    out.extend(strip);
    out
}

fn read(bytes: &[u8]) -> Vec<f32> {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("predicted.tif");
    std::fs::write(&path, bytes).unwrap();
    let (grid, _) = read_grid(&path).unwrap_or_else(|e| panic!("{e}"));
    grid.z.iter().copied().collect()
}

#[test]
fn horizontal_differencing_is_inverted() {
    // Check: TIFF 6.0 (Adobe 1992) Predictor 2, REFERENCES.md §9 — row [10, 12, 15, 15] is stored as
    // [10, 2, 3, 0]; decoding must give the row back exactly
    let stored = shorts(&[10, 2, 3, 0]);
    assert_eq!(
        read(&build(4, 1, 16, 1, 2, &stored)),
        [10.0, 12.0, 15.0, 15.0]
    );
    // Differences wrap modulo 2^16: [100, 40] is stored as [100, 65476] (40 − 100 + 65536).
    let stored = shorts(&[100, 65476]);
    assert_eq!(read(&build(2, 1, 16, 1, 2, &stored)), [100.0, 40.0]);
}

/// Floating-point predictor encoding as described in Adobe Photoshop TIFF Technical Note 3 (from
/// memory, REFERENCES.md §9): per row, bytes of each value split into planes, most significant
/// first, then byte-wise differencing along the whole row.
fn float_predict(row: &[f32]) -> Vec<u8> {
    let n = row.len();
    let mut planes = vec![0u8; 4 * n];
    for (i, v) in row.iter().enumerate() {
        for (b, byte) in v.to_be_bytes().iter().enumerate() {
            planes[b * n + i] = *byte;
        }
    }
    let mut out = planes.clone();
    for i in 1..out.len() {
        out[i] = planes[i].wrapping_sub(planes[i - 1]);
    }
    out
}

#[test]
fn floating_point_predictor_round_trips() {
    // Check: Adobe Photoshop TIFF Technical Note 3 floating-point predictor, REFERENCES.md §9 —
    // f32 [1, 2, 3, 4] encoded by the published rule and decoded must round-trip exactly
    let row = [1.0f32, 2.0, 3.0, 4.0];
    assert_eq!(read(&build(4, 1, 32, 3, 3, &float_predict(&row))), row);
    // Two rows: the differencing restarts on each row.
    let rows = [[-2.5f32, 0.125, 1e6], [7.0, 7.0, -0.0]];
    let strip: Vec<u8> = rows.iter().flat_map(|r| float_predict(r)).collect();
    let z = read(&build(3, 2, 32, 3, 3, &strip));
    assert_eq!(z, [-2.5, 0.125, 1e6, 7.0, 7.0, -0.0]);
}
