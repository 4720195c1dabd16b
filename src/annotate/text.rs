//! Text drawn into a `Frame` with the embedded font (placeholder: draws nothing yet).

use crate::render::Frame;

/// Draws `text` with its top-left corner at (x, y) pixels, `size_px` tall, in `rgba` (alpha blends).
pub fn draw_text(_frame: &mut Frame, _x: f32, _y: f32, _size_px: f32, _rgba: [u8; 4], _text: &str) {
}

/// Width and height in pixels that `draw_text` would cover.
pub fn measure_text(size_px: f32, text: &str) -> (f32, f32) {
    (0.6 * size_px * text.chars().count() as f32, size_px)
}
