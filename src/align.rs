//! [Survey] -> `AlignedStack`: every survey resampled onto one analysis grid.
//!
//! The analysis grid is the first survey's grid, cropped to the area of interest when one is given.
//! Other surveys are resampled onto it bilinearly; a cell whose neighbourhood touches nodata stays
//! nodata. A survey in another projected CRS is reprojected onto it (`crate::reproject`); one whose
//! CRS is not stated, or that the projection library cannot handle, is refused.
//!
//! Invariant, true by construction because only [`align`] builds an `AlignedStack`: every grid in the
//! stack shares one geometry, and surveys are in strictly increasing date order.

use chrono::NaiveDate;
use ndarray::{Array2, ArrayView2, ArrayViewMut2};

use crate::elevations::Elevations;
use crate::error::{Error, Result};
use crate::grid::{Grid, GridGeometry};
use crate::reproject::Reprojection;
use crate::survey::{GridSource, Survey};

/// A rectangle in map coordinates (the CRS's horizontal unit) that limits the analysis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AreaOfInterest {
    /// West edge.
    pub west: f64,
    /// South edge.
    pub south: f64,
    /// East edge.
    pub east: f64,
    /// North edge.
    pub north: f64,
}

/// One survey of a stack: what it is and where it came from. Its elevations on the analysis grid
/// are [`AlignedStack::z`].
#[derive(Debug, Clone)]
pub struct StackedSurvey {
    /// Short identifier, unique within the job.
    pub id: String,
    /// Survey date.
    pub date: NaiveDate,
    /// Optional human label.
    pub label: Option<String>,
    /// Vertical uncertainty (one standard deviation) in metres, if stated.
    pub sigma_z_m: Option<f64>,
    /// Where the grid came from.
    pub source: GridSource,
}

/// Surveys on one shared geometry, sorted by date.
#[derive(Debug, Clone)]
pub struct AlignedStack {
    geometry: GridGeometry,
    surveys: Vec<StackedSurvey>,
    elevations: Elevations,
}

impl AlignedStack {
    /// The analysis grid's geometry.
    pub fn geometry(&self) -> &GridGeometry {
        &self.geometry
    }
    /// The surveys, oldest first.
    pub fn surveys(&self) -> &[StackedSurvey] {
        &self.surveys
    }
    /// Number of surveys.
    pub fn len(&self) -> usize {
        self.surveys.len()
    }
    /// True when empty (never, for a stack built by [`align`]).
    pub fn is_empty(&self) -> bool {
        self.surveys.is_empty()
    }
    /// Elevations of survey `i` on the analysis grid (NaN for nodata).
    pub fn z(&self, i: usize) -> ArrayView2<'_, f32> {
        self.elevations.z(i)
    }
    /// Survey `i` as a grid on the analysis geometry (a copy of its elevations).
    pub fn grid(&self, i: usize) -> Grid {
        Grid {
            geometry: self.geometry.clone(),
            z: self.z(i).to_owned(),
        }
    }
    /// The elevations of survey `i`, to correct in place (used by `coregister`); the geometry and
    /// the date order stay as they were.
    pub(crate) fn z_mut(&mut self, i: usize) -> ArrayViewMut2<'_, f32> {
        self.elevations.z_mut(i)
    }
    /// Replaces the elevations of survey `i` with a corrected surface on the same grid (used by
    /// `coregister`); the geometry and the date order stay as they were.
    ///
    /// # Panics
    /// When `z` has another shape than the analysis grid (a bug in the caller).
    pub(crate) fn replace_z(&mut self, i: usize, z: Array2<f32>) {
        assert_eq!(
            z.dim(),
            (self.geometry.rows, self.geometry.cols),
            "a corrected surface keeps the analysis grid"
        );
        if let Err(e) = self.elevations.set(i, &z) {
            // The file's blocks were reserved when the stack was made, so this is a failing disk.
            panic!("cannot write the corrected survey {i} to the stack's scratch file: {e}");
        }
    }
    /// Smallest and largest finite elevation over all surveys (for a colour scale fixed across frames).
    pub fn elevation_range(&self) -> Option<(f32, f32)> {
        let mut range: Option<(f32, f32)> = None;
        for i in 0..self.len() {
            if let Some((lo, hi)) = crate::grid::finite_range_par(&self.z(i)) {
                range = Some(range.map_or((lo, hi), |(a, b)| (a.min(lo), b.max(hi))));
            }
            self.let_go();
        }
        range
    }
    /// Hands back the memory of grids read so far when the stack lives in a scratch file (see
    /// `crate::elevations`); values never change. Work that visits the surveys one pair at a time
    /// calls it after each pair, so a long series of large grids does not stay resident.
    pub fn let_go(&self) {
        self.elevations.let_go();
    }
    /// True when the elevations live in a mapped scratch file rather than in memory.
    pub fn is_in_scratch_file(&self) -> bool {
        self.elevations.is_mapped()
    }
}

/// Brings surveys onto one grid.
///
/// # Errors
/// `Error::Input` when fewer than two surveys are given, dates are not strictly increasing, CRS or
/// units differ, a survey does not overlap the analysis grid at all, or the area of interest misses
/// the first grid.
pub fn align(surveys: Vec<Survey>, aoi: Option<AreaOfInterest>) -> Result<AlignedStack> {
    align_with_report(surveys, aoi).map(|(stack, _)| stack)
}

/// Like [`align`], and also says, per survey, how it was reprojected (None: it was already in the
/// analysis grid's CRS).
///
/// # Errors
/// As [`align`]; a survey in another CRS is refused only when a CRS is not stated or the
/// projection library cannot handle it.
pub fn align_with_report(
    surveys: Vec<Survey>,
    aoi: Option<AreaOfInterest>,
) -> Result<(AlignedStack, Vec<Option<Reprojection>>)> {
    align_kept_with_report(surveys, aoi, Keep::BySize)
}

/// Where a stack keeps its elevations (see `crate::elevations`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Keep {
    /// In memory up to [`crate::elevations::SCRATCH_FILE_ABOVE_BYTES`], in a scratch file above.
    #[default]
    BySize,
    /// Always in memory.
    Memory,
    /// Always in a scratch file (tests use it to check that both give the same figures).
    ScratchFile,
}

/// Like [`align`], with the elevations kept where `keep` says.
///
/// # Errors
/// As [`align`], and when a scratch file cannot be made.
pub fn align_kept(
    surveys: Vec<Survey>,
    aoi: Option<AreaOfInterest>,
    keep: Keep,
) -> Result<AlignedStack> {
    align_kept_with_report(surveys, aoi, keep).map(|(stack, _)| stack)
}

/// All the surveys pushed onto one [`StackBuilder`].
fn align_kept_with_report(
    surveys: Vec<Survey>,
    aoi: Option<AreaOfInterest>,
    keep: Keep,
) -> Result<(AlignedStack, Vec<Option<Reprojection>>)> {
    let first = surveys
        .first()
        .ok_or_else(|| Error::input(std::path::Path::new("(job)"), "no surveys to align"))?;
    let mut builder = StackBuilder::with_keep(first, surveys.len(), aoi, keep)?;
    for s in surveys {
        builder.push(s)?;
    }
    builder.finish()
}

/// Builds an [`AlignedStack`] one survey at a time, so a run need not hold every survey as read
/// and every survey as aligned at once: read a survey, push it, drop it.
#[derive(Debug)]
pub struct StackBuilder {
    base: GridGeometry,
    surveys: Vec<StackedSurvey>,
    reports: Vec<Option<Reprojection>>,
    elevations: Elevations,
}

impl StackBuilder {
    /// Room for `count` surveys on the analysis grid: `first`'s grid, cropped to `aoi` when given.
    ///
    /// # Errors
    /// `Error::Input` when the area of interest misses the first grid, or the scratch file for a
    /// large stack cannot be made (see `crate::elevations`).
    pub fn new(first: &Survey, count: usize, aoi: Option<AreaOfInterest>) -> Result<Self> {
        Self::with_keep(first, count, aoi, Keep::BySize)
    }

    /// Like [`StackBuilder::new`], with the elevations kept where `keep` says.
    ///
    /// # Errors
    /// As [`StackBuilder::new`].
    pub fn with_keep(
        first: &Survey,
        count: usize,
        aoi: Option<AreaOfInterest>,
        keep: Keep,
    ) -> Result<Self> {
        let base = match aoi {
            Some(a) => crop_geometry(&first.grid.geometry, &a).ok_or_else(|| {
                let (w, s, e, n) = first.grid.geometry.extent();
                Error::input(
                    &first.source.path,
                    format!(
                        "the area of interest (west {}, south {}, east {}, north {}) does not overlap this \
                         grid (west {w}, south {s}, east {e}, north {n}); correct area_of_interest in the job",
                        a.west, a.south, a.east, a.north
                    ),
                )
            })?,
            None => first.grid.geometry.clone(),
        };
        let elevations = match keep {
            Keep::BySize => Elevations::new(count, base.rows, base.cols),
            Keep::Memory => Ok(Elevations::in_memory(count, base.rows, base.cols)),
            Keep::ScratchFile => Elevations::in_scratch_file(count, base.rows, base.cols),
        }
        .map_err(|e| Error::input(&first.source.path, e.to_string()))?;
        Ok(StackBuilder {
            base,
            surveys: Vec::with_capacity(count),
            reports: Vec::with_capacity(count),
            elevations,
        })
    }

    /// The analysis grid's geometry.
    pub fn geometry(&self) -> &GridGeometry {
        &self.base
    }

    /// Brings the next survey onto the analysis grid.
    ///
    /// # Errors
    /// `Error::Input` when it is not dated after the survey before it, its CRS or units differ in
    /// a way that cannot be reconciled, it does not overlap the analysis grid anywhere with data, or
    /// more surveys are pushed than [`StackBuilder::new`] made room for.
    pub fn push(&mut self, s: Survey) -> Result<()> {
        let i = self.surveys.len();
        if i == self.elevations.len() {
            return Err(Error::input(
                &s.source.path,
                format!("the stack was made for {i} surveys; this one is one too many"),
            ));
        }
        if let Some(before) = self.surveys.last() {
            if s.date <= before.date {
                return Err(Error::input(
                    &s.source.path,
                    format!(
                        "survey dated {} does not come after the survey before it ({}); list surveys in date order, one per date",
                        s.date, before.date
                    ),
                ));
            }
        }
        let base = &self.base;
        let g = &s.grid.geometry;
        if g.epsg.is_none() != base.epsg.is_none() {
            let (which, other) = if g.epsg.is_none() {
                ("this grid", crs_name(base.epsg))
            } else {
                ("the first survey's grid", crs_name(g.epsg))
            };
            return Err(Error::input(
                &s.source.path,
                format!(
                    "{which} states no CRS (no ProjectedCRSGeoKey) while the other is in {other}; if they are in \
                     the same CRS, assign that CRS to the grid that lacks it (the elevations need no change)"
                ),
            ));
        }
        let report = if g.epsg != base.epsg {
            let (z, report) = crate::reproject::reproject(&s.grid, base)
                .map_err(|m| Error::input(&s.source.path, m))?;
            if z.iter().all(|v| v.is_nan()) {
                return Err(Error::input(
                    &s.source.path,
                    format!(
                        "reprojected from {} to {}, this grid does not overlap the analysis grid anywhere \
                         with data; check its georeference and CRS",
                        report.source_crs, report.target_crs
                    ),
                ));
            }
            self.store(i, &z, &s.source.path)?;
            Some(report)
        } else {
            if g.horizontal_unit != base.horizontal_unit {
                return Err(Error::input(
                    &s.source.path,
                    format!(
                        "horizontal unit {} differs from the first survey's {}; reproject or rescale this grid first",
                        g.horizontal_unit.symbol(),
                        base.horizontal_unit.symbol()
                    ),
                ));
            }
            // A grid already on the analysis grid (the usual case) is stored as read.
            let resampled;
            let z = if s.grid.geometry == *base {
                &s.grid.z
            } else {
                resampled = resample(&s.grid, base);
                &resampled
            };
            if z.iter().all(|v| v.is_nan()) {
                return Err(Error::input(
                    &s.source.path,
                    "this grid does not overlap the analysis grid (the first survey, cropped to the area of \
                     interest) anywhere with data; check its georeference and CRS",
                ));
            }
            self.store(i, z, &s.source.path)?;
            None
        };
        self.elevations.let_go();
        self.reports.push(report);
        self.surveys.push(StackedSurvey {
            id: s.id,
            date: s.date,
            label: s.label,
            sigma_z_m: s.sigma_z_m,
            source: s.source,
        });
        Ok(())
    }

    /// Puts survey `i`'s elevations on the analysis grid into the stack.
    fn store(&mut self, i: usize, z: &Array2<f32>, path: &std::path::Path) -> Result<()> {
        self.elevations.set(i, z).map_err(|e| {
            Error::input(
                path,
                format!("cannot keep this survey in the stack's scratch file: {e}"),
            )
        })
    }

    /// The stack, and per survey how it was reprojected (None: already in the analysis grid's CRS).
    ///
    /// # Errors
    /// `Error::Input` when fewer than two surveys were pushed, or fewer than room was made for.
    pub fn finish(self) -> Result<(AlignedStack, Vec<Option<Reprojection>>)> {
        let path = |s: Option<&StackedSurvey>| {
            s.map_or_else(
                || std::path::PathBuf::from("(job)"),
                |s| s.source.path.clone(),
            )
        };
        if self.surveys.len() < 2 {
            return Err(Error::input(
                &path(self.surveys.first()),
                "at least two surveys are needed to show change",
            ));
        }
        if self.surveys.len() != self.elevations.len() {
            return Err(Error::input(
                &path(self.surveys.last()),
                format!(
                    "room was made for {} surveys but {} were given",
                    self.elevations.len(),
                    self.surveys.len()
                ),
            ));
        }
        Ok((
            AlignedStack {
                geometry: self.base,
                surveys: self.surveys,
                elevations: self.elevations,
            },
            self.reports,
        ))
    }
}

fn crs_name(epsg: Option<u32>) -> String {
    epsg.map_or_else(|| "(not stated)".to_string(), |c| format!("EPSG:{c}"))
}

/// The part of `g` inside `a`, snapped outward to whole cells of `g`. None when they do not overlap.
fn crop_geometry(g: &GridGeometry, a: &AreaOfInterest) -> Option<GridGeometry> {
    let c0 = ((a.west - g.origin_x) / g.cell_x).floor().max(0.0);
    let c1 = ((a.east - g.origin_x) / g.cell_x).ceil().min(g.cols as f64);
    let r0 = ((g.origin_y - a.north) / g.cell_y).floor().max(0.0);
    let r1 = ((g.origin_y - a.south) / g.cell_y)
        .ceil()
        .min(g.rows as f64);
    if !(c1 - c0 >= 2.0 && r1 - r0 >= 2.0) {
        return None;
    }
    Some(GridGeometry {
        cols: (c1 - c0) as usize,
        rows: (r1 - r0) as usize,
        origin_x: g.origin_x + c0 * g.cell_x,
        origin_y: g.origin_y - r0 * g.cell_y,
        ..g.clone()
    })
}

/// Bilinear resampling of `src` onto `target`; exact copy when the cells coincide. Cells outside
/// `src`, or whose neighbourhood touches nodata, are NaN. The caller checks the CRS.
pub fn resample(src: &Grid, target: &GridGeometry) -> Array2<f32> {
    // A grid already on the analysis grid (the usual case: surveys delivered on one grid) is copied.
    if src.geometry == *target {
        return src.z.clone();
    }
    Array2::from_shape_fn((target.rows, target.cols), |(r, c)| {
        let (x, y) = target.cell_center(r, c);
        let (sr, sc) = src.geometry.to_cell(x, y);
        // Snap values within a millionth of a cell so coincident grids copy exactly.
        let snap = |v: f64| {
            if (v - v.round()).abs() < 1e-6 {
                v.round()
            } else {
                v
            }
        };
        src.sample_bilinear(snap(sr), snap(sc))
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::grid::LinearUnit;
    use crate::survey::GridSource;
    use chrono::NaiveDate;

    fn survey(day: u32, origin_x: f64, f: impl Fn(f64, f64) -> f32) -> Survey {
        let geometry = GridGeometry {
            cols: 20,
            rows: 10,
            origin_x,
            origin_y: 100.0,
            cell_x: 1.0,
            cell_y: 1.0,
            epsg: Some(32633),
            horizontal_unit: LinearUnit::Metre,
        };
        let z = Array2::from_shape_fn((10, 20), |(r, c)| {
            let (x, y) = geometry.cell_center(r, c);
            f(x, y)
        });
        Survey {
            id: format!("d{day}"),
            date: NaiveDate::from_ymd_opt(2030, 1, day).unwrap(),
            label: None,
            sigma_z_m: None,
            grid: Grid { geometry, z },
            source: GridSource {
                path: format!("s{day}.tif").into(),
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

    #[test]
    fn shifted_plane_resamples_exactly() {
        let plane = |x: f64, y: f64| (0.5 * x + 0.25 * y) as f32;
        let a = survey(1, 0.0, plane);
        let b = survey(2, 0.5, plane);
        let stack = align(vec![a, b], None).unwrap();
        // Check: analytic — bilinear resampling of a plane is exact where all four neighbours exist
        let (x, y) = stack.geometry().cell_center(4, 7);
        let got = stack.z(1)[[4, 7]];
        assert!((got - plane(x, y)).abs() < 1e-4, "{got}");
        // Column 0 of the target lies half a cell west of survey b's first centre: clamped, not NaN,
        // while nothing west of b's edge exists.
        assert!(stack.z(1)[[4, 0]].is_finite());
    }

    #[test]
    fn crop_to_area_of_interest() {
        let plane = |x: f64, _y: f64| x as f32;
        let aoi = AreaOfInterest {
            west: 4.2,
            south: 93.0,
            east: 12.0,
            north: 99.5,
        };
        let stack = align(
            vec![survey(1, 0.0, plane), survey(2, 0.0, plane)],
            Some(aoi),
        )
        .unwrap();
        let g = stack.geometry();
        assert_eq!((g.cols, g.rows, g.origin_x, g.origin_y), (8, 7, 4.0, 100.0));
        assert_eq!(stack.z(0)[[0, 0]], 4.5);
        let far = AreaOfInterest {
            west: 500.0,
            south: 0.0,
            east: 600.0,
            north: 10.0,
        };
        let err = align(
            vec![survey(1, 0.0, plane), survey(2, 0.0, plane)],
            Some(far),
        )
        .unwrap_err();
        assert!(err.to_string().contains("does not overlap"), "{err}");
    }

    #[test]
    fn refuses_out_of_order_and_other_crs() {
        let flat = |_: f64, _: f64| 1.0;
        let err = align(vec![survey(2, 0.0, flat), survey(1, 0.0, flat)], None).unwrap_err();
        assert!(err.to_string().contains("date order"), "{err}");
        let mut b = survey(2, 0.0, flat);
        b.grid.geometry.epsg = None;
        let err = align(vec![survey(1, 0.0, flat), b], None).unwrap_err();
        let text = err.to_string();
        assert!(
            text.contains("states no CRS") && text.contains("EPSG:32633"),
            "{text}"
        );
        // A CRS the library does not know is refused clearly.
        let mut b = survey(2, 0.0, flat);
        b.grid.geometry.epsg = Some(1);
        let text = align(vec![survey(1, 0.0, flat), b], None)
            .unwrap_err()
            .to_string();
        assert!(
            text.contains("EPSG:1 ") && text.contains("reproject"),
            "{text}"
        );
    }
}
