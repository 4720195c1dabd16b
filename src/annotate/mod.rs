//! Labels drawn onto a `Frame` in place: title, date, measured/interpolated status, peak height and
//! marker, colour legend, north arrow, scale bar, inset chart and credit.
//!
//! `text` draws strings with the embedded font, `draw` draws shapes, `fit` sets text into a box,
//! and `layout` places everything on a frame ([`draw_overlay`]).
pub mod draw;
pub mod fit;
pub mod layout;
pub mod text;

pub use layout::{
    draw_overlay, plan, FrameStatus, InsetChart, LabelOptions, Legend, Optional, Overlay, Plan,
    DROP_ORDER,
};
