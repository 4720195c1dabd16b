//! A grid in one projected CRS -> its elevations on an analysis grid in another projected CRS.
//!
//! Place in the pipeline: inside `align`, for a survey whose EPSG code differs from the first
//! survey's. Inverse mapping (REFERENCES.md §13): for every analysis cell centre, the point is
//! transformed into the survey's CRS and the survey is sampled there bilinearly; a cell whose
//! neighbourhood touches nodata, or that falls outside the survey, is nodata.
//!
//! Coordinates are transformed with `proj4rs` (a pure-Rust port of PROJ.4's projections) from the
//! EPSG definitions of `crs-definitions`; no system PROJ is needed. Horizontal units (metres,
//! international or US survey feet) come from the definitions. Exact transforms are computed on a
//! lattice every [`LATTICE_CELLS`] cells and interpolated bilinearly between (as image warpers
//! do); the interpolation error is measured at the centre of every lattice block and, when it
//! exceeds [`MAX_LATTICE_ERROR_CELLS`] of a source cell, every cell is transformed exactly.
//!
//! Datums: `proj4rs` shifts between datums only with the 3- or 7-parameter (towgs84) form in the
//! definitions; NAD83 is defined with zero parameters, i.e. identical to WGS 84, as PROJ's
//! "ballpark" transformation does. Real realisations differ by about 1–2 m in North America
//! (REFERENCES.md §13), so whenever the two CRSs name different datums the report carries a
//! caution, which the record keeps.

use ndarray::Array2;
use proj4rs::proj::Proj;
use rayon::prelude::*;

use crate::grid::{Grid, GridGeometry};

/// Spacing, in analysis cells, of the lattice of exact transforms.
pub const LATTICE_CELLS: usize = 16;
/// Largest interpolation error of the lattice, in source cells, before every cell is transformed
/// exactly (an eighth of a cell, the usual tolerance of approximate warping; common practice, no
/// source).
pub const MAX_LATTICE_ERROR_CELLS: f64 = 0.125;

/// What was done to bring one survey onto the analysis grid's CRS.
#[derive(Debug, Clone, PartialEq)]
pub struct Reprojection {
    /// The survey's own CRS, e.g. `EPSG:2264`.
    pub source_crs: String,
    /// The analysis grid's CRS.
    pub target_crs: String,
    /// In words, for the record.
    pub transformation: String,
    /// A caution about the datum shift, when the two CRSs name different datums.
    pub datum_caution: Option<String>,
    /// Largest lattice interpolation error measured, in source cells (0 when exact per cell).
    pub lattice_error_cells: f64,
}

/// A projected CRS from its EPSG code.
///
/// # Errors
/// A message naming the code and the fix when the code is unknown, geographic, or not handled.
pub fn projected_crs(epsg: u32) -> Result<(Proj, &'static str), String> {
    let refuse = |why: &str| {
        format!(
            "EPSG:{epsg} {why}; reproject this grid to the first survey's CRS with another program before running"
        )
    };
    let code = u16::try_from(epsg).map_err(|_| refuse("is not a CRS this program knows"))?;
    let def = crs_definitions::from_code(code)
        .ok_or_else(|| refuse("is not a CRS this program knows"))?;
    let proj = Proj::from_proj_string(def.proj4)
        .map_err(|e| refuse(&format!("cannot be used by the projection library ({e})")))?;
    if proj.is_latlong() {
        return Err(refuse("is geographic (degrees), not projected"));
    }
    Ok((proj, def.proj4))
}

/// The datum part of a PROJ string (`+datum=…`, `+ellps=…`, `+towgs84=…`), for comparison.
fn datum_of(def: &str) -> String {
    let mut parts: Vec<&str> = def
        .split_whitespace()
        .filter(|p| {
            p.starts_with("+datum=") || p.starts_with("+ellps=") || p.starts_with("+towgs84=")
        })
        .collect();
    parts.sort_unstable();
    parts.join(" ")
}

/// Transforms one point from `src` to `dst` (both projected, coordinates in their own units).
fn point(src: &Proj, dst: &Proj, x: f64, y: f64) -> Option<(f64, f64)> {
    let mut p = (x, y, 0.0);
    proj4rs::transform::transform(src, dst, &mut p).ok()?;
    (p.0.is_finite() && p.1.is_finite()).then_some((p.0, p.1))
}

/// Transforms a point between two EPSG CRSs (easting, northing in each CRS's unit).
///
/// # Errors
/// As [`projected_crs`], or when the point cannot be transformed.
pub fn transform_point(from_epsg: u32, to_epsg: u32, x: f64, y: f64) -> Result<(f64, f64), String> {
    let (from, _) = projected_crs(from_epsg)?;
    let (to, _) = projected_crs(to_epsg)?;
    point(&from, &to, x, y).ok_or_else(|| {
        format!("({x}, {y}) cannot be transformed from EPSG:{from_epsg} to EPSG:{to_epsg}")
    })
}

/// Samples `src` (in CRS `src_epsg`) at every cell centre of `target` (in `target.epsg`).
///
/// # Errors
/// A message (without the file name) when either CRS cannot be used.
///
/// # Allocations
/// The output grid, the lattice of exact transforms and two rows of coordinates per task.
pub fn reproject(src: &Grid, target: &GridGeometry) -> Result<(Array2<f32>, Reprojection), String> {
    let (src_epsg, dst_epsg) = match (src.geometry.epsg, target.epsg) {
        (Some(a), Some(b)) => (a, b),
        _ => return Err("the CRS is not stated in both grids, so this grid cannot be reprojected; write the EPSG code into the GeoTIFF".into()),
    };
    let (from, from_def) = projected_crs(dst_epsg)?;
    let (to, to_def) = projected_crs(src_epsg)?;
    let (rows, cols) = (target.rows, target.cols);
    // Exact transforms of the lattice nodes (every LATTICE_CELLS cells, plus the last row and
    // column), analysis CRS -> survey CRS.
    let nodes = |n: usize| -> Vec<usize> {
        let mut v: Vec<usize> = (0..n).step_by(LATTICE_CELLS).collect();
        if *v.last().unwrap_or(&0) != n - 1 {
            v.push(n - 1);
        }
        v
    };
    let (node_r, node_c) = (nodes(rows), nodes(cols));
    let exact = |r: f64, c: f64| -> (f64, f64) {
        let x = target.origin_x + (c + 0.5) * target.cell_x;
        let y = target.origin_y - (r + 0.5) * target.cell_y;
        point(&from, &to, x, y).unwrap_or((f64::NAN, f64::NAN))
    };
    let lattice: Vec<(f64, f64)> = node_r
        .par_iter()
        .flat_map_iter(|&r| node_c.iter().map(move |&c| (r, c)).collect::<Vec<_>>())
        .map(|(r, c)| exact(r as f64, c as f64))
        .collect();
    let nc = node_c.len();
    let interpolate = |r: usize, c: usize| -> (f64, f64) {
        let i = node_r
            .partition_point(|&v| v <= r)
            .saturating_sub(1)
            .min(node_r.len().saturating_sub(2));
        let j = node_c
            .partition_point(|&v| v <= c)
            .saturating_sub(1)
            .min(nc.saturating_sub(2));
        let (r0, r1) = (node_r[i], node_r[(i + 1).min(node_r.len() - 1)]);
        let (c0, c1) = (node_c[j], node_c[(j + 1).min(nc - 1)]);
        let fr = if r1 > r0 {
            (r - r0) as f64 / (r1 - r0) as f64
        } else {
            0.0
        };
        let fc = if c1 > c0 {
            (c - c0) as f64 / (c1 - c0) as f64
        } else {
            0.0
        };
        let at = |a: usize, b: usize| lattice[a * nc + b];
        let i1 = (i + 1).min(node_r.len() - 1);
        let j1 = (j + 1).min(nc - 1);
        let (p00, p01, p10, p11) = (at(i, j), at(i, j1), at(i1, j), at(i1, j1));
        let mix = |a: f64, b: f64, c: f64, d: f64| {
            (1.0 - fr) * ((1.0 - fc) * a + fc * b) + fr * ((1.0 - fc) * c + fc * d)
        };
        (
            mix(p00.0, p01.0, p10.0, p11.0),
            mix(p00.1, p01.1, p10.1, p11.1),
        )
    };
    // Measure the lattice's error at the centre of every block.
    let cell = src.geometry.cell_x.min(src.geometry.cell_y);
    let mut worst = 0f64;
    for w in node_r.windows(2) {
        for v in node_c.windows(2) {
            let (r, c) = ((w[0] + w[1]) / 2, (v[0] + v[1]) / 2);
            let (ex, ey) = exact(r as f64, c as f64);
            let (ix, iy) = interpolate(r, c);
            let e = (ex - ix).hypot(ey - iy) / cell;
            worst = if e.is_nan() {
                f64::INFINITY
            } else {
                worst.max(e)
            };
        }
    }
    let use_lattice = worst <= MAX_LATTICE_ERROR_CELLS;
    let mut z = Array2::from_elem((rows, cols), f32::NAN);
    if let Some(out) = z.as_slice_mut() {
        out.par_chunks_mut(cols).enumerate().for_each_init(
            || vec![(0f64, 0f64); nc],
            |column_nodes, (r, row)| {
                if use_lattice {
                    // This row's point at every lattice column, then linear along the row: the
                    // same bilinear interpolation as `interpolate`, a row at a time.
                    let i = node_r
                        .partition_point(|&v| v <= r)
                        .saturating_sub(1)
                        .min(node_r.len().saturating_sub(2));
                    let i1 = (i + 1).min(node_r.len() - 1);
                    let (r0, r1) = (node_r[i], node_r[i1]);
                    let fr = if r1 > r0 {
                        (r - r0) as f64 / (r1 - r0) as f64
                    } else {
                        0.0
                    };
                    for (j, n) in column_nodes.iter_mut().enumerate() {
                        let (a, b) = (lattice[i * nc + j], lattice[i1 * nc + j]);
                        *n = (a.0 + fr * (b.0 - a.0), a.1 + fr * (b.1 - a.1));
                    }
                }
                for (c, v) in row.iter_mut().enumerate() {
                    let (x, y) = if use_lattice {
                        let j = (c / LATTICE_CELLS).min(nc.saturating_sub(2));
                        let j1 = (j + 1).min(nc - 1);
                        let (c0, c1) = (node_c[j], node_c[j1]);
                        let fc = if c1 > c0 {
                            (c - c0) as f64 / (c1 - c0) as f64
                        } else {
                            0.0
                        };
                        let (a, b) = (column_nodes[j], column_nodes[j1]);
                        (a.0 + fc * (b.0 - a.0), a.1 + fc * (b.1 - a.1))
                    } else {
                        exact(r as f64, c as f64)
                    };
                    if x.is_finite() && y.is_finite() {
                        let (sr, sc) = src.geometry.to_cell(x, y);
                        *v = src.sample_bilinear(sr, sc);
                    }
                }
            },
        );
    }
    let (df, dt) = (datum_of(from_def), datum_of(to_def));
    let datum_caution = (df != dt).then(|| {
        format!(
            "EPSG:{src_epsg} ({}) and EPSG:{dst_epsg} ({}) name different datums; the projection library \
             shifts between them only by the parameters in their definitions (none for NAD83, which it \
             treats as WGS 84, like PROJ's ballpark transformation), while real realisations differ by \
             about 1 to 2 m in North America: check the co-registration offsets of this survey",
            if dt.is_empty() { "no datum stated" } else { &dt },
            if df.is_empty() { "no datum stated" } else { &df },
        )
    });
    let how = if use_lattice {
        format!("exact on a lattice every {LATTICE_CELLS} cells, interpolated between (error at most {worst:.4} cell)")
    } else {
        "exact at every cell".to_string()
    };
    Ok((
        z,
        Reprojection {
            source_crs: format!("EPSG:{src_epsg}"),
            target_crs: format!("EPSG:{dst_epsg}"),
            transformation: format!(
                "EPSG:{src_epsg} -> EPSG:{dst_epsg} by proj4rs (EPSG definitions from crs-definitions), inverse mapping, bilinear; coordinates {how}"
            ),
            datum_caution,
            lattice_error_cells: if use_lattice { worst } else { 0.0 },
        },
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn proj_check_values() {
        // Check: PROJ (GDAL 3.10.3 in rasterio 1.4.4), REFERENCES.md §13 — library run, not here;
        // tolerance 1 mm in metres / 0.005 US ft (the sheet gives four decimals)
        let cases = [
            (
                32631,
                32630,
                500_000.0,
                5_800_000.0,
                908_490.330_4,
                5_816_961.726_9,
                0.001,
            ),
            (
                32618,
                32617,
                400_000.0,
                4_100_000.0,
                933_716.701_1,
                4_110_540.245_9,
                0.001,
            ),
            (
                32618,
                2264,
                400_000.0,
                4_100_000.0,
                2_839_481.424_8,
                1_210_065.513_3,
                0.005,
            ),
        ];
        for (from, to, x, y, ex, ey, tol) in cases {
            let (gx, gy) = transform_point(from, to, x, y).unwrap();
            assert!(
                (gx - ex).abs() < tol && (gy - ey).abs() < tol,
                "EPSG:{from} -> EPSG:{to}: ({gx}, {gy}) vs ({ex}, {ey})"
            );
        }
        // Check: REFERENCES.md §13 — EPSG:32618 -> EPSG:26918 is the identity under PROJ's ballpark
        // transformation; proj4rs passes through geocentric coordinates between the WGS 84 and
        // GRS80 ellipsoids and lands 0.11 mm away, so the tolerance here is 1 mm
        let (gx, gy) = transform_point(32618, 26918, 400_000.0, 4_100_000.0).unwrap();
        assert!(
            (gx - 400_000.0).abs() < 1e-3 && (gy - 4_100_000.0).abs() < 1e-3,
            "({gx}, {gy})"
        );
    }

    #[test]
    fn refuses_what_it_cannot_handle() {
        assert!(projected_crs(4326).unwrap_err().contains("geographic"));
        assert!(projected_crs(1).unwrap_err().contains("EPSG:1"));
        assert!(projected_crs(70_000).unwrap_err().contains("reproject"));
    }

    #[test]
    fn datum_parts() {
        assert_eq!(
            datum_of("+proj=utm +zone=18 +datum=WGS84 +units=m"),
            "+datum=WGS84"
        );
        assert_ne!(
            datum_of("+proj=utm +zone=18 +datum=NAD83 +units=m"),
            datum_of("+proj=utm +zone=18 +datum=WGS84 +units=m")
        );
    }
}
