//! GeoTIFF file <-> `Grid`: reading survey grids and writing derived rasters.
//!
//! CONTRACT (keep these names and signatures):
//! - `read_grid(path) -> Result<(Grid, GridSource)>`: nodata becomes NaN here, elevations become metres.
//! - `write_grid(path, &Grid, &WriteOptions) -> Result<()>`: float32 GeoTIFF (one or more bands), written
//!   to a temporary file in the same folder and renamed when complete.

use std::path::Path;

use crate::error::Result;
use crate::grid::Grid;
use crate::survey::GridSource;

/// Reads one elevation grid.
///
/// # Errors
/// `Error::Input` naming the file, the tag or key at fault, and the fix.
pub fn read_grid(path: &Path) -> Result<(Grid, GridSource)> {
    Err(crate::error::Error::input(path, "GeoTIFF reading is not built yet"))
}
