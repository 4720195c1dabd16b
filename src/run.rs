//! `run_job`: the whole pipeline, from a resolved `Job` to the files of one run.
//!
//! Order matters for the promise "bad input leaves no output": every check (job, grids, alignment,
//! view, output folder) happens before the first byte is written. Outputs are then written into a
//! staging folder beside the target and renamed into place at the very end.

use std::path::{Path, PathBuf};

use crate::align::{self, AlignedStack};
use crate::annotate::{self, FrameStatus, InsetChart, Legend, Overlay};
use crate::archive::{self, ArchiveOptions, ExtraContent, ExtraFile};
use crate::change::{self, ChangeRecord};
use crate::encode::gif;
use crate::encode::png_seq::{self, PosterOptions, PosterTile, RowStatus};
use crate::error::{Error, Result};
use crate::geotiff::{self, WriteOptions};
use crate::grid::GridGeometry;
use crate::interp::flow::{self, FlowResult};
use crate::interp::{self, morph, Surface};
use crate::job::{ColourBy, Job, Method, ShellSurvey};
use crate::render::{ramp, Colouring, Drape, Frame, Renderer};
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

/// Largest grid side, in cells, on which displacement fields are estimated; larger grids are
/// estimated on block means and the field interpolated back (see `interp::flow::estimate_within`).
/// 1024 keeps a pair under a second and about 100 MB.
pub const FLOW_MAX_SIDE: usize = 1024;

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
    /// Per interval: the displacement field when the morph may use it (trusted), else None.
    fields: Vec<Option<FlowResult>>,
    /// The image draped over the terrain, when the job colours by one.
    drape: Option<Drape>,
    warnings: Vec<String>,
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
    let mut renderer = Renderer::new(stack.geometry(), &job.view, &job.sun, range)
        .map_err(|m| Error::job(&job.path, "view", m))?;
    renderer
        .set_water(&job.water)
        .map_err(|m| Error::job(&job.path, "water", m))?;
    renderer
        .set_shell(&job.shell)
        .map_err(|m| Error::job(&job.path, "shell", m))?;
    let drape = match &job.colour {
        ColourBy::Drape { path } => Some(read_drape(job, path, stack.geometry())?),
        _ => None,
    };
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
    let mut record = change::record(&stack, &job.change).map_err(|e| in_job_file(e, &job.path))?;
    let mut warnings = record.warnings.clone();
    record.warnings.clear();

    // The displacement field of every consecutive pair: the morph needs it, and the record reports
    // the dominant displacement as the migration of the landform.
    let cell_m = stack.geometry().cell_x_m();
    let mut fields = Vec::with_capacity(stack.len() - 1);
    for i in 0..stack.len() - 1 {
        let (a, b) = (&stack.surveys()[i], &stack.surveys()[i + 1]);
        let result =
            flow::estimate_within(stack.z(i), stack.z(i + 1), cell_m, &job.flow, FLOW_MAX_SIDE);
        let pair = record
            .pairs
            .iter_mut()
            .find(|p| p.from_index == i && p.to_index == i + 1);
        match (&result.verdict, result.dominant, pair) {
            (v, Some(d), Some(pair)) if v.is_trusted() => pair.set_migration(d.east_m, d.north_m),
            _ => {}
        }
        if result.verdict.is_trusted() {
            fields.push(Some(result));
        } else {
            let fallback = if job.methods[i] == Method::Morph {
                "frames in this interval use the linear blend instead of the morph, and "
            } else {
                ""
            };
            let w = format!(
                "{} -> {}: no reliable displacement ({}); {fallback}no migration is reported for this pair",
                a.id, b.id, result.verdict
            );
            // Logged at info: the CLI prints the report's warnings once, at the end.
            log::info!("{w}");
            warnings.push(w);
            fields.push(None);
        }
    }
    record.warnings.extend(warnings.iter().cloned());
    Ok(Prepared {
        stack,
        timeline,
        renderer,
        record,
        fields,
        drape,
        warnings,
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
fn effective_method(job: &Job, fields: &[Option<FlowResult>], interval: usize) -> Method {
    match (job.methods.get(interval), fields.get(interval)) {
        (Some(Method::Morph), Some(Some(_))) => Method::Morph,
        _ => Method::Linear,
    }
}

fn make_surface(
    out: &mut Surface,
    stack: &AlignedStack,
    fields: &[Option<FlowResult>],
    job: &Job,
    t: &FrameTime,
) {
    match t.kind {
        FrameKind::Interpolated { from, to }
            if effective_method(job, fields, from) == Method::Morph =>
        {
            let field = &fields[from]
                .as_ref()
                .expect("checked by effective_method")
                .field;
            out.kind = t.kind;
            morph::morph_into(
                &mut out.z,
                stack.z(from),
                stack.z(to),
                field,
                t.weight as f32,
            );
        }
        _ => interp::linear_into(out, stack, t),
    }
}

/// Frame durations in hundredths of a second, rounded so the running total stays exact.
fn delays_cs(timeline: &Timeline) -> Vec<u16> {
    let mut out = Vec::with_capacity(timeline.frames.len());
    let mut elapsed = 0.0;
    let mut written: i64 = 0;
    for f in &timeline.frames {
        elapsed += f.duration_s * 100.0;
        let cs = (elapsed.round() as i64 - written).clamp(1, u16::MAX as i64);
        written += cs;
        out.push(cs as u16);
    }
    out
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
        fields,
        drape,
        mut warnings,
    } = prepared;
    let (stack, timeline) = (&stack, &timeline);
    std::fs::create_dir_all(scratch).map_err(|e| Error::io(scratch, e))?;
    let unit = job.change.display_unit;
    let to_unit = |m: f64| m / unit.metres();
    let mut extra = vec![ExtraFile {
        name: "job/job.yaml".into(),
        content: ExtraContent::Bytes(job.text.clone().into_bytes()),
    }];

    // First pass: the peak of every frame's surface, for the labels and the inset chart.
    let mut surface = Surface::for_stack(stack);
    let mut peaks = Vec::with_capacity(timeline.frames.len());
    for t in &timeline.frames {
        make_surface(&mut surface, stack, &fields, job, t);
        peaks.push(surface.peak());
    }
    let years: Vec<f64> = timeline
        .frames
        .iter()
        .map(|t| timeline::decimal_year(t.when))
        .collect();
    let series: Vec<(f64, f64)> = peaks
        .iter()
        .zip(&years)
        .filter_map(|(p, y)| p.map(|(z, _, _)| (*y, to_unit(z as f64))))
        .collect();
    let survey_points: Vec<(f64, f64)> = timeline
        .frames
        .iter()
        .zip(&peaks)
        .zip(&years)
        .filter(|((t, _), _)| t.kind.is_measured())
        .filter_map(|((_, p), y)| p.map(|(z, _, _)| (*y, to_unit(z as f64))))
        .collect();
    let (z_lo, z_hi) = stack
        .elevation_range()
        .expect("align refuses all-nodata grids");
    // Colouring by change: the ramp's limit (fixed for the whole animation) and t for the LoD.
    let change_colour = match &job.colour {
        ColourBy::Elevation | ColourBy::Drape { .. } => None,
        ColourBy::Change { since, limit_m } => {
            let limit = limit_m
                .unwrap_or_else(|| largest_change_m(stack, *since))
                .max(0.01);
            Some((limit, job.change.lod_t))
        }
    };
    let legend = match (&change_colour, &job.colour) {
        (Some((limit, _)), ColourBy::Change { since, .. }) => Some(Legend {
            title: format!(
                "Change since {} survey (pale: within LoD)",
                if *since == ShellSurvey::First {
                    "first"
                } else {
                    "previous"
                }
            ),
            stops: (0..17)
                .map(|i| {
                    let c = ramp::diverging_srgb(i as f32 / 8.0 - 1.0);
                    [
                        (c[0] * 255.0).round() as u8,
                        (c[1] * 255.0).round() as u8,
                        (c[2] * 255.0).round() as u8,
                    ]
                })
                .collect(),
            min: -to_unit(*limit),
            max: to_unit(*limit),
            unit: unit.symbol().into(),
        }),
        _ => None,
    };
    let legend = legend.unwrap_or(Legend {
        title: "Elevation".into(),
        stops: (0..16)
            .map(|i| {
                let c = ramp::viridis_srgb(i as f32 / 15.0);
                [
                    (c[0] * 255.0).round() as u8,
                    (c[1] * 255.0).round() as u8,
                    (c[2] * 255.0).round() as u8,
                ]
            })
            .collect(),
        min: to_unit(z_lo as f64),
        max: to_unit(z_hi as f64),
        unit: unit.symbol().into(),
    });

    // Second pass: render, label, keep for the GIF, write the PNG frames.
    let n = timeline.frames.len();
    let mut frame = Frame::new(job.view.width, job.view.height);
    let mut kept: Vec<Frame> = Vec::with_capacity(if job.output.gif.is_some() { n } else { 0 });
    let mut survey_frames: Vec<(usize, Frame)> = Vec::new();
    let mut png = if job.output.png_frames {
        let dir = scratch.join("frames");
        std::fs::create_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
        Some((png_seq::PngSequence::create(&dir, "frame-", n, false)?, dir))
    } else {
        None
    };
    let date_of = |i: usize| stack.surveys()[i].date.to_string();
    let mut shell = Surface::for_stack(stack);
    for t in &timeline.frames {
        make_surface(&mut surface, stack, &fields, job, t);
        let shell_index = earlier_survey(job.shell_survey, t.kind)
            .filter(|&i| i != t.from || !t.kind.is_measured());
        if let Some(i) = shell_index {
            shell_cells_into(
                &mut shell.z,
                stack.z(i),
                &surface.z,
                job.shell_min_gap_m as f32,
            );
        }
        let shell = shell_index.map(|_| &shell);
        let orbit = if n > 1 {
            t.index as f64 / (n - 1) as f64
        } else {
            0.0
        };
        let colouring = match (&change_colour, &job.colour) {
            (Some((limit_m, t_lod)), ColourBy::Change { since, .. }) => {
                let r = earlier_survey(*since, t.kind).unwrap_or(t.from);
                let sigma = |i: usize| record.surveys[i].sigma_z_m;
                let lod_m = t_lod * sigma(r).hypot(sigma(t.from).max(sigma(t.to)));
                Colouring::Change {
                    reference: stack.z(r),
                    limit_m: *limit_m as f32,
                    lod_m: lod_m as f32,
                }
            }
            _ => drape
                .as_ref()
                .map_or(Colouring::Elevation, Colouring::Drape),
        };
        let view = renderer.render_scene_into(&surface, shell, colouring, orbit, &mut frame);
        let peak = peaks[t.index];
        let peak_px = peak.and_then(|(z, r, c)| {
            let (x, y) = stack.geometry().cell_center(r, c);
            view.project(x, y, z as f64)
        });
        let method = effective_method(job, &fields, t.from);
        let status = match t.kind {
            FrameKind::Measured { survey } => FrameStatus::Surveyed {
                label: stack.surveys()[survey].label.clone(),
            },
            FrameKind::Interpolated { from, to } => FrameStatus::Interpolated {
                method: method.name().to_string(),
                from_date: date_of(from),
                to_date: date_of(to),
            },
        };
        let overlay = Overlay {
            title: job.title.clone(),
            date_text: t.when.date().to_string(),
            status,
            peak_height: peak.map_or(f64::NAN, |(z, _, _)| to_unit(z as f64)),
            peak_unit: unit.symbol().into(),
            peak_px,
            // A draped image has no scale to explain.
            legend: drape.is_none().then(|| legend.clone()),
            north_angle_rad: view.north_px().map(|(dx, dy)| dx.atan2(-dy)),
            metres_per_px: Some(view.metres_per_px()),
            inset: Some(InsetChart {
                title: "Peak elevation".into(),
                unit: unit.symbol().into(),
                series: series.clone(),
                survey_points: survey_points.clone(),
                current_year: years[t.index],
            }),
            credit: job.credit.clone(),
        };
        annotate::draw_overlay(&mut frame, &overlay, &job.labels);
        if let Some((seq, _)) = png.as_mut() {
            let row = png_seq::IndexRow {
                time: t.when.format("%Y-%m-%dT%H:%M:%S").to_string(),
                status: if t.kind.is_measured() {
                    RowStatus::Surveyed
                } else {
                    RowStatus::Interpolated
                },
                from_survey: stack.surveys()[t.from].id.clone(),
                to_survey: stack.surveys()[t.to].id.clone(),
                peak_height: overlay.peak_height,
                peak_unit: overlay.peak_unit.clone(),
            };
            seq.write_frame(&frame, row)?;
        }
        if let FrameKind::Measured { survey } = t.kind {
            survey_frames.push((survey, frame.clone()));
        }
        if job.output.gif.is_some() {
            kept.push(frame.clone());
        }
        if let Some(cb) = &opts.progress {
            cb(t.index + 1, n);
        }
    }
    if let Some((seq, dir)) = png {
        seq.finish()?;
        extra.extend(files_under(&dir, "frames")?);
    }
    if let Some(name) = &job.output.gif {
        let path = scratch.join(name);
        let stats = gif::write_gif(&path, &kept, &delays_cs(timeline), &job.animation, false)?;
        log::info!(
            "{}: {} frames, {} bytes, mean colour error {:.2}",
            name,
            stats.frames,
            stats.bytes,
            stats.mean_colour_error
        );
        drop(kept);
        extra.push(ExtraFile {
            name: format!("animation/{name}"),
            content: ExtraContent::File(path),
        });
    }
    if job.output.poster {
        let captions: Vec<String> = survey_frames
            .iter()
            .map(|(i, _)| {
                let s = &stack.surveys()[*i];
                let peak = record.surveys[*i].max_elevation_m / unit.metres();
                format!("{} — peak {:.2} {}", s.date, peak, unit.symbol())
            })
            .collect();
        let tiles: Vec<PosterTile> = survey_frames
            .iter()
            .zip(&captions)
            .map(|((_, f), c)| PosterTile {
                frame: f,
                caption: c,
            })
            .collect();
        let path = scratch.join("poster.png");
        let opts = PosterOptions {
            title: if job.poster.title.is_empty() {
                job.title.clone()
            } else {
                job.poster.title.clone()
            },
            ..job.poster.clone()
        };
        png_seq::write_poster(&path, &tiles, &opts, false)?;
        extra.push(ExtraFile {
            name: "poster.png".into(),
            content: ExtraContent::File(path),
        });
    }
    // The displacement fields as two-band rasters (east, north in metres), for the record.
    for (i, f) in fields.iter().enumerate() {
        if let Some(f) = f {
            let (a, b) = (&stack.surveys()[i].id, &stack.surveys()[i + 1].id);
            let name = format!("displacement-{a}-{b}.tif");
            let path = scratch.join(&name);
            let wopts = WriteOptions {
                nodata: None,
                overwrite: false,
                band_descriptions: vec![
                    "east displacement (m)".into(),
                    "north displacement (m)".into(),
                ],
            };
            geotiff::write_bands(
                &path,
                stack.geometry(),
                &[&f.field.east_m, &f.field.north_m],
                &wopts,
            )?;
            extra.push(ExtraFile {
                name: format!("fields/{name}"),
                content: ExtraContent::File(path),
            });
        }
    }

    let figures = change::figures(stack, &record, &job.change);
    let archive = archive::write_archive(
        folder,
        &record,
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

/// The survey a frame is compared with: the first, or the earlier end of the frame's interval (for
/// a survey frame, the survey before it). None when there is none.
fn earlier_survey(choice: ShellSurvey, kind: FrameKind) -> Option<usize> {
    match (choice, kind) {
        (ShellSurvey::None, _) => None,
        (ShellSurvey::First, _) => Some(0),
        (ShellSurvey::Previous, FrameKind::Interpolated { from, .. }) => Some(from),
        (ShellSurvey::Previous, FrameKind::Measured { survey }) => survey.checked_sub(1),
    }
}

/// The largest |change| between each survey and the one it is compared with, in metres.
fn largest_change_m(stack: &AlignedStack, since: ShellSurvey) -> f64 {
    let mut most = 0.0f32;
    for i in 1..stack.len() {
        let r = if since == ShellSurvey::First {
            0
        } else {
            i - 1
        };
        for (a, b) in stack.z(i).iter().zip(stack.z(r)) {
            let d = (a - b).abs();
            if d.is_finite() {
                most = most.max(d);
            }
        }
    }
    most as f64
}

/// Keeps the shell's cells that stand at least `min_gap_m` above the surface; the rest become
/// nodata, so the shell shows where sand used to be and never flickers against the surface.
fn shell_cells_into(
    out: &mut ndarray::Array2<f32>,
    shell: &ndarray::Array2<f32>,
    surface: &ndarray::Array2<f32>,
    min_gap_m: f32,
) {
    ndarray::Zip::from(out)
        .and(shell)
        .and(surface)
        .for_each(|o, &s, &z| {
            *o = if s - z >= min_gap_m { s } else { f32::NAN };
        });
}

/// Every file under `dir`, named `prefix/<file>` for the archive, sorted by name.
fn files_under(dir: &Path, prefix: &str) -> Result<Vec<ExtraFile>> {
    let mut names: Vec<String> = std::fs::read_dir(dir)
        .map_err(|e| Error::io(dir, e))?
        .filter_map(|e| e.ok().map(|e| e.file_name().to_string_lossy().into_owned()))
        .collect();
    names.sort();
    Ok(names
        .into_iter()
        .map(|n| ExtraFile {
            name: format!("{prefix}/{n}"),
            content: ExtraContent::File(dir.join(n)),
        })
        .collect())
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

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::NaiveDate;

    #[test]
    fn delays_keep_the_running_total_exact() {
        let d = |y| NaiveDate::from_ymd_opt(y, 1, 1).unwrap();
        let t = timeline::plan(
            &[d(2030), d(2031), d(2033)],
            timeline::FramePlan::PerYear(6.0),
            12.0,
            0.5,
        );
        let cs = delays_cs(&t);
        // Check: GIF89a (CompuServe 1990) — delays are whole hundredths of a second; at 12 fps a
        // frame is 8.33 cs, so the delays alternate 8/9 while their sum tracks the timeline exactly
        let total: u32 = cs.iter().map(|&c| c as u32).sum();
        assert_eq!(total, (t.duration_s() * 100.0).round() as u32);
        assert!(cs.iter().all(|&c| (8..=59).contains(&c)), "{cs:?}");
        assert_eq!(cs[0], 58, "a survey frame holds 1/12 s + 0.5 s");
    }

    #[test]
    fn comparison_surveys() {
        let m = |survey| FrameKind::Measured { survey };
        let between = FrameKind::Interpolated { from: 2, to: 3 };
        assert_eq!(earlier_survey(ShellSurvey::None, between), None);
        assert_eq!(earlier_survey(ShellSurvey::First, between), Some(0));
        assert_eq!(earlier_survey(ShellSurvey::Previous, between), Some(2));
        assert_eq!(earlier_survey(ShellSurvey::Previous, m(3)), Some(2));
        assert_eq!(earlier_survey(ShellSurvey::Previous, m(0)), None);
    }

    #[test]
    fn shell_keeps_only_cells_clearly_above_the_surface() {
        let shell = ndarray::arr2(&[[5.0f32, 5.0, f32::NAN]]);
        let surface = ndarray::arr2(&[[4.0f32, 4.9, 1.0]]);
        let mut out = ndarray::Array2::zeros((1, 3));
        shell_cells_into(&mut out, &shell, &surface, 0.3);
        assert_eq!(out[[0, 0]], 5.0);
        assert!(out[[0, 1]].is_nan() && out[[0, 2]].is_nan());
    }
}
