//! dunereel: animations and change records from repeated elevation surveys of a dune field.
#![warn(missing_docs)]

pub mod align;
pub mod annotate;
pub mod archive;
pub mod change;
pub mod encode;
pub mod error;
pub mod geotiff;
pub mod grid;
pub mod interp;
pub mod render;
pub mod survey;
pub mod timeline;

pub use error::{Error, Result};
