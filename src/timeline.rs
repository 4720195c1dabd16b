//! Survey dates + frame plan -> `Timeline` of `FrameTime`s.
//!
//! Frame times are proportional to real time: an interval twice as long gets twice the frames
//! (rounded, at least one step). Every survey date gets exactly one frame of kind `Measured`, and the
//! frame after it is held on screen longer (`hold_s`). Frames between two surveys are of kind
//! `Interpolated` and carry the two survey indices and the fraction of elapsed time between them.
//!
//! Decimal years follow the actual-length-year convention: `y + (t − Jan 1 y) / (Jan 1 y+1 − Jan 1 y)`.

use chrono::{Datelike, NaiveDate, NaiveDateTime, TimeDelta};

/// Whether a frame shows a survey or something made between two surveys.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FrameKind {
    /// The frame shows survey `survey` exactly as measured.
    Measured {
        /// Index of the survey in the aligned stack.
        survey: usize,
    },
    /// The frame is an interpolation between surveys `from` and `to`: not a measurement.
    Interpolated {
        /// Index of the earlier survey.
        from: usize,
        /// Index of the later survey.
        to: usize,
    },
}

impl FrameKind {
    /// True for a frame that shows a survey as measured.
    pub fn is_measured(self) -> bool {
        matches!(self, FrameKind::Measured { .. })
    }
}

/// One frame of the animation and where it sits in time.
#[derive(Debug, Clone, PartialEq)]
pub struct FrameTime {
    /// Position in the animation, from 0.
    pub index: usize,
    /// The instant the frame stands for.
    pub when: NaiveDateTime,
    /// Earlier survey index.
    pub from: usize,
    /// Later survey index (equal to `from` on a survey frame).
    pub to: usize,
    /// Fraction of the way from `from` to `to` in elapsed time, in [0, 1].
    pub weight: f64,
    /// Measured or interpolated.
    pub kind: FrameKind,
    /// How long the frame stays on screen, in seconds.
    pub duration_s: f64,
}

/// How many frames to make, and how fast to play them.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FramePlan {
    /// Steps per year of real time between surveys.
    PerYear(f64),
    /// Total number of frames in the animation (surveys included).
    Total(usize),
}

/// All frames of one animation, in order.
#[derive(Debug, Clone, PartialEq)]
pub struct Timeline {
    /// The frames.
    pub frames: Vec<FrameTime>,
}

impl Timeline {
    /// Total playing time in seconds.
    pub fn duration_s(&self) -> f64 {
        self.frames.iter().map(|f| f.duration_s).sum()
    }
}

/// Decimal year of an instant (actual-length-year convention).
pub fn decimal_year(t: NaiveDateTime) -> f64 {
    let y = t.year();
    let start = NaiveDate::from_ymd_opt(y, 1, 1)
        .expect("January 1 exists")
        .and_hms_opt(0, 0, 0)
        .unwrap();
    let next = NaiveDate::from_ymd_opt(y + 1, 1, 1)
        .expect("January 1 exists")
        .and_hms_opt(0, 0, 0)
        .unwrap();
    let num = (t - start).num_milliseconds() as f64;
    let den = (next - start).num_milliseconds() as f64;
    y as f64 + num / den
}

/// Number of interpolation steps for each interval between consecutive surveys.
///
/// `PerYear(f)`: `max(1, round(f · years))`. `Total(n)`: the `n − 1` steps are shared out in
/// proportion to the interval lengths by largest remainder, each interval getting at least one.
pub fn steps_per_interval(dates: &[NaiveDate], plan: FramePlan) -> Vec<usize> {
    let years: Vec<f64> = dates
        .windows(2)
        .map(|w| (w[1] - w[0]).num_days() as f64 / 365.2425)
        .collect();
    match plan {
        FramePlan::PerYear(f) => years
            .iter()
            .map(|y| ((f * y).round() as usize).max(1))
            .collect(),
        FramePlan::Total(n) => {
            let intervals = years.len();
            let steps = n.saturating_sub(1).max(intervals);
            let total: f64 = years.iter().sum();
            let spare = steps - intervals;
            let ideal: Vec<f64> = years.iter().map(|y| spare as f64 * y / total).collect();
            let mut out: Vec<usize> = ideal.iter().map(|v| 1 + v.floor() as usize).collect();
            let mut left = steps - out.iter().sum::<usize>();
            let mut order: Vec<usize> = (0..intervals).collect();
            // Largest remainder first; ties go to the earlier interval so the result is stable.
            order.sort_by(|&a, &b| {
                let ra = ideal[a] - ideal[a].floor();
                let rb = ideal[b] - ideal[b].floor();
                rb.partial_cmp(&ra)
                    .unwrap_or(std::cmp::Ordering::Equal)
                    .then(a.cmp(&b))
            });
            for i in order {
                if left == 0 {
                    break;
                }
                out[i] += 1;
                left -= 1;
            }
            out
        }
    }
}

/// Builds the frame list for surveys on `dates` (strictly increasing, at least two).
///
/// `fps` is the playing rate; `hold_s` extra seconds are spent on each survey frame.
///
/// # Panics
/// If fewer than two dates are given or they are not increasing: the job validation rules these out.
pub fn plan(dates: &[NaiveDate], plan: FramePlan, fps: f64, hold_s: f64) -> Timeline {
    assert!(
        dates.len() >= 2 && dates.windows(2).all(|w| w[0] < w[1]),
        "validated dates"
    );
    let steps = steps_per_interval(dates, plan);
    let base = 1.0 / fps;
    let mut frames = Vec::new();
    let midnight = |d: NaiveDate| d.and_hms_opt(0, 0, 0).unwrap();
    for (i, &n) in steps.iter().enumerate() {
        let t0 = midnight(dates[i]);
        let span_ms = (midnight(dates[i + 1]) - t0).num_milliseconds();
        for k in 0..n {
            let weight = k as f64 / n as f64;
            let kind = if k == 0 {
                FrameKind::Measured { survey: i }
            } else {
                FrameKind::Interpolated { from: i, to: i + 1 }
            };
            let when = t0 + TimeDelta::milliseconds((span_ms as f64 * weight).round() as i64);
            let (to, duration_s) = if k == 0 {
                (i, base + hold_s)
            } else {
                (i + 1, base)
            };
            frames.push(FrameTime {
                index: frames.len(),
                when,
                from: i,
                to,
                weight,
                kind,
                duration_s,
            });
        }
    }
    let last = dates.len() - 1;
    frames.push(FrameTime {
        index: frames.len(),
        when: midnight(dates[last]),
        from: last,
        to: last,
        weight: 0.0,
        kind: FrameKind::Measured { survey: last },
        duration_s: base + hold_s,
    });
    Timeline { frames }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn d(y: i32, m: u32, day: u32) -> NaiveDate {
        NaiveDate::from_ymd_opt(y, m, day).unwrap()
    }

    #[test]
    fn decimal_years() {
        let at = |y, m, dd, h| d(y, m, dd).and_hms_opt(h, 0, 0).unwrap();
        // Check: REFERENCES.md §8, actual-length-year convention — 2020-07-02T00:00 → 2020.5 (183/366); abs diff < 1e-12
        assert!((decimal_year(at(2020, 7, 2, 0)) - 2020.5).abs() < 1e-12);
        // Check: REFERENCES.md §8 — 2021-07-02T12:00 → 2021.5; abs diff < 1e-12
        assert!((decimal_year(at(2021, 7, 2, 12)) - 2021.5).abs() < 1e-12);
        // Check: REFERENCES.md §8 — 2019-03-15 → 2019.2 (73/365); abs diff < 1e-12
        assert!((decimal_year(at(2019, 3, 15, 0)) - 2019.2).abs() < 1e-12);
        // Check: REFERENCES.md §8 — 2024-12-31T12:00 → 2024.998634; abs diff < 1e-6
        assert!((decimal_year(at(2024, 12, 31, 12)) - 2024.998634).abs() < 1e-6);
    }

    #[test]
    fn day_counts_follow_the_gregorian_calendar() {
        // Check: Gregorian calendar arithmetic, hand-computed — 2028 is a leap year (divisible by 4),
        // 2100 is not (divisible by 100, not 400), 2000 is (divisible by 400)
        assert_eq!((d(2029, 1, 1) - d(2028, 1, 1)).num_days(), 366);
        assert_eq!((d(2101, 1, 1) - d(2100, 1, 1)).num_days(), 365);
        assert_eq!((d(2001, 1, 1) - d(2000, 1, 1)).num_days(), 366);
        // Check: hand-computed — 2027-03-01 to 2031-03-01 spans one leap day (2028-02-29): 4·365 + 1
        assert_eq!((d(2031, 3, 1) - d(2027, 3, 1)).num_days(), 1461);
    }

    #[test]
    fn frames_follow_real_time() {
        let dates = [d(2026, 1, 1), d(2036, 1, 1), d(2041, 1, 1)];
        let t = plan(&dates, FramePlan::PerYear(2.0), 10.0, 1.0);
        let steps = steps_per_interval(&dates, FramePlan::PerYear(2.0));
        // A ten-year gap gets twice the frames of a five-year gap.
        assert_eq!(steps, vec![20, 10]);
        assert_eq!(t.frames.len(), 31);
        let measured: Vec<usize> = t
            .frames
            .iter()
            .filter_map(|f| match f.kind {
                FrameKind::Measured { survey } => Some(survey),
                _ => None,
            })
            .collect();
        assert_eq!(measured, vec![0, 1, 2]);
        assert_eq!(t.frames[20].kind, FrameKind::Measured { survey: 1 });
        assert_eq!(t.frames[20].when, dates[1].and_hms_opt(0, 0, 0).unwrap());
        // Weights are proportional to elapsed time within the interval.
        for f in &t.frames[1..20] {
            let elapsed =
                (f.when - dates[0].and_hms_opt(0, 0, 0).unwrap()).num_milliseconds() as f64;
            let span = (dates[1] - dates[0]).num_milliseconds() as f64;
            assert!((f.weight - elapsed / span).abs() < 1e-9);
            assert_eq!(f.kind, FrameKind::Interpolated { from: 0, to: 1 });
        }
        assert!((t.frames[0].duration_s - 1.1).abs() < 1e-12);
        assert!((t.frames[1].duration_s - 0.1).abs() < 1e-12);
    }

    #[test]
    fn total_frames_are_shared_by_length() {
        let dates = [d(2026, 1, 1), d(2027, 1, 1), d(2030, 1, 1), d(2030, 2, 1)];
        let steps = steps_per_interval(&dates, FramePlan::Total(41));
        assert_eq!(steps.iter().sum::<usize>(), 40);
        assert!(steps.iter().all(|&s| s >= 1));
        assert!(steps[1] > 2 * steps[0], "{steps:?}");
        let t = plan(&dates, FramePlan::Total(41), 12.0, 0.0);
        assert_eq!(t.frames.len(), 41);
    }
}
