//! Seeded mutation test of the readers (GeoTIFF grids and orthophotos, job files).
//!
//! The committed GeoTIFF fixtures (`tests/fixtures/geotiff/`) and job files
//! (`tests/fixtures/jobs/`) are damaged in many small ways (bit flips, byte edits at IFD entries and
//! tag values, truncations inside every region, huge dimensions, counts, offsets and strip sizes,
//! wrong field types, a swapped byte-order mark, compressed streams that lie about their size; for
//! jobs: truncations, byte edits, huge and non-finite numbers, wrong types, deep nesting, alias
//! expansion) and read again. Every case must end in either
//! - a clean refusal: `Error::Input` or `Error::Job` naming the file (and, for a job, the place),
//!   in plain words, saying what to do; or
//! - a valid result (a grid whose shape, cell size and origin make sense; a job whose numbers are
//!   finite, whose timeline can be planned and whose grids read or are refused cleanly);
//!
//! never a panic, and never more than `ALLOC_LIMIT_BYTES` of heap at once (measured by a counting
//! global allocator).
//!
//! `cargo test --test mutation_readers` runs 4 000 grid cases and 2 000 job cases with a fixed
//! seed. The longer run (DEVELOPERS.md) is `cargo test --test mutation_readers -- --ignored`,
//! 100 000 cases of each kind, or any count and seed through `DUNEREEL_MUTATION_CASES` and
//! `DUNEREEL_MUTATION_SEED`; the debug build is meant, for its overflow checks.

mod mutation;

use std::path::{Path, PathBuf};

use dunereel::geotiff::{read_grid, read_rgb};
use dunereel::job;
use dunereel::survey::read_survey;
use mutation::rng::Rng;
use mutation::tiff_mut::{self, TiffMap};
use mutation::{check_refusal, guarded, yaml_mut, Failure, Reader, Tally};

#[global_allocator]
static COUNTING: mutation::alloc::Counting = mutation::alloc::Counting;

const GRID_CASES: u64 = 4_000;
const JOB_CASES: u64 = 2_000;
const LONG_CASES: u64 = 100_000;

fn fixture_dir(kind: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures")
        .join(kind)
}

/// Checks what `read_grid` returned for a file; `None` when all is well.
fn judge_grid(path: &Path) -> Result<bool, String> {
    match guarded(|| read_grid(path))? {
        Err(e) => check_refusal(&e, path).map(|()| false),
        Ok((grid, source)) => {
            let g = &grid.geometry;
            if grid.z.dim() != (g.rows, g.cols) || g.rows == 0 || g.cols == 0 {
                return Err(format!(
                    "accepted a grid of shape {:?} for {} x {} cells",
                    grid.z.dim(),
                    g.rows,
                    g.cols
                ));
            }
            let east = g.origin_x + g.cols as f64 * g.cell_x;
            let south = g.origin_y - g.rows as f64 * g.cell_y;
            let finite = [g.cell_x, g.cell_y, g.origin_x, g.origin_y, east, south]
                .iter()
                .all(|v| v.is_finite());
            if !(g.cell_x > 0.0 && g.cell_y > 0.0 && finite) {
                return Err(format!(
                    "accepted a grid with an impossible placement: {g:?}"
                ));
            }
            if grid.z.iter().any(|v| v.is_infinite()) {
                return Err("accepted a grid holding infinite elevations".into());
            }
            if source.path != path {
                return Err("the grid's source names another file".into());
            }
            Ok(true)
        }
    }
}

/// Checks what `read_rgb` returned for a file.
fn judge_rgb(path: &Path) -> Result<bool, String> {
    match guarded(|| read_rgb(path))? {
        Err(e) => check_refusal(&e, path).map(|()| false),
        Ok((g, rgb)) => {
            if rgb.dim() != (g.rows, g.cols, 3) || g.rows == 0 || g.cols == 0 {
                return Err(format!(
                    "accepted an image of shape {:?} for {} x {} cells",
                    rgb.dim(),
                    g.rows,
                    g.cols
                ));
            }
            if !(g.cell_x > 0.0 && g.cell_y > 0.0 && g.cell_x.is_finite() && g.cell_y.is_finite()) {
                return Err(format!(
                    "accepted an image with an impossible placement: {g:?}"
                ));
            }
            Ok(true)
        }
    }
}

/// Checks what `job::draft::draft` (`dunereel new`) made of a file.
fn judge_draft(path: &Path, job: &Path) -> Result<bool, String> {
    match guarded(|| job::draft::draft(&[path.to_path_buf()], job))? {
        Err(e) => check_refusal(&e, path).map(|()| false),
        Ok(text) if text.contains("surveys:") => Ok(true),
        Ok(text) => Err(format!("drafted a job without surveys: {text}")),
    }
}

/// Mutates the GeoTIFF fixtures `cases` times and reads each result with the GeoTIFF readers and
/// the job drafter.
fn grid_cases(seed: u64, first: u64, cases: u64) -> Tally {
    let fixtures = mutation::fixtures(&fixture_dir("geotiff"), "tif");
    let pristine: Vec<(Vec<u8>, TiffMap)> = fixtures
        .iter()
        .map(|p| {
            let b = std::fs::read(p).unwrap();
            let m = TiffMap::read(&b);
            (b, m)
        })
        .collect();
    let scratch = tempfile::tempdir().unwrap();
    let mut tally = Tally::default();
    for case in first..first + cases {
        let k = (case % fixtures.len() as u64) as usize;
        let name = fixtures[k]
            .file_name()
            .unwrap()
            .to_string_lossy()
            .into_owned();
        let (bytes, map) = &pristine[k];
        let mut rng = Rng::for_case(seed, case);
        let mut b = bytes.clone();
        let rounds = 1 + usize::from(rng.below(4) == 0) + usize::from(rng.below(8) == 0);
        let what: Vec<String> = (0..rounds)
            .map(|_| {
                if b.is_empty() {
                    "(nothing left)".to_string()
                } else {
                    tiff_mut::mutate(&mut rng, map, &mut b)
                }
            })
            .collect();
        let path = scratch.path().join(&name);
        std::fs::write(&path, &b).unwrap();
        tally.cases += 1;
        let started = std::time::Instant::now();
        let draft_job = scratch.path().join("drafted.yaml");
        for (reader, outcome) in [
            (Reader::Grid, judge_grid(&path)),
            (Reader::Rgb, judge_rgb(&path)),
            (Reader::Draft, judge_draft(&path, &draft_job)),
        ] {
            match outcome {
                Ok(true) => tally.accepted += 1,
                Ok(false) => tally.refused += 1,
                Err(problem) => {
                    let kept = mutation::kept_dir().join(format!("grid-{seed:x}-{case}-{name}"));
                    std::fs::write(&kept, &b).unwrap();
                    tally.failures.push(Failure {
                        reader,
                        case,
                        fixture: name.clone(),
                        mutation: what.join("; "),
                        problem,
                        kept,
                    });
                }
            }
        }
        tally.timed(started.elapsed().as_millis(), case, &what.join("; "));
    }
    tally.peak_bytes = mutation::PEAK_SEEN.with(|p| p.get());
    tally
}

/// Copies the job fixtures and the grids they name into a scratch folder with the same layout,
/// so mutated jobs can be written beside them without touching the source tree.
fn job_scratch() -> (tempfile::TempDir, Vec<(String, Vec<u8>)>) {
    let d = tempfile::tempdir().unwrap();
    std::fs::create_dir_all(d.path().join("jobs")).unwrap();
    std::fs::create_dir_all(d.path().join("geotiff")).unwrap();
    for g in mutation::fixtures(&fixture_dir("geotiff"), "tif") {
        std::fs::copy(&g, d.path().join("geotiff").join(g.file_name().unwrap())).unwrap();
    }
    let jobs = mutation::fixtures(&fixture_dir("jobs"), "yaml")
        .into_iter()
        .map(|p| {
            (
                p.file_name().unwrap().to_string_lossy().into_owned(),
                std::fs::read(&p).unwrap(),
            )
        })
        .collect();
    (d, jobs)
}

/// In the `Debug` text of a value, where a non-finite number shows (`NaN`, `inf`, `-inf` outside
/// quoted strings), with the text before it so the field can be told.
fn non_finite(debug: &str) -> Option<String> {
    let mut plain = String::with_capacity(debug.len());
    let mut quoted = false;
    let mut escaped = false;
    for c in debug.chars() {
        if quoted {
            match (escaped, c) {
                (true, _) => escaped = false,
                (false, '\\') => escaped = true,
                (false, '"') => quoted = false,
                _ => {}
            }
            plain.push(if quoted { ' ' } else { '"' });
        } else {
            quoted = c == '"';
            plain.push(c);
        }
    }
    let b = plain.as_bytes();
    for word in ["NaN", "inf"] {
        for (i, _) in plain.match_indices(word) {
            let before = i.checked_sub(1).map(|j| b[j]);
            let after = b.get(i + word.len()).copied();
            let edge = |c: Option<u8>| c.is_none_or(|c| !c.is_ascii_alphanumeric() && c != b'_');
            if edge(before) && edge(after) {
                let from = plain[..i]
                    .char_indices()
                    .rev()
                    .nth(60)
                    .map_or(0, |(k, _)| k);
                return Some(plain[from..i + word.len()].to_string());
            }
        }
    }
    None
}

/// Checks an accepted job: a plannable timeline, grids that read or are refused cleanly, and the
/// checks `render` makes before its first write passing or refusing cleanly, with no number that
/// is not finite left in a job they pass.
fn judge_job(job: &job::Job) -> Result<(), String> {
    if job.methods.len() + 1 != job.surveys.len() {
        return Err("accepted a job whose methods do not match its intervals".into());
    }
    let dates: Vec<_> = job.surveys.iter().map(|s| s.date).collect();
    if !dates.windows(2).all(|w| w[0] < w[1]) {
        return Err("accepted surveys out of date order".into());
    }
    let plan = guarded(|| {
        Ok(dunereel::timeline::plan(
            &dates,
            job.frame_plan,
            job.fps,
            job.hold_s,
        ))
    })?
    .map_err(|e| e.to_string())?;
    if plan.frames.len() > 10_000 {
        return Err(format!("accepted a job of {} frames", plan.frames.len()));
    }
    for s in &job.surveys {
        if let Err(e) = guarded(|| read_survey(s))? {
            check_refusal(&e, &s.grid)?;
        }
    }
    // What the reader accepts, the checks before the first write (`dunereel check`) accept or
    // refuse cleanly; an accepted job then holds no number that is not finite.
    match guarded(|| dunereel::run::check_job(job, &dunereel::RunOptions::default()))? {
        Ok(_) => {
            if let Some(near) = non_finite(&format!("{job:?}")) {
                return Err(format!(
                    "accepted a job holding a number that is not finite: …{near}"
                ));
            }
        }
        Err(e) => {
            let path = match &e {
                dunereel::Error::Input { path, .. }
                | dunereel::Error::Job { path, .. }
                | dunereel::Error::Output { path, .. } => path.clone(),
                dunereel::Error::Io { .. } => job.path.clone(),
            };
            mutation::check_refusal_or_output(&e, &path)?;
        }
    }
    Ok(())
}

/// Mutates the job fixtures `cases` times and loads each result.
fn job_cases(seed: u64, first: u64, cases: u64) -> Tally {
    let (scratch, jobs) = job_scratch();
    let mut tally = Tally::default();
    for case in first..first + cases {
        let k = (case % jobs.len() as u64) as usize;
        let (name, pristine) = &jobs[k];
        let mut rng = Rng::for_case(seed, case);
        let mut b = pristine.clone();
        let rounds = 1 + usize::from(rng.below(4) == 0) + usize::from(rng.below(8) == 0);
        let what: Vec<String> = (0..rounds)
            .map(|_| yaml_mut::mutate(&mut rng, &mut b))
            .collect();
        let path = scratch.path().join("jobs").join(name);
        std::fs::write(&path, &b).unwrap();
        tally.cases += 1;
        let started = std::time::Instant::now();
        let outcome = guarded(|| job::load(&path)).and_then(|r| match r {
            Err(e) => check_refusal(&e, &path).map(|()| false),
            Ok(j) => judge_job(&j).map(|()| true),
        });
        tally.timed(started.elapsed().as_millis(), case, &what.join("; "));
        match outcome {
            Ok(true) => tally.accepted += 1,
            Ok(false) => tally.refused += 1,
            Err(problem) => {
                let kept = mutation::kept_dir().join(format!("job-{seed:x}-{case}-{name}"));
                std::fs::write(&kept, &b).unwrap();
                tally.failures.push(Failure {
                    reader: Reader::Job,
                    case,
                    fixture: name.clone(),
                    mutation: what.join("; "),
                    problem,
                    kept,
                });
            }
        }
    }
    tally.peak_bytes = mutation::PEAK_SEEN.with(|p| p.get());
    tally
}

fn assert_clean(tally: &Tally, seed: u64) {
    eprintln!("{}", tally.report(seed));
    assert!(tally.failures.is_empty(), "{}", tally.report(seed));
    // A run where every case is refused (or every case is read) tests too little.
    assert!(
        tally.accepted > 0 && tally.refused > 0,
        "{}",
        tally.report(seed)
    );
}

#[test]
fn pristine_fixtures_read_or_are_refused_cleanly() {
    for p in mutation::fixtures(&fixture_dir("geotiff"), "tif") {
        judge_grid(&p).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
        judge_rgb(&p).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
    }
    let (scratch, jobs) = job_scratch();
    for (name, text) in jobs {
        let path = scratch.path().join("jobs").join(&name);
        std::fs::write(&path, text).unwrap();
        let job = job::load(&path).unwrap_or_else(|e| panic!("{name}: {e}"));
        judge_job(&job).unwrap_or_else(|e| panic!("{name}: {e}"));
        // The pristine jobs pass the checks before the first write, so a mutated job the reader
        // accepts is carried through them too.
        dunereel::run::check_job(&job, &dunereel::RunOptions::default())
            .unwrap_or_else(|e| panic!("{name}: {e}"));
    }
}

#[test]
fn grid_readers_survive_mutated_geotiffs() {
    let (_, seed) = mutation::settings(GRID_CASES);
    let tally = grid_cases(seed, 0, GRID_CASES);
    assert_clean(&tally, seed);
}

#[test]
fn job_reader_survives_mutated_job_files() {
    let (_, seed) = mutation::settings(JOB_CASES);
    let tally = job_cases(seed, 0, JOB_CASES);
    assert_clean(&tally, seed);
}

#[test]
fn a_declared_huge_grid_is_refused_before_allocating() {
    // Every fixture with its ImageWidth and ImageLength set to 100 000: refused, naming the size,
    // with less than 2 MiB of heap (the 1 MiB read buffer and the tag tables), never the 40 GB the
    // header asks for.
    let scratch = tempfile::tempdir().unwrap();
    for p in mutation::fixtures(&fixture_dir("geotiff"), "tif") {
        let mut b = std::fs::read(&p).unwrap();
        let map = TiffMap::read(&b);
        assert!(map.set_value(&mut b, 256, 0, 100_000) && map.set_value(&mut b, 257, 0, 100_000));
        let path = scratch.path().join(p.file_name().unwrap());
        std::fs::write(&path, &b).unwrap();
        let (out, usage) = mutation::alloc::measure(|| read_grid(&path));
        let e = out.expect_err("a 100 000 x 100 000 grid in a small file");
        check_refusal(&e, &path).unwrap();
        // A SHORT field holds 100 000 as 34 464 (its low 16 bits): still far beyond the file.
        let (w, h) = (
            map.values(&b, 256).unwrap()[0],
            map.values(&b, 257).unwrap()[0],
        );
        assert!(w > 30_000 && h > 30_000);
        assert!(e.to_string().contains(&format!("{w} x {h} cells")), "{e}");
        assert!(
            usage.peak_bytes < 2 << 20,
            "{}: {} bytes at peak",
            p.display(),
            usage.peak_bytes
        );
    }
}

#[test]
fn cases_repeat_exactly() {
    // The same seed and case number make the same file, byte for byte: a reported case can be
    // run again.
    let fixtures = mutation::fixtures(&fixture_dir("geotiff"), "tif");
    let b = std::fs::read(&fixtures[0]).unwrap();
    let map = TiffMap::read(&b);
    let make = |case| {
        let mut rng = Rng::for_case(7, case);
        let mut x = b.clone();
        let what = tiff_mut::mutate(&mut rng, &map, &mut x);
        (x, what)
    };
    for case in 0..50 {
        assert_eq!(make(case), make(case));
    }
    assert_ne!(make(1).0, make(2).0);
}

/// The longer run: `cargo test --test mutation_readers -- --ignored`
/// (`DUNEREEL_MUTATION_CASES`, `DUNEREEL_MUTATION_SEED` to change the count and the seed). It
/// starts after the cases of the quick run, so it adds new ones.
#[test]
#[ignore = "long run: 100 000 cases of each reader, see DEVELOPERS.md"]
fn long_run_grid_readers() {
    let (cases, seed) = mutation::settings(LONG_CASES);
    let tally = grid_cases(seed, GRID_CASES, cases);
    assert_clean(&tally, seed);
}

/// The longer run of the job reader; see [`long_run_grid_readers`].
#[test]
#[ignore = "long run: 100 000 cases of each reader, see DEVELOPERS.md"]
fn long_run_job_reader() {
    let (cases, seed) = mutation::settings(LONG_CASES);
    let tally = job_cases(seed, JOB_CASES, cases);
    assert_clean(&tally, seed);
}
