//! One frame of a run: its surface (survey, blend or morph), its crest, the translucent shell, the
//! colouring, the render and the labels. `Painter` holds what is made once per job (buffers, the
//! legend, the surveys' crests for the inset chart, the label caches) and paints frame after frame
//! into the caller's `Frame`. Nothing in it depends on other frames, so any one frame can be made
//! alone (`dunereel still`) and comes out identical.

use std::sync::Arc;

use crate::align::AlignedStack;
use crate::annotate::{
    self, Annotator, CrestFigure, CrestLabel, FrameStatus, InsetChart, Legend, Overlay,
};
use crate::change::crest;
use crate::change::ChangeRecord;
use crate::interp::flow::FlowResult;
use crate::interp::piecewise::{self, Between, BlockMax, FieldReach, InBetween};
use crate::interp::{linear, morph, Surface};
use crate::job::{ColourBy, Job, Method, ShellSurvey};
use crate::render::lod::SamplePlan;
use crate::render::{ramp, Colouring, Drape, Frame, Renderer};
use crate::timeline::{self, FrameKind, FrameTime};

use super::effective_method;

/// The figures of one frame's surface, in metres, for the frame index (and a part's manifest).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub(crate) struct FrameFigures {
    /// Crest elevation of the frame's surface (survey or in-between), when it has data.
    pub(crate) crest_elevation_m: Option<f64>,
    /// Elevation of the single highest cell, when it has data.
    pub(crate) highest_cell_elevation_m: Option<f64>,
}

/// Per-job state for painting frames.
pub(super) struct Painter<'a> {
    job: &'a Job,
    stack: &'a AlignedStack,
    record: &'a ChangeRecord,
    fields: &'a [Option<FlowResult>],
    drape: Option<&'a Drape>,
    /// The `shell.grid` surface, when the job draws one instead of an earlier survey.
    shell_grid: Option<&'a ndarray::Array2<f32>>,
    /// The cells the renderer's level of detail reads; `surface` and `shell` hold only those.
    /// Made on the first frame (it depends on the renderer), remade if a renderer reads others.
    plan: Option<Arc<SamplePlan>>,
    surface: Surface,
    shell: Surface,
    /// Which grid `shell` holds (see `paint`), None before the first.
    shell_holds: Option<usize>,
    /// The interval (its earlier survey) of the frame painted last: when the next frame starts
    /// another, the stack may hand back the grids read so far (see `AlignedStack::let_go`).
    interval: Option<usize>,
    /// What the current interval's in-between frames need to find their figures without
    /// computing the whole surface (see `interp::piecewise`); made on its first in-between frame.
    bounds: Option<IntervalBounds>,
    /// The crest of every survey as the frames show it (display unit): (decimal year, value).
    survey_points: Vec<(f64, f64)>,
    /// Each of those surveys' σ (display unit), for the chart's ±σ bars.
    survey_sigma: Vec<f64>,
    /// The chart's smallest value range (display unit), see [`inset_min_span_m`].
    inset_min_span: f64,
    legend: Legend,
    /// For colouring by change: the ramp's limit in metres (fixed for the animation) and t of the LoD.
    change_colour: Option<(f64, f64)>,
    annotator: Annotator,
}

impl<'a> Painter<'a> {
    /// Makes the buffers, the legend and the crest of every survey for the inset chart. Needs no
    /// in-between surface: a single frame (`dunereel still`) costs one surface.
    pub(super) fn new(
        job: &'a Job,
        stack: &'a AlignedStack,
        record: &'a ChangeRecord,
        fields: &'a [Option<FlowResult>],
        drape: Option<&'a Drape>,
        shell_grid: Option<&'a ndarray::Array2<f32>>,
    ) -> Self {
        let survey_points = record
            .surveys
            .iter()
            .filter(|s| s.crest_elevation_m.is_finite())
            .map(|s| {
                (
                    s.decimal_year,
                    shown_crest_m(job, s.crest_elevation_m) / job.change.display_unit.metres(),
                )
            })
            .collect();
        let survey_sigma = record
            .surveys
            .iter()
            .filter(|s| s.crest_elevation_m.is_finite())
            .map(|s| s.sigma_z_m / job.change.display_unit.metres())
            .collect();
        let inset_min_span = inset_min_span_m(record) / job.change.display_unit.metres();
        let change_colour = match &job.colour {
            ColourBy::Change { since, limit_m } => {
                let limit = limit_m
                    .unwrap_or_else(|| largest_change_m(stack, *since))
                    .max(0.01);
                Some((limit, job.change.lod_t))
            }
            _ => None,
        };
        let legend = legend(job, stack, change_colour.map(|(limit, _)| limit));
        Painter {
            job,
            stack,
            record,
            fields,
            drape,
            shell_grid,
            // Sized on the first frame, when the renderer's samples are known.
            plan: None,
            shell: unsized_surface(stack),
            shell_holds: None,
            interval: None,
            bounds: None,
            surface: unsized_surface(stack),
            survey_points,
            survey_sigma,
            inset_min_span,
            legend,
            change_colour,
            annotator: Annotator::new(),
        }
    }

    /// Renders and labels frame `t`, seen from `orbit` (0 to 1 along the orbit), into `frame`.
    /// Returns the figures of the frame's surface.
    pub(super) fn paint(
        &mut self,
        renderer: &mut Renderer,
        t: &FrameTime,
        orbit: f64,
        frame: &mut Frame,
    ) -> FrameFigures {
        let (job, stack) = (self.job, self.stack);
        let unit = job.change.display_unit;
        if self.interval != Some(t.from) {
            stack.let_go();
            self.interval = Some(t.from);
            self.bounds = None;
        }
        // The plan depends only on the grid and the renderer's level (a `still` contact sheet
        // may use renderers of other levels), so it is made again only when the level changes.
        let grid = (stack.geometry().rows, stack.geometry().cols);
        if self
            .plan
            .as_ref()
            .is_none_or(|p| p.level != renderer.level_of_detail() || p.grid != grid)
        {
            let plan = Arc::new(renderer.sample_plan());
            self.surface = Surface::for_samples(stack.geometry(), plan.clone());
            self.shell = Surface::for_samples(stack.geometry(), plan.clone());
            self.shell_holds = None;
            self.bounds = None;
            self.plan = Some(plan);
        }
        let plan = self.plan.clone().expect("made above");
        // The crest of this very surface; between surveys the blend's σ (see `change::crest`).
        let sigma = |i: usize| self.record.surveys[i].sigma_z_m;
        let geometry = stack.geometry();
        self.surface.kind = t.kind;
        let out = self
            .surface
            .z
            .as_slice_mut()
            .expect("a new array is row-major");
        // (The crest as (elevation, map x, map y), and the highest cell's elevation.)
        let (crest, highest_cell_m) = match t.kind {
            FrameKind::Measured { survey } => {
                gather(&plan, &stack.z(survey), out);
                // The record's figures of this survey: the same estimate on the same grid.
                let s = &self.record.surveys[survey];
                (
                    s.crest_elevation_m.is_finite().then_some((
                        s.crest_elevation_m,
                        s.crest_x_crs,
                        s.crest_y_crs,
                    )),
                    s.max_elevation_m.is_finite().then_some(s.max_elevation_m),
                )
            }
            FrameKind::Interpolated { from, to } => {
                // The frame draws the samples alone; its figures are those of the whole
                // surface, found by computing it only where they can lie.
                let field =
                    (effective_method(job, self.fields, from) == Method::Morph).then(|| {
                        &self.fields[from]
                            .as_ref()
                            .expect("checked by effective_method")
                            .field
                    });
                let (a, b) = (stack.z(from), stack.z(to));
                if self.bounds.is_none() {
                    self.bounds = Some(IntervalBounds {
                        max_a: BlockMax::new(&a),
                        max_b: BlockMax::new(&b),
                        reach: field.map(|f| {
                            (
                                FieldReach::new(f),
                                morph::FieldAt::new(f, &plan.rows, &plan.cols),
                            )
                        }),
                    });
                }
                let bounds = self.bounds.as_ref().expect("made above");
                let w = t.weight as f32;
                let how = match (field, &bounds.reach) {
                    (Some(field), Some((reach, at))) => {
                        morph::morph_at_with(out, &a, &b, at, w, &plan.rows, &plan.cols);
                        Between::Morph { field, reach }
                    }
                    _ => {
                        linear::blend_at_into(out, &a, &b, w, &plan.rows, &plan.cols);
                        Between::Blend
                    }
                };
                let src = InBetween {
                    a: a.view(),
                    b: b.view(),
                    max_a: &bounds.max_a,
                    max_b: &bounds.max_b,
                    w,
                    how,
                };
                let sigma_t = crest::blend_sigma_m(sigma(from), sigma(to), t.weight);
                (
                    crest::estimate_piecewise(&src, geometry, sigma_t)
                        .map(|c| (c.elevation_m, c.x_crs, c.y_crs)),
                    piecewise::highest_cell(&src).map(|(z, _, _)| f64::from(z)),
                )
            }
        };
        // The shell: a grid from the job, or an earlier survey (none on the survey itself).
        // (Which grid: `usize::MAX` for the job's shell grid, else the survey's index.)
        let shell_z = match self.shell_grid {
            Some(z) => Some((usize::MAX, z.view())),
            None => earlier_survey(job.shell_survey, t.kind)
                .filter(|&i| i != t.from || !t.kind.is_measured())
                .map(|i| (i, stack.z(i))),
        };
        if let Some((which, z)) = shell_z {
            // The renderer fades the shell in with its height above the surface. Its samples are
            // copied only when it changes (the shell is often one survey throughout).
            if self.shell_holds != Some(which) {
                gather(
                    &plan,
                    &z,
                    self.shell
                        .z
                        .as_slice_mut()
                        .expect("a new array is row-major"),
                );
                self.shell_holds = Some(which);
            }
        }
        let shell = shell_z.map(|_| &self.shell);
        let change_reference;
        let colouring = match (self.change_colour, &job.colour) {
            (Some((limit_m, t_lod)), ColourBy::Change { since, .. }) => {
                let r = earlier_survey(*since, t.kind).unwrap_or(t.from);
                let lod_m = t_lod * sigma(r).hypot(sigma(t.from).max(sigma(t.to)));
                change_reference = stack.z(r);
                Colouring::Change {
                    reference: &change_reference,
                    limit_m: limit_m as f32,
                    lod_m: lod_m as f32,
                }
            }
            _ => self.drape.map_or(Colouring::Elevation, Colouring::Drape),
        };
        let view = renderer.render_scene_into(&self.surface, shell, colouring, orbit, frame);
        let crest_px = crest.and_then(|(z, x, y)| view.project(x, y, z));
        let date_of = |i: usize| stack.surveys()[i].date.to_string();
        let status = match t.kind {
            FrameKind::Measured { survey } => FrameStatus::Surveyed {
                label: stack.surveys()[survey].label.clone(),
            },
            FrameKind::Interpolated { from, to } => FrameStatus::Interpolated {
                method: effective_method(job, self.fields, from).name().to_string(),
                from_date: date_of(from),
                to_date: date_of(to),
            },
        };
        let shown = crest.map_or(f64::NAN, |(z, _, _)| shown_crest_m(job, z) / unit.metres());
        let name = crest_name(job);
        let overlay = Overlay {
            title: job.title.clone(),
            date_text: t.when.date().to_string(),
            status,
            crest: CrestLabel {
                name: name.clone(),
                value: shown,
                unit: unit.symbol().into(),
            },
            crest_px,
            vertical_exaggeration: view.vertical_exaggeration(),
            // A draped image has no scale to explain.
            legend: self.drape.is_none().then(|| self.legend.clone()),
            north_angle_rad: view.north_px().map(|(dx, dy)| dx.atan2(-dy)),
            metres_per_px: Some(view.metres_per_px()),
            scale_unit: (unit.metres(), unit.symbol().into()),
            // The chart's heading is the figure's short name, so the range of the surveys' values
            // keeps its line beside the plot; the crest label above names the reference.
            inset: Some(InsetChart {
                title: crest_short_name(job),
                unit: unit.symbol().into(),
                survey_points: self.survey_points.clone(),
                current: (timeline::decimal_year(t.when), shown),
                survey_sigma: self.survey_sigma.clone(),
                min_span: self.inset_min_span,
            }),
            credit: job.credit.clone(),
        };
        self.annotator.draw(frame, &overlay, &job.labels);
        FrameFigures {
            crest_elevation_m: crest.map(|(z, _, _)| z),
            highest_cell_elevation_m: highest_cell_m,
        }
    }
}

/// The smallest value range of the frames' inset chart, in metres: the larger of 4 LoD (the
/// largest of the consecutive pairs') and a fifth of the surveys' mean crest height above the
/// reference elevation, so survey noise and a decline of a few per cent never fill the chart.
pub(super) fn inset_min_span_m(record: &ChangeRecord) -> f64 {
    let lod = record
        .pairs
        .iter()
        .filter(|p| p.pair_kind == crate::change::PairKind::Consecutive)
        .map(|p| p.lod_m)
        .fold(0.0, f64::max);
    let heights: Vec<f64> = record
        .surveys
        .iter()
        .map(|s| s.crest_height_above_reference_m)
        .filter(|h| h.is_finite())
        .collect();
    let mean = if heights.is_empty() {
        0.0
    } else {
        heights.iter().sum::<f64>() / heights.len() as f64
    };
    (4.0 * lod).max(0.2 * mean.abs())
}

/// The crest figure the job's frames show, in metres: the elevation, or the height above the
/// reference elevation (`labels.crest_shows`).
pub(super) fn shown_crest_m(job: &Job, elevation_m: f64) -> f64 {
    match job.labels.crest_shows {
        CrestFigure::Elevation => elevation_m,
        CrestFigure::HeightAboveReference => elevation_m - job.change.reference_elevation_m,
    }
}

/// The short name of the shown crest figure ("Crest elevation", "Crest height"), for the inset
/// chart's heading.
pub(super) fn crest_short_name(job: &Job) -> String {
    match job.labels.crest_shows {
        CrestFigure::Elevation => "Crest elevation".into(),
        CrestFigure::HeightAboveReference => "Crest height".into(),
    }
}

/// The name of the shown crest figure, saying which it is.
pub(super) fn crest_name(job: &Job) -> String {
    let unit = job.change.display_unit;
    match job.labels.crest_shows {
        CrestFigure::Elevation => "Crest elevation".into(),
        CrestFigure::HeightAboveReference => format!(
            "Crest height above {} {}",
            annotate::paint::format_value(job.change.reference_elevation_m / unit.metres()),
            unit.symbol()
        ),
    }
}

/// The colour legend: the change ramp when colouring by change (limits ±`change_limit_m`), else
/// the elevation ramp over the stack's range.
fn legend(job: &Job, stack: &AlignedStack, change_limit_m: Option<f64>) -> Legend {
    let unit = job.change.display_unit;
    let bytes = |c: [f32; 3]| c.map(|v| (v * 255.0).round() as u8);
    match (&job.colour, change_limit_m) {
        (ColourBy::Change { since, .. }, Some(limit)) => Legend {
            title: format!(
                "Change since {} survey (pale: within LoD)",
                if *since == ShellSurvey::First {
                    "first"
                } else {
                    "previous"
                }
            ),
            stops: (0..17)
                .map(|i| bytes(ramp::diverging_srgb(i as f32 / 8.0 - 1.0)))
                .collect(),
            min: -limit / unit.metres(),
            max: limit / unit.metres(),
            unit: unit.symbol().into(),
        },
        _ => {
            let (lo, hi) = stack
                .elevation_range()
                .expect("align refuses all-nodata grids");
            Legend {
                title: "Elevation".into(),
                stops: (0..16)
                    .map(|i| bytes(job.elevation_ramp.srgb(i as f32 / 15.0)))
                    .collect(),
                min: lo as f64 / unit.metres(),
                max: hi as f64 / unit.metres(),
                unit: unit.symbol().into(),
            }
        }
    }
}

/// Per interval: the two surveys' block maxima and, for the morph, the field's reach and its
/// values at the frame's samples (the field is the same for every frame of the interval).
struct IntervalBounds {
    max_a: BlockMax,
    max_b: BlockMax,
    reach: Option<(FieldReach, morph::FieldAt)>,
}

/// A surface without cells yet (see `Painter::plan`).
fn unsized_surface(stack: &AlignedStack) -> Surface {
    Surface {
        geometry: stack.geometry().clone(),
        z: ndarray::Array2::zeros((0, 0)),
        kind: FrameKind::Measured { survey: 0 },
        samples: None,
    }
}

/// The samples of `plan` from the whole grid `z` into `out`.
fn gather(plan: &SamplePlan, z: &ndarray::ArrayRef2<f32>, out: &mut [f32]) {
    let z = z.as_standard_layout();
    plan.gather_into(z.as_slice().expect("standard layout"), out);
}

/// The survey a frame is compared with: the first, or the earlier end of the frame's interval (for
/// a survey frame, the survey before it). None when there is none.
fn earlier_survey(choice: ShellSurvey, kind: FrameKind) -> Option<usize> {
    match (choice, kind) {
        (ShellSurvey::None | ShellSurvey::Grid, _) => None,
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
        for (a, b) in stack.z(i).iter().zip(&stack.z(r)) {
            let d = (a - b).abs();
            if d.is_finite() {
                most = most.max(d);
            }
        }
    }
    most as f64
}

#[cfg(test)]
mod tests {
    use super::*;

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
}
