//! The `dunereel` binary on bad input: clear messages, exit code 2, nothing written.

mod common;

use std::path::Path;
use std::process::Command;

fn dunereel(args: &[&str], dir: &Path) -> (i32, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_dunereel"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn entries(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

const JOB: &str = "format_version: 1\ntitle: T\nsurveys:\n  - { date: 2030-01-01, grid: a.tif }\n  - { date: 2031-01-01, grid: b.tif }\noutput: { folder: out }\n";

#[test]
fn malformed_job_exits_2_and_writes_nothing() {
    let d = tempfile::tempdir().unwrap();
    std::fs::write(
        d.path().join("job.yaml"),
        "format_version: 1\ntitle: [unclosed\n",
    )
    .unwrap();
    let (code, err) = dunereel(&["render", "job.yaml"], d.path());
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("job.yaml") && err.contains("line"), "{err}");
    assert_eq!(entries(d.path()), vec!["job.yaml"]);
}

#[test]
fn missing_grid_names_the_key_and_path() {
    let d = tempfile::tempdir().unwrap();
    std::fs::write(d.path().join("job.yaml"), JOB).unwrap();
    std::fs::write(d.path().join("a.tif"), b"not a tiff").unwrap();
    let (code, err) = dunereel(&["render", "job.yaml"], d.path());
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("surveys[1].grid") && err.contains("b.tif"),
        "{err}"
    );
    assert_eq!(entries(d.path()), vec!["a.tif", "job.yaml"]);
}

#[test]
fn corrupt_grid_is_refused_before_any_output() {
    let d = tempfile::tempdir().unwrap();
    std::fs::write(d.path().join("job.yaml"), JOB).unwrap();
    std::fs::write(d.path().join("a.tif"), b"not a tiff").unwrap();
    std::fs::write(d.path().join("b.tif"), b"II*\0garbage").unwrap();
    let (code, err) = dunereel(&["render", "job.yaml"], d.path());
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("a.tif"), "{err}");
    assert_eq!(entries(d.path()), vec!["a.tif", "b.tif", "job.yaml"]);
}

#[test]
fn missing_job_file_is_a_clear_error() {
    let d = tempfile::tempdir().unwrap();
    let (code, err) = dunereel(&["render", "nope.yaml"], d.path());
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("nope.yaml") && err.contains("no job file"),
        "{err}"
    );
}

#[test]
fn verify_reports_an_altered_file_with_exit_2() {
    let d = tempfile::tempdir().unwrap();
    let job = common::moving_dune_job(d.path(), "");
    let (code, err) = dunereel(&["render", job.to_str().unwrap()], d.path());
    assert_eq!(code, 0, "{err}");
    let (code, err) = dunereel(&["verify", "out"], d.path());
    assert_eq!(code, 0, "{err}");
    let table = d.path().join("out/data/tables/pairs.csv");
    let mut bytes = std::fs::read(&table).unwrap();
    bytes[10] ^= 1;
    std::fs::write(&table, bytes).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_dunereel"))
        .args(["verify", "out"])
        .current_dir(d.path())
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stdout).contains("data/tables/pairs.csv: altered"));
    // A second render refuses to replace the folder it made.
    let (code, err) = dunereel(&["render", job.to_str().unwrap()], d.path());
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("--overwrite"), "{err}");
}

#[test]
fn check_reads_everything_and_writes_nothing() {
    let d = tempfile::tempdir().unwrap();
    let job = common::moving_dune_job(d.path(), "");
    let before = entries(d.path());
    let out = Command::new(env!("CARGO_BIN_EXE_dunereel"))
        .args(["check", job.to_str().unwrap()])
        .current_dir(d.path())
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("3 surveys on a 64 x 48 grid"), "{text}");
    assert_eq!(entries(d.path()), before);
}

#[test]
fn help_is_there_for_every_subcommand() {
    for sub in ["render", "check", "verify"] {
        let out = Command::new(env!("CARGO_BIN_EXE_dunereel"))
            .args([sub, "--help"])
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(0));
        assert!(String::from_utf8_lossy(&out.stdout).contains("Usage"));
    }
}
