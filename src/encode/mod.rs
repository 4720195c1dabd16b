//! Frames -> files: animated GIF, numbered PNG sequence with an index CSV, and a poster; each file
//! written atomically.
//!
//! - `atomic`: write under a temporary name, rename when complete, never replace unless asked.
//! - `quantize`: one palette for a whole animation (median cut) and nearest-colour mapping with
//!   optional ordered dithering.
//! - `lzw`: the GIF LZW code stream of one image.
//! - `gif`: the animated GIF writer (global palette, difference frames, delays, looping).
//! - `png_seq`: numbered PNG frames with an index CSV, and a poster of several frames.
//! - `video`: H.264 video (OpenH264) of the animation, BT.709 limited range, GIF timing.
//! - `mp4`: the MP4 container for it (our own small muxer, ISO/IEC 14496-12/-15).
pub mod atomic;
pub mod gif;
pub mod lzw;
pub mod mp4;
pub mod png_seq;
pub mod quantize;
pub mod video;

pub use self::gif::{delays_cs, write_gif, Dither, GifOptions, GifStats, GifWriter};
pub use atomic::{write_atomic, AtomicFile};
pub use png_seq::{
    write_png, write_poster, IndexRow, PngSequence, PosterOptions, PosterTile, RowStatus,
};
pub use quantize::{Palette, PaletteBuilder};
pub use video::{VideoOptions, VideoStats, VideoWriter};
