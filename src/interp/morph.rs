//! Warp-and-blend morph between two surveys (placeholder).
