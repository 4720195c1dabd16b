use super::*;
use crate::change::testkit::{geometry, stack, survey};
use crate::change::{record_with_figures, ChangeOptions};
use crate::grid::LinearUnit;

fn sample(unit: LinearUnit) -> (ChangeRecord, Vec<Figure>) {
    let g = geometry(40, 1.0);
    let mound = |cx: f64, h: f64| {
        move |x: f64, y: f64| 1.0 + h * (-((x - cx).powi(2) + y * y) / 30.0).exp()
    };
    let st = stack(vec![
        survey("s1", "2030-03-01", &g, Some(0.05), mound(-4.0, 5.0)),
        survey("s2", "2031-03-01", &g, None, mound(0.0, 5.5)),
        survey("s3", "2032-09-15", &g, Some(0.05), mound(5.0, 5.0)),
    ]);
    let opts = ChangeOptions {
        display_unit: unit,
        transect: Some([[-18.0, 0.0], [18.0, 0.0]]),
        ..Default::default()
    };
    record_with_figures(&st, &opts).unwrap()
}

fn extras() -> Vec<ExtraFile> {
    vec![ExtraFile {
        name: "job/job.yaml".into(),
        content: ExtraContent::Bytes(b"surveys: []\n".to_vec()),
    }]
}

fn opts() -> ArchiveOptions {
    ArchiveOptions {
        overwrite: false,
        bagging_date: chrono::NaiveDate::from_ymd_opt(2032, 10, 1),
        ..Default::default()
    }
}

#[test]
fn writes_a_bag_that_verifies() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("archive");
    let (rec, figs) = sample(LinearUnit::Metre);
    assert_eq!(figs.len(), 4); // 2 consecutive + first-to-last maps, 1 chart
    let report = write_archive(&dir, &rec, &figs, &extras(), &opts()).unwrap();
    assert_eq!(report.payload_files, 6 + 2 + 4 + 1);
    for f in [
        "bagit.txt",
        "bag-info.txt",
        "manifest-sha256.txt",
        "tagmanifest-sha256.txt",
        "data/README.txt",
        "data/tables/pairs.csv",
        "data/tables/transect.json",
        "data/maps/dod-s1-s3.png",
        "data/charts/transect.png",
        "data/job/job.yaml",
    ] {
        assert!(dir.join(f).is_file(), "{f} missing");
    }
    let v = verify(&dir).unwrap();
    assert!(v.is_intact(), "{v:?}");
    assert_eq!(
        (v.payload_checked, v.tags_checked),
        (report.payload_files, 3)
    );
    // Nothing else next to the archive: the temporary folder was renamed away.
    let siblings: Vec<_> = fs::read_dir(tmp.path())
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    assert_eq!(siblings, vec![std::ffi::OsString::from("archive")]);
    let csv = fs::read_to_string(dir.join("data/tables/pairs.csv")).unwrap();
    assert!(csv.lines().next().unwrap().contains(",net_volume_m3,"));
    assert_eq!(csv.lines().count(), 4);
    let readme = fs::read_to_string(dir.join("data/README.txt")).unwrap();
    assert!(readme.contains("licensed professional") && readme.contains("survey s2"));
    // The maps decode to exactly the frames in memory.
    let png = image::open(dir.join("data/maps/dod-s1-s2.png"))
        .unwrap()
        .to_rgba8();
    assert_eq!(png.as_raw(), &figs[0].frame.rgba);
}

#[test]
fn feet_change_every_unit_column() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("ft");
    let (rec, figs) = sample(LinearUnit::UsSurveyFoot);
    write_archive(&dir, &rec, &figs, &[], &opts()).unwrap();
    let text = fs::read_to_string(dir.join("data/tables/pairs.json")).unwrap();
    let rows: serde_json::Value = serde_json::from_str(&text).unwrap();
    let first = rows[2].as_object().unwrap();
    assert!(
        first
            .keys()
            .all(|k| !k.ends_with("_m") && !k.ends_with("_m2") && !k.ends_with("_m3")),
        "{first:?}"
    );
    // Check: 85 FR 62698 (NIST/NOAA 2020) — 1 m3 = (3937/1200)^3 US ft3; rel. diff < 1e-12
    let ft3 = first["deposition_volume_usft3"].as_f64().unwrap();
    let m3 = rec.pairs[2].deposition_volume_m3;
    assert!(m3 > 1.0);
    assert!(
        (ft3 / m3 - (3937.0f64 / 1200.0).powi(3)).abs() < 1e-9,
        "{ft3} {m3}"
    );
    let header = fs::read_to_string(dir.join("data/tables/transect.csv")).unwrap();
    assert!(
        header.starts_with("survey_id,date,distance_usft,x_crs,y_crs,elevation_usft\n"),
        "{header}"
    );
}

#[test]
fn never_overwrites_unless_asked() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("a");
    fs::create_dir(&dir).unwrap();
    fs::write(dir.join("keep.txt"), b"mine").unwrap();
    let (rec, figs) = sample(LinearUnit::Metre);
    let err = write_archive(&dir, &rec, &figs, &[], &opts()).unwrap_err();
    assert!(matches!(err, Error::Output { .. }), "{err}");
    assert!(err.to_string().contains("overwrite"), "{err}");
    assert_eq!(fs::read(dir.join("keep.txt")).unwrap(), b"mine");
    let o = ArchiveOptions {
        overwrite: true,
        ..opts()
    };
    // Asked to overwrite, it still refuses a folder it did not make, and names the user's file.
    let err = write_archive(&dir, &rec, &figs, &[], &o).unwrap_err();
    assert!(err.to_string().contains("keep.txt"), "{err}");
    assert_eq!(fs::read(dir.join("keep.txt")).unwrap(), b"mine");
    // An earlier archive of its own is replaced.
    fs::remove_file(dir.join("keep.txt")).unwrap();
    fs::remove_dir(&dir).unwrap();
    write_archive(&dir, &rec, &figs, &[], &opts()).unwrap();
    write_archive(&dir, &rec, &figs, &[], &o).unwrap();
    assert!(verify(&dir).unwrap().is_intact());
    assert_eq!(fs::read_dir(tmp.path()).unwrap().count(), 1);
}

#[test]
fn a_failure_leaves_nothing_behind() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("a");
    let (rec, figs) = sample(LinearUnit::Metre);
    let bad = vec![ExtraFile {
        name: "anim.gif".into(),
        content: ExtraContent::File(tmp.path().join("nope.gif")),
    }];
    let err = write_archive(&dir, &rec, &figs, &bad, &opts()).unwrap_err();
    assert!(err.to_string().contains("nope.gif"), "{err}");
    let dup = vec![ExtraFile {
        name: "README.txt".into(),
        content: ExtraContent::Bytes(vec![]),
    }];
    assert!(write_archive(&dir, &rec, &figs, &dup, &opts()).is_err());
    let esc = vec![ExtraFile {
        name: "../x".into(),
        content: ExtraContent::Bytes(vec![]),
    }];
    assert!(write_archive(&dir, &rec, &figs, &esc, &opts()).is_err());
    assert_eq!(fs::read_dir(tmp.path()).unwrap().count(), 0);
}

#[test]
fn verify_finds_flipped_missing_and_extra_files() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("a");
    let (rec, figs) = sample(LinearUnit::Metre);
    write_archive(&dir, &rec, &figs, &extras(), &opts()).unwrap();
    let files = bagit::list_files(&dir, "").unwrap();
    assert!(files.len() > 10);
    // Check: FIPS 180-4 / RFC 8493 — any single changed byte changes the file's SHA-256 or breaks its
    // manifest line; tried at the first, middle and last byte of every file in the bag
    for rel in &files {
        let path = dir.join(rel);
        let original = fs::read(&path).unwrap();
        for at in [0, original.len() / 2, original.len() - 1] {
            let mut bytes = original.clone();
            bytes[at] ^= 0x01;
            fs::write(&path, &bytes).unwrap();
            let v = verify(&dir).unwrap();
            assert!(!v.is_intact(), "flip at {at} in {rel} not detected");
            fs::write(&path, &original).unwrap();
        }
        if rel.starts_with("data/") {
            let v = verify(&dir).unwrap();
            assert!(v.is_intact());
        }
    }
    let v = verify(&dir).unwrap();
    assert!(v.is_intact(), "{v:?}");
    // A flipped payload byte is reported as an altered file by name.
    let target = dir.join("data/tables/pairs.csv");
    let original = fs::read(&target).unwrap();
    let mut bytes = original.clone();
    bytes[5] ^= 0x20;
    fs::write(&target, &bytes).unwrap();
    assert_eq!(
        verify(&dir).unwrap().altered,
        vec!["data/tables/pairs.csv".to_string()]
    );
    fs::write(&target, &original).unwrap();
    // Missing payload file.
    fs::remove_file(&target).unwrap();
    let v = verify(&dir).unwrap();
    assert_eq!(v.missing, vec!["data/tables/pairs.csv".to_string()]);
    assert!(v.problems.iter().any(|p| p.contains("Payload-Oxum")));
    fs::write(&target, &original).unwrap();
    // Extra files, in the payload and at the top.
    fs::write(dir.join("data/maps/stray.png"), b"x").unwrap();
    fs::write(dir.join("notes.txt"), b"y").unwrap();
    let v = verify(&dir).unwrap();
    assert_eq!(
        v.extra,
        vec!["data/maps/stray.png".to_string(), "notes.txt".to_string()]
    );
    assert!(v.missing.is_empty() && v.altered.is_empty());
    // Not a folder at all.
    assert!(verify(&tmp.path().join("none")).is_err());
}
