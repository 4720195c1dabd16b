//! The survey-series steps of `prepare`: co-registration on stable ground before anything is
//! measured, and afterwards the record's per-survey provenance (datum offsets, co-registration,
//! source paths relative to the job file) and the migration of each moving landform.

use std::path::Path;

use ndarray::Array2;

use crate::align::AlignedStack;
use crate::change::{self, ChangeRecord, LandformRecord, PairRecord};
use crate::coregister::{self, Registration, StableSource};
use crate::error::{Error, Result};
use crate::geotiff;
use crate::job::{Job, StableGround};
use crate::reproject::Reprojection;

/// The stable ground the job names, on the analysis grid (None: the tool finds it).
///
/// # Errors
/// `Error::Input` when the mask grid cannot be read, is in another CRS, or marks no cell of the
/// analysis grid as stable.
pub(super) fn stable_ground(
    job: &Job,
    stack: &AlignedStack,
) -> Result<Option<(Array2<bool>, StableSource)>> {
    let g = stack.geometry();
    match &job.stable_ground {
        None => Ok(None),
        Some(StableGround::Polygons(p)) => {
            let m = coregister::mask_from_polygons(p, g);
            if !m.iter().any(|&v| v) {
                return Err(Error::job(
                    &job.path,
                    "stable_ground.polygons",
                    "no polygon covers a cell centre of the analysis grid; give the polygons in the grids' CRS units",
                ));
            }
            Ok(Some((m, StableSource::JobPolygons)))
        }
        Some(StableGround::Mask(path)) => {
            let (grid, _) = geotiff::read_grid(path)?;
            let mg = &grid.geometry;
            if mg.epsg.zip(g.epsg).is_some_and(|(a, b)| a != b)
                || mg.horizontal_unit != g.horizontal_unit
            {
                return Err(Error::input(
                    path,
                    format!(
                        "the stable-ground mask is in {:?} ({}), the surveys in {:?} ({}); write the mask in the surveys' CRS",
                        mg.epsg,
                        mg.horizontal_unit.symbol(),
                        g.epsg,
                        g.horizontal_unit.symbol()
                    ),
                ));
            }
            let m = coregister::mask_from_grid(&grid, g);
            if !m.iter().any(|&v| v) {
                return Err(Error::input(
                    path,
                    "the stable-ground mask marks no cell of the analysis grid as stable (non-zero); check its extent and values",
                ));
            }
            Ok(Some((m, StableSource::JobMask)))
        }
    }
}

/// Warnings about reprojected surveys whose datums differ (the shift between them is approximate).
pub(super) fn reprojection_warnings(
    stack: &AlignedStack,
    reprojections: &[Option<Reprojection>],
) -> Vec<String> {
    stack
        .surveys()
        .iter()
        .zip(reprojections)
        .filter_map(|(s, r)| {
            let c = r.as_ref()?.datum_caution.as_ref()?;
            Some(format!("survey {}: reprojected; {c}", s.id))
        })
        .collect()
}

/// Co-registers the stack in place; returns one registration per survey and the warnings.
pub(super) fn coregister_stack(
    job: &Job,
    stack: &mut AlignedStack,
    given: Option<(Array2<bool>, StableSource)>,
) -> (Vec<Registration>, Vec<String>) {
    let sigma = |i: usize| {
        stack.surveys()[i]
            .sigma_z_m
            .filter(|v| v.is_finite() && *v >= 0.0)
            .unwrap_or(job.change.default_sigma_z_m)
    };
    // Check: Brasington et al. (2003) — LoD = t·sqrt(s1² + s2²); REFERENCES.md §7
    let lods: Vec<f64> = (0..stack.len())
        .map(|i| job.change.lod_t * sigma(0).hypot(sigma(i)))
        .collect();
    let regs = coregister::coregister(
        stack,
        given.as_ref().map(|(m, s)| (m, *s)),
        &lods,
        &job.coregister,
    );
    let mut warnings = Vec::new();
    for r in regs.iter().skip(1) {
        let id = &stack.surveys()[r.survey_index].id;
        if r.status.starts_with("applied") {
            let line = format!(
                "survey {id}: co-registered to the first survey on {:.0} m2 of stable ground ({}): {}",
                r.stable_area_m2,
                r.source.describe(),
                r.status
            );
            log::info!("{line}");
            warnings.push(line);
        } else if r.status.contains("stable cells") {
            let line = format!("survey {id}: co-registration {}", r.status);
            // Logged at info: the CLI prints the report's warnings once, at the end.
            log::info!("{line}");
            warnings.push(line);
        }
    }
    (regs, warnings)
}

/// Puts into the survey rows what only the run knows: datum offsets, co-registration, and source
/// paths relative to the job file's folder (forward slashes), so the record reads the same on
/// every machine.
pub(super) fn annotate_surveys(
    job: &Job,
    record: &mut ChangeRecord,
    regs: &[Registration],
    reprojections: &[Option<Reprojection>],
) {
    let here = job.path.parent().unwrap_or(Path::new("."));
    for (i, row) in record.surveys.iter_mut().enumerate() {
        if let Some(spec) = job.surveys.get(i) {
            row.vertical_offset_m = spec.vertical_offset_m;
            row.source_file = relative_path(&spec.grid, here);
        }
        if let Some(r) = regs.get(i) {
            row.set_registration(r);
        }
        if let Some(Some(p)) = reprojections.get(i) {
            row.set_reprojection(p);
        }
    }
}

/// `path` relative to `base`, with `..` where needed and forward slashes; both are absolute.
pub(crate) fn relative_path(path: &Path, base: &Path) -> String {
    use std::path::Component;
    let p: Vec<Component> = path.components().collect();
    let b: Vec<Component> = base.components().collect();
    let common = p.iter().zip(&b).take_while(|(x, y)| x == y).count();
    if common == 0 {
        return path.display().to_string().replace('\\', "/");
    }
    let mut parts: Vec<String> = vec!["..".to_string(); b.len() - common];
    parts.extend(
        p[common..]
            .iter()
            .map(|c| c.as_os_str().to_string_lossy().into_owned()),
    );
    parts.join("/")
}

/// Finds the moving landforms of every pair and fills the landform table and the pairs'
/// site-wide migration; returns the warnings.
/// The landforms of one pair and their migration (fills the pair's migration columns).
pub(super) fn pair_landforms(
    job: &Job,
    stack: &AlignedStack,
    pair: &mut PairRecord,
    max_side: usize,
) -> Vec<LandformRecord> {
    change::landforms(
        stack,
        pair,
        &job.flow,
        job.change.landform_join_m,
        job.change.landform_min_area_m2,
        max_side,
    )
}

/// Puts every pair's landforms (from [`pair_landforms`], in pair order) into the record; returns
/// a warning for each pair whose migration could not be measured.
pub(super) fn gather_landforms(
    record: &mut ChangeRecord,
    found: Vec<Vec<LandformRecord>>,
) -> Vec<String> {
    let mut warnings = Vec::new();
    let mut rows = Vec::new();
    for (pair, found) in record.pairs.iter().zip(found) {
        if let Some(site) = found.last() {
            if site.status != "measured" {
                warnings.push(format!(
                    "{} -> {}: {}; no migration is reported for this pair",
                    pair.from_id, pair.to_id, site.status
                ));
            }
        }
        rows.extend(found);
    }
    record.landforms = rows;
    warnings
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn relative_paths() {
        assert_eq!(
            relative_path(Path::new("/a/b/grids/x.tif"), Path::new("/a/b")),
            "grids/x.tif"
        );
        assert_eq!(
            relative_path(Path::new("/a/data/x.tif"), Path::new("/a/jobs")),
            "../data/x.tif"
        );
    }
}
