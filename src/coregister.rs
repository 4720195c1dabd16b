//! AlignedStack -> the same stack with every later survey co-registered to the first on stable
//! ground, and one [`Registration`] per survey saying what was estimated and what was applied.
//!
//! Place in the pipeline: after `align`, before the change record, the displacement fields and the
//! frames, so that every figure and picture uses the corrected surfaces.
//!
//! # Method (Nuth & Kääb 2011; REFERENCES.md §14)
//! A survey shifted horizontally by `d` (magnitude `a`, compass direction `b`) against the first one
//! differs from it, on ground that did not change, by `dh ≈ tan α · a · cos(b − ψ)` plus any vertical
//! bias, with α the slope and ψ the aspect (downslope compass direction) of the first survey. So
//! `dh / tan α = a·cos(b − ψ) + c` is fitted by least squares (multiplied through by `tan α`, so
//! each cell weighs by its slope; see `fit_cosine`) over stable cells whose slope lies in
//! a useful range (`stable_ground.min_slope_deg` to `max_slope_deg`: flat cells say nothing about a
//! shift and divide by almost zero, cliffs are where the surfaces disagree most for other reasons).
//! The survey is then resampled at the shifted position (bilinear), and the fit repeated on what is
//! left, until the shift step is below a hundredth of a cell (their rule, a spread improving by less
//! than 2 %, stopped too early on survey-grade data). The vertical offset is the median of `dh` on stable ground after the
//! last shift; the spread is the NMAD, `1.4826 · median |dh − median|` (Höhle & Höhle 2009).
//!
//! # Stable ground
//! Given by the job (polygons in CRS units, or a mask GeoTIFF, non-zero = stable), or found: in a
//! first pass, for each survey, cells whose `dh` against the first survey stays within
//! `max(LoD, 3·NMAD)` of its median, re-chosen at every iteration as the shift improves; in a second
//! pass, every survey is estimated again on the cells found stable in all of them (change within the
//! level of detection across the whole series), when enough such cells remain. Given ground is also
//! cleaned of outliers beyond `max(LoD, 3·NMAD)` (a parked car, a new fence).
//!
//! # Uncertainty and when a correction is applied
//! Standard errors are NMAD/√n_eff for the vertical offset and the least-squares standard error of
//! the fitted shift for the horizontal one, both with one independent value per area of
//! correlation of `dh` on stable ground (`n_eff = n / (π·L²)`, L the distance at which the
//! correlation falls to 1/e); the horizontal error is raised to half the disagreement of the fit on
//! two halves of the ground (alternate 32-cell blocks) when that is larger. Cells steeper than the
//! noise alone could make (four times the Horn slope noise) are the only ones used for the
//! horizontal fit: on flat stable ground the horizontal offset is not estimated, and the record
//! says so. A component (horizontal or vertical) is applied only when it exceeds 1.96 standard
//! errors; with fewer than `stable_ground.min_cells` stable cells nothing is applied and a warning
//! says so.
//!
//! Conventions: offsets are those of the later survey relative to the first (`b(x) = a(x − d) + dz`),
//! east and north in metres; the correction resamples it at `x + d` and subtracts `dz`.

use std::borrow::Cow;

use ndarray::{Array2, ArrayRef2};

use rayon::prelude::*;

use crate::align::AlignedStack;
use crate::grid::GridGeometry;

/// Normal-distribution factor turning a median absolute deviation into a standard deviation
/// (Höhle & Höhle 2009, REFERENCES.md §14).
pub const NMAD_FACTOR: f64 = 1.4826;
/// Multiplier of the standard error an offset must exceed to be applied (95 % two-sided).
pub const APPLY_T: f64 = 1.96;
/// Cells used for the horizontal fit are steeper than this many times the slope noise of a survey.
/// Noise alone makes a slope beyond k·σ_p in a share exp(−k²/2) of flat cells (Rayleigh tail):
/// 1.1 % at k = 3, which on the demo's flat stable ground was enough cells to report (and apply)
/// a spurious 0.3 m shift; 0.03 % at k = 4, too few to pass `min_cells`.
const SLOPE_NOISE_FACTOR: f64 = 4.0;
/// Most shift-and-fit iterations per survey and pass.
const MAX_ITERATIONS: usize = 12;

/// Settings of the co-registration, resolved from the job's `coregister` and `stable_ground` keys.
#[derive(Debug, Clone, PartialEq)]
pub struct CoregOptions {
    /// Whether to estimate and apply offsets at all. Default: true.
    pub enabled: bool,
    /// Smallest slope, degrees, of a cell used for the horizontal fit. Default: 3.
    pub min_slope_deg: f64,
    /// Largest slope, degrees, of a cell used for the horizontal fit. Default: 60.
    pub max_slope_deg: f64,
    /// Fewest stable cells for an estimate (and fewest sloping stable cells for a horizontal one).
    /// Default: 1000.
    pub min_cells: usize,
    /// Found ground keeps this distance, in metres, from any patch of change beyond the band (the
    /// faint tails of a moving dune change by less than the LoD, but not at random). Default: 10.
    pub buffer_m: f64,
}

impl Default for CoregOptions {
    fn default() -> Self {
        CoregOptions {
            enabled: true,
            min_slope_deg: 3.0,
            max_slope_deg: 60.0,
            min_cells: 1000,
            buffer_m: 10.0,
        }
    }
}

/// Where the stable ground came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StableSource {
    /// Polygons listed in the job.
    JobPolygons,
    /// A mask GeoTIFF named in the job.
    JobMask,
    /// Found by the tool: change within the level of detection.
    Found,
}

impl StableSource {
    /// Words for the record.
    pub fn describe(self) -> &'static str {
        match self {
            StableSource::JobPolygons => "job polygons",
            StableSource::JobMask => "job mask",
            StableSource::Found => "found: change within the LoD",
        }
    }
}

/// What co-registration found and did for one survey.
#[derive(Debug, Clone, PartialEq)]
pub struct Registration {
    /// Index of the survey in the stack.
    pub survey_index: usize,
    /// Estimated eastward offset of this survey relative to the first, metres (NaN: not estimated).
    pub east_m: f64,
    /// Estimated northward offset, metres (NaN: not estimated).
    pub north_m: f64,
    /// Estimated vertical offset (this survey minus the first on stable ground), metres.
    pub vertical_m: f64,
    /// Standard error of the horizontal offset (length of the vector of the two errors), metres.
    pub horizontal_sigma_m: f64,
    /// Standard error of the vertical offset, metres.
    pub vertical_sigma_m: f64,
    /// NMAD of the elevation differences on stable ground after the correction, metres.
    pub stable_nmad_m: f64,
    /// Stable cells used.
    pub stable_cells: u64,
    /// Their area, square metres.
    pub stable_area_m2: f64,
    /// Where the stable ground came from.
    pub source: StableSource,
    /// Whether the horizontal offset was applied.
    pub applied_horizontal: bool,
    /// Whether the vertical offset was applied.
    pub applied_vertical: bool,
    /// In words: what was applied, or why not.
    pub status: String,
}

impl Registration {
    fn not_estimated(i: usize, source: StableSource, status: String) -> Self {
        Registration {
            survey_index: i,
            east_m: f64::NAN,
            north_m: f64::NAN,
            vertical_m: f64::NAN,
            horizontal_sigma_m: f64::NAN,
            vertical_sigma_m: f64::NAN,
            stable_nmad_m: f64::NAN,
            stable_cells: 0,
            stable_area_m2: 0.0,
            source,
            applied_horizontal: false,
            applied_vertical: false,
            status,
        }
    }
}

/// The reference survey's terrain, cell by cell: slope tangent and aspect sine/cosine, computed
/// when asked (Horn's gradient of a 3x3 window) rather than stored, which at 4096² would be three
/// more grids (192 MB) held for the whole co-registration.
struct Terrain<'a> {
    z: &'a [f32],
    rows: usize,
    cols: usize,
    dx: f32,
    dy: f32,
}

/// Slope tangent and aspect (sine, cosine) of one cell.
#[derive(Clone, Copy)]
struct Facet {
    tan_slope: f32,
    sin_aspect: f32,
    cos_aspect: f32,
}

impl Terrain<'_> {
    fn new<'a>(z: &'a [f32], g: &GridGeometry) -> Terrain<'a> {
        Terrain {
            z,
            rows: g.rows,
            cols: g.cols,
            dx: g.cell_x_m() as f32,
            dy: g.cell_y_m() as f32,
        }
    }

    /// The facet of cell `k`: NaN slope where the cell has no data (or a neighbour gives NaN),
    /// aspect (0, 0) where the slope is not above 0.
    #[inline]
    fn facet(&self, k: usize) -> Facet {
        if !self.z[k].is_finite() {
            return Facet {
                tan_slope: f32::NAN,
                sin_aspect: 0.0,
                cos_aspect: 0.0,
            };
        }
        let (r, c) = (k / self.cols, k % self.cols);
        // Check: Horn (1981) 3x3 gradient; aspect = atan2(-p, -q) is the downslope compass
        // direction, REFERENCES.md §1
        let (p, q) = crate::render::shade::horn_gradient(
            self.z, self.rows, self.cols, r, c, self.dx, self.dy,
        );
        let m = p.hypot(q);
        let (sin_aspect, cos_aspect) = if m > 0.0 {
            (-p / m, -q / m)
        } else {
            (0.0, 0.0)
        };
        Facet {
            tan_slope: m,
            sin_aspect,
            cos_aspect,
        }
    }

    /// The slope tangent of cell `k` (see [`Terrain::facet`]).
    #[inline]
    fn tan_slope(&self, k: usize) -> f32 {
        self.facet(k).tan_slope
    }
}

/// `z` resampled at `x + (east, north)` (map units), bilinear; NaN beyond the data.
pub fn shifted(z: &ArrayRef2<f32>, g: &GridGeometry, east: f64, north: f64) -> Array2<f32> {
    let (rows, cols) = z.dim();
    let dc = east / g.cell_x;
    let dr = -north / g.cell_y;
    let mut out = Array2::from_elem((rows, cols), f32::NAN);
    if rows == 0 || cols == 0 {
        return out;
    }
    // The shift is the same for every cell, so where each row and each column samples is found
    // once, by the arithmetic of `grid::sample_bilinear` (which this equals bit for bit): the
    // two neighbours and the weight of the second; None beyond half a cell outside the data.
    let place = |x: f64, n: usize| -> Option<(usize, usize, f32)> {
        // (NaN fails the first test, as in `sample_bilinear`.)
        if x.is_nan() || x < -0.5 || x > n as f64 - 0.5 {
            return None;
        }
        let p = x.clamp(0.0, (n - 1) as f64);
        let i0 = p.floor() as usize;
        Some((i0, (i0 + 1).min(n - 1), (p - i0 as f64) as f32))
    };
    let at_rows: Vec<_> = (0..rows).map(|r| place(r as f64 + dr, rows)).collect();
    let at_cols: Vec<_> = (0..cols).map(|c| place(c as f64 + dc, cols)).collect();
    let laid_out = z.as_standard_layout();
    let zs = laid_out.as_slice().expect("standard layout");
    if let Some(slice) = out.as_slice_mut() {
        slice
            .par_chunks_mut(cols)
            .zip(at_rows.par_iter())
            .for_each(|(row, at_row)| {
                let Some((r0, r1, fr)) = *at_row else {
                    return;
                };
                let (top, bottom) = (
                    &zs[r0 * cols..(r0 + 1) * cols],
                    &zs[r1 * cols..(r1 + 1) * cols],
                );
                for (v, at_col) in row.iter_mut().zip(&at_cols) {
                    if let Some((c0, c1, fc)) = *at_col {
                        *v = crate::grid::bilinear(
                            [top[c0], top[c1], bottom[c0], bottom[c1]],
                            fr,
                            fc,
                        );
                    }
                }
            });
    }
    out
}

/// Median of a slice (reorders it); NaN when empty.
fn median(v: &mut [f32]) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    let mid = v.len() / 2;
    let (_, m, _) = v.select_nth_unstable_by(mid, f32::total_cmp);
    let hi = *m as f64;
    if v.len() % 2 == 1 {
        return hi;
    }
    let lo = v[..mid].iter().copied().fold(f32::NEG_INFINITY, f32::max) as f64;
    0.5 * (lo + hi)
}

/// Median and NMAD of `dh` over the cells where `keep` holds.
fn median_nmad(dh: &[f32], keep: impl Fn(usize) -> bool) -> (f64, f64, usize) {
    let mut v: Vec<f32> = (0..dh.len())
        .filter(|&k| keep(k) && dh[k].is_finite())
        .map(|k| dh[k])
        .collect();
    let n = v.len();
    let med = median(&mut v);
    for x in v.iter_mut() {
        *x = (*x as f64 - med).abs() as f32;
    }
    // Check: Höhle & Höhle (2009) — NMAD = 1.4826 · median |x − median|; REFERENCES.md §14
    (med, NMAD_FACTOR * median(&mut v), n)
}

/// One survey's estimate against the reference: the fitted offsets and the stable cells used.
struct Estimate {
    east_m: f64,
    north_m: f64,
    horizontal_sigma_m: f64,
    horizontal_ok: bool,
    vertical_m: f64,
    vertical_sigma_m: f64,
    nmad_m: f64,
    /// The stable cells, one bit each (a survey's estimate is kept until all are done: at 4096²
    /// a bit per cell is 2 MB, a byte would be 16 MB).
    stable: Bits,
}

/// A set of cells, one bit a cell.
struct Bits(Vec<u64>);

impl Bits {
    fn from_bools(v: &[bool]) -> Bits {
        Bits(
            v.chunks(64)
                .map(|c| {
                    c.iter()
                        .enumerate()
                        .fold(0u64, |w, (i, &b)| w | (u64::from(b) << i))
                })
                .collect(),
        )
    }
    #[inline]
    fn get(&self, k: usize) -> bool {
        self.0[k / 64] >> (k % 64) & 1 == 1
    }
    fn count(&self) -> usize {
        self.0.iter().map(|w| w.count_ones() as usize).sum()
    }
}

/// Least squares of `dh = tanα·(A·sinψ + B·cosψ) + C` over the cells in `fit`; returns
/// (A, B, σ_A, σ_B), or None when the aspects do not span both directions well enough.
///
/// This is the Nuth & Kääb (2011) equation multiplied through by tanα. Fitted in their form
/// (`dh / tanα`), every cell counts alike and the gentle slopes, whose noisy aspects and small
/// tangents carry little information, dominate: on tests/survey_series.rs (noise 0.03 m) each step
/// recovered only part of the remaining shift and the estimate stopped 0.1 m short. Multiplied
/// through, each cell is weighted by its slope, which removes that dilution.
fn fit_cosine(dh: &[f32], t: &Terrain, fit: &[u32]) -> Option<(f64, f64, f64, f64)> {
    let mut m = [[0f64; 3]; 3];
    let mut rhs = [0f64; 3];
    let (mut ss, mut sc, mut cc) = (0f64, 0f64, 0f64);
    let x_of = |f: Facet| {
        let tan = f.tan_slope as f64;
        [tan * f.sin_aspect as f64, tan * f.cos_aspect as f64, 1.0]
    };
    for &k in fit {
        let k = k as usize;
        let f = t.facet(k);
        let x = x_of(f);
        for i in 0..3 {
            for j in 0..3 {
                m[i][j] += x[i] * x[j];
            }
            rhs[i] += x[i] * dh[k] as f64;
        }
        let (s, c) = (f.sin_aspect as f64, f.cos_aspect as f64);
        ss += s * s;
        sc += s * c;
        cc += c * c;
    }
    let n = fit.len() as f64;
    // The aspects must cover more than one direction: the smaller eigenvalue of the 2x2 matrix of
    // (sin, cos) second moments, per cell, at least 0.05 (0.5 when aspects are spread evenly).
    // Common practice, no source: a guard against ridges that all face one way.
    let (a, b, d) = (ss / n, sc / n, cc / n);
    let tr = a + d;
    let det = a * d - b * b;
    let small = 0.5 * (tr - (tr * tr - 4.0 * det).max(0.0).sqrt());
    if small < 0.05 {
        return None;
    }
    let inv = invert3(m)?;
    let sol: Vec<f64> = (0..3)
        .map(|i| (0..3).map(|j| inv[i][j] * rhs[j]).sum())
        .collect();
    // Residual spread, robust: NMAD of the residuals.
    let mut res: Vec<f32> = fit
        .iter()
        .map(|&k| {
            let k = k as usize;
            let x = x_of(t.facet(k));
            (dh[k] as f64 - sol[0] * x[0] - sol[1] * x[1] - sol[2]) as f32
        })
        .collect();
    let med = median(&mut res.clone());
    for r in res.iter_mut() {
        *r = (*r as f64 - med).abs() as f32;
    }
    let s = NMAD_FACTOR * median(&mut res);
    Some((
        sol[0],
        sol[1],
        s * inv[0][0].max(0.0).sqrt(),
        s * inv[1][1].max(0.0).sqrt(),
    ))
}

fn invert3(m: [[f64; 3]; 3]) -> Option<[[f64; 3]; 3]> {
    let det = m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
        - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
        + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0]);
    if det.is_nan() || det.abs() <= 1e-12 {
        return None;
    }
    let mut inv = [[0f64; 3]; 3];
    for (i, row) in inv.iter_mut().enumerate() {
        for (j, v) in row.iter_mut().enumerate() {
            let (r0, r1) = ((j + 1) % 3, (j + 2) % 3);
            let (c0, c1) = ((i + 1) % 3, (i + 2) % 3);
            *v = (m[r0][c0] * m[r1][c1] - m[r0][c1] * m[r1][c0]) / det;
        }
    }
    Some(inv)
}

/// Standard deviation of a Horn slope component made by noise alone, from the NMAD of the
/// differences of two surveys (each survey carries about 1/√2 of it).
fn slope_noise(nmad_dh: f64, g: &GridGeometry) -> f64 {
    // Check: Horn (1981) stencil — weights (1, 2, 1) on each side over 8·Δx, so the sum of squared
    // weights is 12 and σ_p = σ·√12 / (8·Δx); analytic, REFERENCES.md §1
    let sigma = nmad_dh / std::f64::consts::SQRT_2;
    if sigma.is_finite() {
        sigma * 12f64.sqrt() / (8.0 * g.cell_x_m())
    } else {
        0.0
    }
}

/// Distance, in cells, at which the correlation of `dh` between stable cells falls to 1/e:
/// measured along rows and columns at lags 1, 2, 3, 4, 6, 8, 12, 16, 24 and 32 cells, with linear
/// interpolation between lags (correlation 1 at lag 0). Common practice, no source: a variogram
/// reduced to its range, as used to count independent values in DEM error budgets.
fn correlation_range_cells(dh: &[f32], stable: &[bool], rows: usize, cols: usize) -> f64 {
    let values: Vec<f64> = (0..dh.len())
        .filter(|&k| stable[k])
        .map(|k| dh[k] as f64)
        .collect();
    if values.len() < 2 {
        return 0.0;
    }
    let mean = values.iter().sum::<f64>() / values.len() as f64;
    let var = values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / values.len() as f64;
    if var.is_nan() || var <= 0.0 {
        return 0.0;
    }
    let target = (-1f64).exp();
    let (mut prev_lag, mut prev_corr) = (0.0, 1.0);
    for lag in [1usize, 2, 3, 4, 6, 8, 12, 16, 24, 32] {
        let (mut sum, mut n) = (0.0, 0usize);
        for r in 0..rows {
            for c in 0..cols {
                let k = r * cols + c;
                if !stable[k] {
                    continue;
                }
                let here = dh[k] as f64 - mean;
                if c + lag < cols && stable[k + lag] {
                    sum += here * (dh[k + lag] as f64 - mean);
                    n += 1;
                }
                if r + lag < rows && stable[k + lag * cols] {
                    sum += here * (dh[k + lag * cols] as f64 - mean);
                    n += 1;
                }
            }
        }
        if n == 0 {
            return prev_lag;
        }
        let corr = sum / n as f64 / var;
        if corr < target {
            return prev_lag + (lag as f64 - prev_lag) * (prev_corr - target) / (prev_corr - corr);
        }
        (prev_lag, prev_corr) = (lag as f64, corr);
    }
    32.0
}

/// Marks as stable the candidate cells whose `dh` lies within `band` of `med`; found ground also
/// keeps `buffer_m` away from patches of change beyond the band (a majority of a 5 x 5
/// neighbourhood, so single noisy cells do not punch holes).
#[allow(clippy::too_many_arguments)]
fn select_stable(
    stable: &mut [bool],
    dh: &[f32],
    med: f64,
    band: f32,
    cand: &(impl Fn(usize) -> bool + Sync),
    found: bool,
    g: &GridGeometry,
    opts: &CoregOptions,
) {
    let med = med as f32;
    let (rows, cols) = (g.rows, g.cols);
    // One byte a cell: at 4096² each of these masks is 16 MB, not the 64 MB of wider counts.
    let outside: Vec<u8> = dh
        .par_iter()
        .map(|&d| (d.is_finite() && (d - med).abs() > band) as u8)
        .collect();
    let buffer = (opts.buffer_m / g.cell_x_m()).round() as usize;
    let near_change: Vec<bool> = if found && buffer > 0 {
        let valid: Vec<u8> = dh.par_iter().map(|d| d.is_finite() as u8).collect();
        let so = crate::change::landform::window_counts(&outside, rows, cols, 2);
        let sv = crate::change::landform::window_counts(&valid, rows, cols, 2);
        drop(valid);
        let core: Vec<u8> = (0..dh.len())
            .into_par_iter()
            .map(|k| (outside[k] == 1 && 2 * so[k] >= sv[k]) as u8)
            .collect();
        drop((so, sv));
        crate::change::landform::dilate(&core, rows, cols, buffer)
    } else {
        vec![false; dh.len()]
    };
    stable.par_iter_mut().enumerate().for_each(|(k, s)| {
        *s = cand(k) && dh[k].is_finite() && outside[k] == 0 && !near_change[k];
    });
}

/// Estimates the offset of `z` against the reference on the candidate cells (all when None).
#[allow(clippy::too_many_arguments)]
fn estimate(
    reference: &[f32],
    z: &ArrayRef2<f32>,
    g: &GridGeometry,
    t: &Terrain,
    candidates: Option<&[bool]>,
    lod_m: f64,
    found: bool,
    opts: &CoregOptions,
) -> Estimate {
    let unit = g.horizontal_unit.metres();
    let (lo, hi) = (
        opts.min_slope_deg.to_radians().tan() as f32,
        opts.max_slope_deg.to_radians().tan() as f32,
    );
    let cand = |k: usize| candidates.is_none_or(|c| c[k]);
    let (mut east, mut north) = (0.0f64, 0.0f64);
    let (mut sig_e, mut sig_n) = (f64::NAN, f64::NAN);
    let mut horizontal_ok = false;
    let mut dh = vec![0f32; reference.len()];
    let mut stable = vec![false; reference.len()];
    for _ in 0..MAX_ITERATIONS {
        // Unshifted, the survey is used as it is (no copy of a grid that may be 64 MB).
        let moved = if east == 0.0 && north == 0.0 {
            Cow::Borrowed(z)
        } else {
            Cow::Owned(shifted(z, g, east / unit, north / unit))
        };
        let zs = moved.as_slice().expect("standard layout");
        dh.par_iter_mut()
            .zip(zs.par_iter().zip(reference.par_iter()))
            .for_each(|(d, (&b, &a))| *d = b - a);
        let (med, nmad, _) = median_nmad(&dh, cand);
        // Found ground must also stay within the level of detection; given ground only loses
        // outliers.
        let band = lod_m.max(3.0 * nmad) as f32;
        select_stable(&mut stable, &dh, med, band, &cand, found, g, opts);
        // Slopes made by survey noise alone say nothing about a shift, and their aspects are
        // random: keep cells steeper than SLOPE_NOISE_FACTOR times the slope noise.
        let (_, nmad_stable, _) = median_nmad(&dh, |k| stable[k]);
        let lo_eff = lo.max((SLOPE_NOISE_FACTOR * slope_noise(nmad_stable, g)) as f32);
        // Cell indices as u32 (half the memory of usize; a grid has far fewer than 2³² cells).
        let fit: Vec<u32> = (0..dh.len())
            .filter(|&k| {
                stable[k] && {
                    let tan = t.tan_slope(k);
                    tan >= lo_eff && tan <= hi
                }
            })
            .map(|k| k as u32)
            .collect();
        if fit.len() < opts.min_cells {
            break;
        }
        let Some((a, b, sa, sb)) = fit_cosine(&dh, t, &fit) else {
            break;
        };
        // The fit says how far the shifted survey still lies from the reference.
        horizontal_ok = true;
        sig_e = sa;
        sig_n = sb;
        let step = a.hypot(b);
        east += a;
        north += b;
        // Stop on a step below a hundredth of a cell. Nuth & Kääb (2011) stop when the spread
        // improves by less than 2 %; on survey-grade data the spread is mostly noise after the
        // first step, and that rule stopped with a tenth of the shift still left (measured on
        // tests/survey_series.rs), so the step size decides.
        if step < 0.01 * g.cell_x_m() {
            break;
        }
        if east.hypot(north) > 20.0 * g.cell_x_m() {
            // Running away: the ground is not stable, or not enough of it. Give up the horizontal.
            horizontal_ok = false;
            break;
        }
    }
    if !horizontal_ok {
        east = 0.0;
        north = 0.0;
    }
    // Final differences at the final shift, the stable set, and the vertical offset.
    let moved = if horizontal_ok {
        Cow::Owned(shifted(z, g, east / unit, north / unit))
    } else {
        Cow::Borrowed(z)
    };
    let zs = moved.as_slice().expect("standard layout");
    for (k, d) in dh.iter_mut().enumerate() {
        *d = zs[k] - reference[k];
    }
    let (med, nmad, _) = median_nmad(&dh, cand);
    let band = lod_m.max(3.0 * nmad) as f32;
    select_stable(&mut stable, &dh, med, band, &cand, found, g, opts);
    let (vertical, nmad, n) = median_nmad(&dh, |k| stable[k]);
    // Errors of neighbouring cells are not independent: count one independent value per area
    // of correlation (at least one cell).
    let range = correlation_range_cells(&dh, &stable, g.rows, g.cols);
    let cells_per_value = (std::f64::consts::PI * range * range).max(1.0);
    let n_eff = (n as f64 / cells_per_value).max(1.0);
    // A second, empirical error of the horizontal offset: the fit repeated on two halves of the
    // sloping stable ground (alternate blocks of 32 x 32 cells, a checkerboard), whose residual
    // shifts differ by about 2σ when each half carries √2 times the error of the whole. It catches
    // ground whose least-squares error is too hopeful (errors correlated over whole blocks).
    let mut split_sigma = 0.0;
    if horizontal_ok {
        let (_, nmad_stable, _) = median_nmad(&dh, |k| stable[k]);
        let lo_eff = lo.max((SLOPE_NOISE_FACTOR * slope_noise(nmad_stable, g)) as f32);
        let half = |parity: usize| -> Vec<u32> {
            (0..dh.len())
                .filter(|&k| {
                    let (r, c) = (k / g.cols, k % g.cols);
                    stable[k] && (r / 32 + c / 32) % 2 == parity && {
                        let tan = t.tan_slope(k);
                        tan >= lo_eff && tan <= hi
                    }
                })
                .map(|k| k as u32)
                .collect()
        };
        let (h0, h1) = (half(0), half(1));
        match (
            (h0.len() >= opts.min_cells / 2)
                .then(|| fit_cosine(&dh, t, &h0))
                .flatten(),
            (h1.len() >= opts.min_cells / 2)
                .then(|| fit_cosine(&dh, t, &h1))
                .flatten(),
        ) {
            (Some(a), Some(b)) => split_sigma = 0.5 * (a.0 - b.0).hypot(a.1 - b.1),
            _ => horizontal_ok = false,
        }
    }
    Estimate {
        east_m: if horizontal_ok { east } else { f64::NAN },
        north_m: if horizontal_ok { north } else { f64::NAN },
        horizontal_sigma_m: if horizontal_ok {
            (sig_e.hypot(sig_n) * cells_per_value.sqrt()).max(split_sigma)
        } else {
            f64::NAN
        },
        horizontal_ok,
        vertical_m: vertical,
        // Check: REFERENCES.md §14 — NMAD/√n_eff; the standard error of a median is about
        // 1.2533·σ/√n for normal errors (from memory), so this is the optimistic side
        vertical_sigma_m: nmad / n_eff.sqrt(),
        nmad_m: nmad,
        stable: Bits::from_bools(&stable),
    }
}

/// Co-registers every survey after the first to the first, in place, and reports per survey
/// (the first survey's row says it is the reference).
///
/// `given` is the stable ground from the job (true = stable) with its source, or None to find it.
/// `lod_m[i]` is the level of detection between survey `i` and the first.
///
/// # Panics
/// When `lod_m` has fewer entries than the stack or `given` has another shape (a bug in the caller).
pub fn coregister(
    stack: &mut AlignedStack,
    given: Option<(&Array2<bool>, StableSource)>,
    lod_m: &[f64],
    opts: &CoregOptions,
) -> Vec<Registration> {
    assert!(lod_m.len() >= stack.len(), "one LoD per survey");
    let g = stack.geometry().clone();
    let source = given.map_or(StableSource::Found, |(_, s)| s);
    let mut out = vec![Registration {
        status: "reference: the other surveys are co-registered to this one".into(),
        east_m: 0.0,
        north_m: 0.0,
        vertical_m: 0.0,
        ..Registration::not_estimated(0, source, String::new())
    }];
    if !opts.enabled {
        for i in 1..stack.len() {
            out.push(Registration::not_estimated(
                i,
                source,
                "not applied: co-registration turned off (coregister: false)".into(),
            ));
        }
        out[0].status = "reference (co-registration turned off)".into();
        return out;
    }
    if let Some((m, _)) = given {
        assert_eq!(m.dim(), stack.z(0).dim(), "stable mask shape");
    }
    // The reference and its slopes live only while the offsets are estimated (at 4096² the
    // slopes alone take 192 MB), and the reference is read in place, not copied.
    let estimates = {
        let reference_view = stack.z(0);
        let reference_grid = reference_view.as_standard_layout();
        let reference: &[f32] = reference_grid.as_slice().expect("standard layout");
        let t = Terrain::new(reference, &g);
        let given_slice: Option<Vec<bool>> = given.map(|(m, _)| m.iter().copied().collect());
        let found = given.is_none();
        // One survey per thread, and no more than two on large grids: each holds a few
        // grid-sized scratch arrays.
        let in_flight = crate::waves::items_in_flight(g.rows * g.cols);
        // One pass over the surveys against the reference, on the given candidate cells.
        let pass = |candidates: Option<&[bool]>, found: bool| -> Vec<Estimate> {
            crate::waves::map_at_most(stack.len() - 1, in_flight, |k| {
                let i = k + 1;
                let e = estimate(
                    reference,
                    &stack.z(i),
                    &g,
                    &t,
                    candidates,
                    lod_m[i],
                    found,
                    opts,
                );
                stack.let_go();
                e
            })
        };
        let mut estimates = pass(given_slice.as_deref(), found);
        if found && stack.len() > 2 {
            // Second pass: the cells stable against the first survey in every survey.
            let common: Vec<bool> = (0..reference.len())
                .map(|k| estimates.iter().all(|e| e.stable.get(k)))
                .collect();
            if common.iter().filter(|&&s| s).count() >= opts.min_cells {
                estimates = pass(Some(&common), true);
            }
        }
        estimates
    };
    let cell_area = g.cell_area_m2();
    for (k, e) in estimates.into_iter().enumerate() {
        let i = k + 1;
        let n = e.stable.count();
        let mut r = Registration {
            survey_index: i,
            east_m: e.east_m,
            north_m: e.north_m,
            vertical_m: e.vertical_m,
            horizontal_sigma_m: e.horizontal_sigma_m,
            vertical_sigma_m: e.vertical_sigma_m,
            stable_nmad_m: e.nmad_m,
            stable_cells: n as u64,
            stable_area_m2: n as f64 * cell_area,
            source,
            applied_horizontal: false,
            applied_vertical: false,
            status: String::new(),
        };
        if n < opts.min_cells {
            r.status = format!(
                "not applied: only {n} stable cells ({:.0} m2), fewer than stable_ground.min_cells = {}; \
                 the survey is used uncorrected",
                r.stable_area_m2, opts.min_cells
            );
            out.push(r);
            continue;
        }
        r.applied_horizontal =
            e.horizontal_ok && e.east_m.hypot(e.north_m) > APPLY_T * e.horizontal_sigma_m;
        r.applied_vertical = e.vertical_m.abs() > APPLY_T * e.vertical_sigma_m;
        let mut parts = Vec::new();
        if r.applied_horizontal {
            parts.push(format!(
                "horizontal {:.3} m east, {:.3} m north",
                -e.east_m, -e.north_m
            ));
        }
        if r.applied_vertical {
            parts.push(format!("vertical {:.3} m", -e.vertical_m));
        }
        let horizontal_note = if e.horizontal_ok {
            ""
        } else {
            "; the horizontal offset could not be estimated (too few sloping stable cells, or slopes \
             facing one way)"
        };
        r.status = if parts.is_empty() {
            format!("not applied: the offsets are within 1.96 standard errors{horizontal_note}")
        } else {
            format!("applied: correction {}{horizontal_note}", parts.join(", "))
        };
        let (de, dn) = if r.applied_horizontal {
            (e.east_m, e.north_m)
        } else {
            (0.0, 0.0)
        };
        let dz = if r.applied_vertical {
            e.vertical_m
        } else {
            0.0
        };
        if de != 0.0 || dn != 0.0 || dz != 0.0 {
            let unit = g.horizontal_unit.metres();
            let dz32 = dz as f32;
            if de != 0.0 || dn != 0.0 {
                let mut z = shifted(&stack.z(i), &g, de / unit, dn / unit);
                z.par_mapv_inplace(|v| v - dz32);
                stack.replace_z(i, z);
            } else {
                // A vertical correction alone is made in place.
                stack.z_mut(i).par_mapv_inplace(|v| v - dz32);
            }
            stack.let_go();
        }
        out.push(r);
    }
    out
}

/// Stable ground from polygons in map coordinates (CRS units): cells whose centre lies inside any
/// polygon (even–odd rule; rings need not be closed).
pub fn mask_from_polygons(polygons: &[Vec<[f64; 2]>], g: &GridGeometry) -> Array2<bool> {
    Array2::from_shape_fn((g.rows, g.cols), |(r, c)| {
        let (x, y) = g.cell_center(r, c);
        polygons.iter().any(|p| inside(p, x, y))
    })
}

fn inside(ring: &[[f64; 2]], x: f64, y: f64) -> bool {
    let mut odd = false;
    let n = ring.len();
    for i in 0..n {
        let [xi, yi] = ring[i];
        let [xj, yj] = ring[(i + n - 1) % n];
        if (yi > y) != (yj > y) && x < (xj - xi) * (y - yi) / (yj - yi) + xi {
            odd = !odd;
        }
    }
    odd
}

/// Stable ground from a mask grid (non-zero, finite = stable) brought onto `g` by the nearest cell.
pub fn mask_from_grid(mask: &crate::grid::Grid, g: &GridGeometry) -> Array2<bool> {
    let (rows, cols) = mask.z.dim();
    Array2::from_shape_fn((g.rows, g.cols), |(r, c)| {
        let (x, y) = g.cell_center(r, c);
        let (mr, mc) = mask.geometry.to_cell(x, y);
        let (mr, mc) = (mr.round(), mc.round());
        if mr < 0.0 || mc < 0.0 || mr >= rows as f64 || mc >= cols as f64 {
            return false;
        }
        let v = mask.z[[mr as usize, mc as usize]];
        v.is_finite() && v != 0.0
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn polygon_even_odd() {
        let square = vec![[0.0, 0.0], [10.0, 0.0], [10.0, 10.0], [0.0, 10.0]];
        assert!(inside(&square, 5.0, 5.0));
        assert!(!inside(&square, 15.0, 5.0));
        assert!(!inside(&square, -0.1, 5.0));
    }

    #[test]
    fn median_and_nmad() {
        // Check: analytic — median of 1..=5 is 3; |x − 3| = 2,1,0,1,2 has median 1 → NMAD 1.4826
        let v = [1.0f32, 2.0, 3.0, 4.0, 5.0];
        let (m, s, n) = median_nmad(&v, |_| true);
        assert_eq!((m, n), (3.0, 5));
        assert!((s - 1.4826).abs() < 1e-12);
        let mut even = [4.0f32, 1.0, 3.0, 2.0];
        assert_eq!(median(&mut even), 2.5);
    }

    #[test]
    fn a_shift_equals_sampling_every_cell() {
        // Check: grid::sample_bilinear — the shifted grid equals sampling each cell at its shifted
        // place, bit for bit, for shifts inside a cell, across cells, off the edge and with nodata.
        let (rows, cols) = (23, 31);
        let g = GridGeometry {
            cols,
            rows,
            origin_x: 0.0,
            origin_y: 0.0,
            cell_x: 0.5,
            cell_y: 0.5,
            epsg: Some(32631),
            horizontal_unit: crate::grid::LinearUnit::Metre,
        };
        let mut z = Array2::from_shape_fn((rows, cols), |(r, c)| {
            ((r * 37 + c * 11) % 17) as f32 * 0.31 - 1.7
        });
        z[[5, 7]] = f32::NAN;
        for (east, north) in [
            (0.13, -0.21),
            (1.7, 2.35),
            (-3.1, 0.0),
            (0.0, 0.25),
            (20.0, 1.0),
        ] {
            let out = shifted(&z, &g, east, north);
            let (dc, dr) = (east / g.cell_x, -north / g.cell_y);
            for r in 0..rows {
                for c in 0..cols {
                    let want = crate::grid::sample_bilinear(&z, r as f64 + dr, c as f64 + dc);
                    assert_eq!(
                        out[[r, c]].to_bits(),
                        want.to_bits(),
                        "({r}, {c}) at {east}, {north}"
                    );
                }
            }
        }
    }

    #[test]
    fn inverse_of_a_3x3() {
        let m = [[4.0, 1.0, 0.0], [1.0, 3.0, 1.0], [0.0, 1.0, 2.0]];
        let inv = invert3(m).unwrap();
        // Check: analytic — m · m⁻¹ is the identity
        for (i, row) in m.iter().enumerate() {
            let product: Vec<f64> = (0..3)
                .map(|j| (0..3).map(|k| row[k] * inv[k][j]).sum())
                .collect();
            for (j, v) in product.iter().enumerate() {
                assert!((v - if i == j { 1.0 } else { 0.0 }).abs() < 1e-12);
            }
        }
    }
}
