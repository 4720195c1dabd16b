//! A job split into parts for a cluster: `render --part K/N` renders a share of the frames into a
//! part folder; `assemble` checks that all N parts are there and made from the same job and grids,
//! then builds the bag exactly as a one-machine run would.
//!
//! The split is fixed and documented: of a job's `n` frames (numbered from 0), part K of N renders
//! frames `floor((K-1)·n/N)` up to, not including, `floor(K·n/N)`: contiguous blocks whose sizes
//! differ by at most one. Parts live in `<output folder>.parts/part-K-of-N/`, beside the output
//! folder (`--output` moves both). A part folder holds its frames as `frame-NNNNNN.png` (numbered as
//! in the whole job) and `part.json`: the job file's and every grid's SHA-256, K, N, the frame range and
//! each frame's crest figure. It is built under a hidden name and renamed into place when complete,
//! so a part folder that exists is a finished part.
//!
//! A part reads and checks everything a whole run does, but estimates only the displacement fields
//! its own frames need, plus the fields it stores for `assemble`: the part that renders an
//! interval's first frame writes that interval's field as `field-III.bin` (exact bits, see
//! `interp::flow::stored`), so each field is estimated once over all the parts. A part skips the
//! landforms' migration, which only the record shows.
//! `assemble` reads the grids again (the record and the poster need them), reads the fields from
//! the parts instead of estimating them, refuses parts that are missing, from another job, from
//! other grids or from another split, then
//! hands the frames, decoded from the parts' PNGs (lossless, so equal to the frames in memory), to
//! the same output stage as `render`. The bag is byte-identical to a one-machine run except for the
//! BagIt date line (`Bagging-Date`) and the tag manifest that lists it. The parts folder is removed
//! once the bag is in place.

use std::fs;
use std::ops::Range;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::frames::{FrameFigures, Painter};
use super::{output_folder, protected, scratch, FrameSource, Prepared};
use super::{RunOptions, RunReport};
use crate::archive::{self, bagit::sha256_hex};
use crate::encode::png_seq;
use crate::error::{Error, Result};
use crate::interp::flow::FlowResult;
use crate::job::Job;
use crate::render::Frame;
use crate::timeline::Timeline;

/// Part K of N (1 ≤ K ≤ N).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct PartSpec {
    /// Which part, from 1.
    pub k: usize,
    /// How many parts in all.
    pub n: usize,
}

impl PartSpec {
    /// A checked part number.
    ///
    /// # Errors
    /// A message when `k` is not in 1..=n.
    pub fn new(k: usize, n: usize) -> std::result::Result<Self, String> {
        if n == 0 || k == 0 || k > n {
            return Err(format!(
                "part {k}/{n} does not exist; parts are numbered 1/N to N/N with N at least 1"
            ));
        }
        Ok(PartSpec { k, n })
    }

    /// Parses `K/N`.
    ///
    /// # Errors
    /// A message saying what a part looks like.
    pub fn parse(text: &str) -> std::result::Result<Self, String> {
        let bad = || {
            format!("--part {text:?}: write the part as K/N, e.g. 2/8 (or `slurm` inside a Slurm job array)")
        };
        let (k, n) = text.split_once('/').ok_or_else(bad)?;
        let k: usize = k.trim().parse().map_err(|_| bad())?;
        let n: usize = n.trim().parse().map_err(|_| bad())?;
        PartSpec::new(k, n)
    }

    /// The part a Slurm job-array task stands for: K = (SLURM_ARRAY_TASK_ID − SLURM_ARRAY_TASK_MIN) /
    /// SLURM_ARRAY_TASK_STEP + 1 and N = SLURM_ARRAY_TASK_COUNT (REFERENCES.md §16; from memory for
    /// the variable names, confirmed on a real one-node cluster by tests/slurm). `var` looks a
    /// variable up (the CLI passes the environment; the library never reads it).
    ///
    /// # Errors
    /// The variable at fault and a message: missing, not a whole number, or an impossible part.
    pub fn from_slurm(
        var: impl Fn(&str) -> Option<String>,
    ) -> std::result::Result<Self, (&'static str, String)> {
        let get = |name: &'static str| -> std::result::Result<usize, (&'static str, String)> {
            let v = var(name).ok_or((
                name,
                "is not set: run inside an `sbatch --array` job, or give the part as --part K/N"
                    .to_string(),
            ))?;
            v.trim()
                .parse()
                .map_err(|_| (name, format!("{v:?} is not a whole number")))
        };
        let (id, min, count) = (
            get("SLURM_ARRAY_TASK_ID")?,
            get("SLURM_ARRAY_TASK_MIN")?,
            get("SLURM_ARRAY_TASK_COUNT")?,
        );
        let step = get("SLURM_ARRAY_TASK_STEP").unwrap_or(1).max(1);
        let k = id.checked_sub(min).map_or(0, |d| d / step + 1);
        PartSpec::new(k, count).map_err(|m| ("SLURM_ARRAY_TASK_ID", m))
    }

    /// The frames of this part among `total`: see the module doc.
    pub fn frames(&self, total: usize) -> Range<usize> {
        (self.k - 1) * total / self.n..self.k * total / self.n
    }

    /// The part's folder name, `part-K-of-N`.
    pub fn folder_name(&self) -> String {
        format!("part-{}-of-{}", self.k, self.n)
    }
}

/// The folder that holds the parts of an output folder: `<folder>.parts`.
pub fn parts_folder(output: &Path) -> PathBuf {
    let name = output
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "out".into());
    output.with_file_name(format!("{name}.parts"))
}

const PART_FILE: &str = "part.json";

/// What a part folder says about itself.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
struct PartManifest {
    program: String,
    job_sha256: String,
    grids_sha256: Vec<String>,
    part: usize,
    parts: usize,
    frames_in_job: usize,
    first_frame: usize,
    end_frame: usize,
    /// The figures `paint` returned for each frame of the part (crest and highest cell, metres).
    frame_figures: Vec<FrameFigures>,
    /// The intervals (pair indices) whose displacement field this part stores, as
    /// `field-III.bin` (`interp::flow::stored`).
    #[serde(default)]
    fields: Vec<usize>,
}

/// Whether part `spec` stores the displacement field of interval `i` for `assemble`: the part that
/// renders the interval's first frame does (part 1 when no frame belongs to the interval), so each
/// field is estimated once over all parts.
pub(super) fn stores_field(timeline: &Timeline, spec: PartSpec, i: usize) -> bool {
    let total = timeline.frames.len();
    match timeline.frames.iter().position(|t| t.from == i) {
        Some(first) => spec.frames(total).contains(&first),
        None => spec.k == 1,
    }
}

fn field_file(i: usize) -> String {
    format!("field-{i:03}.bin")
}

fn program() -> String {
    concat!("dunereel ", env!("CARGO_PKG_VERSION")).to_string()
}

fn identity(job: &Job, prepared: &Prepared) -> (String, Vec<String>) {
    (
        sha256_hex(job.text.as_bytes()),
        prepared
            .record
            .surveys
            .iter()
            .map(|s| s.source_sha256.clone())
            .collect(),
    )
}

fn frame_file(i: usize) -> String {
    format!("frame-{i:06}.png")
}

/// What `render --part` wrote.
#[derive(Debug, Clone)]
pub struct PartReport {
    /// The part folder.
    pub folder: PathBuf,
    /// Frames rendered by this part.
    pub frames: Range<usize>,
    /// Frames in the whole job.
    pub frames_in_job: usize,
    /// Warnings worth showing.
    pub warnings: Vec<String>,
}

/// Renders part `spec` of a job into its part folder (see the module doc).
///
/// # Errors
/// As [`super::run_job`] before writing; `Error::Output` when the part folder exists and overwriting
/// was not asked for.
pub fn render_part(job: &Job, opts: &RunOptions, spec: PartSpec) -> Result<PartReport> {
    let output = output_folder(job, opts);
    let overwrite = opts.overwrite || job.output.overwrite;
    // The parts end up in the output folder: refuse now what assembling would refuse later.
    archive::check_replaceable(&output, overwrite, &protected(job))?;
    let parts = parts_folder(&output);
    let target = parts.join(spec.folder_name());
    if target.exists() && !overwrite {
        return Err(Error::output(
            &target,
            "this part was rendered already; pass --overwrite to render it again, or assemble the job",
        ));
    }
    // A part estimates only the displacement fields its own frames need.
    let prepared = super::prepare_share(job, super::FrameShare::Part(spec))?;
    let (job_sha256, grids_sha256) = identity(job, &prepared);
    let Prepared {
        stack,
        timeline,
        mut renderer,
        record,
        fields,
        shell_grid,
        drape,
        warnings,
        ..
    } = prepared;
    let total = timeline.frames.len();
    let range = spec.frames(total);
    fs::create_dir_all(&parts).map_err(|e| Error::io(&parts, e))?;
    let tmp = parts.join(format!(
        ".{}.partial-{}",
        spec.folder_name(),
        std::process::id()
    ));
    let _ = fs::remove_dir_all(&tmp);
    fs::create_dir_all(&tmp).map_err(|e| Error::io(&tmp, e))?;
    let result = (|| {
        let mut painter = Painter::new(
            job,
            &stack,
            &record,
            &fields,
            drape.as_ref(),
            shell_grid.as_ref(),
        );
        let mut frame = Frame::new(job.view.width, job.view.height);
        let mut figures = Vec::with_capacity(range.len());
        for t in &timeline.frames[range.clone()] {
            let figure = painter.paint(
                &mut renderer,
                t,
                super::orbit_share(t.index, total),
                &mut frame,
            );
            png_seq::write_png(&tmp.join(frame_file(t.index)), &frame, false)?;
            figures.push(figure);
            if let Some(cb) = &opts.progress {
                cb(t.index + 1 - range.start, range.len());
            }
        }
        // The fields this part stores for `assemble` (estimated here in any case; see
        // `stores_field`).
        let mut stored = Vec::new();
        for (i, field) in fields.iter().enumerate() {
            if !stores_field(&timeline, spec, i) {
                continue;
            }
            let Some(field) = field else {
                return Err(Error::output(
                    &tmp,
                    format!(
                        "the field of interval {i} was not estimated; this is a bug in dunereel"
                    ),
                ));
            };
            let path = tmp.join(field_file(i));
            fs::write(&path, crate::interp::flow::stored::to_bytes(field))
                .map_err(|e| Error::io(&path, e))?;
            stored.push(i);
        }
        let manifest = PartManifest {
            program: program(),
            job_sha256,
            grids_sha256,
            part: spec.k,
            parts: spec.n,
            frames_in_job: total,
            first_frame: range.start,
            end_frame: range.end,
            frame_figures: figures,
            fields: stored,
        };
        let text = serde_json::to_string_pretty(&manifest)
            .map_err(|e| Error::output(&tmp, format!("cannot describe the part: {e}")))?;
        fs::write(tmp.join(PART_FILE), text).map_err(|e| Error::io(&tmp, e))?;
        if target.exists() {
            fs::remove_dir_all(&target).map_err(|e| Error::io(&target, e))?;
        }
        fs::rename(&tmp, &target).map_err(|e| Error::io(&target, e))
    })();
    if result.is_err() {
        let _ = fs::remove_dir_all(&tmp);
    }
    result?;
    Ok(PartReport {
        folder: target,
        frames: range,
        frames_in_job: total,
        warnings,
    })
}

/// The frames of a job, gathered from its part folders.
pub(crate) struct Gathered {
    /// Per frame: its PNG file and the figure `paint` returned for it.
    frames: Vec<(PathBuf, FrameFigures)>,
    /// Per interval: the file of its stored displacement field.
    fields: Vec<PathBuf>,
}

impl Gathered {
    /// Decodes frame `i` into `frame` and returns its figure.
    ///
    /// # Errors
    /// `Error::Input` when the PNG cannot be read or has another size than the job's frames.
    pub(crate) fn load(&self, i: usize, frame: &mut Frame) -> Result<FrameFigures> {
        let (path, figure) = &self.frames[i];
        let img = image::open(path)
            .map_err(|e| {
                Error::input(
                    path,
                    format!("cannot read this part frame ({e}); render its part again"),
                )
            })?
            .to_rgba8();
        if img.width() != frame.width || img.height() != frame.height {
            return Err(Error::input(
                path,
                format!(
                    "is {} x {} but the job's frames are {} x {}; render its part again",
                    img.width(),
                    img.height(),
                    frame.width,
                    frame.height
                ),
            ));
        }
        frame.rgba.copy_from_slice(img.as_raw());
        Ok(*figure)
    }
}

/// Finds and checks every part of the job (see the module doc).
fn gather(job: &Job, parts: &Path, prepared: &Prepared) -> Result<Gathered> {
    let total = prepared.timeline.frames.len();
    let (job_sha, grid_shas) = identity(job, prepared);
    let missing_all = || {
        Error::input(
            parts,
            "holds no parts; render them first with `dunereel render JOB --part K/N` (or --part slurm)",
        )
    };
    let entries = fs::read_dir(parts).map_err(|_| missing_all())?;
    let mut found: Vec<(PartManifest, PathBuf)> = Vec::new();
    for e in entries.flatten() {
        let name = e.file_name().to_string_lossy().into_owned();
        if !name.starts_with("part-") {
            continue;
        }
        let dir = e.path();
        let file = dir.join(PART_FILE);
        let text = fs::read_to_string(&file).map_err(|_| {
            Error::input(
                &dir,
                "has no part.json: it is not a finished part; render this part again",
            )
        })?;
        let m: PartManifest = serde_json::from_str(&text).map_err(|e| {
            Error::input(
                &file,
                format!("cannot be read ({e}); render this part again"),
            )
        })?;
        found.push((m, dir));
    }
    if found.is_empty() {
        return Err(missing_all());
    }
    found.sort_by_key(|(m, _)| (m.parts, m.part));
    let n = found[0].0.parts;
    for (m, dir) in &found {
        if m.parts != n {
            return Err(Error::input(
                dir,
                format!(
                    "belongs to a split into {} parts while {} belongs to a split into {n}; remove the \
                     parts of the split you no longer want",
                    m.parts,
                    found[0].1.display()
                ),
            ));
        }
    }
    for (m, dir) in &found {
        if m.job_sha256 != job_sha {
            return Err(Error::input(
                dir,
                "was made from another job file (its SHA-256 differs); render this part again from this job",
            ));
        }
        if m.grids_sha256 != grid_shas {
            return Err(Error::input(
                dir,
                "was made from other grids (their SHA-256 differ from the grids the job names now); \
                 render this part again",
            ));
        }
        let expect = PartSpec { k: m.part, n }.frames(total);
        if m.frames_in_job != total
            || m.first_frame != expect.start
            || m.end_frame != expect.end
            || m.frame_figures.len() != expect.len()
        {
            return Err(Error::input(
                dir,
                format!(
                    "holds frames {}..{} of {}, but part {}/{n} of this job is frames {}..{} of {total}; \
                     render this part again",
                    m.first_frame, m.end_frame, m.frames_in_job, m.part, expect.start, expect.end
                ),
            ));
        }
    }
    let have: Vec<usize> = found.iter().map(|(m, _)| m.part).collect();
    let missing: Vec<String> = (1..=n)
        .filter(|k| !have.contains(k))
        .map(|k| format!("{k}/{n}"))
        .collect();
    if !missing.is_empty() {
        return Err(Error::input(
            parts,
            format!(
                "part(s) {} of {n} are missing; render them with `dunereel render JOB --part K/{n}`",
                missing.join(", ")
            ),
        ));
    }
    let mut frames = Vec::with_capacity(total);
    for (m, dir) in &found {
        for (j, figure) in m.frame_figures.iter().enumerate() {
            let path = dir.join(frame_file(m.first_frame + j));
            if !path.is_file() {
                return Err(Error::input(
                    &path,
                    "is missing from its part; render this part again",
                ));
            }
            frames.push((path, *figure));
        }
    }
    // Every interval's field, from the part that stores it.
    let intervals = prepared.stack.len() - 1;
    let mut fields = Vec::with_capacity(intervals);
    for i in 0..intervals {
        let Some((m, dir)) = found
            .iter()
            .find(|(m, _)| stores_field(&prepared.timeline, PartSpec { k: m.part, n }, i))
        else {
            return Err(Error::input(
                parts,
                "no part stores a displacement field; render the parts again",
            ));
        };
        let path = dir.join(field_file(i));
        if !m.fields.contains(&i) || !path.is_file() {
            return Err(Error::input(
                &path,
                format!(
                    "is missing: part {}/{n} stores the displacement field of interval {i}; render this part again",
                    m.part
                ),
            ));
        }
        fields.push(path);
    }
    Ok(Gathered { frames, fields })
}

impl Gathered {
    /// Reads every interval's stored displacement field.
    ///
    /// # Errors
    /// `Error::Input` naming the file that cannot be read or is damaged.
    fn read_fields(&self) -> Result<Vec<Option<FlowResult>>> {
        self.fields
            .iter()
            .map(|path| {
                let bytes = fs::read(path).map_err(|e| Error::io(path, e))?;
                crate::interp::flow::stored::from_bytes(&bytes)
                    .map(Some)
                    .map_err(|e| {
                        Error::input(path, format!("is damaged ({e}); render its part again"))
                    })
            })
            .collect()
    }
}

/// Builds the bag of a job from its rendered parts (see the module doc).
///
/// # Errors
/// `Error::Input` naming the missing or mismatched part; otherwise as [`super::run_job`].
pub fn assemble(job: &Job, opts: &RunOptions) -> Result<RunReport> {
    let folder = output_folder(job, opts);
    let overwrite = opts.overwrite || job.output.overwrite;
    archive::check_replaceable(&folder, overwrite, &protected(job))?;
    let parts = parts_folder(&folder);
    // The displacement fields come from the parts, which estimated each once.
    let mut prepared = super::prepare_share(job, super::FrameShare::Assemble)?;
    let gathered = gather(job, &parts, &prepared)?;
    let fields = gathered.read_fields()?;
    prepared.attach_fields(job, fields);
    let cleared = scratch::clear_stale(&folder);
    let work = scratch::scratch_path(&folder);
    let result = super::outputs::write_outputs(
        job,
        prepared,
        &work,
        &folder,
        overwrite,
        opts,
        FrameSource::Parts(&gathered),
    );
    let _ = fs::remove_dir_all(&work);
    let mut report = result?;
    report.warnings.extend(cleared);
    if let Err(e) = fs::remove_dir_all(&parts) {
        report.warnings.push(format!(
            "{}: the parts could not be removed after assembling ({e}); remove them by hand",
            parts.display()
        ));
    }
    Ok(report)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_split_covers_every_frame_once_in_near_equal_blocks() {
        for total in [0usize, 1, 2, 7, 50, 154] {
            for n in 1..=9 {
                let mut next = 0;
                for k in 1..=n {
                    let r = PartSpec::new(k, n).unwrap().frames(total);
                    assert_eq!(r.start, next, "{total} frames, part {k}/{n}");
                    assert!(r.len() <= total.div_ceil(n) && r.len() + 1 >= total / n);
                    next = r.end;
                }
                assert_eq!(next, total);
            }
        }
        // 154 frames in 3 parts: 51, 51, 52.
        let sizes: Vec<usize> = (1..=3)
            .map(|k| PartSpec::new(k, 3).unwrap().frames(154).len())
            .collect();
        assert_eq!(sizes, [51, 51, 52]);
    }

    #[test]
    fn part_numbers_are_checked() {
        assert_eq!(PartSpec::parse("2/8").unwrap(), PartSpec { k: 2, n: 8 });
        assert!(PartSpec::parse("0/3")
            .unwrap_err()
            .contains("does not exist"));
        assert!(PartSpec::parse("4/3")
            .unwrap_err()
            .contains("does not exist"));
        assert!(PartSpec::parse("two").unwrap_err().contains("K/N"));
        // An array --array=10-20:5 has tasks 10, 15, 20: task 15 is part 2 of 3.
        let vars = |name: &str| match name {
            "SLURM_ARRAY_TASK_ID" => Some("15".to_string()),
            "SLURM_ARRAY_TASK_MIN" => Some("10".to_string()),
            "SLURM_ARRAY_TASK_COUNT" => Some("3".to_string()),
            "SLURM_ARRAY_TASK_STEP" => Some("5".to_string()),
            _ => None,
        };
        assert_eq!(PartSpec::from_slurm(vars).unwrap(), PartSpec { k: 2, n: 3 });
        assert_eq!(
            PartSpec::from_slurm(|_| None).unwrap_err().0,
            "SLURM_ARRAY_TASK_ID"
        );
        assert_eq!(
            parts_folder(Path::new("/a/out/site")),
            PathBuf::from("/a/out/site.parts")
        );
    }
}
