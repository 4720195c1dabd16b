//! `Grid` and `GridGeometry`: the raster types shared by every stage.
//!
//! Conventions, fixed here and relied on everywhere:
//! - x = east, y = north, z = up. Rows run north to south, columns west to east.
//! - `GridGeometry` always describes cell *corners*: `origin_x, origin_y` is the outer north-west
//!   corner of cell (row 0, col 0). A pixel-is-point file is shifted by half a cell when read, so the
//!   rest of the program never has to ask which kind it came from.
//! - Map coordinates stay in the CRS's own horizontal unit; elevations are converted to metres when a
//!   grid is read. Missing values (nodata) are `f32::NAN` and nothing else.

use ndarray::{Array2, ArrayRef2};

/// A unit of length used by a CRS or a vertical datum.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum LinearUnit {
    /// The metre (EPSG 9001).
    Metre,
    /// The international foot, 0.3048 m exactly (EPSG 9002).
    Foot,
    /// The US survey foot, 1200/3937 m (EPSG 9003).
    UsSurveyFoot,
}

impl LinearUnit {
    /// Length of one unit in metres.
    pub fn metres(self) -> f64 {
        match self {
            LinearUnit::Metre => 1.0,
            // Check: international yard and pound agreement (1959) — 1 ft = 0.3048 m exactly; from memory
            LinearUnit::Foot => 0.3048,
            // Check: 85 FR 62698 (NIST/NOAA 2020) — US survey foot = 1200/3937 m; exact rational
            LinearUnit::UsSurveyFoot => 1200.0 / 3937.0,
        }
    }
    /// The unit for an EPSG unit-of-measure code, if it is a length unit this program knows.
    pub fn from_epsg(code: u16) -> Option<Self> {
        match code {
            9001 => Some(LinearUnit::Metre),
            9002 => Some(LinearUnit::Foot),
            9003 => Some(LinearUnit::UsSurveyFoot),
            _ => None,
        }
    }
    /// A short symbol for labels: `m`, `ft`, `US ft`.
    pub fn symbol(self) -> &'static str {
        match self {
            LinearUnit::Metre => "m",
            LinearUnit::Foot => "ft",
            LinearUnit::UsSurveyFoot => "US ft",
        }
    }
}

/// Where a unit of a grid came from: the file said it, the job said it, or nobody did.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum UnitSource {
    /// The file's GeoKeys state it (a unit key, or a CRS whose unit is known).
    File,
    /// The job file states it (`surveys[].vertical_unit`, `surveys[].horizontal_unit`).
    Job,
    /// Neither does; metres were assumed, with a warning that reaches the record.
    Assumed,
}

impl UnitSource {
    /// The word used in tables: `file`, `job` or `assumed`.
    pub fn name(self) -> &'static str {
        match self {
            UnitSource::File => "file",
            UnitSource::Job => "job",
            UnitSource::Assumed => "assumed",
        }
    }
}

/// Where a grid sits on the map and how big its cells are.
#[derive(Debug, Clone, PartialEq)]
pub struct GridGeometry {
    /// Number of columns (west to east).
    pub cols: usize,
    /// Number of rows (north to south).
    pub rows: usize,
    /// Map x of the west edge of column 0, in the CRS unit.
    pub origin_x: f64,
    /// Map y of the north edge of row 0, in the CRS unit.
    pub origin_y: f64,
    /// Cell width in the CRS unit (> 0).
    pub cell_x: f64,
    /// Cell height in the CRS unit (> 0).
    pub cell_y: f64,
    /// EPSG code of the projected CRS, when the file states one.
    pub epsg: Option<u32>,
    /// Horizontal unit of the CRS.
    pub horizontal_unit: LinearUnit,
}

impl GridGeometry {
    /// Map coordinates of the centre of cell (row, col).
    pub fn cell_center(&self, row: usize, col: usize) -> (f64, f64) {
        (
            self.origin_x + (col as f64 + 0.5) * self.cell_x,
            self.origin_y - (row as f64 + 0.5) * self.cell_y,
        )
    }
    /// Continuous (row, col) of a map point, with cell centres at whole numbers.
    pub fn to_cell(&self, x: f64, y: f64) -> (f64, f64) {
        (
            (self.origin_y - y) / self.cell_y - 0.5,
            (x - self.origin_x) / self.cell_x - 0.5,
        )
    }
    /// Map extent as (west, south, east, north).
    pub fn extent(&self) -> (f64, f64, f64, f64) {
        (
            self.origin_x,
            self.origin_y - self.rows as f64 * self.cell_y,
            self.origin_x + self.cols as f64 * self.cell_x,
            self.origin_y,
        )
    }
    /// Cell width in metres.
    pub fn cell_x_m(&self) -> f64 {
        self.cell_x * self.horizontal_unit.metres()
    }
    /// Cell height in metres.
    pub fn cell_y_m(&self) -> f64 {
        self.cell_y * self.horizontal_unit.metres()
    }
    /// Area of one cell in square metres.
    pub fn cell_area_m2(&self) -> f64 {
        self.cell_x_m() * self.cell_y_m()
    }
    /// Number of cells.
    pub fn len(&self) -> usize {
        self.rows * self.cols
    }
    /// True when the grid has no cells.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// Elevations on a geometry. `z` has shape (rows, cols), holds metres, and NaN marks nodata.
#[derive(Debug, Clone)]
pub struct Grid {
    /// Where the grid lies.
    pub geometry: GridGeometry,
    /// Elevations in metres, NaN where nodata.
    pub z: Array2<f32>,
}

impl Grid {
    /// Smallest and largest finite elevation, or None if every cell is nodata.
    pub fn finite_range(&self) -> Option<(f32, f32)> {
        finite_range(self.z.iter().copied())
    }
    /// Share of cells that are nodata, from 0 to 1.
    pub fn nodata_share(&self) -> f64 {
        nodata_share(&self.z)
    }
    /// Bilinear sample at a continuous (row, col) with cell centres at whole numbers.
    /// Returns NaN outside the grid or when any of the four neighbours used is nodata.
    pub fn sample_bilinear(&self, row: f64, col: f64) -> f32 {
        sample_bilinear(&self.z, row, col)
    }
}

/// Compass azimuth in degrees, clockwise from north, in [0, 360), of the vector (east, north).
pub fn azimuth_deg(east: f64, north: f64) -> f64 {
    if east == 0.0 && north == 0.0 {
        return 0.0;
    }
    let a = east.atan2(north).to_degrees().rem_euclid(360.0);
    if a >= 360.0 {
        0.0
    } else {
        a
    }
}

/// Share of cells that are nodata (NaN), from 0 to 1; 0 for an empty array.
pub fn nodata_share(z: &ArrayRef2<f32>) -> f64 {
    if z.is_empty() {
        return 0.0;
    }
    z.iter().filter(|v| v.is_nan()).count() as f64 / z.len() as f64
}

/// Smallest and largest finite value of a sequence.
pub fn finite_range(values: impl Iterator<Item = f32>) -> Option<(f32, f32)> {
    let mut lo = f32::INFINITY;
    let mut hi = f32::NEG_INFINITY;
    for v in values.filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    (lo <= hi).then_some((lo, hi))
}

/// [`finite_range`] of a grid, rows side by side. The lowest and highest values do not depend on
/// the order they are met in (a zero counts as +0, whatever its sign), so the result is the same on
/// any thread count.
pub fn finite_range_par(z: &ArrayRef2<f32>) -> Option<(f32, f32)> {
    use rayon::prelude::*;
    let rows: Vec<(f32, f32)> = (0..z.nrows())
        .into_par_iter()
        .with_min_len(16)
        .filter_map(|r| finite_range(z.row(r).iter().map(|&v| v + 0.0)))
        .collect();
    finite_range(rows.iter().flat_map(|&(lo, hi)| [lo, hi]))
}

/// Bilinear sample of an array at continuous (row, col), cell centres at whole numbers.
/// Points within half a cell outside the edge are clamped to the edge; further out gives NaN.
/// Nodata (NaN) in any neighbour with non-zero weight propagates.
pub fn sample_bilinear(z: &ArrayRef2<f32>, row: f64, col: f64) -> f32 {
    let (rows, cols) = z.dim();
    if rows == 0 || cols == 0 || !(row >= -0.5 && col >= -0.5) {
        return f32::NAN;
    }
    if row > rows as f64 - 0.5 || col > cols as f64 - 0.5 {
        return f32::NAN;
    }
    let r = row.clamp(0.0, (rows - 1) as f64);
    let c = col.clamp(0.0, (cols - 1) as f64);
    let r0 = r.floor() as usize;
    let c0 = c.floor() as usize;
    let r1 = (r0 + 1).min(rows - 1);
    let c1 = (c0 + 1).min(cols - 1);
    let fr = (r - r0 as f64) as f32;
    let fc = (c - c0 as f64) as f32;
    bilinear([z[[r0, c0]], z[[r0, c1]], z[[r1, c0]], z[[r1, c1]]], fr, fc)
}

/// The bilinear blend of four neighbours `[top left, top right, bottom left, bottom right]` at
/// fractions `fr` (down) and `fc` (across). A weight of 0 takes nothing, not even a NaN. Callers
/// that place many samples alike (`coregister::shifted`) use it to give the values of
/// [`sample_bilinear`] bit for bit.
#[inline(always)]
pub(crate) fn bilinear(z: [f32; 4], fr: f32, fc: f32) -> f32 {
    let pick = |v: f32, w: f32| if w == 0.0 { 0.0 } else { v * w };
    pick(z[0], (1.0 - fr) * (1.0 - fc))
        + pick(z[1], (1.0 - fr) * fc)
        + pick(z[2], fr * (1.0 - fc))
        + pick(z[3], fr * fc)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn geom() -> GridGeometry {
        GridGeometry {
            cols: 4,
            rows: 3,
            origin_x: 500_000.0,
            origin_y: 4_000_000.0,
            cell_x: 1.0,
            cell_y: 1.0,
            epsg: Some(32633),
            horizontal_unit: LinearUnit::Metre,
        }
    }

    #[test]
    fn cell_centre_and_back() {
        let g = geom();
        // Check: OGC GeoTIFF 1.1 raster-to-model, PixelIsArea — centre of col 10,row 20 with
        // tiepoint (500000, 4000000) and 1 m cells is (500010.5, 3999979.5); REFERENCES.md §9
        let (x, y) = GridGeometry {
            cols: 30,
            rows: 30,
            ..g.clone()
        }
        .cell_center(20, 10);
        assert_eq!((x, y), (500_010.5, 3_999_979.5));
        let (r, c) = g.to_cell(500_002.5, 3_999_998.5);
        assert!((r - 1.0).abs() < 1e-12 && (c - 2.0).abs() < 1e-12);
    }

    #[test]
    fn us_survey_foot() {
        // Check: 85 FR 62698 (NIST/NOAA 2020) — 100 US ft = 30.4800610 m; hand-computed, abs diff < 1e-7
        assert!((100.0 * LinearUnit::UsSurveyFoot.metres() - 30.480_061_0).abs() < 1e-7);
        // Check: 85 FR 62698 — easting 2 000 000 US ft = 609 601.2192 m; abs diff < 1e-4
        assert!((2.0e6 * LinearUnit::UsSurveyFoot.metres() - 609_601.219_2).abs() < 1e-4);
    }

    #[test]
    fn bilinear_is_exact_on_planes_and_propagates_nodata() {
        let mut z = Array2::from_shape_fn((3, 4), |(r, c)| 2.0 * r as f32 + 0.5 * c as f32);
        // Check: analytic — bilinear interpolation reproduces any plane exactly
        assert!((sample_bilinear(&z, 1.25, 2.5) - (2.5 + 1.25)).abs() < 1e-6);
        z[[1, 1]] = f32::NAN;
        assert!(sample_bilinear(&z, 0.5, 0.5).is_nan());
        assert!(!sample_bilinear(&z, 0.0, 2.0).is_nan());
        assert!(sample_bilinear(&z, -1.0, 0.0).is_nan());
    }
}
