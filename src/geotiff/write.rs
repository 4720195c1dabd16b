//! GeoTIFF writing (placeholder).

use std::path::Path;

use ndarray::Array2;

use crate::error::{Error, Result};
use crate::grid::GridGeometry;

/// How to write a raster.
#[derive(Debug, Clone, Default)]
pub struct WriteOptions {}

/// Writes float32 bands as one GeoTIFF.
///
/// # Errors
/// `Error::Output` or `Error::Io` naming the path.
pub fn write_bands(
    path: &Path,
    _geometry: &GridGeometry,
    _bands: &[&Array2<f32>],
    _opts: &WriteOptions,
) -> Result<()> {
    Err(Error::output(path, "GeoTIFF writing is not built yet"))
}
