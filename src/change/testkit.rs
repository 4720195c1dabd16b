//! Test fixtures: surveys built in code on small grids, aligned into stacks.

use chrono::NaiveDate;
use ndarray::Array2;

use crate::align::{align, AlignedStack};
use crate::grid::{Grid, GridGeometry, LinearUnit};
use crate::survey::{GridSource, Survey};

/// A square geometry of `n` × `n` cells of `cell` metres, centred on (0, 0).
pub fn geometry(n: usize, cell: f64) -> GridGeometry {
    let half = n as f64 * cell / 2.0;
    GridGeometry {
        cols: n,
        rows: n,
        origin_x: -half,
        origin_y: half,
        cell_x: cell,
        cell_y: cell,
        epsg: Some(32632),
        horizontal_unit: LinearUnit::Metre,
    }
}

/// A survey whose elevation at each cell centre is `f(x, y)`.
pub fn survey(
    id: &str,
    date: &str,
    g: &GridGeometry,
    sigma: Option<f64>,
    f: impl Fn(f64, f64) -> f64,
) -> Survey {
    let z = Array2::from_shape_fn((g.rows, g.cols), |(r, c)| {
        let (x, y) = g.cell_center(r, c);
        f(x, y) as f32
    });
    Survey {
        id: id.to_string(),
        date: NaiveDate::parse_from_str(date, "%Y-%m-%d").unwrap(),
        label: None,
        sigma_z_m: sigma,
        grid: Grid {
            geometry: g.clone(),
            z,
        },
        source: GridSource {
            path: format!("/nonexistent/{id}.tif").into(),
            sample_type: "float32".into(),
            compression: "none".into(),
            nodata: None,
            vertical_unit: LinearUnit::Metre,
            vertical_unit_source: crate::grid::UnitSource::File,
            horizontal_unit: LinearUnit::Metre,
            horizontal_unit_source: crate::grid::UnitSource::File,
            pixel_is_point: false,
        },
    }
}

/// Aligns surveys that already share one geometry.
pub fn stack(surveys: Vec<Survey>) -> AlignedStack {
    align(surveys, None).unwrap()
}
