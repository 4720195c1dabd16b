//! The DEM of difference as data: a small job is rendered, and its `data/fields/dod-A-B.tif` and
//! `detected-A-B.tif` are read back with GDAL (through `tests/fixtures/dod/check_dod.py`, Debian's
//! `python3-gdal`, installed by `.ci/run`), against the job's own grids read with GDAL too.
//! Without GDAL's Python bindings this test fails with a message saying what to install.

mod common;

use std::path::{Path, PathBuf};
use std::process::Command;

use dunereel::{job, run_job, RunOptions};
use serde_json::Value;

/// A Python 3 with GDAL's bindings: Debian's own first (a managed Python on PATH may lack them).
fn python_with_gdal() -> PathBuf {
    for p in ["/usr/bin/python3", "python3"] {
        let ok = Command::new(p)
            .args(["-c", "from osgeo import gdal; import numpy"])
            .status()
            .is_ok_and(|s| s.success());
        if ok {
            return PathBuf::from(p);
        }
    }
    panic!(
        "this test reads the DoD back with GDAL: install Debian's python3-gdal and python3-numpy \
         (sudo apt-get install -y --no-install-recommends python3-gdal python3-numpy), as .ci/run does"
    );
}

fn gdal_check(earlier: &Path, later: &Path, dod: &Path, detected: &Path) -> Value {
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/dod/check_dod.py");
    let out = Command::new(python_with_gdal())
        .arg(script)
        .args([earlier, later, dod, detected])
        .output()
        .expect("python runs");
    assert!(
        out.status.success(),
        "check_dod.py failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("check_dod.py prints JSON")
}

#[test]
fn dod_geotiff_is_later_minus_earlier_on_the_grids_georeference() {
    let dir = tempfile::tempdir().unwrap();
    let path = common::moving_dune_job(
        dir.path(),
        "coregister: false\noutput: { folder: out, gif: null, png_frames: false, poster: false }\n",
    );
    // A gap in the last survey: the DoD must carry nodata there.
    let g = common::geometry(64, 48);
    let mut z = common::gaussian_dune(&g, 16.0 + 18.0, 24.0, 4.5, 5.0);
    for r in 5..9 {
        for c in 40..46 {
            z[[r, c]] = f32::NAN;
        }
    }
    let last = dir.path().join("2033-03-01.tif");
    std::fs::remove_file(&last).unwrap();
    common::write_grid(&last, &g, &z);
    let text = std::fs::read_to_string(&path).unwrap();
    // The job's output section is replaced by the one above (no frames needed here).
    let text = text.replace("output: { folder: out }\n", "");
    std::fs::write(&path, text).unwrap();

    let job = job::load(&path).unwrap();
    let report = run_job(&job, &RunOptions::default()).unwrap();
    let fields = report.folder.join("data/fields");
    let manifest = std::fs::read_to_string(report.folder.join("manifest-sha256.txt")).unwrap();
    for (a, b) in [
        ("2030-03-01", "2031-03-01"),
        ("2031-03-01", "2033-03-01"),
        ("2030-03-01", "2033-03-01"),
    ] {
        let dod = fields.join(format!("dod-{a}-{b}.tif"));
        let det = fields.join(format!("detected-{a}-{b}.tif"));
        // Both files are in the bag's manifest.
        assert!(
            manifest.contains(&format!("data/fields/dod-{a}-{b}.tif")),
            "{manifest}"
        );
        assert!(manifest.contains(&format!("data/fields/detected-{a}-{b}.tif")));
        let v = gdal_check(
            &dir.path().join(format!("{a}.tif")),
            &dir.path().join(format!("{b}.tif")),
            &dod,
            &det,
        );
        // Check: GDAL 3.6 read-back (library run in the test) — DoD = later − earlier cell by cell,
        // float32, on the source grid's geotransform and EPSG code; abs diff < 1e-5 m (float32)
        assert_eq!(v["data_type"], "Float32", "{v}");
        assert_eq!(v["size"], v["source_size"]);
        assert_eq!(v["geotransform"], v["source_geotransform"]);
        assert_eq!(v["epsg"], "32631");
        assert_eq!(v["epsg"], v["source_epsg"]);
        assert_eq!(v["nodata"], -9999.0);
        assert!(v["max_abs_diff"].as_f64().unwrap() < 1e-5, "{v}");
        assert!(v["nodata_cells_match"].as_bool().unwrap(), "{v}");
        assert!(v["compared_cells"].as_u64().unwrap() > 3000);
        assert!(
            v["description"]
                .as_str()
                .unwrap()
                .contains("later minus earlier"),
            "{v}"
        );
        // The detection mask: codes -1, 0, 1 only, nodata where the DoD has none.
        let codes: Vec<f64> = v["detected_codes"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c.as_f64().unwrap())
            .collect();
        assert!(
            codes.iter().all(|c| [-1.0, 0.0, 1.0].contains(c)),
            "{codes:?}"
        );
        assert!(codes.contains(&-1.0) && codes.contains(&1.0), "{codes:?}");
        assert!(v["detected_nodata_cells_match"].as_bool().unwrap(), "{v}");
    }
}
