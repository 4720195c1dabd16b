//! GeoTIFF reading (placeholder).

use std::path::Path;

use crate::error::{Error, Result};
use crate::grid::Grid;
use crate::survey::GridSource;

/// Reads one elevation grid.
///
/// # Errors
/// `Error::Input` naming the file, the tag or key at fault, and the fix.
pub fn read_grid(path: &Path) -> Result<(Grid, GridSource)> {
    Err(Error::input(path, "GeoTIFF reading is not built yet"))
}
