//! The `dunereel` binary never deletes what it did not make, never assumes a unit in silence, and
//! `check` / `verify` report what `render` and the manifests would. One test per refusal or message;
//! the message text is part of each test, and every refusal leaves the user's files as they were.

mod common;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Command;

use dunereel::grid::{GridGeometry, LinearUnit};
use ndarray::Array2;

struct Out {
    code: i32,
    stdout: String,
    stderr: String,
}

fn dunereel(args: &[&str], dir: &Path) -> Out {
    let out = Command::new(env!("CARGO_BIN_EXE_dunereel"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap();
    Out {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Every file under `dir` (relative path -> bytes), to show nothing changed.
fn snapshot(dir: &Path) -> BTreeMap<PathBuf, Vec<u8>> {
    let mut out = BTreeMap::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.insert(
                    p.strip_prefix(dir).unwrap().to_path_buf(),
                    std::fs::read(&p).unwrap(),
                );
            }
        }
    }
    out
}

/// The moving-dune job with its grids and a notes file in `grids/`, and the job file beside that
/// folder (paths rewritten), so the grids' folder is not the job's folder.
fn job_beside_grids(d: &Path) -> PathBuf {
    let grids = d.join("grids");
    std::fs::create_dir_all(&grids).unwrap();
    let inner = common::moving_dune_job(&grids, "");
    std::fs::write(grids.join("notes.txt"), b"field notes").unwrap();
    let text = std::fs::read_to_string(&inner)
        .unwrap()
        .replace("grid: 20", "grid: grids/20");
    std::fs::remove_file(inner).unwrap();
    let job = d.join("job.yaml");
    std::fs::write(&job, text).unwrap();
    job
}

#[test]
fn overwrite_refuses_the_folder_holding_the_grids() {
    let d = tempfile::tempdir().unwrap();
    job_beside_grids(d.path());
    let before = snapshot(d.path());
    for cmd in ["render", "check"] {
        let o = dunereel(
            &[cmd, "job.yaml", "--output", "grids", "--overwrite"],
            d.path(),
        );
        assert_eq!(o.code, 1, "{cmd}: {}", o.stderr);
        assert!(
            o.stderr.contains("holds the survey grid") && o.stderr.contains("outside your inputs"),
            "{}",
            o.stderr
        );
    }
    assert_eq!(snapshot(d.path()), before);
}

#[test]
fn overwrite_refuses_the_job_files_folder_and_its_ancestors() {
    let d = tempfile::tempdir().unwrap();
    let site = d.path().join("site");
    std::fs::create_dir_all(&site).unwrap();
    common::moving_dune_job(&site, "");
    let before = snapshot(d.path());
    for out in [".", ".."] {
        let o = dunereel(
            &["render", "job.yaml", "--output", out, "--overwrite"],
            &site,
        );
        assert_eq!(o.code, 1, "{}", o.stderr);
        assert!(
            o.stderr.contains("the job file's folder") && o.stderr.contains("would delete it"),
            "{}",
            o.stderr
        );
    }
    assert_eq!(snapshot(d.path()), before);
}

#[test]
fn overwrite_refuses_a_folder_dunereel_did_not_make() {
    let d = tempfile::tempdir().unwrap();
    common::moving_dune_job(d.path(), "");
    let mine = d.path().join("reports");
    std::fs::create_dir_all(&mine).unwrap();
    std::fs::write(mine.join("summary.docx"), b"my report").unwrap();
    let before = snapshot(d.path());
    let o = dunereel(
        &["render", "job.yaml", "--output", "reports", "--overwrite"],
        d.path(),
    );
    assert_eq!(o.code, 1, "{}", o.stderr);
    assert!(
        o.stderr.contains("not a dunereel output") && o.stderr.contains("summary.docx"),
        "{}",
        o.stderr
    );
    assert_eq!(snapshot(d.path()), before);
}

#[test]
fn an_earlier_output_is_replaced_only_when_it_holds_nothing_else() {
    let d = tempfile::tempdir().unwrap();
    common::moving_dune_job(d.path(), "");
    assert_eq!(dunereel(&["render", "job.yaml"], d.path()).code, 0);
    // A note the user put inside the earlier output stops the replacement, by name.
    std::fs::write(d.path().join("out/data/my-notes.txt"), b"keep me").unwrap();
    let o = dunereel(&["render", "job.yaml", "--overwrite"], d.path());
    assert_eq!(o.code, 1, "{}", o.stderr);
    assert!(
        o.stderr.contains("data/my-notes.txt") && o.stderr.contains("would be lost"),
        "{}",
        o.stderr
    );
    assert_eq!(
        std::fs::read(d.path().join("out/data/my-notes.txt")).unwrap(),
        b"keep me"
    );
    // `check` says the same, with the same exit code.
    let c = dunereel(&["check", "job.yaml", "--overwrite"], d.path());
    assert_eq!(c.code, 1, "{}", c.stderr);
    assert!(c.stderr.contains("data/my-notes.txt"), "{}", c.stderr);
    // Without the note (and with a file manager's litter) it is replaced, and a working folder of a
    // killed run is cleared with a note.
    std::fs::remove_file(d.path().join("out/data/my-notes.txt")).unwrap();
    std::fs::write(d.path().join("out/.DS_Store"), b"x").unwrap();
    let stale = d.path().join(".out.frames-4194999");
    std::fs::create_dir_all(stale.join("frames")).unwrap();
    let c = dunereel(&["check", "job.yaml", "--overwrite"], d.path());
    assert_eq!(c.code, 0, "{}", c.stderr);
    assert!(
        c.stderr.contains("interrupted run") && c.stderr.contains("render will remove"),
        "{}",
        c.stderr
    );
    assert!(stale.exists(), "check must not remove anything");
    let o = dunereel(&["render", "job.yaml", "--overwrite"], d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stderr.contains("interrupted run") && !stale.exists(),
        "{}",
        o.stderr
    );
    let v = dunereel(&["verify", "out"], d.path());
    assert_eq!(v.code, 0, "{}", v.stdout);
}

#[test]
fn render_and_verify_count_the_same_files() {
    let d = tempfile::tempdir().unwrap();
    common::moving_dune_job(d.path(), "");
    let r = dunereel(&["render", "job.yaml"], d.path());
    assert_eq!(r.code, 0, "{}", r.stderr);
    let count = |text: &str| -> usize {
        let before = text.split(" payload files").next().unwrap();
        before
            .rsplit(|c: char| !c.is_ascii_digit())
            .next()
            .unwrap()
            .parse()
            .unwrap()
    };
    let v = dunereel(&["verify", "out"], d.path());
    assert_eq!(v.code, 0, "{}", v.stdout);
    assert_eq!(
        count(&r.stdout),
        count(&v.stdout),
        "{} | {}",
        r.stdout,
        v.stdout
    );
    // Litter is reported as ignored and the bag still verifies.
    std::fs::write(d.path().join("out/data/Thumbs.db"), b"x").unwrap();
    let v = dunereel(&["verify", "out"], d.path());
    assert_eq!(v.code, 0, "{}", v.stdout);
    assert!(v.stdout.contains("ignored: data/Thumbs.db"), "{}", v.stdout);
}

#[test]
fn verify_names_an_edited_manifest_and_refuses_a_non_bag() {
    let d = tempfile::tempdir().unwrap();
    common::moving_dune_job(d.path(), "");
    assert_eq!(dunereel(&["render", "job.yaml"], d.path()).code, 0);
    let m = d.path().join("out/manifest-sha256.txt");
    let text = std::fs::read_to_string(&m).unwrap();
    let first = text.lines().next().unwrap().to_string();
    let digit = if first.starts_with('0') { "1" } else { "0" };
    let edited = format!("{digit}{}", &first[1..]);
    std::fs::write(&m, text.replacen(&first, &edited, 1)).unwrap();
    let v = dunereel(&["verify", "out"], d.path());
    assert_eq!(v.code, 2);
    assert!(
        v.stdout.contains("altered tag file: manifest-sha256.txt")
            && v.stdout.contains("edited manifest-sha256.txt"),
        "{}",
        v.stdout
    );
    let n = dunereel(&["verify", "."], d.path());
    assert_eq!(n.code, 2);
    assert!(n.stderr.contains("is not a bag"), "{}", n.stderr);
}

/// A float32 GeoTIFF with a projected CRS but no vertical unit key, as many deliveries are.
fn write_without_vertical_unit(path: &Path, g: &GridGeometry, z: &Array2<f32>) {
    use tiff::encoder::{colortype::Gray32Float, TiffEncoder};
    use tiff::tags::Tag;
    let data: Vec<f32> = z.iter().copied().collect();
    let mut out = std::io::BufWriter::new(std::fs::File::create(path).unwrap());
    let mut enc = TiffEncoder::new(&mut out).unwrap();
    let mut image = enc
        .new_image::<Gray32Float>(g.cols as u32, g.rows as u32)
        .unwrap();
    let dir = image.encoder();
    dir.write_tag(Tag::ModelPixelScaleTag, &[g.cell_x, g.cell_y, 0.0][..])
        .unwrap();
    dir.write_tag(
        Tag::ModelTiepointTag,
        &[0.0, 0.0, 0.0, g.origin_x, g.origin_y, 0.0][..],
    )
    .unwrap();
    // GeoKey directory 1.1.0 with 2 keys: projected model (1024 = 1), EPSG:32631 (3072); no 4099.
    dir.write_tag(
        Tag::GeoKeyDirectoryTag,
        &[1u16, 1, 0, 2, 1024, 0, 1, 1, 3072, 0, 1, 32631][..],
    )
    .unwrap();
    image.write_data(&data).unwrap();
}

fn feet_job(d: &Path, units: &str) {
    let g = common::geometry(48, 40);
    for (date, cx) in [("2030-01-01", 18.0), ("2031-01-01", 24.0)] {
        // A 30 ft dune on a 6.5 ft plane (2 + 4.5), stored in US survey feet.
        let z = common::gaussian_dune(&g, cx, 20.0, 30.0, 5.0).mapv(|v| v + 4.5);
        write_without_vertical_unit(&d.join(format!("{date}.tif")), &g, &z);
    }
    let job = format!(
        "format_version: 1\ntitle: Feet\nsurveys:\n  - {{ date: 2030-01-01, grid: 2030-01-01.tif{units} }}\n  - {{ date: 2031-01-01, grid: 2031-01-01.tif{units} }}\ntimeline: {{ frames_per_year: 2 }}\nview: {{ width: 96, height: 64 }}\noutput: {{ folder: out, png_frames: false, gif: null }}\n"
    );
    std::fs::write(d.join("job.yaml"), job).unwrap();
}

#[test]
fn an_unstated_vertical_unit_is_a_warning_that_reaches_the_record() {
    let d = tempfile::tempdir().unwrap();
    feet_job(d.path(), "");
    let c = dunereel(&["check", "job.yaml"], d.path());
    assert_eq!(c.code, 0, "{}", c.stderr);
    assert!(
        c.stderr
            .contains("2030-01-01.tif: the file does not say what unit its elevations")
            && c.stderr.contains("surveys[0].vertical_unit: foot"),
        "{}",
        c.stderr
    );
    let r = dunereel(&["render", "job.yaml"], d.path());
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stderr.contains("read as metres"), "{}", r.stderr);
    let csv = std::fs::read_to_string(d.path().join("out/data/tables/surveys.csv")).unwrap();
    let header: Vec<&str> = csv.lines().next().unwrap().split(',').collect();
    let row: Vec<&str> = csv.lines().nth(1).unwrap().split(',').collect();
    let col = header
        .iter()
        .position(|h| *h == "vertical_unit_source")
        .unwrap();
    assert_eq!(row[col], "assumed");
    for f in ["out/data/run.json", "out/data/README.txt"] {
        let t = std::fs::read_to_string(d.path().join(f)).unwrap();
        assert!(t.contains("read as metres"), "{f}");
    }
}

#[test]
fn a_stated_vertical_unit_converts_and_a_contradicted_one_is_refused() {
    let d = tempfile::tempdir().unwrap();
    feet_job(d.path(), ", vertical_unit: us-survey-foot");
    let r = dunereel(&["render", "job.yaml"], d.path());
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(!r.stderr.contains("read as metres"), "{}", r.stderr);
    let json = std::fs::read_to_string(d.path().join("out/data/tables/surveys.json")).unwrap();
    let v: serde_json::Value = serde_json::from_str(&json).unwrap();
    let rows = v.as_array().or_else(|| v["rows"].as_array()).unwrap();
    assert_eq!(rows[0]["vertical_unit_source"], "job");
    // Check: 85 FR 62698 (NIST/NOAA 2020) — US survey foot = 1200/3937 m; 36.5 US ft = 11.12522 m,
    // REFERENCES.md §8; the fixture's highest cell is 36.5 ft (plane 2 + 4.5, dune 30), abs diff < 1e-3
    let top = rows[0]["max_elevation_m"].as_f64().unwrap();
    assert!((top - 36.5 * 1200.0 / 3937.0).abs() < 1e-3, "{top}");

    // A file that states metres, contradicted by the job: refused, naming both units.
    let d2 = tempfile::tempdir().unwrap();
    common::moving_dune_job(d2.path(), "");
    let job = d2.path().join("job.yaml");
    let text = std::fs::read_to_string(&job).unwrap().replacen(
        "sigma_z_m: 0.1 }",
        "sigma_z_m: 0.1, vertical_unit: foot }",
        1,
    );
    std::fs::write(&job, text).unwrap();
    let before = snapshot(d2.path());
    let o = dunereel(&["render", "job.yaml"], d2.path());
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(
        o.stderr
            .contains("vertical unit is metre but the job says foot"),
        "{}",
        o.stderr
    );
    assert_eq!(snapshot(d2.path()), before);
}

#[test]
fn lengths_in_the_job_may_carry_their_unit() {
    let d = tempfile::tempdir().unwrap();
    common::moving_dune_job(
        d.path(),
        "water: { level_m: { value: 10, unit: foot } }\nchange: { reference_elevation_m: { value: 1, unit: us-survey-foot } }\n",
    );
    let r = dunereel(&["render", "job.yaml"], d.path());
    assert_eq!(r.code, 0, "{}", r.stderr);
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.path().join("out/data/run.json")).unwrap())
            .unwrap();
    // Check: 85 FR 62698 — 1 US survey ft = 0.3048006096 m; REFERENCES.md §8, abs diff < 1e-9
    let reference = run["options"]["reference_elevation_m"].as_f64().unwrap();
    assert!((reference - 0.304_800_609_6).abs() < 1e-9, "{reference}");
}

#[test]
fn messages_speak_the_users_words() {
    let d = tempfile::tempdir().unwrap();
    common::moving_dune_job(d.path(), "");
    let base = std::fs::read_to_string(d.path().join("job.yaml")).unwrap();
    let cases: [(&str, String, &str); 5] = [
        (
            "tab",
            base.replace("view: { width: 128, height: 96 }", "view:\n\twidth: 128"),
            "tabs for indentation, indent with spaces",
        ),
        (
            "whole number",
            base.replace("width: 128", "width: 12.5"),
            "a whole number",
        ),
        (
            "supersample",
            base.replace("width: 128,", "width: 128, supersample: 8,"),
            "not one of 1 (off), 2, 3 or 4",
        ),
        (
            "no such day",
            base.replace("date: 2031-03-01", "date: 2031-02-30"),
            "February 2031 has 28 days, so day 30 does not exist",
        ),
        (
            "a number",
            base.replace("sigma_z_m: 0.1 }", "sigma_z_m: high }"),
            "a length is a number of metres",
        ),
    ];
    for (name, text, expect) in cases {
        std::fs::write(d.path().join("bad.yaml"), text).unwrap();
        let o = dunereel(&["check", "bad.yaml"], d.path());
        assert_eq!(o.code, 2, "{name}: {}", o.stderr);
        assert!(o.stderr.contains(expect), "{name}: {}", o.stderr);
        assert!(
            !o.stderr.contains("u32") && !o.stderr.contains("f64"),
            "{name}: {}",
            o.stderr
        );
    }
    // A folder given as the job file.
    let o = dunereel(&["check", "."], d.path());
    assert_eq!(o.code, 2);
    assert!(
        o.stderr.contains("is a folder, not a job file"),
        "{}",
        o.stderr
    );
    // A negative thread count gets a plain range message, not a hint about `--`.
    let o = dunereel(&["render", "job.yaml", "--threads", "-1"], d.path());
    assert_eq!(o.code, 2);
    assert!(
        o.stderr.contains("-1 is not in 1..") && !o.stderr.contains("-- -1"),
        "{}",
        o.stderr
    );
}

#[test]
fn grid_problems_are_named_in_plain_words() {
    let d = tempfile::tempdir().unwrap();
    let g = common::geometry(32, 24);
    let z = common::gaussian_dune(&g, 12.0, 12.0, 5.0, 4.0);
    // A grid with no CRS next to one with a CRS: assign, not reproject.
    let bare = GridGeometry {
        epsg: None,
        ..g.clone()
    };
    common::write_grid(&d.path().join("a.tif"), &bare, &z);
    common::write_grid(&d.path().join("b.tif"), &g, &z);
    // An RGB picture offered as a DEM.
    common::write_rgb(&d.path().join("photo.tif"), &g, |r, c| {
        [r as u8, c as u8, 9]
    });
    let job = |a: &str, b: &str| {
        format!("format_version: 1\ntitle: T\nsurveys:\n  - {{ date: 2030-01-01, grid: {a} }}\n  - {{ date: 2031-01-01, grid: {b} }}\noutput: {{ folder: out }}\n")
    };
    std::fs::write(d.path().join("crs.yaml"), job("a.tif", "b.tif")).unwrap();
    let o = dunereel(&["check", "crs.yaml"], d.path());
    assert_eq!(o.code, 2);
    assert!(
        o.stderr.contains("states no CRS") && o.stderr.contains("assign that CRS"),
        "{}",
        o.stderr
    );
    std::fs::write(d.path().join("rgb.yaml"), job("b.tif", "photo.tif")).unwrap();
    let o = dunereel(&["check", "rgb.yaml"], d.path());
    assert_eq!(o.code, 2);
    assert!(
        o.stderr.contains("photo.tif") && o.stderr.contains("not an elevation grid"),
        "{}",
        o.stderr
    );
    // Cell sizes in `check` are rounded to the millimetre: 3 ft cells.
    let feet = GridGeometry {
        cell_x: 3.0,
        cell_y: 3.0,
        horizontal_unit: LinearUnit::Foot,
        ..g.clone()
    };
    common::write_grid(&d.path().join("f1.tif"), &feet, &z);
    common::write_grid(&d.path().join("f2.tif"), &feet, &z);
    std::fs::write(d.path().join("ft.yaml"), job("f1.tif", "f2.tif")).unwrap();
    let o = dunereel(&["check", "ft.yaml"], d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    // Check: international foot = 0.3048 m exactly (REFERENCES.md §8) — 3 ft = 0.9144 m → 0.914 at mm
    assert!(o.stdout.contains("3 ft (0.914 m) cells"), "{}", o.stdout);
}

#[test]
fn an_unwritable_output_names_the_users_folder_not_a_working_one() {
    let d = tempfile::tempdir().unwrap();
    common::moving_dune_job(d.path(), "");
    // The output's parent is a file, so nothing can be created there.
    let o = dunereel(
        &["render", "job.yaml", "--output", "job.yaml/out"],
        d.path(),
    );
    assert_eq!(o.code, 1, "{}", o.stderr);
    assert!(
        o.stderr.contains("job.yaml/out") && !o.stderr.contains(".frames-"),
        "{}",
        o.stderr
    );
}

#[test]
fn check_warns_as_render_does() {
    let d = tempfile::tempdir().unwrap();
    // A search radius far below the dune's 6 m a year: no displacement can be followed.
    common::moving_dune_job(d.path(), "flow: { search_radius_m: 1 }\n");
    let c = dunereel(&["check", "job.yaml"], d.path());
    let r = dunereel(&["render", "job.yaml"], d.path());
    assert_eq!((c.code, r.code), (0, 0), "{} {}", c.stderr, r.stderr);
    let warnings = |s: &str| -> Vec<String> {
        s.lines()
            .filter(|l| l.starts_with("warning:"))
            .map(str::to_string)
            .collect()
    };
    assert!(!warnings(&c.stderr).is_empty(), "{}", c.stderr);
    assert_eq!(warnings(&c.stderr), warnings(&r.stderr));
}
