//! Survey dates + frame plan -> `Timeline` of `FrameTime`s.
//!
//! Placeholder: filled in by the foundation work.

use chrono::NaiveDateTime;

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
    /// Fraction of the way from `from` to `to`, in [0, 1].
    pub weight: f64,
    /// Measured or interpolated.
    pub kind: FrameKind,
}
