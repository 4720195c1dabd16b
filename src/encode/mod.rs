//! Frames -> files: animated GIF and numbered PNG sequence, each written atomically.
