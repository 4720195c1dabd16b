//! dunereel: animations and change records from repeated elevation surveys of a dune field.
//!
//! The pipeline, one module per stage:
//! 1. `job` — YAML job file -> resolved, checked `Job`.
//! 2. `survey` + `geotiff` — GeoTIFF -> `Survey` (elevations in metres, nodata as NaN).
//! 3. `align` — surveys -> `AlignedStack` on one analysis grid; `coregister` then corrects
//!    each later survey's horizontal and vertical offset against the first on stable ground.
//! 4. `timeline` — survey dates -> `FrameTime`s (measured or interpolated).
//! 5. `interp` — stack + frame time -> `Surface` (linear blend or morph).
//! 6. `render` — surface -> shaded perspective `Frame`.
//! 7. `annotate` — labels drawn into the frame.
//! 8. `encode` — frames -> GIF and PNG sequence.
//! 9. `change` — stack -> change records; `archive` writes them with checksums.
//!
//! `run::run_job` runs them all; the CLI in `main.rs` is a thin shell over it.
#![warn(missing_docs)]

pub mod align;
pub mod annotate;
pub mod archive;
pub mod change;
pub mod coregister;
pub mod elevations;
pub mod encode;
pub mod error;
pub mod geotiff;
pub mod grid;
pub mod interp;
pub mod job;
pub mod render;
pub mod reproject;
pub mod run;
pub mod survey;
pub mod timeline;
pub mod waves;

pub use error::{Error, Result};
pub use job::Job;
pub use run::{run_job, RunOptions, RunReport};
