//! `run_job`: the whole pipeline, from a resolved `Job` to the files of one run.
//!
//! Order matters for the promise "bad input leaves no output": every check (job, grids, alignment,
//! view, drape, change options, output folder) happens in `prepare`, before the first byte is
//! written. `outputs` then makes the frames in a hidden scratch folder beside the target, and the
//! archive is built in a hidden sibling folder and renamed into place at the very end.
//!
//! - `mod.rs`: options, report, checks and everything computed before writing (`prepare`).
//! - `frames.rs`: one frame — its surface, shell, colouring, render and labels.
//! - `outputs.rs`: the loop over frames and every file of the run.
//! - `scratch.rs`: hidden working folders beside the output, and clearing those of killed runs.
//! - `parts.rs`: a job split over a cluster (`render --part K/N`) and put together (`assemble`).

mod frames;
mod outputs;
pub mod parts;
mod scratch;
mod series;
mod still;

pub use still::{parse_view, still, StillOptions, StillReport, ViewOverride};

use std::path::{Path, PathBuf};

use rayon::prelude::*;

use crate::align::{self, AlignedStack};
use crate::archive::{self, Protected};
use crate::change::{self, ChangeRecord};
use crate::error::{Error, Result};
use crate::geotiff;
use crate::grid::GridGeometry;
use crate::interp::flow::{self, FlowResult};
use crate::job::{ColourBy, Job, Method};
use crate::render::{framing, Drape, Focus, Renderer, FREE_AREA};
use crate::reproject::Reprojection;
use crate::survey;
use crate::timeline::{self, Timeline};

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
    /// Wall-clock seconds of each stage, in order (not part of the record).
    pub timings: Vec<(&'static str, f64)>,
}

/// Most memory the kept animation frames may take, in bytes (frames are kept for the GIF palette).
pub const FRAME_MEMORY_BUDGET: usize = 6 << 30;

/// Largest grid side, in cells, on which displacement fields are estimated; larger grids are
/// estimated on block means and the field kept on the blocks (see `interp::flow::estimate_within`).
/// 1024 keeps a pair under a second and about 100 MB.
pub const FLOW_MAX_SIDE: usize = 1024;

/// Runs a job end to end.
///
/// # Errors
/// `Error::Job`/`Error::Input` for bad input (nothing is written), `Error::Output`/`Error::Io` when
/// writing fails (temporary files are removed and an existing output folder is left as it was).
pub fn run_job(job: &Job, opts: &RunOptions) -> Result<RunReport> {
    let folder = output_folder(job, opts);
    let overwrite = opts.overwrite || job.output.overwrite;
    archive::check_replaceable(&folder, overwrite, &protected(job))?;

    let prepared = prepare(job)?;
    let cleared = scratch::clear_stale(&folder);
    let scratch = scratch::scratch_path(&folder);
    let result = outputs::write_outputs(
        job,
        prepared,
        &scratch,
        &folder,
        overwrite,
        opts,
        FrameSource::Render,
    );
    let _ = std::fs::remove_dir_all(&scratch);
    result.map(|mut report| {
        report.warnings.extend(cleared);
        report
    })
}

/// Where the frames of a run come from: rendered here, or rendered by the parts of a split job.
pub(super) enum FrameSource<'a> {
    /// Render every frame in this process.
    Render,
    /// Decode every frame from the part folders (`assemble`).
    Parts(&'a parts::Gathered),
}

/// How far along the orbit frame `index` of `total` stands, 0 to 1.
pub(super) fn orbit_share(index: usize, total: usize) -> f64 {
    if total > 1 {
        index as f64 / (total - 1) as f64
    } else {
        0.0
    }
}

/// The folder a run writes: `--output` if given, else the job's `output.folder`.
fn output_folder(job: &Job, opts: &RunOptions) -> PathBuf {
    opts.output_folder
        .clone()
        .unwrap_or_else(|| job.output.folder.clone())
}

/// Everything the job reads: no output folder may be one of these or hold one.
pub(crate) fn protected(job: &Job) -> Vec<Protected> {
    let mut out = Vec::new();
    let mut add = |what: &str, path: &Path| {
        out.push(Protected {
            what: what.into(),
            path: path.to_path_buf(),
        })
    };
    if let Some(folder) = job.path.parent() {
        add("job file's folder", folder);
    }
    for s in &job.surveys {
        add("survey grid", &s.grid);
    }
    if let ColourBy::Drape { path } = &job.colour {
        add("drape image", path);
    }
    if let Some(p) = &job.shell_grid {
        add("shell grid", p);
    }
    out
}

/// Everything computed and checked before the first write.
pub(super) struct Prepared {
    pub(super) stack: AlignedStack,
    pub(super) timeline: Timeline,
    pub(super) renderer: Renderer,
    /// The area framed when the job sets no distance.
    pub(super) focus: Focus,
    pub(super) record: ChangeRecord,
    /// Per interval: the displacement field estimated for it (trusted or not; the morph uses only
    /// trusted ones, see `effective_method`), or None when this run did not estimate it (a part's
    /// frames never reach that interval).
    pub(super) fields: Vec<Option<FlowResult>>,
    /// The `shell.grid` surface on the analysis grid, when the job draws one.
    pub(super) shell_grid: Option<ndarray::Array2<f32>>,
    /// The image draped over the terrain, when the job colours by one.
    pub(super) drape: Option<Drape>,
    pub(super) warnings: Vec<String>,
    /// Seconds spent in each stage so far.
    pub(super) timings: Vec<(&'static str, f64)>,
}

/// Which frames a run paints: all of them, or one part's share (whose pair fields are all a part
/// estimates).
#[derive(Debug, Clone)]
pub(super) enum FrameShare {
    /// Every frame (a whole run, or `assemble`).
    All,
    /// Only the frames of one part (`render --part`): the fields its frames need, and the fields of
    /// the intervals it stores for `assemble` (`parts::stores_field`).
    Part(parts::PartSpec),
    /// No field: `assemble` reads them from the parts.
    Assemble,
}

fn prepare(job: &Job) -> Result<Prepared> {
    prepare_share(job, FrameShare::All)
}

fn prepare_share(job: &Job, share: FrameShare) -> Result<Prepared> {
    let mut clock = Stopwatch::start();
    let (mut stack, reprojections, unit_warnings) = read_and_align(job)?;
    clock.lap("read and align grids");
    let stable = series::stable_ground(job, &stack)?;
    let (registrations, coreg_warnings) = series::coregister_stack(job, &mut stack, stable);
    clock.lap("co-register");
    let dates: Vec<_> = stack.surveys().iter().map(|s| s.date).collect();
    let timeline = timeline::plan(&dates, job.frame_plan, job.fps, job.hold_s);
    let mut record = change::record(&stack, &job.change).map_err(|e| in_job_file(e, &job.path))?;
    clock.lap("change record");
    let Scene {
        renderer,
        focus,
        shell_grid,
        drape,
    } = scene(job, &stack, &record)?;
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
                (frame_bytes * timeline.frames.len()) >> 20,
                FRAME_MEMORY_BUDGET >> 20
            ),
        ));
    }
    clock.lap("renderer, shell, drape");
    let mut warnings = unit_warnings;
    warnings.extend(series::reprojection_warnings(&stack, &reprojections));
    warnings.extend(coreg_warnings);
    warnings.append(&mut record.warnings);
    series::annotate_surveys(job, &mut record, &registrations, &reprojections);

    // Migration comes from the landforms that changed beyond the LoD, not the whole relief; the
    // morph needs the displacement field of every consecutive pair. All of them are independent:
    // one queue takes the fields, then the pairs' landforms, one item per thread at a time (so at
    // 4096² no more than two items' scratch arrays are held); results come back in order, so the
    // output does not depend on the thread count.
    // A part estimates only the fields of the intervals its in-between frames fall in.
    let needed: Vec<bool> = match &share {
        FrameShare::All => vec![true; stack.len() - 1],
        FrameShare::Assemble => vec![false; stack.len() - 1],
        FrameShare::Part(spec) => {
            let mut needed = vec![false; stack.len() - 1];
            for t in &timeline.frames[spec.frames(timeline.frames.len())] {
                if !t.kind.is_measured() {
                    needed[t.from] = true;
                }
            }
            for (i, need) in needed.iter_mut().enumerate() {
                *need |= parts::stores_field(&timeline, *spec, i);
            }
            needed
        }
    };
    // A part's frames do not show migration; the record is written by `assemble`.
    let measure_landforms = !matches!(share, FrameShare::Part(_));
    enum Item {
        Field(Option<Box<FlowResult>>),
        Landforms(Vec<change::LandformRecord>),
    }
    let n_fields = stack.len() - 1;
    let pairs: Vec<std::sync::Mutex<&mut change::PairRecord>> = if measure_landforms {
        record.pairs.iter_mut().map(std::sync::Mutex::new).collect()
    } else {
        Vec::new()
    };
    let cells = stack.geometry().rows * stack.geometry().cols;
    let in_flight = crate::waves::items_in_flight(cells);
    let items = crate::waves::map_at_most(n_fields + pairs.len(), in_flight, |k| {
        let item = if k < n_fields {
            Item::Field(needed[k].then(|| Box::new(pair_field(job, &stack, k))))
        } else {
            let mut pair = pairs[k - n_fields]
                .lock()
                .unwrap_or_else(|p| p.into_inner());
            Item::Landforms(series::pair_landforms(
                job,
                &stack,
                &mut pair,
                FLOW_MAX_SIDE,
            ))
        };
        stack.let_go();
        item
    });
    drop(pairs);
    let (mut estimated, mut found) = (Vec::new(), Vec::new());
    for item in items {
        match item {
            Item::Field(f) => estimated.push(f.map(|f| *f)),
            Item::Landforms(l) => found.push(l),
        }
    }
    let landform_warnings = if measure_landforms {
        series::gather_landforms(&mut record, found)
    } else {
        Vec::new()
    };
    warnings.extend(landform_warnings);
    record.warnings.extend(warnings.iter().cloned());
    let mut prepared = Prepared {
        stack,
        timeline,
        renderer,
        focus,
        record,
        fields: Vec::new(),
        shell_grid,
        drape,
        warnings,
        timings: Vec::new(),
    };
    prepared.attach_fields(job, estimated);
    clock.lap("landforms and displacement fields");
    prepared.timings = clock.laps;
    Ok(prepared)
}

impl Prepared {
    /// Takes the displacement field of each interval (None: not estimated by this run) and warns,
    /// in the run's warnings and the record's, of every morph interval whose field is not trusted.
    /// A run and `assemble` (which reads the fields from the parts) call it alike, so their warnings
    /// are the same.
    pub(super) fn attach_fields(&mut self, job: &Job, fields: Vec<Option<FlowResult>>) {
        for (i, result) in fields.iter().enumerate() {
            let Some(result) = result else { continue };
            if !result.verdict.is_trusted() && job.methods[i] == Method::Morph {
                let (a, b) = (&self.stack.surveys()[i], &self.stack.surveys()[i + 1]);
                let w = format!(
                    "{} -> {}: no reliable displacement field ({}); frames in this interval use the linear blend instead of the morph",
                    a.id, b.id, result.verdict
                );
                // Logged at info: the CLI prints the report's warnings once, at the end.
                log::info!("{w}");
                self.record.warnings.push(w.clone());
                self.warnings.push(w);
            }
        }
        self.fields = fields;
    }
}

/// Reads the job's surveys and brings them onto the analysis grid, in chunks of as many surveys as
/// there are threads, read side by side while the chunk before is pushed onto the stack (a large
/// stack writes its grids to a scratch file, see `crate::elevations`, and the disk then sets the
/// pace). Each survey is dropped once pushed, so the grids as read never all sit in memory at
/// once. The first failing survey in job order is the one reported. Also returns the warnings
/// for units nobody stated.
pub(super) fn read_and_align(
    job: &Job,
) -> Result<(AlignedStack, Vec<Option<Reprojection>>, Vec<String>)> {
    let threads = rayon::current_num_threads().max(1);
    let chunks: Vec<_> = job.surveys.chunks(threads).collect();
    let read = |c: usize| -> Vec<Result<survey::Survey>> {
        chunks[c].par_iter().map(survey::read_survey).collect()
    };
    let mut unit_warnings = Vec::new();
    let mut builder: Option<align::StackBuilder> = None;
    let mut push_chunk = |c: usize, surveys: Vec<Result<survey::Survey>>| -> Result<()> {
        for (k, s) in surveys.into_iter().enumerate() {
            let s = s?;
            unit_warnings.extend(s.unit_warnings(c * threads + k));
            let b = match &mut builder {
                Some(b) => b,
                None => builder.insert(align::StackBuilder::new(
                    &s,
                    job.surveys.len(),
                    job.area_of_interest,
                )?),
            };
            b.push(s)?;
        }
        Ok(())
    };
    let mut next = (!chunks.is_empty()).then(|| read(0));
    for c in 0..chunks.len() {
        let current = next.take().expect("each chunk is read before it is pushed");
        let (pushed, read_ahead) = rayon::join(
            || push_chunk(c, current),
            || (c + 1 < chunks.len()).then(|| read(c + 1)),
        );
        pushed?;
        next = read_ahead;
    }
    let builder =
        builder.ok_or_else(|| Error::job(&job.path, "surveys", "the job lists no surveys"))?;
    let (stack, reprojections) = builder.finish()?;
    Ok((stack, reprojections, unit_warnings))
}

/// The renderer and what it draws besides the surveys, checked against the stack.
pub(super) struct Scene {
    pub(super) renderer: Renderer,
    /// What the camera frames (the landforms that change, or the whole grid).
    pub(super) focus: Focus,
    pub(super) shell_grid: Option<ndarray::Array2<f32>>,
    pub(super) drape: Option<Drape>,
}

/// The record's levels of detection decide what the camera frames, so the record comes first.
pub(super) fn scene(job: &Job, stack: &AlignedStack, record: &ChangeRecord) -> Result<Scene> {
    let range = stack
        .elevation_range()
        .expect("align refuses all-nodata grids");
    let focus = focus_of(stack, record);
    let mut renderer = Renderer::framed(
        stack.geometry(),
        &job.view,
        &job.sun,
        range,
        &focus,
        &FREE_AREA,
    )
    .map_err(|m| keyed_job_error(&job.path, "view", m))?;
    renderer.set_elevation_ramp(job.elevation_ramp);
    log::info!(
        "view: vertical exaggeration {}{}, framing rows {}..{} and columns {}..{} (relief {:.1} m)",
        renderer.vertical_exaggeration(),
        if job.view.vertical_exaggeration.is_none() {
            " (automatic)"
        } else {
            ""
        },
        focus.row0,
        focus.row1,
        focus.col0,
        focus.col1,
        focus.relief_m
    );
    renderer
        .set_water(&job.water)
        .map_err(|m| keyed_job_error(&job.path, "water", m))?;
    renderer
        .set_shell(&job.shell)
        .map_err(|m| keyed_job_error(&job.path, "shell", m))?;
    let shell_grid = match &job.shell_grid {
        Some(path) => Some(read_shell_grid(path, stack.geometry())?),
        None => None,
    };
    let drape = match &job.colour {
        ColourBy::Drape { path } => Some(read_drape(job, path, stack.geometry())?),
        _ => None,
    };
    Ok(Scene {
        renderer,
        focus,
        shell_grid,
        drape,
    })
}

/// The displacement field of the pair (survey `i`, survey `i + 1`).
pub(super) fn pair_field(job: &Job, stack: &AlignedStack, i: usize) -> FlowResult {
    let cell_m = stack.geometry().cell_x_m();
    flow::estimate_within(
        &stack.z(i),
        &stack.z(i + 1),
        cell_m,
        &job.flow,
        FLOW_MAX_SIDE,
    )
}

/// How the frames were drawn, for `run.json`: the exaggeration used and whether it was chosen, the
/// framed area and the camera's target and distance, the sun and the ramp.
pub(super) fn view_as_run(
    job: &Job,
    stack: &AlignedStack,
    renderer: &Renderer,
    focus: &Focus,
) -> serde_json::Value {
    let g = stack.geometry();
    let (west, south, east, north) = focus.extent(g);
    let f = renderer.framing();
    let (gw, gs, ge, gn) = g.extent();
    let unit = g.horizontal_unit.metres();
    let k = renderer.vertical_exaggeration();
    serde_json::json!({
        "vertical_exaggeration": k,
        "vertical_exaggeration_source": if job.view.vertical_exaggeration.is_some() { "job" } else { "automatic" },
        "vertical_exaggeration_rule": format!(
            "exaggerated relief = {} x the framed area's longer side, rounded to 0.5, kept in {}..{}",
            framing::AUTO_RELIEF_SHARE, framing::AUTO_EXAGGERATION_RANGE.0, framing::AUTO_EXAGGERATION_RANGE.1
        ),
        "framed_area_crs": { "west": west, "south": south, "east": east, "north": north },
        "framed_area_relief_m": focus.relief_m,
        "framed_area_is_whole_grid": focus.is_whole(g),
        "camera_target_crs": [(gw + ge) / 2.0 + f.target[0] / unit, (gs + gn) / 2.0 + f.target[1] / unit, f.target[2] / k],
        "camera_distance_m": f.distance_m,
        "facing_deg": job.view.facing_deg,
        "elevation_deg": job.view.elevation_deg,
        "orbit_deg": job.view.orbit_deg,
        "sun_azimuth_deg": job.sun.azimuth_deg.map_or_else(
            || serde_json::json!(format!("follows the view: {} deg from the line of sight", crate::render::SUN_FROM_VIEW_DEG)),
            |a| serde_json::json!(a),
        ),
        "sun_altitude_deg": job.sun.altitude_deg,
        "elevation_ramp": job.elevation_ramp.name(),
    })
}

/// The area the camera frames when the job sets no distance: where the surveys change beyond the
/// level of detection of the record's pairs (see `render::framing::focus_of_change`).
pub fn focus_of(stack: &AlignedStack, record: &ChangeRecord) -> Focus {
    let pairs: Vec<_> = record
        .pairs
        .iter()
        .map(|p| (p.from_index, p.to_index, p.lod_m))
        .collect();
    // Letting go before each fetch keeps no more than the two surveys in use resident.
    let surface = |i: usize| {
        stack.let_go();
        stack.z(i)
    };
    let focus = framing::focus_of_change(stack.geometry(), stack.len(), &surface, &pairs);
    stack.let_go();
    focus
}

/// Hands the heap that a finished stage freed back to the system. glibc's allocator keeps freed
/// blocks below its mapping threshold (up to 32 MB each) for reuse, so without this one stage's
/// scratch arrays (byte masks, crops) stay resident under the next stage and add to its peak.
/// Called at every stage boundary; elsewhere (other C libraries) it does nothing.
fn give_back_free_heap() {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    // SAFETY: malloc_trim only returns free memory to the system; it takes the allocator's lock
    // and touches no memory in use.
    unsafe {
        libc::malloc_trim(0);
    }
}

/// Wall-clock time of each stage of a run, for `-v` and the benchmarks. Kept out of the record on
/// purpose: the record must be byte-identical on every machine, thread count and split into parts.
pub(super) struct Stopwatch {
    last: std::time::Instant,
    last_cpu_s: Option<f64>,
    /// The peak resident memory was reset at the last lap, so the next lap's peak is its own.
    peak_reset: bool,
    pub(super) laps: Vec<(&'static str, f64)>,
}

impl Stopwatch {
    pub(super) fn start() -> Self {
        Stopwatch {
            last: std::time::Instant::now(),
            last_cpu_s: process_cpu_s(),
            peak_reset: reset_peak_resident(),
            laps: Vec::new(),
        }
    }
    /// Records the time since the previous lap under `stage`, and logs it with the cores it kept
    /// busy (CPU time over wall time) and the process's peak resident memory so far (where the
    /// system tells them), which show the stages that leave a core idle or set the peak.
    pub(super) fn lap(&mut self, stage: &'static str) {
        let now = std::time::Instant::now();
        let seconds = now.duration_since(self.last).as_secs_f64();
        self.laps.push((stage, seconds));
        self.last = now;
        let cpu = process_cpu_s();
        let cores = match (cpu, self.last_cpu_s) {
            (Some(c), Some(l)) if seconds > 0.0 => format!("; {:.2} cores busy", (c - l) / seconds),
            _ => String::new(),
        };
        self.last_cpu_s = cpu;
        let peak = stage_peak_resident_mib();
        give_back_free_heap();
        // Where the system lets the peak be reset, each stage reports its own peak (the process's
        // peak is kept aside, see `peak_resident_mib`).
        let own = reset_peak_resident();
        match peak {
            Some(mib) => log::info!(
                "stage {stage}: {seconds:.2} s{cores}; peak resident memory {} {mib:.0} MiB",
                if self.peak_reset {
                    "in this stage"
                } else {
                    "so far"
                }
            ),
            None => log::info!("stage {stage}: {seconds:.2} s{cores}"),
        }
        self.peak_reset = own;
    }
}

/// The CPU time (user + system) the process has used so far, in seconds, from /proc on Linux
/// (in clock ticks of 1/100 s, the USER_HZ every Linux build reports there); None elsewhere.
fn process_cpu_s() -> Option<f64> {
    let stat = std::fs::read_to_string("/proc/self/stat").ok()?;
    // The command name (field 2) may hold spaces; the fields after its closing parenthesis are
    // state, ppid, …: utime and stime are the 12th and 13th of them.
    let rest = &stat[stat.rfind(')')? + 1..];
    let mut f = rest.split_whitespace().skip(11);
    let utime: f64 = f.next()?.parse().ok()?;
    let stime: f64 = f.next()?.parse().ok()?;
    Some((utime + stime) / 100.0)
}

/// The largest resident-memory peak seen before the last reset, in KiB.
static EARLIER_PEAK_KIB: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);

/// The peak resident memory (VmHWM) since the last reset, in MiB, read from /proc on Linux; None
/// elsewhere.
fn stage_peak_resident_mib() -> Option<f64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib as f64 / 1024.0)
}

/// Resets the peak resident memory to the current size (Linux: "5" written to
/// /proc/self/clear_refs, see proc(5)), keeping the peak so far for [`peak_resident_mib`];
/// false where that is not possible.
fn reset_peak_resident() -> bool {
    // Only when the stage log is shown: a reset also lowers what `/usr/bin/time` and other
    // wait4-based tools report as the process's peak.
    if !log::log_enabled!(log::Level::Info) {
        return false;
    }
    let Some(mib) = stage_peak_resident_mib() else {
        return false;
    };
    EARLIER_PEAK_KIB.fetch_max((mib * 1024.0) as u64, std::sync::atomic::Ordering::Relaxed);
    std::fs::write("/proc/self/clear_refs", "5").is_ok()
}

/// The process's peak resident memory since it started, in MiB (Linux); None elsewhere.
pub fn peak_resident_mib() -> Option<f64> {
    let now = stage_peak_resident_mib()?;
    let earlier = EARLIER_PEAK_KIB.load(std::sync::atomic::Ordering::Relaxed) as f64 / 1024.0;
    Some(now.max(earlier))
}

/// A stage's message that starts with its key (`view.fov_deg: …`) becomes a job error placed at that
/// key; other messages are placed at `section`.
fn keyed_job_error(path: &Path, section: &str, message: String) -> Error {
    match message.split_once(": ") {
        Some((key, rest)) if key.starts_with(section) && !key.contains(' ') => {
            Error::job(path, key, rest)
        }
        _ => Error::job(path, section, message),
    }
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

/// Reads the `shell.grid` surface and brings it onto the analysis grid (same CRS required).
fn read_shell_grid(path: &Path, target: &GridGeometry) -> Result<ndarray::Array2<f32>> {
    let (grid, _) = geotiff::read_grid(path)?;
    let g = &grid.geometry;
    if g.epsg != target.epsg || g.horizontal_unit != target.horizontal_unit {
        return Err(Error::input(
            path,
            format!(
                "CRS {:?} in {} differs from the surveys' {:?} in {}; reproject the shell grid to the surveys' CRS",
                g.epsg,
                g.horizontal_unit.symbol(),
                target.epsg,
                target.horizontal_unit.symbol()
            ),
        ));
    }
    let z = align::resample(&grid, target);
    if z.iter().all(|v| v.is_nan()) {
        return Err(Error::input(
            path,
            "this grid does not overlap the analysis grid anywhere; check its extent and CRS",
        ));
    }
    Ok(z)
}

/// Reads the image to drape and checks it against the grid: same CRS and unit, overlapping extent.
fn read_drape(job: &Job, path: &Path, grid: &GridGeometry) -> Result<Drape> {
    let (geometry, rgb) = geotiff::read_rgb(path)?;
    let crs = |g: &GridGeometry| {
        let code = g.epsg.map_or("not stated".into(), |c| format!("EPSG:{c}"));
        format!("{code}, in {}", g.horizontal_unit.symbol())
    };
    if geometry.epsg.zip(grid.epsg).is_some_and(|(a, b)| a != b)
        || geometry.horizontal_unit != grid.horizontal_unit
    {
        let (ours, theirs) = (crs(&geometry), crs(grid));
        let msg = format!("CRS {ours} differs from the surveys' {theirs}; reproject the image to the surveys' CRS");
        return Err(Error::input(path, msg));
    }
    Drape::new(&geometry, &rgb, grid).map_err(|m| Error::job(&job.path, "colour.drape", m))
}

/// The method an interval really uses: the morph only where its displacement field is trusted.
pub(super) fn effective_method(
    job: &Job,
    fields: &[Option<FlowResult>],
    interval: usize,
) -> Method {
    match (job.methods.get(interval), fields.get(interval)) {
        (Some(Method::Morph), Some(Some(r))) if r.verdict.is_trusted() => Method::Morph,
        _ => Method::Linear,
    }
}

/// True when the job's output folder already holds a finished run of this very job: it verifies
/// against its manifests, its copy of the job file has the same bytes, and the grids' SHA-256 in its
/// survey table are those of the grids the job names now. Used by `render --skip-done`, so a
/// campaign re-run resumes where it stopped. Any doubt (unreadable, different, missing) is `false`.
pub fn is_done(job: &Job, opts: &RunOptions) -> bool {
    let folder = output_folder(job, opts);
    let intact = archive::verify(&folder).is_ok_and(|r| r.is_intact());
    if !intact {
        return false;
    }
    let same_job = std::fs::read(folder.join("data/job/job.yaml"))
        .is_ok_and(|bytes| bytes == job.text.as_bytes());
    let recorded: Option<Vec<String>> =
        std::fs::read_to_string(folder.join("data/tables/surveys.json"))
            .ok()
            .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
            .and_then(|v| {
                v.as_array().map(|rows| {
                    rows.iter()
                        .map(|r| r["source_sha256"].as_str().unwrap_or("").to_string())
                        .collect()
                })
            });
    let now: Option<Vec<String>> = job
        .surveys
        .iter()
        .map(|s| crate::change::record::sha256_file(&s.grid).ok())
        .collect();
    same_job && recorded.is_some() && recorded == now
}

/// What `check_job` found: a one-line summary and everything `render` would warn about.
#[derive(Debug, Clone)]
pub struct CheckReport {
    /// Surveys, grid, frames and duration in one line.
    pub summary: String,
    /// The warnings `render` would give (low overlap, assumed units, …), and working folders of
    /// interrupted runs that `render` would clear.
    pub warnings: Vec<String>,
}

/// Checks a job and its grids as `run_job` would, writing nothing: the output folder (exists,
/// may be replaced, does not hold an input), every grid, the alignment, the view, the displacement
/// fields. What `render` would refuse, this refuses with the same error; what `render` would warn
/// about is in the report.
///
/// # Errors
/// As `run_job` before its first write.
pub fn check_job(job: &Job, opts: &RunOptions) -> Result<CheckReport> {
    let folder = output_folder(job, opts);
    let overwrite = opts.overwrite || job.output.overwrite;
    archive::check_replaceable(&folder, overwrite, &protected(job))?;
    let Prepared {
        stack,
        timeline,
        mut warnings,
        ..
    } = prepare(job)?;
    for s in scratch::find_stale(&folder) {
        warnings.push(format!(
            "{}: a working folder left by an interrupted run (process {} is gone); render will {} it",
            s.path.display(),
            s.pid,
            if s.kind == "old" && !folder.exists() { "put back" } else { "remove" }
        ));
    }
    warnings.dedup();
    let g = stack.geometry();
    let cell = if g.horizontal_unit == crate::grid::LinearUnit::Metre {
        format!("{} m", round_mm(g.cell_x_m()))
    } else {
        format!(
            "{} {} ({} m)",
            round_mm(g.cell_x),
            g.horizontal_unit.symbol(),
            round_mm(g.cell_x_m())
        )
    };
    Ok(CheckReport {
        summary: format!(
            "{} surveys on a {} x {} grid of {cell} cells, {} frames, {:.1} s",
            stack.len(),
            g.cols,
            g.rows,
            timeline.frames.len(),
            timeline.duration_s()
        ),
        warnings,
    })
}

/// A length for a message: rounded to the millimetre, without trailing zeros (0.914, 2, 0.5).
/// Lengths in messages are given to the millimetre; full precision stays in the JSON tables.
pub fn round_mm(x: f64) -> String {
    let s = format!("{x:.3}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".into()
    } else {
        s.into()
    }
}
