//! (earlier grid, later grid, LoD, smallest patch) -> a detection mask: which cells show change the
//! two surveys can defend, and the sums of the detected budget.
//!
//! Two tests, in order:
//! 1. the cell's change reaches the minimum level of detection, `|DoD| >= LoD` (Brasington et al.
//!    2003; Lane et al. 2003);
//! 2. the cell belongs to a patch of detected change of one sign (cells joined through any of their
//!    8 neighbours) covering at least the smallest patch area (`change.min_patch_m2`).
//!
//! The second test is a spatial-coherence filter in the spirit of Wheaton et al. (2010, ESPL 35:
//! 136–156), who raise or lower a cell's probability of real change by how many of its neighbours
//! change the same way: real erosion and deposition come in patches, while survey noise that crosses
//! a 95 % LoD (about 5 % of stable cells) lands in scattered single cells. Their neighbourhood
//! update is replaced here by a plain patch-area threshold, which is simpler to state in a record.
//!
//! Default smallest patch (own rule, no source): with independent noise a stable cell passes the LoD
//! on one side with probability `q = 1 − Φ(t)` (0.025 at t = 1.96). A patch of `k` cells needs a chain
//! of `k − 1` further cells of the same sign, each among 8 neighbours, so its chance is at most about
//! `(8q)^(k−1)`; the default is the smallest `k` for which that is at most 1 %, in cells of the grid:
//! 4 cells at t = 1.96, 3 at t = 2.58, 25 (the cap) when `8q >= 1`. On a seeded noisy fixture this
//! keeps false detections on stable ground well below 1 % (test below).
//!
//! The flood fill runs in one thread in row-major order, so the mask never depends on the thread
//! count; sums run over fixed chunks like `metrics`.

use ndarray::{Array2, ArrayRef2};
use rayon::prelude::*;

use super::metrics::CHUNK_CELLS;

/// Mask code: no data in one of the surveys.
pub const NODATA: i8 = i8::MIN;
/// Mask code: change not detected (within the LoD, or in a patch smaller than the smallest patch).
pub const NONE: i8 = 0;
/// Mask code: detected lowering (erosion).
pub const EROSION: i8 = -1;
/// Mask code: detected raising (deposition).
pub const DEPOSITION: i8 = 1;
/// Largest default smallest patch, in cells.
pub const MAX_DEFAULT_PATCH_CELLS: usize = 25;

/// Standard normal cumulative distribution Φ(x), from the complementary error function by the
/// rational approximation of Abramowitz & Stegun (1964) 7.1.26 (absolute error below 1.5e-7).
pub fn normal_cdf(x: f64) -> f64 {
    // Check: from memory — Abramowitz & Stegun 7.1.26 coefficients; tested against Φ(1.96) = 0.9750021 below
    let z = x.abs() / std::f64::consts::SQRT_2;
    let t = 1.0 / (1.0 + 0.327_591_1 * z);
    let poly = t
        * (0.254_829_592
            + t * (-0.284_496_736
                + t * (1.421_413_741 + t * (-1.453_152_027 + t * 1.061_405_429))));
    let erfc = poly * (-z * z).exp();
    if x >= 0.0 {
        1.0 - 0.5 * erfc
    } else {
        0.5 * erfc
    }
}

/// The default smallest patch in cells for a level of detection with multiplier `lod_t` (see the
/// module doc): the smallest `k` with `(8q)^(k−1) <= 0.01`, `q = 1 − Φ(t)`, between 2 and
/// [`MAX_DEFAULT_PATCH_CELLS`].
pub fn default_min_patch_cells(lod_t: f64) -> usize {
    let q = 1.0 - normal_cdf(lod_t);
    let r = 8.0 * q;
    if !(r > 0.0 && r < 1.0) {
        return if r <= 0.0 { 2 } else { MAX_DEFAULT_PATCH_CELLS };
    }
    let k = 1.0 + (0.01f64.ln() / r.ln()).ceil();
    (k as usize).clamp(2, MAX_DEFAULT_PATCH_CELLS)
}

/// The smallest patch in cells: `min_patch_m2` divided by the cell area (rounded up), or the default
/// rule when not given. 0 m² gives 1 cell (no filter).
pub fn min_patch_cells(min_patch_m2: Option<f64>, cell_area_m2: f64, lod_t: f64) -> usize {
    match min_patch_m2 {
        Some(a) if a > 0.0 => ((a / cell_area_m2) - 1e-9).ceil().max(1.0) as usize,
        Some(_) => 1,
        None => default_min_patch_cells(lod_t),
    }
}

/// A pair's detection mask and what the patch filter removed.
#[derive(Debug, Clone, PartialEq)]
pub struct Detection {
    /// One code per cell: [`EROSION`], [`DEPOSITION`], [`NONE`] or [`NODATA`].
    pub codes: Array2<i8>,
    /// Cells beyond the LoD left out because their patch was smaller than the smallest patch.
    pub small_patch_cells: u64,
    /// The smallest patch used, in cells.
    pub min_patch_cells: usize,
}

/// Detection mask of `later − earlier` with level of detection `lod_m` and smallest patch
/// `min_cells` (1 = no patch filter).
///
/// # Panics
/// If the grids differ in shape (an `AlignedStack` guarantees they do not).
///
/// # Allocations
/// The mask (one byte a cell) and a flood-fill stack.
pub fn detect(
    earlier: &ArrayRef2<f32>,
    later: &ArrayRef2<f32>,
    lod_m: f64,
    min_cells: usize,
) -> Detection {
    assert_eq!(
        earlier.dim(),
        later.dim(),
        "detect needs grids of one shape"
    );
    let (rows, cols) = earlier.dim();
    let mut codes = Array2::from_elem((rows, cols), NONE);
    ndarray::Zip::from(&mut codes)
        .and(earlier)
        .and(later)
        .par_for_each(|m, &a, &b| {
            let d = (b - a) as f64;
            *m = if !d.is_finite() {
                NODATA
            } else if d <= -lod_m {
                EROSION
            } else if d >= lod_m {
                DEPOSITION
            } else {
                NONE
            };
        });
    let small_patch_cells = if min_cells > 1 {
        drop_small_patches(&mut codes, min_cells)
    } else {
        0
    };
    Detection {
        codes,
        small_patch_cells,
        min_patch_cells: min_cells.max(1),
    }
}

/// Sets to [`NONE`] every 8-connected patch of one sign smaller than `min_cells`; returns how many
/// cells that cleared. Sequential, row-major: the same result on any thread count.
fn drop_small_patches(codes: &mut Array2<i8>, min_cells: usize) -> u64 {
    let (rows, cols) = codes.dim();
    let Some(m) = codes.as_slice_mut() else {
        return 0;
    };
    let mut seen = vec![false; rows * cols];
    let mut stack = Vec::new();
    let mut patch = Vec::new();
    let mut cleared = 0u64;
    for start in 0..rows * cols {
        let sign = m[start];
        if seen[start] || !(sign == EROSION || sign == DEPOSITION) {
            continue;
        }
        patch.clear();
        stack.push(start);
        seen[start] = true;
        while let Some(i) = stack.pop() {
            patch.push(i);
            let (r, c) = (i / cols, i % cols);
            for dr in -1isize..=1 {
                for dc in -1isize..=1 {
                    let (rr, cc) = (r as isize + dr, c as isize + dc);
                    if rr < 0 || cc < 0 || rr >= rows as isize || cc >= cols as isize {
                        continue;
                    }
                    let j = rr as usize * cols + cc as usize;
                    if !seen[j] && m[j] == sign {
                        seen[j] = true;
                        stack.push(j);
                    }
                }
            }
        }
        if patch.len() < min_cells {
            for &i in &patch {
                m[i] = NONE;
            }
            cleared += patch.len() as u64;
        }
    }
    cleared
}

/// Sums of the detected budget, in cells and metres of change.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct DetectedSums {
    /// Sum of |DoD| over detected erosion cells.
    pub erosion_m: f64,
    /// Detected erosion cells.
    pub erosion_cells: u64,
    /// Sum of DoD over detected deposition cells.
    pub deposition_m: f64,
    /// Detected deposition cells.
    pub deposition_cells: u64,
}

/// Sums `later − earlier` over the cells the mask marks as detected, in fixed chunks combined in
/// order (the same figures on any thread count).
pub fn detected_sums(
    earlier: &ArrayRef2<f32>,
    later: &ArrayRef2<f32>,
    codes: &Array2<i8>,
) -> DetectedSums {
    let a: Vec<f32>;
    let b: Vec<f32>;
    let m: Vec<i8>;
    let (a, b, m) = match (earlier.as_slice(), later.as_slice(), codes.as_slice()) {
        (Some(a), Some(b), Some(m)) => (a, b, m),
        _ => {
            a = earlier.iter().copied().collect();
            b = later.iter().copied().collect();
            m = codes.iter().copied().collect();
            (&a[..], &b[..], &m[..])
        }
    };
    let partials: Vec<DetectedSums> = a
        .par_chunks(CHUNK_CELLS)
        .zip(b.par_chunks(CHUNK_CELLS))
        .zip(m.par_chunks(CHUNK_CELLS))
        .map(|((ca, cb), cm)| {
            let mut s = DetectedSums::default();
            for ((&z0, &z1), &code) in ca.iter().zip(cb).zip(cm) {
                let d = (z1 - z0) as f64;
                match code {
                    EROSION => {
                        s.erosion_m -= d;
                        s.erosion_cells += 1;
                    }
                    DEPOSITION => {
                        s.deposition_m += d;
                        s.deposition_cells += 1;
                    }
                    _ => {}
                }
            }
            s
        })
        .collect();
    let mut t = DetectedSums::default();
    for p in partials {
        t.erosion_m += p.erosion_m;
        t.erosion_cells += p.erosion_cells;
        t.deposition_m += p.deposition_m;
        t.deposition_cells += p.deposition_cells;
    }
    t
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A seeded normal deviate stream (Box–Muller over a 64-bit LCG), for noisy fixtures.
    pub(crate) fn normal_noise(seed: u64) -> impl FnMut() -> f64 {
        let mut s = seed;
        let mut next = move || {
            // Check: Knuth MMIX LCG constants, from memory
            s = s
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            ((s >> 11) as f64 + 0.5) / (1u64 << 53) as f64
        };
        move || {
            let (u, v) = (next(), next());
            (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
        }
    }

    #[test]
    fn normal_cdf_matches_tables() {
        // Check: standard normal table — Φ(1.96) = 0.9750021, Φ(1) = 0.8413447, Φ(0) = 0.5; from memory, abs diff < 2e-7
        assert!((normal_cdf(1.96) - 0.975_002_1).abs() < 2e-7);
        assert!((normal_cdf(1.0) - 0.841_344_7).abs() < 2e-7);
        assert!((normal_cdf(0.0) - 0.5).abs() < 1e-9);
        assert!((normal_cdf(-1.96) - 0.024_997_9).abs() < 2e-7);
    }

    #[test]
    fn default_patch_rule() {
        // Own rule (module doc): (8q)^(k-1) <= 0.01 with q = 1 - Φ(t); hand-computed:
        // t = 1.96: 8q = 0.19998, ln 0.01 / ln 0.19998 = 2.861 → k = 4
        assert_eq!(default_min_patch_cells(1.96), 4);
        // t = 2.58: 8q = 0.03952 → 1.42 → k = 3
        assert_eq!(default_min_patch_cells(2.58), 3);
        // t = 1: 8q = 1.27 → the cap
        assert_eq!(default_min_patch_cells(1.0), MAX_DEFAULT_PATCH_CELLS);
        assert_eq!(min_patch_cells(Some(10.0), 4.0, 1.96), 3);
        assert_eq!(min_patch_cells(Some(0.0), 4.0, 1.96), 1);
        assert_eq!(min_patch_cells(None, 4.0, 1.96), 4);
    }

    #[test]
    fn patch_filter_removes_noise_and_keeps_real_change() {
        // Seeded noisy fixture: σ = 0.1 m on both surveys, stable except a 40 × 40 patch raised 1 m.
        let n = 300;
        let mut noise = normal_noise(7);
        let a = Array2::from_shape_fn((n, n), |_| (5.0 + 0.1 * noise()) as f32);
        let b = Array2::from_shape_fn((n, n), |(r, c)| {
            let raised = if (100..140).contains(&r) && (100..140).contains(&c) {
                1.0
            } else {
                0.0
            };
            (5.0 + raised + 0.1 * noise()) as f32
        });
        let lod = 1.96 * 0.1f64.hypot(0.1);
        let stable = (n * n - 1600) as f64;
        let false_share = |d: &Detection| {
            let mut k = 0usize;
            for ((r, c), &v) in d.codes.indexed_iter() {
                let inside = (100..140).contains(&r) && (100..140).contains(&c);
                if !inside && v != NONE {
                    k += 1;
                }
            }
            k as f64 / stable
        };
        let raw = detect(&a, &b, lod, 1);
        let filtered = detect(&a, &b, lod, default_min_patch_cells(1.96));
        // Check: normal distribution — |N(0, 1)| >= 1.96 in 5 % of cells; the LoD alone flags about
        // 5 % of stable cells (seeded fixture, between 4 % and 6 %)
        let before = false_share(&raw);
        assert!((0.04..0.06).contains(&before), "{before}");
        // Check: issue requirement — false detections on stable ground below 1 % after the filter
        let after = false_share(&filtered);
        assert!(after < 0.01, "{after}");
        // The real patch survives whole.
        let kept = (100..140)
            .flat_map(|r| (100..140).map(move |c| (r, c)))
            .filter(|&(r, c)| filtered.codes[[r, c]] == DEPOSITION)
            .count();
        assert_eq!(kept, 1600);
        assert!(filtered.small_patch_cells > 0);
        let sums = detected_sums(&a, &b, &filtered.codes);
        assert!(sums.deposition_cells >= 1600);
    }

    #[test]
    fn nodata_and_one_thread_equal_many() {
        let mut noise = normal_noise(3);
        let mut a = Array2::from_shape_fn((200, 150), |_| (noise() * 0.2) as f32);
        let b = Array2::from_shape_fn((200, 150), |_| (noise() * 0.2) as f32);
        a[[5, 5]] = f32::NAN;
        let one = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap();
        let four = rayon::ThreadPoolBuilder::new()
            .num_threads(4)
            .build()
            .unwrap();
        let d1 = one.install(|| detect(&a, &b, 0.3, 4));
        let d4 = four.install(|| detect(&a, &b, 0.3, 4));
        assert_eq!(d1, d4);
        assert_eq!(d1.codes[[5, 5]], NODATA);
        assert_eq!(
            one.install(|| detected_sums(&a, &b, &d1.codes)),
            four.install(|| detected_sums(&a, &b, &d4.codes))
        );
    }
}
