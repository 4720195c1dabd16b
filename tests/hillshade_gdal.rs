//! The renderer's 2D hillshade (same Horn normals as the 3D view) against GDAL's `gdaldem hillshade`.
//!
//! Fixture: tests/fixtures/hillshade/ (made once by make_fixture.py with GDAL 3.6; the test itself
//! needs no GDAL): a 80 × 60 synthetic dune DEM with 1 m cells and GDAL's hillshade of it at
//! azimuth 315°, altitude 45°, z factor 2.

use std::fs::File;
use std::path::PathBuf;

use dunereel::render::shade::{hillshade, hillshade_byte};
use ndarray::Array2;
use tiff::decoder::{Decoder, DecodingResult};

fn read(name: &str) -> (usize, usize, DecodingResult) {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/hillshade")
        .join(name);
    let mut d = Decoder::new(File::open(&path).unwrap()).unwrap();
    let (w, h) = d.dimensions().unwrap();
    (h as usize, w as usize, d.read_image().unwrap())
}

#[test]
fn hillshade_matches_gdaldem_on_interior_cells() {
    let (rows, cols, dem) = read("dem.tif");
    let DecodingResult::F32(z) = dem else {
        panic!("dem.tif is not float32")
    };
    let (grows, gcols, gdal) = read("gdal-hillshade.tif");
    let DecodingResult::U8(expected) = gdal else {
        panic!("gdal-hillshade.tif is not bytes")
    };
    assert_eq!((rows, cols), (grows, gcols));
    let z = Array2::from_shape_vec((rows, cols), z).unwrap();
    let ours = hillshade(&z, 1.0, 1.0, 315.0, 45.0, 2.0);
    let (mut within, mut total, mut worst) = (0usize, 0usize, 0i32);
    // GDAL leaves the outer ring of cells as nodata (no -compute_edges), so compare the interior.
    for r in 1..rows - 1 {
        for c in 1..cols - 1 {
            let e = expected[r * cols + c] as i32;
            let o = hillshade_byte(ours[[r, c]]) as i32;
            total += 1;
            worst = worst.max((e - o).abs());
            if (e - o).abs() <= 2 {
                within += 1;
            }
        }
    }
    let share = within as f64 / total as f64;
    eprintln!("hillshade vs gdaldem: {within}/{total} within 2 levels, worst {worst}");
    // Check: GDAL gdaldem hillshade (apps/gdaldem_lib.cpp; library run with GDAL 3.6.2, fixture
    // script committed) — Horn (1981) normals, 1 + 254·cos(incidence); ≥ 99 % of interior cells
    // within 2 grey levels
    assert!(
        share >= 0.99,
        "{within}/{total} cells within 2 levels (worst {worst})"
    );
    // The DEM is not trivially flat: the shading spans a wide range.
    let (lo, hi) = expected
        .iter()
        .filter(|&&v| v > 0)
        .fold((255u8, 0u8), |a, &v| (a.0.min(v), a.1.max(v)));
    assert!(hi - lo > 100, "{lo}..{hi}");
}
