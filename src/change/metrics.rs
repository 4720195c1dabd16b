//! Elevation grids -> sums: per-survey statistics and per-pair DEM-of-difference budgets.
//!
//! Everything here works in cells and metres of elevation; the caller multiplies by the cell area.
//! Sums run over fixed chunks of [`CHUNK_CELLS`] cells in parallel, each chunk giving f64 partials,
//! and the partials are combined in chunk order: the result does not depend on the thread count.

use chrono::NaiveDate;
use ndarray::ArrayRef2;
use rayon::prelude::*;

/// Cells per summation chunk. Fixed, so the order of additions never depends on the thread count.
pub const CHUNK_CELLS: usize = 1 << 16;

/// Statistics of one elevation grid, in cells and metres.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SurveyStats {
    /// Cells with a finite elevation.
    pub finite_cells: u64,
    /// Smallest finite elevation (NaN when there is none).
    pub min_m: f64,
    /// Largest finite elevation (NaN when there is none).
    pub max_m: f64,
    /// Sum of finite elevations.
    pub sum_m: f64,
    /// Sum of `z - reference` over cells above the reference.
    pub excess_sum_m: f64,
    /// Cells above the reference.
    pub cells_above: u64,
    /// Flat index (row-major) of the highest cell; the first one on ties.
    pub peak_index: Option<usize>,
}

/// DEM-of-difference sums for one pair, `DoD = later - earlier` (positive = deposition).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct PairStats {
    /// Cells finite in both surveys.
    pub compared_cells: u64,
    /// Sum of |DoD| over cells with DoD < 0.
    pub erosion_raw_m: f64,
    /// Sum of DoD over cells with DoD > 0.
    pub deposition_raw_m: f64,
    /// Cells with DoD < 0.
    pub erosion_raw_cells: u64,
    /// Cells with DoD > 0.
    pub deposition_raw_cells: u64,
    /// Sum of |DoD| over cells with DoD <= -LoD.
    pub erosion_m: f64,
    /// Sum of DoD over cells with DoD >= LoD.
    pub deposition_m: f64,
    /// Cells with DoD <= -LoD.
    pub erosion_cells: u64,
    /// Cells with DoD >= LoD.
    pub deposition_cells: u64,
    /// Most negative DoD (NaN when nothing was compared).
    pub min_dod_m: f64,
    /// Most positive DoD (NaN when nothing was compared).
    pub max_dod_m: f64,
}

fn contiguous(z: &ArrayRef2<f32>) -> std::borrow::Cow<'_, [f32]> {
    match z.as_slice() {
        Some(s) => std::borrow::Cow::Borrowed(s),
        None => std::borrow::Cow::Owned(z.iter().copied().collect()),
    }
}

/// Statistics of a grid against a reference elevation (metres).
pub fn survey_stats(z: &ArrayRef2<f32>, reference_m: f64) -> SurveyStats {
    let cells = contiguous(z);
    let empty = SurveyStats {
        finite_cells: 0,
        min_m: f64::INFINITY,
        max_m: f64::NEG_INFINITY,
        sum_m: 0.0,
        excess_sum_m: 0.0,
        cells_above: 0,
        peak_index: None,
    };
    let partials: Vec<SurveyStats> = cells
        .par_chunks(CHUNK_CELLS)
        .enumerate()
        .map(|(k, chunk)| {
            let mut s = empty;
            let base = k * CHUNK_CELLS;
            for (i, &v) in chunk.iter().enumerate() {
                if !v.is_finite() {
                    continue;
                }
                let v = v as f64;
                s.finite_cells += 1;
                s.sum_m += v;
                if v < s.min_m {
                    s.min_m = v;
                }
                if v > s.max_m {
                    s.max_m = v;
                    s.peak_index = Some(base + i);
                }
                if v > reference_m {
                    s.excess_sum_m += v - reference_m;
                    s.cells_above += 1;
                }
            }
            s
        })
        .collect();
    let mut total = empty;
    for p in partials {
        total.finite_cells += p.finite_cells;
        total.sum_m += p.sum_m;
        total.excess_sum_m += p.excess_sum_m;
        total.cells_above += p.cells_above;
        total.min_m = total.min_m.min(p.min_m);
        // Strictly greater: the earliest chunk keeps a tie, as within a chunk.
        if p.max_m > total.max_m {
            total.max_m = p.max_m;
            total.peak_index = p.peak_index;
        }
    }
    if total.finite_cells == 0 {
        total.min_m = f64::NAN;
        total.max_m = f64::NAN;
    }
    total
}

/// DoD sums of `later - earlier` with the level of detection `lod_m` (cells with |DoD| >= LoD count
/// as detected change).
///
/// # Panics
/// If the two grids differ in shape (an `AlignedStack` guarantees they do not).
pub fn pair_stats(earlier: &ArrayRef2<f32>, later: &ArrayRef2<f32>, lod_m: f64) -> PairStats {
    assert_eq!(
        earlier.dim(),
        later.dim(),
        "pair_stats needs grids of one shape"
    );
    let a = contiguous(earlier);
    let b = contiguous(later);
    let empty = PairStats {
        min_dod_m: f64::INFINITY,
        max_dod_m: f64::NEG_INFINITY,
        ..Default::default()
    };
    let partials: Vec<PairStats> = a
        .par_chunks(CHUNK_CELLS)
        .zip(b.par_chunks(CHUNK_CELLS))
        .map(|(ca, cb)| {
            let mut s = empty;
            for (&z0, &z1) in ca.iter().zip(cb) {
                let d = (z1 - z0) as f64;
                if !d.is_finite() {
                    continue;
                }
                s.compared_cells += 1;
                s.min_dod_m = s.min_dod_m.min(d);
                s.max_dod_m = s.max_dod_m.max(d);
                if d < 0.0 {
                    s.erosion_raw_m -= d;
                    s.erosion_raw_cells += 1;
                    if -d >= lod_m {
                        s.erosion_m -= d;
                        s.erosion_cells += 1;
                    }
                } else if d > 0.0 {
                    s.deposition_raw_m += d;
                    s.deposition_raw_cells += 1;
                    if d >= lod_m {
                        s.deposition_m += d;
                        s.deposition_cells += 1;
                    }
                }
            }
            s
        })
        .collect();
    let mut t = empty;
    for p in partials {
        t.compared_cells += p.compared_cells;
        t.erosion_raw_m += p.erosion_raw_m;
        t.deposition_raw_m += p.deposition_raw_m;
        t.erosion_raw_cells += p.erosion_raw_cells;
        t.deposition_raw_cells += p.deposition_raw_cells;
        t.erosion_m += p.erosion_m;
        t.deposition_m += p.deposition_m;
        t.erosion_cells += p.erosion_cells;
        t.deposition_cells += p.deposition_cells;
        t.min_dod_m = t.min_dod_m.min(p.min_dod_m);
        t.max_dod_m = t.max_dod_m.max(p.max_dod_m);
    }
    if t.compared_cells == 0 {
        t.min_dod_m = f64::NAN;
        t.max_dod_m = f64::NAN;
    }
    t
}

/// Sub-cell offset of a peak from three samples around it, by a parabola through them (the
/// three-point fit of REFERENCES.md §4). Returns 0 when a neighbour is missing or the samples do not
/// curve downward; the result is clamped to half a cell.
pub fn parabolic_offset(before: f32, centre: f32, after: f32) -> f64 {
    let (m, c, p) = (before as f64, centre as f64, after as f64);
    let denom = 2.0 * (m - 2.0 * c + p);
    if !(m.is_finite() && p.is_finite()) || denom >= 0.0 {
        return 0.0;
    }
    ((m - p) / denom).clamp(-0.5, 0.5)
}

/// Sub-cell (row, col) of the peak at cell (row, col), by separate parabolic fits along each axis.
pub fn peak_subcell(z: &ArrayRef2<f32>, row: usize, col: usize) -> (f64, f64) {
    let (rows, cols) = z.dim();
    let at = |r: isize, c: isize| -> f32 {
        if r < 0 || c < 0 || r as usize >= rows || c as usize >= cols {
            f32::NAN
        } else {
            z[[r as usize, c as usize]]
        }
    };
    let (r, c) = (row as isize, col as isize);
    let centre = at(r, c);
    let dr = parabolic_offset(at(r - 1, c), centre, at(r + 1, c));
    let dc = parabolic_offset(at(r, c - 1), centre, at(r, c + 1));
    (row as f64 + dr, col as f64 + dc)
}

pub use crate::timeline::decimal_year;

/// Decimal year of a calendar date, taken at 00:00 of that day.
pub fn decimal_year_of_date(d: NaiveDate) -> f64 {
    decimal_year(d.and_time(chrono::NaiveTime::MIN))
}

pub use crate::grid::azimuth_deg;

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    #[test]
    fn azimuths() {
        // Check: analytic — compass azimuth of east is 90°, south 180°, west 270°, north-east 45°
        assert_eq!(azimuth_deg(1.0, 0.0), 90.0);
        assert_eq!(azimuth_deg(0.0, -2.0), 180.0);
        assert_eq!(azimuth_deg(-1.0, 0.0), 270.0);
        assert!((azimuth_deg(1.0, 1.0) - 45.0).abs() < 1e-12);
        assert_eq!(azimuth_deg(0.0, 3.0), 0.0);
    }

    #[test]
    fn parabolic_fit_on_a_parabola() {
        // Check: analytic — samples of -(x-0.3)^2 at -1, 0, 1 put the vertex at +0.3 exactly
        let f = |x: f64| -(x - 0.3) * (x - 0.3);
        let d = parabolic_offset(f(-1.0) as f32, f(0.0) as f32, f(1.0) as f32);
        assert!((d - 0.3).abs() < 1e-6, "{d}");
        assert_eq!(parabolic_offset(f32::NAN, 1.0, 0.5), 0.0);
    }

    #[test]
    fn sums_ignore_nodata_and_find_first_peak() {
        let mut z = Array2::from_shape_fn((300, 300), |(r, c)| ((r * 7 + c * 3) % 11) as f32);
        z[[0, 0]] = f32::NAN;
        let s = survey_stats(&z, 5.0);
        let finite: Vec<f64> = z
            .iter()
            .filter(|v| v.is_finite())
            .map(|&v| v as f64)
            .collect();
        assert_eq!(s.finite_cells, finite.len() as u64);
        assert_eq!(s.max_m, 10.0);
        assert_eq!(s.min_m, 0.0);
        let above: f64 = finite.iter().filter(|&&v| v > 5.0).map(|v| v - 5.0).sum();
        assert!((s.excess_sum_m - above).abs() < 1e-6);
        // First cell (row-major) holding 10: row 0, col c with 3c % 11 == 10 → c = 7.
        assert_eq!(s.peak_index, Some(7));
    }

    #[test]
    fn same_sums_on_any_thread_count() {
        let a = Array2::from_shape_fn((700, 500), |(r, c)| {
            ((r as f32) * 0.013).sin() + (c as f32 * 0.007).cos()
        });
        let b = Array2::from_shape_fn((700, 500), |(r, c)| {
            ((r as f32) * 0.011).sin() + (c as f32 * 0.009).cos()
        });
        let one = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap();
        let four = rayon::ThreadPoolBuilder::new()
            .num_threads(4)
            .build()
            .unwrap();
        let p1 = one.install(|| pair_stats(&a, &b, 0.1));
        let p4 = four.install(|| pair_stats(&a, &b, 0.1));
        assert_eq!(p1, p4);
        let s1 = one.install(|| survey_stats(&a, 0.2));
        let s4 = four.install(|| survey_stats(&a, 0.2));
        assert_eq!(s1, s4);
    }
}
