//! GeoTIFF fixtures written by GDAL -> `read_grid`, checked against what GDAL itself reported.
//!
//! The fixtures and `tests/fixtures/geotiff/expected.json` come from
//! `tests/fixtures/geotiff/make_fixtures.py` (GDAL 3.6.2, Python bindings). Neither GDAL nor Python
//! is needed here: the test reads the JSON GDAL produced and compares.

use std::path::PathBuf;

use dunereel::geotiff::read_grid;
use dunereel::grid::LinearUnit;
use serde_json::Value;

fn dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/geotiff")
}

fn expected() -> Value {
    let text =
        std::fs::read_to_string(dir().join("expected.json")).expect("expected.json is committed");
    serde_json::from_str(&text).expect("expected.json is valid JSON")
}

fn entry(name: &str) -> Value {
    let all = expected();
    assert_eq!(
        all["gdal_version"], "3.6.2",
        "fixtures were recorded with GDAL 3.6.2"
    );
    all["fixtures"][name].clone()
}

fn f(v: &Value) -> f64 {
    v.as_f64()
        .unwrap_or_else(|| panic!("number expected, got {v}"))
}

/// Reads fixture `name` and compares everything GDAL recorded for it. Returns the GDAL entry.
fn assert_matches_gdal(name: &str) -> Value {
    let e = entry(name);
    let path = dir().join(name);
    let (grid, source) = read_grid(&path).unwrap_or_else(|err| panic!("{name}: {err}"));
    let g = &grid.geometry;
    let gt: Vec<f64> = e["geotransform"]
        .as_array()
        .unwrap()
        .iter()
        .map(f)
        .collect();

    // Check: GDAL 3.6.2 gdal.Info on fixture `name` — raster size (cols, rows); library run, values in
    // tests/fixtures/geotiff/expected.json; exact
    assert_eq!(
        [g.cols as u64, g.rows as u64],
        [
            e["size"][0].as_u64().unwrap(),
            e["size"][1].as_u64().unwrap()
        ]
    );
    // Check: GDAL 3.6.2 GetGeoTransform on fixture `name` — GDAL's geotransform is corner-based
    // (gt[0], gt[3] = outer corner of cell (0,0); gt[1] = cell width; gt[5] = −cell height), the same
    // convention as GridGeometry; library run, values in tests/fixtures/geotiff/expected.json; abs diff < 1e-6
    assert!(
        (g.origin_x - gt[0]).abs() < 1e-6,
        "{name}: origin_x {} vs GDAL {}",
        g.origin_x,
        gt[0]
    );
    assert!(
        (g.origin_y - gt[3]).abs() < 1e-6,
        "{name}: origin_y {} vs GDAL {}",
        g.origin_y,
        gt[3]
    );
    assert!(
        (g.cell_x - gt[1]).abs() < 1e-12,
        "{name}: cell_x {} vs GDAL {}",
        g.cell_x,
        gt[1]
    );
    assert!(
        (g.cell_y + gt[5]).abs() < 1e-12,
        "{name}: cell_y {} vs GDAL {}",
        g.cell_y,
        -gt[5]
    );
    assert_eq!(gt[2], 0.0);
    assert_eq!(gt[4], 0.0);
    // Check: GDAL 3.6.2 GetSpatialRef().GetAuthorityCode("PROJCS") on fixture `name` — EPSG code;
    // library run, values in tests/fixtures/geotiff/expected.json; exact
    assert_eq!(g.epsg.map(u64::from), e["epsg"].as_u64(), "{name}: EPSG");
    // Check: GDAL 3.6.2 GetLinearUnits() on fixture `name` — metres per map unit; library run, values
    // in tests/fixtures/geotiff/expected.json; rel diff < 1e-12
    let h_m = f(&e["horizontal_unit_m"]);
    assert!(
        (g.horizontal_unit.metres() - h_m).abs() < 1e-12 * h_m,
        "{name}: horizontal unit"
    );
    // Check: GDAL 3.6.2 GetTargetLinearUnits("VERT_CS") on fixture `name` — metres per elevation unit
    // (null when GDAL reports no vertical CRS: metres assumed); library run, values in
    // tests/fixtures/geotiff/expected.json; rel diff < 1e-12
    let v_m = e["vertical_unit_m"].as_f64().unwrap_or(1.0);
    assert!(
        (source.vertical_unit.metres() - v_m).abs() < 1e-12,
        "{name}: vertical unit"
    );
    // Check: GDAL 3.6.2 band DataType and IMAGE_STRUCTURE COMPRESSION on fixture `name`; library run,
    // values in tests/fixtures/geotiff/expected.json; exact (lower-cased, absent = "none")
    assert_eq!(
        source.sample_type,
        e["data_type"].as_str().unwrap().to_lowercase(),
        "{name}"
    );
    let compression = e["compression"]
        .as_str()
        .map(str::to_lowercase)
        .unwrap_or_else(|| "none".into());
    assert_eq!(source.compression, compression, "{name}");
    // Check: GDAL 3.6.2 GetNoDataValue() on fixture `name`; library run, values in
    // tests/fixtures/geotiff/expected.json; exact ("nan" for NaN)
    match &e["nodata"] {
        Value::Null => assert_eq!(source.nodata, None, "{name}"),
        Value::String(s) if s == "nan" => assert!(source.nodata.unwrap().is_nan(), "{name}"),
        // serde_json's default float parsing may be 1 ulp off; rel diff < 1e-15
        v => assert!(
            (source.nodata.unwrap() - f(v)).abs() <= 1e-15 * f(v).abs(),
            "{name}"
        ),
    }
    // Check: GDAL 3.6.2 ReadAsArray + GetMaskBand on fixture `name` — every cell; masked cells must
    // be NaN, the others equal GDAL's raw value times the vertical unit in metres; library run,
    // values in tests/fixtures/geotiff/expected.json; abs diff < 1e-6 · max(1, |z|)
    let mut nodata_seen = 0;
    for (r, row) in e["values"].as_array().unwrap().iter().enumerate() {
        for (c, v) in row.as_array().unwrap().iter().enumerate() {
            let z = grid.z[[r, c]];
            match v {
                Value::Null => {
                    assert!(
                        z.is_nan(),
                        "{name}: cell ({r},{c}) is nodata for GDAL, read {z}"
                    );
                    nodata_seen += 1;
                }
                v => {
                    let want = f(v) * v_m;
                    let tol = 1e-6 * want.abs().max(1.0);
                    assert!(
                        (z as f64 - want).abs() < tol,
                        "{name}: cell ({r},{c}) = {z}, GDAL {want}"
                    );
                }
            }
        }
    }
    assert_eq!(
        nodata_seen,
        e["nodata_cells"].as_array().unwrap().len(),
        "{name}"
    );
    e
}

#[test]
fn float32_stripped_uncompressed() {
    // Check: GDAL 3.6.2 gdal.Info on fixture f32_strip_none.tif — nodata -3.4028234663852886e+38
    // (lowest float32) at cells (0,0), (6,8); library run, values in tests/fixtures/geotiff/expected.json
    let e = assert_matches_gdal("f32_strip_none.tif");
    assert_eq!(e["nodata_cells"], serde_json::json!([[0, 0], [6, 8]]));
}

#[test]
fn int16_tiled_lzw_predictor2() {
    // Check: GDAL 3.6.2 gdal.Info on fixture i16_tile_lzw_pred2.tif — 16x16 tiles over a 9x7 raster,
    // LZW, PREDICTOR=2, nodata -32768 at (2,3), (5,0); library run, values in tests/fixtures/geotiff/expected.json
    let e = assert_matches_gdal("i16_tile_lzw_pred2.tif");
    assert_eq!(
        (e["predictor"].as_str(), e["block"][0].as_u64()),
        (Some("2"), Some(16))
    );
}

#[test]
fn float64_deflate_predictor3() {
    // Check: GDAL 3.6.2 gdal.Info on fixture f64_deflate_pred3.tif — float64, DEFLATE, PREDICTOR=3,
    // nodata "nan"; library run, values in tests/fixtures/geotiff/expected.json
    let e = assert_matches_gdal("f64_deflate_pred3.tif");
    assert_eq!(e["predictor"].as_str(), Some("3"));
}

#[test]
fn float32_tiled_lzw_predictor3() {
    // Check: GDAL 3.6.2 gdal.Info on fixture f32_tile_lzw_pred3.tif — float32, LZW, PREDICTOR=3, tiles;
    // library run, values in tests/fixtures/geotiff/expected.json
    let e = assert_matches_gdal("f32_tile_lzw_pred3.tif");
    assert_eq!(e["predictor"].as_str(), Some("3"));
}

#[test]
fn float32_big_endian_deflate_strips_of_three_rows() {
    // Check: GDAL 3.6.2 gdal.Info on fixture f32_be_deflate.tif — ENDIANNESS=BIG, 3-row strips;
    // library run, values in tests/fixtures/geotiff/expected.json
    assert_matches_gdal("f32_be_deflate.tif");
}

#[test]
fn uint16_and_int32() {
    // Check: GDAL 3.6.2 gdal.Info on fixtures u16_strip_deflate.tif (nodata 65535) and
    // i32_strip_lzw.tif (nodata -9999); library run, values in tests/fixtures/geotiff/expected.json
    assert_matches_gdal("u16_strip_deflate.tif");
    assert_matches_gdal("i32_strip_lzw.tif");
}

#[test]
fn bigtiff() {
    // Check: GDAL 3.6.2 gdal.Info on fixture bigtiff_tile_deflate.tif — BIGTIFF=YES; library run,
    // values in tests/fixtures/geotiff/expected.json
    assert_matches_gdal("bigtiff_tile_deflate.tif");
    let head = std::fs::read(dir().join("bigtiff_tile_deflate.tif")).unwrap();
    // Check: BigTIFF header, REFERENCES.md §9 — bytes 2..4 are 43 (0x2B) and the offset size is 8
    assert_eq!(
        &head[..8],
        &[0x49, 0x49, 0x2B, 0x00, 0x08, 0x00, 0x00, 0x00]
    );
}

#[test]
fn pixel_is_point_is_shifted_to_corners() {
    // Check: GDAL 3.6.2 gdal.Info on fixture point_f32.tif — AREA_OR_POINT=Point; GDAL's default
    // geotransform is corner-based and equals ours; library run, values in tests/fixtures/geotiff/expected.json
    let e = assert_matches_gdal("point_f32.tif");
    let (grid, source) = read_grid(&dir().join("point_f32.tif")).unwrap();
    assert!(source.pixel_is_point);
    // Check: GDAL 3.6.2 with GTIFF_POINT_GEO_IGNORE=TRUE on fixture point_f32.tif — the raw tiepoint
    // names the centre of cell (0,0), half a cell east and south of the corner we report; library run,
    // values in tests/fixtures/geotiff/expected.json; abs diff < 1e-9
    let raw: Vec<f64> = e["geotransform_point_geo_ignored"]
        .as_array()
        .unwrap()
        .iter()
        .map(f)
        .collect();
    let (cx, cy) = grid.geometry.cell_center(0, 0);
    assert!(
        (cx - raw[0]).abs() < 1e-9 && (cy - raw[3]).abs() < 1e-9,
        "({cx}, {cy}) vs {raw:?}"
    );
}

#[test]
fn us_survey_feet_horizontal_and_vertical() {
    // Check: GDAL 3.6.2 gdal.Info on fixture usft_f32.tif — EPSG:2227 + NAVD88 height (ftUS) 6360;
    // library run, values in tests/fixtures/geotiff/expected.json
    let e = assert_matches_gdal("usft_f32.tif");
    let (grid, source) = read_grid(&dir().join("usft_f32.tif")).unwrap();
    // Check: GDAL 3.6.2 gdal.Info on fixture usft_f32.tif — GetLinearUnitsName "US survey foot" and
    // vertical unit 0.304800609601219 m; library run, values in tests/fixtures/geotiff/expected.json
    assert_eq!(e["horizontal_unit_name"], "US survey foot");
    assert_eq!(grid.geometry.horizontal_unit, LinearUnit::UsSurveyFoot);
    assert_eq!(source.vertical_unit, LinearUnit::UsSurveyFoot);
    // Check: 85 FR 62698 (NIST/NOAA 2020) — US survey foot = 1200/3937 m; a 3 US ft cell is
    // 0.914401829 m; hand-computed, abs diff < 1e-9
    assert!((grid.geometry.cell_x_m() - 3.0 * 1200.0 / 3937.0).abs() < 1e-12);
    assert!((grid.geometry.cell_x_m() - 0.914_401_829).abs() < 1e-9);
    // Check: 85 FR 62698 — GDAL's raw cell (1,0) = 3.25 US ft becomes 3.25 · 1200/3937 m; library
    // run value in tests/fixtures/geotiff/expected.json; abs diff < 1e-6
    let raw = f(&e["values"][1][0]);
    assert!((grid.z[[1, 0]] as f64 - raw * 1200.0 / 3937.0).abs() < 1e-6);
}

#[test]
fn international_feet_horizontal_and_vertical() {
    // Check: GDAL 3.6.2 gdal.Info on fixture ft_f32.tif — EPSG:2222 + NAVD88 height (ft) 8228, unit
    // 0.3048 m; library run, values in tests/fixtures/geotiff/expected.json
    let e = assert_matches_gdal("ft_f32.tif");
    let (grid, source) = read_grid(&dir().join("ft_f32.tif")).unwrap();
    // Check: GDAL 3.6.2 gdal.Info on fixture ft_f32.tif — GetLinearUnitsName "foot" (0.3048 m) for both
    // axes; library run, values in tests/fixtures/geotiff/expected.json
    assert_eq!(e["horizontal_unit_name"], "foot");
    assert_eq!(
        (grid.geometry.horizontal_unit, source.vertical_unit),
        (LinearUnit::Foot, LinearUnit::Foot)
    );
}

#[test]
fn model_transformation_big_endian_no_unit_key() {
    // Check: GDAL 3.6.2 gdal.Info on fixture transform_be_f32.tif — hand-written big-endian file with
    // ModelTransformation (tag 34264) only and no ProjLinearUnitsGeoKey; GDAL reports geotransform
    // (720000, 1.5, 0, 3300000, 0, -1.5), EPSG 32618, metres; library run, values in
    // tests/fixtures/geotiff/expected.json
    assert_matches_gdal("transform_be_f32.tif");
}

#[test]
fn multi_band_reads_band_one() {
    // Check: GDAL 3.6.2 gdal.Info on fixture two_band_f32.tif — 2 bands pixel-interleaved, band 1 is
    // the surface, band 2 all 7; library run, values in tests/fixtures/geotiff/expected.json
    let e = assert_matches_gdal("two_band_f32.tif");
    assert_eq!(e["bands"], 2);
    // Check: GDAL 3.6.2 gdal.Info on fixture two_band_planar_i16.tif — 2 bands INTERLEAVE=BAND
    // (PlanarConfiguration 2), LZW, nodata -1 at (6,1); library run, values in
    // tests/fixtures/geotiff/expected.json
    let e = assert_matches_gdal("two_band_planar_i16.tif");
    assert_eq!(e["bands"], 2);
}

#[test]
fn rotated_grid_is_refused() {
    // Check: GDAL 3.6.2 gdal.Info on fixture rotated_f32.tif — geotransform has rotation terms 0.5, 0.5,
    // stored as ModelTransformation; library run, values in tests/fixtures/geotiff/expected.json
    let e = entry("rotated_f32.tif");
    assert_eq!(
        (f(&e["geotransform"][2]), f(&e["geotransform"][4])),
        (0.5, 0.5)
    );
    let err = read_grid(&dir().join("rotated_f32.tif"))
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("rotated_f32.tif") && err.contains("34264") && err.contains("north-up"),
        "{err}"
    );
}

#[test]
fn grid_without_georeference_is_refused() {
    // Check: GDAL 3.6.2 gdal.Info on fixture nogeo_f32.tif — no geotransform; library run, values in
    // tests/fixtures/geotiff/expected.json
    let e = entry("nogeo_f32.tif");
    assert!(e["geotransform"].is_null());
    let err = read_grid(&dir().join("nogeo_f32.tif"))
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("nogeo_f32.tif") && err.contains("georeferencing"),
        "{err}"
    );
}
