//! Labels drawn onto a `Frame` in place: date, measured/interpolated, peak height.
pub mod text;
