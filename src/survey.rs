//! GeoTIFF file -> `Survey`: one dated elevation grid with its provenance.
//!
//! Nodata becomes NaN inside `geotiff::read_grid` and nowhere else; elevations are in metres from
//! here on, whatever the file's vertical unit was (the original unit is kept in `GridSource`).

use std::path::PathBuf;

use chrono::NaiveDate;

use crate::grid::{Grid, LinearUnit, UnitSource};

/// Facts about the file a grid came from, kept for the change record.
#[derive(Debug, Clone, PartialEq)]
pub struct GridSource {
    /// The file read.
    pub path: PathBuf,
    /// Sample type as stored, e.g. `float32`, `int16`.
    pub sample_type: String,
    /// Compression as stored, e.g. `none`, `lzw`, `deflate`.
    pub compression: String,
    /// The nodata value written in the file (tag 42113), if any.
    pub nodata: Option<f64>,
    /// Vertical unit the file's values were in before conversion to metres.
    pub vertical_unit: LinearUnit,
    /// Who said so: the file, the job, or nobody (metres assumed).
    pub vertical_unit_source: UnitSource,
    /// Unit of the map coordinates.
    pub horizontal_unit: LinearUnit,
    /// Who said so: the file, the job, or nobody (metres assumed).
    pub horizontal_unit_source: UnitSource,
    /// True when the file declared its raster as pixel-is-point (shifted to corners on reading).
    pub pixel_is_point: bool,
}

/// One dated survey of the dune field.
#[derive(Debug, Clone)]
pub struct Survey {
    /// Short identifier, unique within the job (defaults to the date).
    pub id: String,
    /// Survey date (ISO 8601 calendar date).
    pub date: NaiveDate,
    /// Optional human label, e.g. "after the winter storms".
    pub label: Option<String>,
    /// Vertical uncertainty (one standard deviation) in metres, if stated.
    pub sigma_z_m: Option<f64>,
    /// The elevations, in metres, NaN for nodata.
    pub grid: Grid,
    /// Where the grid came from.
    pub source: GridSource,
}

impl Survey {
    /// Warnings for units nobody stated (metres were assumed), naming the file and the job key to set.
    pub fn unit_warnings(&self, index: usize) -> Vec<String> {
        let mut out = Vec::new();
        let path = self.source.path.display();
        if self.source.vertical_unit_source == UnitSource::Assumed {
            out.push(format!(
                "{path}: the file does not say what unit its elevations are in (no VerticalUnitsGeoKey \
                 4099 and no vertical CRS with a known unit); they were read as metres. If they are in \
                 feet, set surveys[{index}].vertical_unit: foot (or us-survey-foot); if metres, set \
                 surveys[{index}].vertical_unit: metre to silence this warning"
            ));
        }
        if self.source.horizontal_unit_source == UnitSource::Assumed {
            out.push(format!(
                "{path}: the file does not say what unit its map coordinates are in (no \
                 ProjLinearUnitsGeoKey 3076 and no CRS with a known unit); they were read as metres. \
                 Set surveys[{index}].horizontal_unit (metre, foot or us-survey-foot) to say which"
            ));
        }
        out
    }
}

/// Reads the grid of one job survey.
///
/// # Errors
/// `Error::Input` when the grid is missing, corrupt or unsupported (see `geotiff::read_grid`).
pub fn read_survey(spec: &crate::job::SurveySpec) -> crate::error::Result<Survey> {
    let stated = crate::geotiff::StatedUnits {
        horizontal: spec.horizontal_unit,
        vertical: spec.vertical_unit,
    };
    let (grid, source) = crate::geotiff::read_grid_as(&spec.grid, stated)?;
    Ok(Survey {
        id: spec.id.clone(),
        date: spec.date,
        label: spec.label.clone(),
        sigma_z_m: spec.sigma_z_m,
        grid,
        source,
    })
}
