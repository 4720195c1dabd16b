//! GeoTIFF file <-> `Grid`: reading survey grids and writing derived rasters.
//!
//! CONTRACT (keep these names and signatures):
//! - `read_grid(path) -> Result<(Grid, GridSource)>`: nodata becomes NaN here, elevations become metres.
//! - `write_bands(path, geometry, bands, &WriteOptions) -> Result<()>`: float32 GeoTIFF with one band per
//!   array, written to a temporary file in the same folder and renamed when complete.

mod georef;
mod keys;
mod read;
mod sample;
mod units;
mod write;

pub use read::read_grid;
pub use write::{write_bands, WriteOptions};
