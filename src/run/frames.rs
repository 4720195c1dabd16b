//! One frame of a run: its surface (survey, blend or morph), the translucent shell, the colouring,
//! the render and the labels. `Painter` holds what is made once per job (buffers, the legend, the
//! peak series of the inset chart) and paints frame after frame into the caller's `Frame`.

use crate::align::AlignedStack;
use crate::annotate::{self, FrameStatus, InsetChart, Legend, Overlay};
use crate::change::ChangeRecord;
use crate::interp::flow::FlowResult;
use crate::interp::{self, morph, Surface};
use crate::job::{ColourBy, Job, Method, ShellSurvey};
use crate::render::{ramp, Colouring, Drape, Frame, Renderer};
use crate::timeline::{self, FrameKind, FrameTime, Timeline};

use super::effective_method;

/// Per-job state for painting frames.
pub(super) struct Painter<'a> {
    job: &'a Job,
    stack: &'a AlignedStack,
    record: &'a ChangeRecord,
    fields: &'a [Option<FlowResult>],
    drape: Option<&'a Drape>,
    /// The `shell.grid` surface, when the job draws one instead of an earlier survey.
    shell_grid: Option<&'a ndarray::Array2<f32>>,
    surface: Surface,
    shell: Surface,
    /// Highest cell of every frame's surface: (elevation m, row, col).
    peaks: Vec<Option<(f32, usize, usize)>>,
    years: Vec<f64>,
    series: Vec<(f64, f64)>,
    survey_points: Vec<(f64, f64)>,
    legend: Legend,
    /// For colouring by change: the ramp's limit in metres (fixed for the animation) and t of the LoD.
    change_colour: Option<(f64, f64)>,
}

impl<'a> Painter<'a> {
    /// Makes the buffers and, in a first pass over the surfaces, the peak of every frame.
    pub(super) fn new(
        job: &'a Job,
        stack: &'a AlignedStack,
        timeline: &Timeline,
        record: &'a ChangeRecord,
        fields: &'a [Option<FlowResult>],
        drape: Option<&'a Drape>,
        shell_grid: Option<&'a ndarray::Array2<f32>>,
    ) -> Self {
        let unit = job.change.display_unit;
        let to_unit = |m: f64| m / unit.metres();
        let mut surface = Surface::for_stack(stack);
        let mut peaks = Vec::with_capacity(timeline.frames.len());
        for t in &timeline.frames {
            make_surface(&mut surface, stack, fields, job, t);
            peaks.push(surface.peak());
        }
        let years: Vec<f64> = timeline
            .frames
            .iter()
            .map(|t| timeline::decimal_year(t.when))
            .collect();
        let point = |(p, y): (&Option<(f32, usize, usize)>, &f64)| {
            p.map(|(z, _, _)| (*y, to_unit(z as f64)))
        };
        let series = peaks.iter().zip(&years).filter_map(point).collect();
        let survey_points = timeline
            .frames
            .iter()
            .zip(peaks.iter().zip(&years))
            .filter(|(t, _)| t.kind.is_measured())
            .filter_map(|(_, py)| point(py))
            .collect();
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
            shell: Surface::for_stack(stack),
            surface,
            peaks,
            years,
            series,
            survey_points,
            legend,
            change_colour,
        }
    }

    /// Renders and labels frame `t`, seen from `orbit` (0 to 1 along the orbit), into `frame`.
    /// Returns the peak elevation shown on it, in the display unit.
    pub(super) fn paint(
        &mut self,
        renderer: &mut Renderer,
        t: &FrameTime,
        orbit: f64,
        frame: &mut Frame,
    ) -> f64 {
        let (job, stack) = (self.job, self.stack);
        let unit = job.change.display_unit;
        make_surface(&mut self.surface, stack, self.fields, job, t);
        // The shell: a grid from the job, or an earlier survey (none on the survey itself).
        let shell_z = match self.shell_grid {
            Some(z) => Some(z),
            None => earlier_survey(job.shell_survey, t.kind)
                .filter(|&i| i != t.from || !t.kind.is_measured())
                .map(|i| stack.z(i)),
        };
        if let Some(z) = shell_z {
            // The renderer fades the shell in with its height above the surface.
            self.shell.z.assign(z);
        }
        let shell = shell_z.map(|_| &self.shell);
        let colouring = match (self.change_colour, &job.colour) {
            (Some((limit_m, t_lod)), ColourBy::Change { since, .. }) => {
                let r = earlier_survey(*since, t.kind).unwrap_or(t.from);
                let sigma = |i: usize| self.record.surveys[i].sigma_z_m;
                let lod_m = t_lod * sigma(r).hypot(sigma(t.from).max(sigma(t.to)));
                Colouring::Change {
                    reference: stack.z(r),
                    limit_m: limit_m as f32,
                    lod_m: lod_m as f32,
                }
            }
            _ => self.drape.map_or(Colouring::Elevation, Colouring::Drape),
        };
        let view = renderer.render_scene_into(&self.surface, shell, colouring, orbit, frame);
        let peak = self.peaks[t.index];
        let peak_px = peak.and_then(|(z, r, c)| {
            let (x, y) = stack.geometry().cell_center(r, c);
            view.project(x, y, z as f64)
        });
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
        let peak_height = peak.map_or(f64::NAN, |(z, _, _)| z as f64 / unit.metres());
        let overlay = Overlay {
            title: job.title.clone(),
            date_text: t.when.date().to_string(),
            status,
            peak_height,
            peak_unit: unit.symbol().into(),
            peak_px,
            // A draped image has no scale to explain.
            legend: self.drape.is_none().then(|| self.legend.clone()),
            north_angle_rad: view.north_px().map(|(dx, dy)| dx.atan2(-dy)),
            metres_per_px: Some(view.metres_per_px()),
            scale_unit: (unit.metres(), unit.symbol().into()),
            inset: Some(InsetChart {
                title: "Peak elevation".into(),
                unit: unit.symbol().into(),
                series: self.series.clone(),
                survey_points: self.survey_points.clone(),
                current_year: self.years[t.index],
            }),
            credit: job.credit.clone(),
            vertical_exaggeration: Some(view.vertical_exaggeration()),
        };
        annotate::draw_overlay(frame, &overlay, &job.labels);
        peak_height
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

pub(super) fn make_surface(
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
        for (a, b) in stack.z(i).iter().zip(stack.z(r)) {
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
