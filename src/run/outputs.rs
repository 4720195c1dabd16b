//! Every file of one run: the PNG frames and their index, the GIF, the poster, the displacement
//! rasters, then the archive that seals them with the change record.

use std::path::{Path, PathBuf};
use std::sync::{mpsc, Mutex};

use rayon::prelude::*;

use crate::archive::{self, ArchiveOptions, ExtraContent, ExtraFile};
use crate::change;
use crate::encode::gif;
use crate::encode::png_seq::{self, PosterOptions, PosterTile, RowStatus};
use crate::encode::quantize::PaletteBuilder;
use crate::encode::video::VideoWriter;
use crate::error::{Error, Result};
use crate::geotiff::{self, WriteOptions};
use crate::render::{Frame, Renderer};

use super::frames::{FrameFigures, Painter};
use super::{effective_method, orbit_share, FrameSource, Prepared, RunOptions, RunReport};
use crate::align::AlignedStack;
use crate::interp::flow::FlowResult;
use crate::job::Job;
use crate::timeline::{FrameTime, Timeline};

pub(super) fn write_outputs(
    job: &Job,
    prepared: Prepared,
    scratch: &Path,
    folder: &Path,
    overwrite: bool,
    opts: &RunOptions,
    source: FrameSource<'_>,
) -> Result<RunReport> {
    let Prepared {
        stack,
        timeline,
        renderer,
        focus,
        record,
        fields,
        shell_grid,
        drape,
        mut warnings,
        timings,
    } = prepared;
    let mut clock = super::Stopwatch::start();
    clock.laps = timings;
    std::fs::create_dir_all(scratch).map_err(|e| {
        // The working folder is an implementation detail; name the folder the user chose.
        let parent = scratch.parent().unwrap_or(Path::new("."));
        Error::output(
            folder,
            format!(
                "cannot write in {} ({e}); choose an output folder where you may write (output.folder or --output)",
                parent.display()
            ),
        )
    })?;
    let mut extra = vec![ExtraFile {
        name: "job/job.yaml".into(),
        content: ExtraContent::Bytes(job.text.clone().into_bytes()),
    }];
    let new_painter = || {
        Painter::new(
            job,
            &stack,
            &record,
            &fields,
            drape.as_ref(),
            shell_grid.as_ref(),
        )
    };
    // With more than one thread, two painters (each with its own renderer buffers) paint two
    // frames at once: the serial parts of a frame (its crest, labels, the renderer's set-up) then
    // overlap instead of leaving a core idle. Each frame is painted whole by one painter, so the
    // frames are the same whichever painter paints them.
    // A painter holds only the cells its renderer reads (at most 16 per vertex, 4 MB at 4096²),
    // so a second one costs little at any grid size.
    let (rows, cols) = (stack.geometry().rows, stack.geometry().cols);
    let workers = if rayon::current_num_threads() > 1 {
        2
    } else {
        1
    };
    let mut renderers: Vec<Renderer> = (1..workers).map(|_| renderer.clone()).collect();
    renderers.insert(0, renderer);
    let painters: Vec<Mutex<(Painter, Renderer)>> = renderers
        .into_iter()
        .map(|r| Mutex::new((new_painter(), r)))
        .collect();

    // Render and label every frame; the encoders take them as they come (see `FrameSinks`).
    let n = timeline.frames.len();
    let png = if job.output.png_frames {
        let dir = scratch.join("frames");
        std::fs::create_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
        Some((png_seq::PngSequence::create(&dir, "frame-", n, false)?, dir))
    } else {
        None
    };
    let video = match &job.output.video {
        Some(name) => {
            let (w, h) = (job.view.width, job.view.height);
            if w % 2 == 1 || h % 2 == 1 {
                let msg = format!(
                    "{name}: the frame size {w} x {h} is odd; the video leaves out the last pixel {} (H.264 4:2:0 needs even sizes); the GIF and PNG frames keep every pixel",
                    if w % 2 == 1 && h % 2 == 1 { "column and row" } else if w % 2 == 1 { "column" } else { "row" }
                );
                log::info!("{msg}");
                warnings.push(msg);
            }
            let path = scratch.join(name);
            Some((
                VideoWriter::create(&path, w, h, job.fps, &job.video, false)?,
                path,
            ))
        }
        None => None,
    };
    let sinks = FrameSinks {
        job,
        stack: &stack,
        fields: &fields,
        png,
        video,
        kept: Vec::with_capacity(if job.output.gif.is_some() { n } else { 0 }),
        palette: PaletteBuilder::new(),
    };
    // Worker `k` paints with painter `k` only, so its lock is never contended.
    let paint = |k: usize, t: &FrameTime, frame: &mut Frame| match &source {
        FrameSource::Render => {
            let mut guard = painters[k].lock().unwrap_or_else(|p| p.into_inner());
            let (painter, renderer) = &mut *guard;
            Ok(painter.paint(renderer, t, orbit_share(t.index, n), frame))
        }
        FrameSource::Parts(gathered) => gathered.load(t.index, frame),
    };
    let FrameSinks {
        png,
        video,
        kept,
        palette,
        ..
    } = if workers > 1 {
        sinks.pipelined(&timeline.frames, workers, &paint, opts)?
    } else {
        sinks.inline(&timeline.frames, |t, f| paint(0, t, f), opts)?
    };
    // The poster and the run's view use the first painter and renderer.
    let (mut painter, renderer) = painters
        .into_iter()
        .next()
        .expect("at least one painter")
        .into_inner()
        .unwrap_or_else(|p| p.into_inner());
    let mut renderer = renderer;
    // With a video, each frame's H.264 encoding is inside this lap too (it runs as frames come).
    clock.lap(if video.is_some() {
        "frames: surface, render, PNG, video"
    } else {
        "frames: surface, render, labels, PNG"
    });
    if let Some((seq, dir)) = png {
        seq.finish()?;
        extra.extend(files_under(&dir, "frames")?);
    }
    if let Some((v, path)) = video {
        let stats = v.finish()?;
        log::info!(
            "video: {} frames of {} x {}, {:.2} s, {} bytes, {} keyframes",
            stats.frames,
            stats.size.0,
            stats.size.1,
            stats.duration_s,
            stats.bytes,
            stats.keyframes
        );
        let name = job.output.video.as_deref().unwrap_or("animation.mp4");
        extra.push(ExtraFile {
            name: format!("animation/{name}"),
            content: ExtraContent::File(path),
        });
        clock.lap("video file");
    }
    // The GIF, the poster, the record's rasters and its maps need only what is made by now: they
    // are made side by side (each spreads over the pool as well), and their files are listed in
    // this fixed order whatever finishes first.
    // One after another only for a long series of large grids (above 2048² cells, the stack in
    // its scratch file): there each side would keep its own pair of grids resident besides its
    // buffers, and twelve 4096² surveys then peaked at 992 MiB instead of about 800. A stack held
    // in memory is resident anyway, and a 4096² pair side by side peaks at about 210 MB.
    let small = rows * cols <= SIDE_BY_SIDE_MAX_CELLS || !stack.is_in_scratch_file();
    let ((gif_file, poster_file), (raster_files, figures)) = join_if(
        small,
        || {
            join_if(
                small,
                || timed("GIF", || write_gif(job, &timeline, scratch, kept, &palette)),
                || {
                    timed("poster", || {
                        write_poster(job, &stack, &timeline, &mut painter, &mut renderer, scratch)
                    })
                },
            )
        },
        || {
            join_if(
                small,
                || {
                    timed("displacement and difference rasters", || {
                        let mut files = field_rasters(&stack, &fields, scratch)?;
                        // Every pair's DEM of difference and detection mask.
                        files.extend(difference_rasters(&stack, &record, scratch)?);
                        Ok(files)
                    })
                },
                || {
                    timed("maps and charts", || {
                        change::figures(&stack, &record, &job.change)
                    })
                },
            )
        },
    );
    extra.extend(gif_file?);
    extra.extend(poster_file?);
    extra.extend(raster_files?);
    clock.lap("GIF, poster, rasters, maps and charts");
    // The viewer page is made from the files above, so it comes last among the extras.
    let page = archive::viewer::page(&archive::viewer::ViewerInputs {
        title: &job.title,
        record: &record,
        figures: &figures,
        extra: &extra,
        fps: job.fps,
        hold_s: job.hold_s,
    })?;
    extra.push(ExtraFile {
        name: archive::viewer::PAGE.into(),
        content: ExtraContent::Bytes(page.into_bytes()),
    });
    clock.lap("viewer page");
    let archive = archive::write_archive(
        folder,
        &record,
        &figures,
        &extra,
        &ArchiveOptions {
            overwrite,
            bagging_date: None,
            protected: super::protected(job),
            view: Some(super::view_as_run(job, &stack, &renderer, &focus)),
        },
    )?;
    clock.lap("archive and checksums");
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
        timings: clock.laps,
    })
}

/// `(a(), b())`, side by side on the pool when `parallel`, else one after the other.
fn join_if<RA: Send, RB: Send>(
    parallel: bool,
    a: impl FnOnce() -> RA + Send,
    b: impl FnOnce() -> RB + Send,
) -> (RA, RB) {
    if parallel {
        rayon::join(a, b)
    } else {
        (a(), b())
    }
}

/// Runs `f`, logging how long it took (the parts of a side-by-side stage have no lap of their own).
fn timed<T>(what: &str, f: impl FnOnce() -> T) -> T {
    let t0 = std::time::Instant::now();
    let out = f();
    log::info!("  {what}: {:.2} s", t0.elapsed().as_secs_f64());
    out
}

/// The GIF from the kept frames and the palette sampled as they came; None when the job has none.
fn write_gif(
    job: &Job,
    timeline: &Timeline,
    scratch: &Path,
    kept: Vec<Frame>,
    palette: &PaletteBuilder,
) -> Result<Option<ExtraFile>> {
    let Some(name) = &job.output.gif else {
        return Ok(None);
    };
    let path = scratch.join(name);
    // Survey frames are held longer; delays carry their fractions forward (30 fps → 3, 3, 4 cs).
    let hold_cs = (job.hold_s * 100.0).round() as u16;
    let delays = gif::delays_cs(kept.len(), job.fps, hold_cs, |i| {
        timeline.frames[i].kind.is_measured()
    });
    let stats = gif::write_gif_sampled(&path, &kept, &delays, palette, &job.animation, false)?;
    log::info!(
        "{name}: {} frames, {} bytes, mean colour error {:.2}",
        stats.frames,
        stats.bytes,
        stats.mean_colour_error
    );
    Ok(Some(ExtraFile {
        name: format!("animation/{name}"),
        content: ExtraContent::File(path),
    }))
}

/// The poster: every survey seen from the orbit's start (small multiples compare best from one
/// viewpoint); None when the job has none.
fn write_poster(
    job: &Job,
    stack: &AlignedStack,
    timeline: &Timeline,
    painter: &mut Painter,
    renderer: &mut Renderer,
    scratch: &Path,
) -> Result<Option<ExtraFile>> {
    if !job.output.poster {
        return Ok(None);
    }
    let unit = job.change.display_unit;
    let mut tiles_frames = Vec::new();
    for t in timeline.frames.iter().filter(|t| t.kind.is_measured()) {
        let mut f = Frame::new(job.view.width, job.view.height);
        let figures = painter.paint(renderer, t, 0.0, &mut f);
        let caption = format!(
            "{} — {} {}",
            stack.surveys()[t.from].date,
            super::frames::crest_name(job).to_lowercase(),
            figures.crest_elevation_m.map_or("—".into(), |z| format!(
                "{:.2} {}",
                super::frames::shown_crest_m(job, z) / unit.metres(),
                unit.symbol()
            ))
        );
        tiles_frames.push((f, caption));
        stack.let_go();
    }
    let tiles: Vec<PosterTile> = tiles_frames
        .iter()
        .map(|(frame, caption)| PosterTile { frame, caption })
        .collect();
    let path = scratch.join("poster.png");
    let title = if job.poster.title.is_empty() {
        job.title.clone()
    } else {
        job.poster.title.clone()
    };
    png_seq::write_poster(
        &path,
        &tiles,
        &PosterOptions {
            title,
            ..job.poster.clone()
        },
        false,
    )?;
    Ok(Some(ExtraFile {
        name: "poster.png".into(),
        content: ExtraContent::File(path),
    }))
}

/// The trusted displacement fields as two-band rasters (east, north in metres), for the record.
fn field_rasters(
    stack: &AlignedStack,
    fields: &[Option<FlowResult>],
    scratch: &Path,
) -> Result<Vec<ExtraFile>> {
    let mut files = Vec::new();
    for (i, f) in fields.iter().enumerate() {
        let Some(f) = f.as_ref().filter(|f| f.verdict.is_trusted()) else {
            continue;
        };
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
            effort: geotiff::Effort::Fast,
        };
        // A field estimated on blocks is written on the blocks: same origin, cells `step` times
        // as large (the last row and column of blocks may reach past the survey grid's edge).
        let g = stack.geometry();
        let (rows, cols) = f.field.east_m.dim();
        let step = f.field.step.max(1) as f64;
        let block_grid = crate::grid::GridGeometry {
            rows,
            cols,
            cell_x: g.cell_x * step,
            cell_y: g.cell_y * step,
            ..g.clone()
        };
        geotiff::write_bands(
            &path,
            &block_grid,
            &[&f.field.east_m, &f.field.north_m],
            &wopts,
        )?;
        files.push(ExtraFile {
            name: format!("fields/{name}"),
            content: ExtraContent::File(path),
        });
    }
    Ok(files)
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

/// How many painted frames may wait for the encoders: enough to even out frames that take longer
/// to paint or to encode, few enough that memory does not grow with the animation.
const PIPELINE_DEPTH: usize = 3;

/// Largest grid (cells) whose closing outputs are always made side by side; see `write_outputs`.
const SIDE_BY_SIDE_MAX_CELLS: usize = 2048 * 2048;

/// Where each finished frame goes, in frame order: the PNG sequence (with its index row), the
/// video encoder, and the frames kept for the GIF's palette.
struct FrameSinks<'a> {
    job: &'a Job,
    stack: &'a AlignedStack,
    fields: &'a [Option<FlowResult>],
    png: Option<(png_seq::PngSequence, PathBuf)>,
    video: Option<(VideoWriter, PathBuf)>,
    kept: Vec<Frame>,
    /// The GIF palette's samples, taken as the frames come (so the GIF stage only maps and codes).
    palette: PaletteBuilder,
}

impl FrameSinks<'_> {
    /// Hands frame `t` to every output. Gives the frame back when no output keeps it, so its
    /// buffer can be painted again.
    fn take(
        &mut self,
        t: &FrameTime,
        figures: FrameFigures,
        frame: Frame,
    ) -> Result<Option<Frame>> {
        let (job, unit) = (self.job, self.job.change.display_unit);
        if let Some((seq, _)) = self.png.as_mut() {
            let in_unit = |m: f64| m / unit.metres();
            let crest_m = figures.crest_elevation_m.unwrap_or(f64::NAN);
            let row = png_seq::IndexRow {
                time: t.when.format("%Y-%m-%dT%H:%M:%S").to_string(),
                status: if t.kind.is_measured() {
                    RowStatus::Surveyed
                } else {
                    RowStatus::Interpolated
                },
                method: if t.kind.is_measured() {
                    "survey".into()
                } else {
                    effective_method(job, self.fields, t.from).name().into()
                },
                from_survey: self.stack.surveys()[t.from].id.clone(),
                to_survey: self.stack.surveys()[t.to].id.clone(),
                crest_elevation: in_unit(crest_m),
                crest_height_above_reference: in_unit(crest_m - job.change.reference_elevation_m),
                highest_cell_elevation: in_unit(
                    figures.highest_cell_elevation_m.unwrap_or(f64::NAN),
                ),
                unit: unit.symbol().into(),
            };
            seq.write_frame(&frame, row)?;
        }
        if let Some((v, _)) = self.video.as_mut() {
            v.write_frame(&frame, t.duration_s, t.kind.is_measured())?;
        }
        if job.output.gif.is_some() {
            self.palette
                .add_rgba(&frame.rgba, job.animation.palette_sample_step);
            self.kept.push(frame);
            return Ok(None);
        }
        Ok(Some(frame))
    }

    /// Paints and encodes frame after frame on this thread (a one-thread run uses one core).
    fn inline(
        mut self,
        frames: &[FrameTime],
        mut paint: impl FnMut(&FrameTime, &mut Frame) -> Result<FrameFigures>,
        opts: &RunOptions,
    ) -> Result<Self> {
        let (w, h) = (self.job.view.width, self.job.view.height);
        let mut spare = None;
        for t in frames {
            let mut frame = spare.take().unwrap_or_else(|| Frame::new(w, h));
            let figures = paint(t, &mut frame)?;
            spare = self.take(t, figures, frame)?;
            if let Some(cb) = &opts.progress {
                cb(t.index + 1, frames.len());
            }
        }
        Ok(self)
    }

    /// Paints `workers` frames at a time on the rayon pool (`paint(k, …)` is worker `k`; the
    /// renderer also spreads each frame over the pool) while a second thread encodes the frames
    /// painted before, through a channel of [`PIPELINE_DEPTH`] frames. Frames reach the encoders
    /// in order, so the files are the same as [`FrameSinks::inline`]'s.
    fn pipelined(
        self,
        frames: &[FrameTime],
        workers: usize,
        paint: &(dyn Fn(usize, &FrameTime, &mut Frame) -> Result<FrameFigures> + Sync),
        opts: &RunOptions,
    ) -> Result<Self> {
        let (w, h) = (self.job.view.width, self.job.view.height);
        let (to_encoder, painted) =
            mpsc::sync_channel::<(usize, FrameFigures, Frame)>(PIPELINE_DEPTH);
        let (give_back, spares) = mpsc::channel::<Frame>();
        std::thread::scope(|scope| {
            let encoder = scope.spawn(move || -> Result<Self> {
                let mut sinks = self;
                for (i, figures, frame) in painted {
                    if let Some(frame) = sinks.take(&frames[i], figures, frame)? {
                        // The painter may be done already; then the buffer is simply dropped.
                        let _ = give_back.send(frame);
                    }
                }
                Ok(sinks)
            });
            let mut painting = Ok(());
            'frames: for batch in frames.chunks(workers.max(1)) {
                let mut buffers: Vec<Frame> = batch
                    .iter()
                    .map(|_| spares.try_recv().unwrap_or_else(|_| Frame::new(w, h)))
                    .collect();
                let figures: Vec<Result<FrameFigures>> = buffers
                    .par_iter_mut()
                    .zip(batch.par_iter())
                    .enumerate()
                    .map(|(k, (frame, t))| paint(k, t, frame))
                    .collect();
                for ((t, frame), figures) in batch.iter().zip(buffers).zip(figures) {
                    match figures {
                        Ok(figures) => {
                            // A closed channel means the encoder stopped on an error; it reports it.
                            if to_encoder.send((t.index, figures, frame)).is_err() {
                                break 'frames;
                            }
                        }
                        Err(e) => {
                            painting = Err(e);
                            break 'frames;
                        }
                    }
                    if let Some(cb) = &opts.progress {
                        cb(t.index + 1, frames.len());
                    }
                }
            }
            drop(to_encoder);
            let encoded = encoder
                .join()
                .unwrap_or_else(|panic| std::panic::resume_unwind(panic));
            painting.and(encoded)
        })
    }
}

/// Writes every pair's DEM of difference (`dod-A-B.tif`, float32 metres, later minus earlier) and
/// detection mask (`detected-A-B.tif`: -1 erosion, 1 deposition, 0 not detected) into `scratch`,
/// on the grids' georeference with nodata -9999, and names them for `data/fields/`.
fn difference_rasters(
    stack: &AlignedStack,
    record: &change::ChangeRecord,
    scratch: &Path,
) -> Result<Vec<ExtraFile>> {
    let mut out = Vec::new();
    for pair in &record.pairs {
        let (a, b) = (
            change::file_safe(&pair.from_id),
            change::file_safe(&pair.to_id),
        );
        let span = format!(
            "{} to {}",
            change::map::id_and_date(&pair.from_id, &pair.from_date),
            change::map::id_and_date(&pair.to_id, &pair.to_date)
        );
        let det = change::pair_detection(stack, pair);
        let rasters = [
            (
                format!("dod-{a}-{b}.tif"),
                change::dod_grid(stack, pair),
                format!(
                    "DEM of difference {span}: later minus earlier, metres; positive = deposition"
                ),
            ),
            (
                format!("detected-{a}-{b}.tif"),
                change::detection_raster(&det),
                format!(
                    "detected change {span}: -1 erosion, 1 deposition, 0 not detected (within LoD {:.3} m or in a patch under {:.1} m2)",
                    pair.lod_m, pair.min_patch_m2
                ),
            ),
        ];
        for (name, grid, description) in rasters {
            let path = scratch.join(&name);
            let wopts = WriteOptions {
                nodata: Some(-9999.0),
                overwrite: false,
                band_descriptions: vec![description],
                effort: geotiff::Effort::Fast,
            };
            geotiff::write_bands(&path, stack.geometry(), &[&grid], &wopts)?;
            out.push(ExtraFile {
                name: format!("fields/{name}"),
                content: ExtraContent::File(path),
            });
        }
        stack.let_go();
    }
    Ok(out)
}
