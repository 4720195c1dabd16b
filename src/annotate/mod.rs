//! Labels drawn onto a `Frame` in place: title, date, measured/interpolated status, crest figure and
//! marker, colour legend, north arrow, scale bar, inset chart and credit.
//!
//! `text` draws strings with the embedded font, `shapes` draws shapes (tiny-skia), `fit` sets text
//! into a box, `overlay` holds what a frame says, `layout` places it and `paint` draws it
//! ([`Annotator`], [`draw_overlay`]).
pub mod fit;
pub mod layout;
pub mod overlay;
pub mod paint;
pub mod shapes;
pub mod text;

pub use layout::{plan, Optional, Plan, Rect, DROP_ORDER};
pub use overlay::{
    CrestFigure, CrestLabel, FrameStatus, InsetChart, LabelOptions, Legend, Overlay,
};
pub use paint::{draw_overlay, Annotator};
