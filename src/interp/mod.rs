//! (AlignedStack, FrameTime) -> `Surface`: the surface shown on one frame.
//!
//! A survey frame copies its survey. An in-between frame is made by the interval's method: the
//! linear blend, or the morph along the displacement field (`flow` estimates it, `morph` applies it).

pub mod flow;
pub mod linear;
pub mod morph;
pub mod piecewise;

use std::sync::Arc;

use ndarray::Array2;

use crate::align::AlignedStack;
use crate::grid::GridGeometry;
use crate::render::lod;
use crate::timeline::{FrameKind, FrameTime};

/// An elevation surface ready to render: a survey, or an interpolation between two.
#[derive(Debug, Clone)]
pub struct Surface {
    /// The analysis grid's geometry.
    pub geometry: GridGeometry,
    /// Elevations in metres, NaN for nodata; shape (rows, cols), or the shape of `samples`.
    pub z: Array2<f32>,
    /// Measured or interpolated; travels to the label.
    pub kind: FrameKind,
    /// When set, `z` holds only the cells a renderer's level of detail reads (see
    /// [`lod::SamplePlan`]), not the whole grid: what the frames draw, at a fraction of the cost
    /// on a large grid.
    pub samples: Option<Arc<lod::SamplePlan>>,
}

impl Surface {
    /// A surface buffer for `stack`'s grid, to be filled frame after frame.
    pub fn for_stack(stack: &AlignedStack) -> Surface {
        let g = stack.geometry().clone();
        Surface {
            z: Array2::from_elem((g.rows, g.cols), f32::NAN),
            geometry: g,
            kind: FrameKind::Measured { survey: 0 },
            samples: None,
        }
    }

    /// A surface buffer holding the samples of `plan` (see [`Surface::samples`]).
    pub fn for_samples(geometry: &GridGeometry, plan: Arc<lod::SamplePlan>) -> Surface {
        Surface {
            z: Array2::from_elem(plan.shape(), f32::NAN),
            geometry: geometry.clone(),
            kind: FrameKind::Measured { survey: 0 },
            samples: Some(plan),
        }
    }

    /// Highest finite elevation and its (row, col), or None if every cell is nodata.
    pub fn peak(&self) -> Option<(f32, usize, usize)> {
        let mut best: Option<(f32, usize, usize)> = None;
        for ((r, c), &v) in self.z.indexed_iter() {
            if v.is_finite() && best.is_none_or(|(b, _, _)| v > b) {
                best = Some((v, r, c));
            }
        }
        best
    }
}

/// Fills `out` with the surface for frame `t` using the linear blend.
pub fn linear_into(out: &mut Surface, stack: &AlignedStack, t: &FrameTime) {
    out.kind = t.kind;
    match t.kind {
        FrameKind::Measured { survey } => out.z.assign(&stack.z(survey)),
        FrameKind::Interpolated { from, to } => {
            linear::blend_into(&mut out.z, &stack.z(from), &stack.z(to), t.weight as f32)
        }
    }
}
