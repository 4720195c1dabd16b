//! `dunereel still`: one labelled frame of a job for one date, or a contact sheet of viewpoints
//! around the site, without rendering the animation.
//!
//! The frame is the one a full render makes at that date, byte for byte: the same timeline, the
//! same orbit position, the same surface and labels (the inset chart and the legend depend only on
//! the surveys, never on other frames). Only what the frame needs is computed: the surveys are read
//! and aligned, the record's per-survey figures give the σ and the crests of the chart, and at most
//! one displacement field is estimated (the pair around the date, when that interval morphs).
//!
//! A date that falls between two frames of the animation gets its own in-between surface and an
//! orbit position interpolated between those frames' positions; only a frame's own date is
//! guaranteed to match the render.

use std::path::PathBuf;

use chrono::{NaiveDate, NaiveDateTime};

use super::frames::Painter;
use super::{effective_method, pair_field, scene, Scene};
use crate::align::AlignedStack;
use crate::change;
use crate::encode::png_seq::{self, PosterOptions, PosterTile};
use crate::error::{Error, Result};
use crate::interp::flow::FlowResult;
use crate::job::{Job, Method};
use crate::render::Frame;
use crate::timeline::{self, FrameKind, FrameTime, Timeline};

/// A viewpoint given on the command line: `facing,elevation,distance`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ViewOverride {
    /// Compass bearing the camera looks, degrees clockwise from north.
    pub facing_deg: f64,
    /// Angle of the line of sight below the horizon, degrees.
    pub elevation_deg: f64,
    /// Distance from the camera to the target, metres.
    pub distance_m: f64,
}

/// What `still` makes.
#[derive(Debug, Clone)]
pub struct StillOptions {
    /// The date of the frame.
    pub at: NaiveDate,
    /// The PNG file to write.
    pub output: PathBuf,
    /// Look from here instead of the job's view (the orbit is then not applied). Default: none.
    pub view: Option<ViewOverride>,
    /// Write a contact sheet of this many viewpoints around the site instead of one frame.
    /// Default: none.
    pub sheet: Option<usize>,
    /// Replace an existing file. Default: false.
    pub overwrite: bool,
}

/// What `still` wrote.
#[derive(Debug, Clone)]
pub struct StillReport {
    /// The file written.
    pub path: PathBuf,
    /// Index of the animation frame at that date, when the date is a frame's date.
    pub frame_index: Option<usize>,
    /// Whether the frame shows a survey.
    pub surveyed: bool,
    /// One line per viewpoint drawn: the view keys to paste into the job.
    pub views: Vec<String>,
}

/// Most viewpoints on one contact sheet.
pub const MAX_SHEET: usize = 36;

/// Parses `facing,elevation,distance` (degrees, degrees, metres).
///
/// # Errors
/// A message naming what is wrong and how to write it.
pub fn parse_view(text: &str) -> std::result::Result<ViewOverride, String> {
    let parts: Vec<&str> = text.split(',').map(str::trim).collect();
    let how = "write --view FACING,ELEVATION,DISTANCE, e.g. --view 20,35,900 (degrees from north, degrees below the horizon, metres)";
    if parts.len() != 3 {
        return Err(format!(
            "\"{text}\" has {} value(s), not 3; {how}",
            parts.len()
        ));
    }
    let num = |s: &str, what: &str| {
        s.parse::<f64>()
            .ok()
            .filter(|v| v.is_finite())
            .ok_or_else(|| format!("{what} \"{s}\" is not a number; {how}"))
    };
    let facing_deg = num(parts[0], "facing")?;
    let elevation_deg = num(parts[1], "elevation")?;
    let distance_m = num(parts[2], "distance")?;
    if !(5.0..=90.0).contains(&elevation_deg) {
        return Err(format!(
            "elevation {elevation_deg}° is outside 5 to 90 degrees below the horizon; {how}"
        ));
    }
    if distance_m <= 0.0 {
        return Err(format!("distance {distance_m} m must be above 0; {how}"));
    }
    Ok(ViewOverride {
        facing_deg: facing_deg.rem_euclid(360.0),
        elevation_deg,
        distance_m,
    })
}

/// Renders one labelled frame of `job` at `opts.at` (or a contact sheet) into `opts.output`.
///
/// # Errors
/// `Error::Job` for a date outside the surveys or a sheet of 0 (nothing written), `Error::Input`
/// for bad grids, `Error::Output` when the file exists and `overwrite` is off, `Error::Io` when
/// writing fails.
pub fn still(job: &Job, opts: &StillOptions) -> Result<StillReport> {
    // Everything is checked before anything is read or written.
    if let Some(n) = opts.sheet {
        if n == 0 || n > MAX_SHEET {
            return Err(Error::job(
                &job.path,
                "--sheet",
                format!("{n} viewpoints: give 1 to {MAX_SHEET} (e.g. --sheet 8)"),
            ));
        }
    }
    let (first, last) = (
        job.surveys.first().map(|s| s.date),
        job.surveys.last().map(|s| s.date),
    );
    if let (Some(first), Some(last)) = (first, last) {
        if opts.at < first || opts.at > last {
            return Err(Error::job(
                &job.path,
                "--at",
                format!(
                    "{} is outside the surveys, which span {first} to {last}; give a date in that span",
                    opts.at
                ),
            ));
        }
    }
    crate::encode::atomic::check_target(&opts.output, opts.overwrite)?;

    let mut job = job.clone();
    if let Some(v) = opts.view {
        job.view.facing_deg = v.facing_deg;
        job.view.elevation_deg = v.elevation_deg;
        job.view.distance_m = Some(v.distance_m);
        job.view.eye = None;
        job.view.orbit_deg = 0.0;
    }
    let job = &job;
    // The same surfaces as `render`: reprojected, then co-registered on stable ground.
    let (mut stack, _, _) = super::read_and_align(job)?;
    let stable = super::series::stable_ground(job, &stack)?;
    let _ = super::series::coregister_stack(job, &mut stack, stable);
    let dates: Vec<_> = stack.surveys().iter().map(|s| s.date).collect();
    let timeline = timeline::plan(&dates, job.frame_plan, job.fps, job.hold_s);
    let (t, orbit) = frame_at(&timeline, &stack, opts.at);
    let record =
        change::record(&stack, &job.change).map_err(|e| super::in_job_file(e, &job.path))?;
    let Scene {
        mut renderer,
        shell_grid,
        drape,
        ..
    } = scene(job, &stack, &record)?;
    // Only the field of the frame's own interval, and only when that interval morphs.
    let mut fields: Vec<Option<FlowResult>> = (0..stack.len() - 1).map(|_| None).collect();
    if let FrameKind::Interpolated { from, .. } = t.kind {
        if job.methods.get(from) == Some(&Method::Morph) {
            let result = pair_field(job, &stack, from);
            if !result.verdict.is_trusted() {
                log::warn!(
                    "{} -> {}: no reliable displacement ({}); this frame uses the linear blend",
                    stack.surveys()[from].id,
                    stack.surveys()[from + 1].id,
                    result.verdict
                );
            }
            fields[from] = Some(result);
        }
    }
    debug_assert!(
        !matches!(t.kind, FrameKind::Interpolated { from, .. } if effective_method(job, &fields, from) == Method::Morph && fields[from].as_ref().is_none_or(|r| !r.verdict.is_trusted()))
    );
    let mut painter = Painter::new(
        job,
        &stack,
        &record,
        &fields,
        drape.as_ref(),
        shell_grid.as_ref(),
    );
    let frame_index = timeline
        .frames
        .iter()
        .find(|f| f.when == t.when)
        .map(|f| f.index);
    let mut views = Vec::new();
    match opts.sheet {
        None => {
            let mut frame = Frame::new(job.view.width, job.view.height);
            painter.paint(&mut renderer, &t, orbit, &mut frame);
            views.push(view_line(renderer.frame_view(orbit).view_values()));
            png_seq::write_png(&opts.output, &frame, opts.overwrite)?;
        }
        Some(n) => {
            let base = renderer.frame_view(orbit).view_values();
            let mut tiles = Vec::with_capacity(n);
            for k in 0..n {
                let facing = (base.0 + 360.0 * k as f64 / n as f64).rem_euclid(360.0);
                let mut vj = job.clone();
                vj.view.facing_deg = facing;
                vj.view.elevation_deg = base.1;
                vj.view.distance_m = Some(base.2);
                vj.view.eye = None;
                vj.view.orbit_deg = 0.0;
                let Scene {
                    renderer: mut r, ..
                } = scene(&vj, &stack, &record)?;
                let mut f = Frame::new(job.view.width, job.view.height);
                painter.paint(&mut r, &t, 0.0, &mut f);
                let line = view_line(r.frame_view(0.0).view_values());
                tiles.push((f, line.clone()));
                views.push(line);
            }
            let tile_refs: Vec<PosterTile> = tiles
                .iter()
                .map(|(frame, caption)| PosterTile { frame, caption })
                .collect();
            let title = format!(
                "{} — {} viewpoints on {}; paste a caption under view: in the job",
                job.title, n, opts.at
            );
            png_seq::write_poster(
                &opts.output,
                &tile_refs,
                &PosterOptions {
                    title,
                    columns: if n <= 4 { n.min(2) } else { 3 },
                    ..job.poster.clone()
                },
                opts.overwrite,
            )?;
        }
    }
    Ok(StillReport {
        path: opts.output.clone(),
        frame_index,
        surveyed: t.kind.is_measured(),
        views,
    })
}

/// The job keys of a viewpoint, ready to paste under `view:`.
fn view_line((facing, elevation, distance): (f64, f64, f64)) -> String {
    format!(
        "facing_deg: {:.0}, elevation_deg: {:.0}, distance_m: {:.0}",
        facing.round().rem_euclid(360.0),
        elevation,
        distance
    )
}

/// The animation's frame at `date` with its orbit position; between frames, a frame made for the
/// date with the orbit position interpolated in time.
fn frame_at(timeline: &Timeline, stack: &AlignedStack, date: NaiveDate) -> (FrameTime, f64) {
    let n = timeline.frames.len();
    let orbit_of = |i: usize| {
        if n > 1 {
            i as f64 / (n - 1) as f64
        } else {
            0.0
        }
    };
    if let Some(f) = timeline.frames.iter().find(|f| f.when.date() == date) {
        return (f.clone(), orbit_of(f.index));
    }
    let when: NaiveDateTime = date.and_time(chrono::NaiveTime::MIN);
    // The frames before and after (the date lies inside the survey span, so both exist).
    let after = timeline
        .frames
        .iter()
        .position(|f| f.when > when)
        .unwrap_or(n - 1)
        .max(1);
    let (a, b) = (&timeline.frames[after - 1], &timeline.frames[after]);
    let span = (b.when - a.when).num_seconds().max(1) as f64;
    let k = (when - a.when).num_seconds() as f64 / span;
    let orbit = orbit_of(a.index) + k * (orbit_of(b.index) - orbit_of(a.index));
    let surveys = stack.surveys();
    let from = surveys
        .iter()
        .rposition(|s| s.date <= date)
        .unwrap_or(0)
        .min(surveys.len() - 2);
    let to = from + 1;
    let d0 = surveys[from].date.and_time(chrono::NaiveTime::MIN);
    let d1 = surveys[to].date.and_time(chrono::NaiveTime::MIN);
    let weight =
        ((when - d0).num_seconds() as f64 / (d1 - d0).num_seconds().max(1) as f64).clamp(0.0, 1.0);
    let t = FrameTime {
        index: a.index,
        when,
        from,
        to,
        weight,
        kind: FrameKind::Interpolated { from, to },
        duration_s: a.duration_s,
    };
    (t, orbit)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn views_parse_and_bad_ones_say_how() {
        let v = parse_view("380, 35,900").unwrap();
        assert_eq!(
            v,
            ViewOverride {
                facing_deg: 20.0,
                elevation_deg: 35.0,
                distance_m: 900.0
            }
        );
        for (bad, says) in [
            ("20,35", "not 3"),
            ("20,abc,900", "elevation \"abc\" is not a number"),
            ("20,95,900", "outside 5 to 90"),
            ("20,35,-4", "must be above 0"),
            ("20,35,inf", "not a number"),
        ] {
            let e = parse_view(bad).unwrap_err();
            assert!(
                e.contains(says) && e.contains("--view 20,35,900"),
                "{bad}: {e}"
            );
        }
    }
}
