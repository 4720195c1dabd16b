//! A job split into parts and assembled gives the bag a one-machine run gives; parts that are
//! missing, from another job or from another split are refused by name; several jobs run in one
//! call, a failing one does not stop the others, and `--skip-done` resumes a campaign.

mod common;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Command;

fn dunereel(args: &[&str], dir: &Path, env: &[(&str, &str)]) -> (i32, String, String) {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_dunereel"));
    cmd.args(args).current_dir(dir);
    for v in [
        "SLURM_ARRAY_TASK_ID",
        "SLURM_ARRAY_TASK_MIN",
        "SLURM_ARRAY_TASK_COUNT",
        "SLURM_ARRAY_TASK_STEP",
    ] {
        cmd.env_remove(v);
    }
    for (k, v) in env {
        cmd.env(k, v);
    }
    let out = cmd.output().unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// Every file of a bag but the two that carry the bagging date.
fn bag_files(dir: &Path) -> BTreeMap<PathBuf, Vec<u8>> {
    let mut out = BTreeMap::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            let rel = p.strip_prefix(dir).unwrap().to_path_buf();
            if p.is_dir() {
                stack.push(p);
            } else if rel != Path::new("bag-info.txt") && rel != Path::new("tagmanifest-sha256.txt")
            {
                out.insert(rel, std::fs::read(&p).unwrap());
            }
        }
    }
    out
}

#[test]
fn three_parts_assemble_into_the_one_machine_bag() {
    let d = tempfile::tempdir().unwrap();
    common::moving_dune_job(d.path(), "");
    let (code, _, err) = dunereel(&["render", "job.yaml", "--output", "one"], d.path(), &[]);
    assert_eq!(code, 0, "{err}");
    // Part 2 through the Slurm variables (an array 5-7: task 6 is the second of three).
    let slurm = [
        ("SLURM_ARRAY_TASK_ID", "6"),
        ("SLURM_ARRAY_TASK_MIN", "5"),
        ("SLURM_ARRAY_TASK_COUNT", "3"),
    ];
    for (args, env) in [
        (vec!["--part", "1/3"], &[][..]),
        (vec!["--part", "slurm"], &slurm[..]),
        (vec!["--part", "3/3"], &[][..]),
    ] {
        let mut all = vec!["render", "job.yaml", "--output", "split"];
        all.extend(args);
        let (code, out, err) = dunereel(&all, d.path(), env);
        assert_eq!(code, 0, "{err}");
        assert!(out.contains("part "), "{out}");
    }
    assert!(d.path().join("split.parts/part-2-of-3/part.json").is_file());
    let (code, _, err) = dunereel(
        &["assemble", "job.yaml", "--output", "split"],
        d.path(),
        &[],
    );
    assert_eq!(code, 0, "{err}");
    // Check: RFC 8493 — the payload and its manifest are byte-identical; only bag-info.txt
    // (Bagging-Date) and the tag manifest that hashes it may differ
    let (one, split) = (
        bag_files(&d.path().join("one")),
        bag_files(&d.path().join("split")),
    );
    assert_eq!(
        one.keys().collect::<Vec<_>>(),
        split.keys().collect::<Vec<_>>()
    );
    for (k, v) in &one {
        assert!(split[k] == *v, "{} differs", k.display());
    }
    assert!(
        !d.path().join("split.parts").exists(),
        "parts are removed once assembled"
    );
    let (code, _, err) = dunereel(&["verify", "split"], d.path(), &[]);
    assert_eq!(code, 0, "{err}");
}

#[test]
fn missing_foreign_and_impossible_parts_are_refused() {
    let d = tempfile::tempdir().unwrap();
    common::moving_dune_job(d.path(), "");
    let (code, _, err) = dunereel(&["render", "job.yaml", "--part", "1/2"], d.path(), &[]);
    assert_eq!(code, 0, "{err}");
    // Part 2 is missing.
    let (code, _, err) = dunereel(&["assemble", "job.yaml"], d.path(), &[]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("part(s) 2/2 of 2 are missing"), "{err}");
    assert!(!d.path().join("out").exists());
    // Part 2 made from an edited job: refused as made from another job file.
    let job = d.path().join("job.yaml");
    let text = std::fs::read_to_string(&job).unwrap();
    std::fs::write(
        &job,
        text.replace("title: Test dune", "title: Test dune, edited"),
    )
    .unwrap();
    let (code, _, err) = dunereel(&["render", "job.yaml", "--part", "2/2"], d.path(), &[]);
    assert_eq!(code, 0, "{err}");
    let (code, _, err) = dunereel(&["assemble", "job.yaml"], d.path(), &[]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("part-1-of-2") && err.contains("another job file"),
        "{err}"
    );
    // A part of another split.
    let (code, _, err) = dunereel(&["render", "job.yaml", "--part", "1/3"], d.path(), &[]);
    assert_eq!(code, 0, "{err}");
    let (code, _, err) = dunereel(&["assemble", "job.yaml"], d.path(), &[]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("split into"), "{err}");
    assert!(!d.path().join("out").exists());
    // A stored displacement field missing or damaged: refused, naming the file and the part.
    let (code, _, err) = dunereel(
        &["render", "job.yaml", "--part", "1/1", "--overwrite"],
        d.path(),
        &[],
    );
    assert_eq!(code, 0, "{err}");
    for entry in std::fs::read_dir(d.path().join("out.parts"))
        .unwrap()
        .flatten()
    {
        if entry.file_name() != "part-1-of-1" {
            std::fs::remove_dir_all(entry.path()).unwrap();
        }
    }
    let field = d.path().join("out.parts/part-1-of-1/field-000.bin");
    let bytes = std::fs::read(&field).unwrap();
    std::fs::write(&field, &bytes[..bytes.len() / 2]).unwrap();
    let (code, _, err) = dunereel(&["assemble", "job.yaml"], d.path(), &[]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("field-000.bin") && err.contains("damaged"),
        "{err}"
    );
    std::fs::remove_file(&field).unwrap();
    let (code, _, err) = dunereel(&["assemble", "job.yaml"], d.path(), &[]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("field-000.bin") && err.contains("part 1/1"),
        "{err}"
    );
    assert!(!d.path().join("out").exists());
    // Impossible part numbers, and Slurm without its variables.
    for (part, expect) in [
        ("0/3", "does not exist"),
        ("4/3", "does not exist"),
        ("x", "K/N"),
    ] {
        let (code, _, err) = dunereel(&["render", "job.yaml", "--part", part], d.path(), &[]);
        assert_eq!(code, 2, "{err}");
        assert!(err.contains(expect), "{part}: {err}");
    }
    let (code, _, err) = dunereel(&["render", "job.yaml", "--part", "slurm"], d.path(), &[]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("SLURM_ARRAY_TASK_ID") && err.contains("sbatch --array"),
        "{err}"
    );
}

#[test]
fn many_jobs_in_one_call_resume_with_skip_done() {
    let d = tempfile::tempdir().unwrap();
    let (a, b) = (d.path().join("a"), d.path().join("b"));
    std::fs::create_dir_all(&a).unwrap();
    std::fs::create_dir_all(&b).unwrap();
    common::moving_dune_job(&a, "");
    common::moving_dune_job(&b, "");
    // Site b has a corrupt grid.
    std::fs::write(b.join("2031-03-01.tif"), b"II*\0broken").unwrap();
    let (code, out, err) = dunereel(&["render", "a/job.yaml", "b/job.yaml"], d.path(), &[]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("2031-03-01.tif"), "{err}");
    assert!(
        out.contains("2 jobs:") && out.contains("ok ") && out.contains("FAILED"),
        "{out}"
    );
    assert!(a.join("out/bagit.txt").is_file() && !b.join("out").exists());
    // Repair b, run both again with --skip-done: a is skipped, b is rendered.
    for f in std::fs::read_dir(&b).unwrap() {
        std::fs::remove_file(f.unwrap().path()).unwrap();
    }
    common::moving_dune_job(&b, "");
    let (code, out, err) = dunereel(
        &["render", "--skip-done", "a/job.yaml", "b/job.yaml"],
        d.path(),
        &[],
    );
    assert_eq!(code, 0, "{err}");
    assert!(
        out.contains("skipped") && out.contains("a/job.yaml"),
        "{out}"
    );
    assert!(b.join("out/bagit.txt").is_file());
    // A changed grid makes the job not done any more (it then refuses the existing folder).
    std::fs::remove_file(a.join("2033-03-01.tif")).unwrap();
    common::write_grid(
        &a.join("2033-03-01.tif"),
        &common::geometry(64, 48),
        &common::gaussian_dune(&common::geometry(64, 48), 30.0, 24.0, 4.0, 5.0),
    );
    let (code, _, err) = dunereel(&["render", "--skip-done", "a/job.yaml"], d.path(), &[]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("already exists"), "{err}");
}
