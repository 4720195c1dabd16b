//! (AlignedStack, FrameTime) -> `Surface`: the surface shown on one frame.

use ndarray::Array2;

use crate::grid::GridGeometry;
use crate::timeline::FrameKind;

/// An elevation surface ready to render: a survey, or an interpolation between two.
#[derive(Debug, Clone)]
pub struct Surface {
    /// The analysis grid's geometry.
    pub geometry: GridGeometry,
    /// Elevations in metres, NaN for nodata; shape (rows, cols).
    pub z: Array2<f32>,
    /// Measured or interpolated; travels to the label.
    pub kind: FrameKind,
}

pub mod flow;
pub mod linear;
pub mod morph;
