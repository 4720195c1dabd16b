//! Displacement field between two surveys (placeholder).
