//! The seeded mutation test of the readers: committed fixtures are damaged in many small ways and
//! read again; every case must end in a clean refusal or a valid result, with bounded allocation.
//!
//! A case is fixed by (seed, case number): the fixture is `case mod fixtures`, the mutations come
//! from `Rng::for_case(seed, case)`. A failure report names both and what was done, and the
//! damaged file is kept in `target/mutation-failures/` to be read again by hand.

pub mod alloc;
pub mod rng;
pub mod tiff_mut;
pub mod yaml_mut;

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};

use dunereel::Error;

/// Seed of the cases `cargo test` runs. Any other seed is a different, equally valid sample.
pub const DEFAULT_SEED: u64 = 0x00D1_5EA5_E5EE_D5EE;

/// Most heap one reader call may hold at once on a mutated fixture (all fixtures are under
/// 20 KB; a mutated one may grow to 30 KB with an appended stream). The readers' own bound is a
/// fixed multiple of the stored bytes (`geotiff` module docs); 64 MiB leaves room for that and
/// the 1 MiB read buffer, and is far below what a lying header asks for (a declared
/// 30 000 x 30 000 float32 grid needs 3.6 GB).
pub const ALLOC_LIMIT_BYTES: usize = 64 << 20;

/// Which reader a case went through.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Reader {
    /// `geotiff::read_grid`.
    Grid,
    /// `geotiff::read_rgb`.
    Rgb,
    /// `job::draft::draft` (`dunereel new`), which also reads the TIFF DateTime tag.
    Draft,
    /// `job::load`, and for an accepted job the survey grids and the timeline it describes.
    Job,
}

/// One case that broke a rule.
#[derive(Debug)]
pub struct Failure {
    pub reader: Reader,
    pub case: u64,
    pub fixture: String,
    pub mutation: String,
    pub problem: String,
    pub kept: PathBuf,
}

/// What a run of cases found.
#[derive(Debug, Default)]
pub struct Tally {
    pub cases: u64,
    pub accepted: u64,
    pub refused: u64,
    pub peak_bytes: usize,
    pub failures: Vec<Failure>,
    /// The slowest cases: (milliseconds, case, what was done), slowest first, at most 3.
    pub slowest: Vec<(u128, u64, String)>,
}

impl Tally {
    /// Notes how long a case took.
    pub fn timed(&mut self, ms: u128, case: u64, what: &str) {
        if self.slowest.len() < 3 || ms > self.slowest[2].0 {
            self.slowest
                .push((ms, case, what.chars().take(120).collect()));
            self.slowest.sort_by_key(|s| std::cmp::Reverse(s.0));
            self.slowest.truncate(3);
        }
    }

    /// A summary for the test log, and every failure with how to repeat it.
    pub fn report(&self, seed: u64) -> String {
        let mut s = format!(
            "{} cases (seed {seed:#x}): {} read, {} refused, {} broke a rule; largest peak heap {} KiB\n",
            self.cases,
            self.accepted,
            self.refused,
            self.failures.len(),
            self.peak_bytes >> 10
        );
        for (ms, case, what) in &self.slowest {
            s.push_str(&format!("  slow: case {case} took {ms} ms: {what}\n"));
        }
        for f in self.failures.iter().take(40) {
            s.push_str(&format!(
                "  {:?} case {} on {}: {}\n      did: {}\n      kept: {}\n",
                f.reader,
                f.case,
                f.fixture,
                f.problem,
                f.mutation,
                f.kept.display()
            ));
        }
        s
    }
}

/// Words that belong to the program, not to a message for a surveyor.
const INNARDS: &[&str] = &[
    "panicked",
    "unwrap",
    "Some(",
    "None",
    "Ok(",
    "Err(",
    "List(",
    "Short(",
    "Unsigned(",
    "Ascii(",
    "Byte(",
    "expected u8",
    "expected u16",
    "expected u32",
    "expected u64",
    "expected usize",
    "expected i32",
    "expected f32",
    "expected f64",
    "Utf8Error",
    "TiffError",
    "FormatError",
    "struct ",
    "enum ",
];

/// Words with which a message tells the user what to do.
const FIXES: &[&str] = &[
    "export",
    "write",
    "copy",
    "give",
    "crop",
    "resample",
    "rectify",
    "flip",
    "set ",
    "correct",
    "check",
    "save",
    "assign",
    "use ",
    "remove",
    "add ",
    "list ",
    "lower",
    "keep",
    "indent",
    "quote",
    "reproject",
    "replace",
    "put ",
    "leave",
    "turn",
    "state",
    "delete",
    "choose",
    "name",
    "raise",
    // A valid value to give instead ("outside 0..=1; e.g. 0.55", "typical lidar values are …").
    "e.g.",
    "typical",
];

/// Checks a refusal of bad input: an input or job error that names the file, says what is wrong
/// in plain words, and how to fix it.
pub fn check_refusal(e: &Error, file: &Path) -> Result<(), String> {
    check_message(e, file, false)
}

/// As [`check_refusal`], also accepting a refusal of the output folder (the checks before the
/// first write make those too).
pub fn check_refusal_or_output(e: &Error, file: &Path) -> Result<(), String> {
    check_message(e, file, true)
}

fn check_message(e: &Error, file: &Path, output_ok: bool) -> Result<(), String> {
    let text = e.to_string();
    let named = match e {
        Error::Input { path, .. } | Error::Job { path, .. } => path == file,
        Error::Output { path, .. } if output_ok => path == file,
        Error::Io { .. } | Error::Output { .. } => {
            return Err(format!(
                "refused as an I/O or output error, not bad input: {text}"
            ))
        }
    };
    if !named || !text.starts_with(&file.display().to_string()) {
        return Err(format!("the message does not name the file: {text}"));
    }
    if let Error::Job { place, .. } = e {
        if place.trim().is_empty() {
            return Err(format!("the message names no place in the job: {text}"));
        }
    }
    let message = match e {
        Error::Input { message, .. }
        | Error::Job { message, .. }
        | Error::Output { message, .. } => message,
        _ => unreachable!(),
    };
    if message.len() < 20 {
        return Err(format!("the message is too short to help: {text}"));
    }
    if message.len() > 600 {
        return Err(format!(
            "the message is {} bytes long; it should say what is wrong in a sentence or two: {}…",
            message.len(),
            &text.chars().take(300).collect::<String>()
        ));
    }
    if let Some(w) = INNARDS.iter().find(|w| message.contains(**w)) {
        return Err(format!("the message shows program innards ({w}): {text}"));
    }
    let lower = message.to_lowercase();
    if !FIXES.iter().any(|w| lower.contains(w)) {
        return Err(format!("the message does not say what to do: {text}"));
    }
    Ok(())
}

/// Runs one reader call: catches a panic, measures the heap, and returns the outcome or a problem.
pub fn guarded<T>(f: impl FnOnce() -> dunereel::Result<T>) -> Result<dunereel::Result<T>, String> {
    let (out, usage) = alloc::measure(|| catch_unwind(AssertUnwindSafe(f)));
    let out = out.map_err(|p| {
        let msg = p
            .downcast_ref::<String>()
            .cloned()
            .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
            .unwrap_or_default();
        format!("panicked: {msg}")
    })?;
    if usage.peak_bytes > ALLOC_LIMIT_BYTES || usage.largest_request > ALLOC_LIMIT_BYTES {
        return Err(format!(
            "allocated {} MiB at peak (largest single request {} MiB), over the {} MiB limit",
            usage.peak_bytes >> 20,
            usage.largest_request >> 20,
            ALLOC_LIMIT_BYTES >> 20
        ));
    }
    PEAK_SEEN.with(|p| p.set(p.get().max(usage.peak_bytes)));
    Ok(out)
}

thread_local! {
    /// Largest peak heap of any call on this thread, for the summary.
    pub static PEAK_SEEN: std::cell::Cell<usize> = const { std::cell::Cell::new(0) };
}

/// The committed fixtures of one kind, sorted by name so case numbers stay put.
pub fn fixtures(dir: &Path, ext: &str) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == ext))
        .collect();
    v.sort();
    assert!(!v.is_empty(), "no .{ext} fixtures in {}", dir.display());
    v
}

/// Where failing inputs are kept.
pub fn kept_dir() -> PathBuf {
    let d = Path::new(env!("CARGO_MANIFEST_DIR")).join("target/mutation-failures");
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// Case count and seed: `DUNEREEL_MUTATION_CASES` and `DUNEREEL_MUTATION_SEED` (decimal or 0x
/// hex) when set, else the defaults given.
pub fn settings(default_cases: u64) -> (u64, u64) {
    let parse = |s: String| {
        s.strip_prefix("0x")
            .map_or_else(|| s.parse().ok(), |h| u64::from_str_radix(h, 16).ok())
    };
    let cases = std::env::var("DUNEREEL_MUTATION_CASES")
        .ok()
        .and_then(parse)
        .unwrap_or(default_cases);
    let seed = std::env::var("DUNEREEL_MUTATION_SEED")
        .ok()
        .and_then(parse)
        .unwrap_or(DEFAULT_SEED);
    (cases, seed)
}
