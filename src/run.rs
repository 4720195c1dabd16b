//! `run_job`: the whole pipeline, from a resolved `Job` to the files of one run.
//!
//! Order matters for the promise "bad input leaves no output": every check (job, grids, alignment,
//! view, output folder) happens before the first byte is written. Outputs are then written into a
//! staging folder beside the target and renamed into place at the very end.

use std::path::{Path, PathBuf};

use crate::align::{self, AlignedStack};
use crate::archive::{self, ArchiveOptions, ExtraContent, ExtraFile};
use crate::change::{self, ChangeRecord};
use crate::error::{Error, Result};
use crate::interp::{self, Surface};
use crate::job::{Job, Method};
use crate::render::{Frame, Renderer};
use crate::survey;
use crate::timeline::{self, FrameKind, FrameTime, Timeline};

/// Settings the command line may override; everything else comes from the job.
#[derive(Default)]
pub struct RunOptions {
    /// Replace an existing output folder. Default: false (the job's `output.overwrite` also allows it).
    pub overwrite: bool,
    /// Write into this folder instead of the job's `output.folder`. Default: the job's.
    pub output_folder: Option<PathBuf>,
    /// Called after each frame with (frames done, frames in all). Default: none.
    pub progress: Option<Box<dyn Fn(usize, usize) + Sync>>,
}

/// What a run produced.
#[derive(Debug, Clone)]
pub struct RunReport {
    /// The output folder.
    pub folder: PathBuf,
    /// Number of frames rendered.
    pub frames: usize,
    /// Of which survey frames.
    pub survey_frames: usize,
    /// Number of payload files in the archive folder.
    pub files: usize,
    /// Warnings worth showing the user (also logged).
    pub warnings: Vec<String>,
}

/// Most memory the kept animation frames may take, in bytes (frames are kept for the GIF palette).
pub const FRAME_MEMORY_BUDGET: usize = 6 << 30;

/// Runs a job end to end.
///
/// # Errors
/// `Error::Job`/`Error::Input` for bad input (nothing is written), `Error::Output`/`Error::Io` when
/// writing fails (temporary files are removed and an existing output folder is left as it was).
pub fn run_job(job: &Job, opts: &RunOptions) -> Result<RunReport> {
    let folder = opts
        .output_folder
        .clone()
        .unwrap_or_else(|| job.output.folder.clone());
    let overwrite = opts.overwrite || job.output.overwrite;
    check_output_folder(&folder, overwrite)?;

    let prepared = prepare(job)?;
    let scratch = scratch_path(&folder);
    let result = write_outputs(job, prepared, &scratch, &folder, overwrite, opts);
    let _ = std::fs::remove_dir_all(&scratch);
    result
}

/// Everything computed and checked before the first write.
struct Prepared {
    stack: AlignedStack,
    timeline: Timeline,
    renderer: Renderer,
    record: ChangeRecord,
}

fn prepare(job: &Job) -> Result<Prepared> {
    let surveys = job
        .surveys
        .iter()
        .map(survey::read_survey)
        .collect::<Result<Vec<_>>>()?;
    let stack = align::align(surveys, job.area_of_interest)?;
    let dates: Vec<_> = stack.surveys().iter().map(|s| s.date).collect();
    let timeline = timeline::plan(&dates, job.frame_plan, job.fps, job.hold_s);
    let range = stack
        .elevation_range()
        .expect("align refuses all-nodata grids");
    let renderer = Renderer::new(stack.geometry(), &job.view, &job.sun, range)
        .map_err(|m| Error::job(&job.path, "view", m))?;
    let frame_bytes = job.view.width as usize * job.view.height as usize * 4;
    if job.output.gif.is_some() && frame_bytes * timeline.frames.len() > FRAME_MEMORY_BUDGET {
        return Err(Error::job(
            &job.path,
            "timeline",
            format!(
                "{} frames of {} x {} would need {} MiB to build the GIF (limit {} MiB); lower frames_per_year or the frame size",
                timeline.frames.len(),
                job.view.width,
                job.view.height,
                frame_bytes * timeline.frames.len() >> 20,
                FRAME_MEMORY_BUDGET >> 20
            ),
        ));
    }
    let record = change::record(&stack, &job.change).map_err(|e| in_job_file(e, &job.path))?;
    Ok(Prepared {
        stack,
        timeline,
        renderer,
        record,
    })
}

/// The change stage reports job mistakes without knowing the job file's path; put it in.
fn in_job_file(e: Error, path: &Path) -> Error {
    match e {
        Error::Job { place, message, .. } => Error::Job {
            path: path.to_path_buf(),
            place,
            message,
        },
        other => other,
    }
}

fn write_outputs(
    job: &Job,
    prepared: Prepared,
    scratch: &Path,
    folder: &Path,
    overwrite: bool,
    opts: &RunOptions,
) -> Result<RunReport> {
    let Prepared {
        stack,
        timeline,
        mut renderer,
        record,
    } = prepared;
    let (stack, timeline, record) = (&stack, &timeline, &record);
    std::fs::create_dir_all(scratch).map_err(|e| Error::io(scratch, e))?;
    let mut extra = vec![ExtraFile {
        name: "job/job.yaml".into(),
        content: ExtraContent::Bytes(job.text.clone().into_bytes()),
    }];
    let mut surface = Surface::for_stack(stack);
    let mut frame = Frame::new(job.view.width, job.view.height);
    let n = timeline.frames.len();
    let mut warnings = record.warnings.clone();
    for t in &timeline.frames {
        make_surface(
            &mut surface,
            stack,
            t,
            job.methods.get(t.from).copied().unwrap_or(Method::Linear),
        );
        let orbit = if n > 1 {
            t.index as f64 / (n - 1) as f64
        } else {
            0.0
        };
        let _view = renderer.render_into(&surface, orbit, &mut frame);
        if job.output.png_frames {
            let name = format!("frame-{:05}.png", t.index + 1);
            let path = scratch.join(&name);
            image::save_buffer(
                &path,
                &frame.rgba,
                frame.width,
                frame.height,
                image::ExtendedColorType::Rgba8,
            )
            .map_err(|e| Error::output(&path, format!("could not write the PNG frame: {e}")))?;
            extra.push(ExtraFile {
                name: format!("frames/{name}"),
                content: ExtraContent::File(path),
            });
        }
        if let Some(cb) = &opts.progress {
            cb(t.index + 1, n);
        }
    }
    let figures = change::figures(stack, record, &job.change);
    let archive = archive::write_archive(
        folder,
        record,
        &figures,
        &extra,
        &ArchiveOptions {
            overwrite,
            bagging_date: None,
        },
    )?;
    warnings.dedup();
    Ok(RunReport {
        folder: archive.dir,
        frames: n,
        survey_frames: timeline
            .frames
            .iter()
            .filter(|f| f.kind.is_measured())
            .count(),
        files: archive.payload_files,
        warnings,
    })
}

fn make_surface(out: &mut Surface, stack: &AlignedStack, t: &FrameTime, method: Method) {
    match (t.kind, method) {
        (FrameKind::Interpolated { .. }, Method::Morph)
        | (_, Method::Linear)
        | (FrameKind::Measured { .. }, _) => interp::linear_into(out, stack, t),
    }
}

/// Refuses to touch an existing folder unless overwriting was asked for.
fn check_output_folder(folder: &Path, overwrite: bool) -> Result<()> {
    if folder.exists() && !overwrite {
        return Err(Error::output(
            folder,
            "the output folder already exists; choose another output.folder, or pass --overwrite (or set output.overwrite: true) to replace it",
        ));
    }
    if folder.exists() && !folder.is_dir() {
        return Err(Error::output(
            folder,
            "exists and is not a folder; choose another output.folder",
        ));
    }
    Ok(())
}

/// A hidden sibling of the output folder for frames on their way into the archive.
fn scratch_path(folder: &Path) -> PathBuf {
    let name = folder
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "out".into());
    folder.with_file_name(format!(".{name}.frames-{}", std::process::id()))
}

/// Checks a job and its grids as `run_job` would, writing nothing. Returns a one-line summary.
///
/// # Errors
/// As `run_job` before its first write.
pub fn check_job(job: &Job) -> Result<String> {
    let Prepared {
        stack, timeline, ..
    } = prepare(job)?;
    let g = stack.geometry();
    Ok(format!(
        "{} surveys on a {} x {} grid of {} m cells, {} frames, {:.1} s",
        stack.len(),
        g.cols,
        g.rows,
        g.cell_x_m(),
        timeline.frames.len(),
        timeline.duration_s()
    ))
}
