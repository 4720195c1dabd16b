//! The whole pipeline through the library: a small job in, an archive folder out.

mod common;

use dunereel::{job, run_job, RunOptions};

#[test]
fn small_job_writes_a_verifiable_archive() {
    let d = tempfile::tempdir().unwrap();
    let path = common::moving_dune_job(d.path(), "");
    let job = job::load(&path).unwrap();
    let report = run_job(&job, &RunOptions::default()).unwrap();
    // 1 year at 3 frames/yr + 2 years at 3 frames/yr + the last survey.
    assert_eq!(report.frames, 3 + 6 + 1);
    assert_eq!(report.survey_frames, 3);
    let out = d.path().join("out");
    let check = dunereel::archive::verify(&out).unwrap();
    assert!(check.is_intact(), "{check:?}");
    assert!(out.join("data/job/job.yaml").is_file());
    // Frames are numbered from 0, so ten frames end at frame-09 (two digits suffice).
    let frames: Vec<String> = std::fs::read_dir(out.join("data/frames"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(
        frames.iter().filter(|n| n.ends_with(".png")).count(),
        10,
        "{frames:?}"
    );
    let index = std::fs::read_to_string(out.join("data/frames/index.csv")).unwrap();
    assert_eq!(index.lines().count(), 11);
    assert_eq!(
        index
            .lines()
            .filter(|l| l.contains(",interpolated,"))
            .count(),
        7,
        "{index}"
    );
    assert!(out.join("data/animation/animation.gif").is_file());
    assert!(out.join("data/poster.png").is_file());
    // The dune moves 6 m/yr east: the record reports it from the displacement field.
    let pairs = std::fs::read_to_string(out.join("data/tables/pairs.json")).unwrap();
    let pairs: serde_json::Value = serde_json::from_str(&pairs).unwrap();
    let first = &pairs.as_array().unwrap()[0];
    let east = first["migration_east_m"].as_f64().unwrap();
    let north = first["migration_north_m"].as_f64().unwrap();
    // Check: analytic — fixture dune translated by exactly 6.0 m east, 0 north; within 0.1 cell
    assert!(
        (east - 6.0).abs() < 0.1 && north.abs() < 0.1,
        "{east} {north}"
    );
    // The survey without a stated uncertainty is flagged in the record.
    assert!(
        report.warnings.iter().any(|w| w.contains("2033-03-01")),
        "{:?}",
        report.warnings
    );
    // No scratch or staging folders are left beside the output.
    let names: Vec<String> = std::fs::read_dir(d.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert!(names.iter().all(|n| !n.starts_with('.')), "{names:?}");
}

#[test]
fn existing_output_is_kept_unless_overwrite_is_asked() {
    let d = tempfile::tempdir().unwrap();
    let path = common::moving_dune_job(d.path(), "");
    let job = job::load(&path).unwrap();
    let out = d.path().join("out");
    std::fs::create_dir(&out).unwrap();
    std::fs::write(out.join("notes.txt"), "mine").unwrap();
    let err = run_job(&job, &RunOptions::default()).unwrap_err();
    assert_eq!(err.exit_code(), 1);
    assert!(err.to_string().contains("--overwrite"), "{err}");
    assert_eq!(
        std::fs::read_to_string(out.join("notes.txt")).unwrap(),
        "mine"
    );
    let again = RunOptions {
        overwrite: true,
        ..Default::default()
    };
    // Overwriting replaces only an earlier output of dunereel: this folder holds the user's notes.
    let err = run_job(&job, &again).unwrap_err();
    assert!(err.to_string().contains("notes.txt"), "{err}");
    assert_eq!(
        std::fs::read_to_string(out.join("notes.txt")).unwrap(),
        "mine"
    );
    std::fs::remove_dir_all(&out).unwrap();
    run_job(&job, &RunOptions::default()).unwrap();
    run_job(&job, &again).unwrap();
    assert!(dunereel::archive::verify(&out).unwrap().is_intact());
}

#[test]
fn same_job_gives_identical_frames_and_tables() {
    let d = tempfile::tempdir().unwrap();
    let path = common::moving_dune_job(d.path(), "");
    let job = job::load(&path).unwrap();
    let a = d.path().join("a");
    let b = d.path().join("b");
    run_job(
        &job,
        &RunOptions {
            output_folder: Some(a.clone()),
            ..Default::default()
        },
    )
    .unwrap();
    run_job(
        &job,
        &RunOptions {
            output_folder: Some(b.clone()),
            ..Default::default()
        },
    )
    .unwrap();
    let manifest =
        |p: &std::path::Path| std::fs::read_to_string(p.join("manifest-sha256.txt")).unwrap();
    assert_eq!(manifest(&a), manifest(&b));
}

#[test]
fn one_thread_and_two_threads_give_identical_outputs() {
    let d = tempfile::tempdir().unwrap();
    let path = common::moving_dune_job(
        d.path(),
        "in_between: { method: morph }\nsun: { shadows: true }\n",
    );
    let job = job::load(&path).unwrap();
    let run_in = |threads: usize, name: &str| {
        let out = d.path().join(name);
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            run_job(
                &job,
                &RunOptions {
                    output_folder: Some(out.clone()),
                    ..Default::default()
                },
            )
        })
        .unwrap();
        std::fs::read_to_string(out.join("manifest-sha256.txt")).unwrap()
    };
    let one = run_in(1, "one");
    let two = run_in(2, "two");
    assert!(one.contains("data/animation/animation.gif"));
    // Check: common practice, no source — a deterministic renderer gives the same bytes on any thread count
    assert_eq!(one, two);
}

#[test]
fn morph_job_is_trusted_and_indexes_every_frame() {
    let d = tempfile::tempdir().unwrap();
    let path = common::moving_dune_job(d.path(), "in_between: { method: morph }\n");
    let job = job::load(&path).unwrap();
    let report = run_job(&job, &RunOptions::default()).unwrap();
    assert!(
        report
            .warnings
            .iter()
            .all(|w| !w.contains("no reliable displacement")),
        "{:?}",
        report.warnings
    );
    let index = std::fs::read_to_string(d.path().join("out/data/frames/index.csv")).unwrap();
    let interpolated = index
        .lines()
        .filter(|l| l.contains(",interpolated,"))
        .count();
    let surveyed = index.lines().filter(|l| l.contains(",surveyed,")).count();
    assert_eq!((surveyed, interpolated), (3, 7), "{index}");
    // Every interpolated frame names the method that made it.
    assert_eq!(
        index
            .lines()
            .filter(|l| l.contains(",interpolated,morph,"))
            .count(),
        7,
        "{index}"
    );
}

#[test]
fn a_separate_grid_can_be_the_shell() {
    let d = tempfile::tempdir().unwrap();
    let sub = |name: &str| {
        let p = d.path().join(name);
        std::fs::create_dir(&p).unwrap();
        p
    };
    let (with_dir, plain_dir, bad_dir) = (sub("with"), sub("plain"), sub("bad"));
    // A flat design surface at 5 m: above the 2 m beach, below the dune's top.
    let g = common::geometry(64, 48);
    let flat = ndarray::Array2::from_elem((48, 64), 5.0f32);
    common::write_grid(&with_dir.join("design.tif"), &g, &flat);
    let with = common::moving_dune_job(
        &with_dir,
        "shell: { survey: grid, grid: design.tif, opacity: 0.6 }\n",
    );
    let plain = common::moving_dune_job(&plain_dir, "");
    let first_frame = |path: &std::path::Path| {
        let job = job::load(path).unwrap();
        run_job(&job, &RunOptions::default()).unwrap();
        let frames = path.parent().unwrap().join("out/data/frames");
        let mut names: Vec<_> = std::fs::read_dir(&frames)
            .unwrap()
            .map(|e| e.unwrap().path())
            .collect();
        names.sort();
        image::open(&names[0]).unwrap().to_rgba8()
    };
    let (a, b) = (first_frame(&with), first_frame(&plain));
    let changed = a.pixels().zip(b.pixels()).filter(|(p, q)| p != q).count();
    // The shell covers the beach around the dune: a large share of the terrain changes colour.
    assert!(
        changed > (a.width() * a.height()) as usize / 10,
        "{changed} pixels differ"
    );

    // A shell grid in another CRS is refused before anything is written.
    let mut other = g.clone();
    other.epsg = Some(26918);
    common::write_grid(&bad_dir.join("elsewhere.tif"), &other, &flat);
    let bad = common::moving_dune_job(&bad_dir, "shell: { survey: grid, grid: elsewhere.tif }\n");
    let err = run_job(&job::load(&bad).unwrap(), &RunOptions::default()).unwrap_err();
    assert_eq!(err.exit_code(), 2);
    assert!(
        err.to_string().contains("elsewhere.tif") && err.to_string().contains("reproject"),
        "{err}"
    );
    assert!(!bad_dir.join("out").exists());
}

#[test]
fn morph_is_the_default_and_a_pair_it_cannot_follow_falls_back_to_the_linear_blend() {
    let d = tempfile::tempdir().unwrap();
    // Two flat surveys (a beach raised by 0.5 m): no relief to follow.
    let g = common::geometry(64, 48);
    for (name, z) in [("a.tif", 2.0f32), ("b.tif", 2.5)] {
        common::write_grid(
            &d.path().join(name),
            &g,
            &ndarray::Array2::from_elem((48, 64), z),
        );
    }
    let path = d.path().join("job.yaml");
    std::fs::write(
        &path,
        "format_version: 1\ntitle: Flat beach\nsurveys:\n  - { date: 2030-03-01, grid: a.tif, sigma_z_m: 0.1 }\n  - { date: 2031-03-01, grid: b.tif, sigma_z_m: 0.1 }\ntimeline: { frames_per_year: 4 }\nview: { width: 64, height: 48 }\noutput: { folder: out }\n",
    )
    .unwrap();
    let job = job::load(&path).unwrap();
    assert_eq!(job.methods, vec![dunereel::job::Method::Morph]);
    let report = run_job(&job, &RunOptions::default()).unwrap();
    assert!(
        report
            .warnings
            .iter()
            .any(|w| w.contains("linear blend instead of the morph")),
        "{:?}",
        report.warnings
    );
    let index = std::fs::read_to_string(d.path().join("out/data/frames/index.csv")).unwrap();
    let between: Vec<_> = index
        .lines()
        .filter(|l| l.contains(",interpolated,"))
        .collect();
    assert!(!between.is_empty(), "{index}");
    assert!(
        between
            .iter()
            .all(|l| l.contains(",interpolated,linear blend,")),
        "{index}"
    );
    // The exaggeration chosen for a job that sets none is recorded with its source.
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.path().join("out/data/run.json")).unwrap())
            .unwrap();
    let view = &run["view"];
    assert_eq!(view["vertical_exaggeration_source"], "automatic", "{view}");
    // Check: analytic — a flat pair has no relief, so the rule gives its upper bound, 5.
    assert_eq!(view["vertical_exaggeration"], 5.0, "{view}");
}
