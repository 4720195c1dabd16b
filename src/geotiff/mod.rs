//! GeoTIFF file <-> `Grid`: reading survey grids and writing derived rasters.
//!
//! CONTRACT (keep these names and signatures):
//! - `read_grid(path) -> Result<(Grid, GridSource)>`: nodata becomes NaN here, elevations become metres.
//! - `write_bands(path, geometry, bands, &WriteOptions) -> Result<()>`: float32 GeoTIFF with one band per
//!   array, written to a temporary file in the same folder and renamed when complete.
//! - `read_rgb(path) -> Result<(GridGeometry, Array3<u8>)>`: an RGB(A) orthophoto as sRGB bytes.

mod georef;
mod keys;
mod read;
mod rgb;
mod sample;
mod structure;
mod units;
mod write;

pub use read::{read_grid, read_grid_as, unit_word, StatedUnits};
pub use rgb::read_rgb;
pub use write::{write_bands, Effort, WriteOptions};
