//! `dunereel new`: a commented job file drafted from survey grids, which `check` accepts as it is;
//! and its refusals (no date, two dates in a name, two grids on one date, an existing job file).

mod common;

use std::path::Path;
use std::process::Command;

fn dunereel(args: &[&str], dir: &Path) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_dunereel"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn grids(d: &Path, names: &[&str]) {
    std::fs::create_dir_all(d.join("grids")).unwrap();
    let g = common::geometry(40, 30);
    for (i, n) in names.iter().enumerate() {
        let z = common::gaussian_dune(&g, 12.0 + 4.0 * i as f64, 15.0, 5.0, 4.0);
        common::write_grid(&d.join("grids").join(n), &g, &z);
    }
}

#[test]
fn a_drafted_job_is_sorted_relative_and_passes_check() {
    let d = tempfile::tempdir().unwrap();
    grids(
        d.path(),
        &[
            "Gull Point 2033-06-01.tif",
            "Gull Point 2031-06-01.tif",
            "Gull Point 20320601.tif",
        ],
    );
    std::fs::create_dir_all(d.path().join("jobs")).unwrap();
    let (code, out, err) = dunereel(
        &[
            "new",
            "grids/Gull Point 2033-06-01.tif",
            "grids/Gull Point 2031-06-01.tif",
            "grids/Gull Point 20320601.tif",
            "-o",
            "jobs/gull.yaml",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("3 surveys"), "{out}");
    let text = std::fs::read_to_string(d.path().join("jobs/gull.yaml")).unwrap();
    let dates: Vec<&str> = text
        .lines()
        .filter_map(|l| l.trim().strip_prefix("- date: "))
        .map(|l| l.split_whitespace().next().unwrap())
        .collect();
    assert_eq!(dates, ["2031-06-01", "2032-06-01", "2033-06-01"]);
    assert!(
        text.contains("grid: ../grids/Gull Point 2031-06-01.tif"),
        "{text}"
    );
    assert!(text.contains("folder: out/gull-point"), "{text}");
    assert!(text.contains("title: Gull Point, 2031-2033"), "{text}");
    let (code, out, err) = dunereel(&["check", "jobs/gull.yaml"], d.path());
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("3 surveys"), "{out}");
    // The job file is not replaced unless asked.
    let (code, _, err) = dunereel(
        &[
            "new",
            "grids/Gull Point 2033-06-01.tif",
            "grids/Gull Point 2031-06-01.tif",
            "-o",
            "jobs/gull.yaml",
        ],
        d.path(),
    );
    assert_eq!(code, 1, "{err}");
    assert!(
        err.contains("already exists") && err.contains("--overwrite"),
        "{err}"
    );
}

#[test]
fn undatable_or_doubled_grids_are_named() {
    let d = tempfile::tempdir().unwrap();
    grids(
        d.path(),
        &[
            "ridge.tif",
            "ridge-2030-01-01.tif",
            "ridge_20300101.tif",
            "diff-2030-01-01-2031-01-01.tif",
        ],
    );
    let cases: [(&[&str], &str); 3] = [
        (
            &["grids/ridge.tif", "grids/ridge-2030-01-01.tif"],
            "ridge.tif: has no date in its name",
        ),
        (
            &["grids/ridge-2030-01-01.tif", "grids/ridge_20300101.tif"],
            "has the same date (2030-01-01) as",
        ),
        (
            &[
                "grids/ridge-2030-01-01.tif",
                "grids/diff-2030-01-01-2031-01-01.tif",
            ],
            "its name holds 2 dates",
        ),
    ];
    for (args, expect) in cases {
        let mut all = vec!["new"];
        all.extend_from_slice(args);
        all.extend_from_slice(&["-o", "job.yaml"]);
        let (code, _, err) = dunereel(&all, d.path());
        assert_eq!(code, 2, "{err}");
        assert!(err.contains(expect), "{expect}: {err}");
        assert!(!d.path().join("job.yaml").exists());
    }
}
