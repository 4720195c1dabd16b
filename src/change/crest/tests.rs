use super::*;
use crate::change::testkit::geometry;
use ndarray::Array2;

/// SplitMix64 (Steele, Lea & Flood 2014, from memory) and a normal draw as the sum of twelve
/// uniforms minus six (variance 1; common practice, no source). Seeded, so every run is the same.
struct Noise(u64);

impl Noise {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn normal(&mut self) -> f64 {
        (0..12)
            .map(|_| (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64)
            .sum::<f64>()
            - 6.0
    }
}

fn surface(g: &GridGeometry, f: impl Fn(f64, f64) -> f64) -> Array2<f32> {
    Array2::from_shape_fn((g.rows, g.cols), |(r, c)| {
        let (x, y) = g.cell_center(r, c);
        f(x, y) as f32
    })
}

fn with_noise(z: &Array2<f32>, sigma: f64, seed: u64) -> Array2<f32> {
    let mut n = Noise(seed);
    z.mapv(|v| v + (sigma * n.normal()) as f32)
}

/// A dune of height `h` on a 2 m beach: Gaussian of 25 m standard deviation centred on (cx, cy).
fn dune(cx: f64, cy: f64, h: f64) -> impl Fn(f64, f64) -> f64 {
    move |x, y| 2.0 + h * (-((x - cx).powi(2) + (y - cy).powi(2)) / (2.0 * 25.0 * 25.0)).exp()
}

#[test]
fn a_quadratic_cap_is_found_exactly_between_cells() {
    let g = geometry(40, 1.0);
    // Check: analytic — the top of z = 9 − 0.02((x−1.3)² + 2(y+0.6)²) is 9 m at (1.3, −0.6)
    let z = surface(&g, |x, y| {
        9.0 - 0.02 * ((x - 1.3).powi(2) + 2.0 * (y + 0.6).powi(2))
    });
    let c = estimate(&z, &g, 0.05).unwrap();
    assert_eq!(c.method, CrestMethod::QuadraticFit);
    assert!((c.elevation_m - 9.0).abs() < 1e-4, "{c:?}");
    assert!(
        (c.x_crs - 1.3).abs() < 1e-3 && (c.y_crs + 0.6).abs() < 1e-3,
        "{c:?}"
    );
}

#[test]
fn noise_moves_the_highest_cell_but_not_the_crest() {
    let g = geometry(200, 1.0);
    let clean = surface(&g, dune(3.0, -5.0, 30.0));
    let mut worst_crest = 0.0f64;
    let mut mean_cell_bias = 0.0;
    for seed in 0..8 {
        let z = with_noise(&clean, 0.1, 1000 + seed);
        let c = estimate(&z, &g, 0.1).unwrap();
        worst_crest = worst_crest.max((c.elevation_m - 32.0).abs());
        mean_cell_bias += (highest_cell(&z).unwrap().0 as f64 - 32.0) / 8.0;
        assert!(
            (c.x_crs - 3.0).abs() < 1.0 && (c.y_crs + 5.0).abs() < 1.0,
            "{c:?}"
        );
    }
    // Check: analytic Gaussian dune, crest 32.0 m; 0.10 m is the bound of issue #9 item 8
    assert!(worst_crest < 0.10, "crest off by {worst_crest} m");
    // The single highest cell rides on the noise: on average clearly above the true crest (about
    // 0.11 m here; more on broader crests, where more cells draw noise near the top).
    assert!(mean_cell_bias > 0.08, "highest-cell bias {mean_cell_bias}");
}

#[test]
fn the_neighbourhood_grows_with_sigma() {
    let g = geometry(200, 1.0);
    let clean = surface(&g, dune(0.0, 0.0, 30.0));
    let small = estimate(&with_noise(&clean, 0.02, 7), &g, 0.02).unwrap();
    let large = estimate(&with_noise(&clean, 0.2, 7), &g, 0.2).unwrap();
    assert!(
        large.radius_cells > small.radius_cells,
        "{small:?} {large:?}"
    );
    assert!(small.standard_error_m <= TARGET_STANDARD_ERROR_M + 1e-12);
}

#[test]
fn a_blended_series_is_smooth_at_and_between_surveys() {
    // Five noisy surveys of a dune that grows and shrinks in place, ten blended frames apiece:
    // the crest series must not jump at survey frames (where the blend's noise is largest).
    let g = geometry(160, 1.0);
    let heights = [30.0, 29.0, 27.5, 27.0, 25.0];
    let sigma = 0.1;
    let surveys: Vec<Array2<f32>> = heights
        .iter()
        .enumerate()
        .map(|(i, &h)| with_noise(&surface(&g, dune(0.0, 0.0, h)), sigma, 77 + i as u64))
        .collect();
    let mut series = Vec::new();
    let mut truth = Vec::new();
    for i in 0..heights.len() - 1 {
        for k in 0..10 {
            let w = k as f32 / 10.0;
            let z = ndarray::Zip::from(&surveys[i])
                .and(&surveys[i + 1])
                .map_collect(|&a, &b| (1.0 - w) * a + w * b);
            let s = blend_sigma_m(sigma, sigma, w as f64);
            series.push(estimate(&z, &g, s).unwrap().elevation_m);
            truth.push(2.0 + heights[i] * (1.0 - w as f64) + heights[i + 1] * w as f64);
        }
    }
    let last = surveys.last().unwrap();
    series.push(estimate(last, &g, sigma).unwrap().elevation_m);
    truth.push(2.0 + heights[4]);
    for (k, (e, t)) in series.iter().zip(&truth).enumerate().step_by(10) {
        // Check: analytic crest of the noise-free dune; bound 0.10 m from issue #9 item 8
        assert!((e - t).abs() < 0.10, "survey frame {k}: {e} vs {t}");
    }
    for k in 1..series.len() - 1 {
        let mid = (series[k - 1] + series[k + 1]) / 2.0;
        // Check: the noise-free series is linear in time within each interval; bound 0.05 m from
        // issue #9 item 8 (a kink of 1.5 m per interval at a survey adds at most 0.075 m, so
        // frames at surveys compare with their true neighbours' mean instead)
        let true_mid = (truth[k - 1] + truth[k + 1]) / 2.0;
        let kink = truth[k] - true_mid;
        assert!(
            (series[k] - mid - kink).abs() <= 0.05,
            "frame {k}: {} vs neighbours' mean {mid} (true kink {kink})",
            series[k]
        );
    }
}

#[test]
fn nodata_everywhere_gives_none_and_sparse_data_falls_back() {
    let g = geometry(10, 1.0);
    assert!(estimate(&Array2::from_elem((10, 10), f32::NAN), &g, 0.1).is_none());
    let mut z = Array2::from_elem((10, 10), f32::NAN);
    z[[4, 6]] = 3.5;
    z[[1, 1]] = 2.0;
    let c = estimate(&z, &g, 0.1).unwrap();
    assert_eq!(c.method, CrestMethod::HighestCell);
    assert_eq!((c.elevation_m, c.row, c.col), (3.5, 4.0, 6.0));
}

#[test]
fn blend_sigma_at_ends_and_middle() {
    // Check: analytic — variance of (1−w)a + w·b with independent errors; w = 0.5, σ = 0.1 each
    // gives 0.1/√2
    assert!((blend_sigma_m(0.1, 0.1, 0.5) - 0.1 / 2f64.sqrt()).abs() < 1e-12);
    assert_eq!(blend_sigma_m(0.1, 0.3, 0.0), 0.1);
    assert!((blend_sigma_m(0.1, 0.3, 1.0) - 0.3).abs() < 1e-12);
}

#[test]
fn sharp_and_broad_dunes_on_fine_and_coarse_grids() {
    // (Gaussian standard deviation m, height m, cell m): from a narrow 10 m-wide hummock to a broad
    // 30 m dune on 2 m cells.
    for &(s, h, cell) in &[
        (10.0, 10.0, 1.0),
        (25.0, 30.0, 1.0),
        (60.0, 30.0, 1.0),
        (40.0, 30.0, 2.0),
    ] {
        let g = geometry(240, cell);
        let clean = surface(&g, move |x, y| {
            2.0 + h * (-((x * x + y * y) / (2.0 * s * s))).exp()
        });
        // Check: analytic crest 2 + h at (0, 0); noise-free data: abs diff < 0.005 m
        let c0 = estimate(&clean, &g, 0.1).unwrap();
        assert!((c0.elevation_m - 2.0 - h).abs() < 0.005, "s={s}: {c0:?}");
        for seed in 0..4 {
            let c = estimate(&with_noise(&clean, 0.1, 50 + seed), &g, 0.1).unwrap();
            // Check: analytic crest; 0.10 m is the bound of issue #9 item 8, met with margin
            assert!(
                (c.elevation_m - 2.0 - h).abs() < 0.07,
                "s={s} seed {seed}: {c:?}"
            );
        }
    }
}

#[test]
fn a_surface_computed_piece_by_piece_gives_the_whole_grids_crest() {
    use crate::interp::flow::FlowField;
    use crate::interp::piecewise::{Between, BlockMax, FieldReach, InBetween, Whole};
    use crate::interp::{linear, morph};
    // Two noisy dunes 30 m apart on a 300 m grid (cell 1 m), a field moving the first onto the
    // second, and nodata in a strip: the crest of every in-between surface found piece by piece
    // equals the crest found on the whole surface.
    let g = geometry(300, 1.0);
    let mut a = with_noise(&surface(&g, dune(-20.0, 10.0, 9.0)), 0.08, 11);
    let b = with_noise(&surface(&g, dune(10.0, 5.0, 8.2)), 0.08, 12);
    for r in 0..300 {
        a[[r, 40]] = f32::NAN;
    }
    let field = FlowField::full(
        Array2::from_elem((300, 300), 30.0),
        Array2::from_elem((300, 300), -5.0),
        Array2::ones((300, 300)),
        1.0,
    );
    let (ma, mb, reach) = (
        BlockMax::new(&a),
        BlockMax::new(&b),
        FieldReach::new(&field),
    );
    // Check: common practice, no source — the whole grid read piece by piece is the whole grid.
    assert_eq!(
        estimate_piecewise(&Whole::new(a.view()), &g, 0.08),
        estimate(&a, &g, 0.08)
    );
    for w in [0.0, 0.2, 0.5, 0.8, 1.0] {
        for morphing in [false, true] {
            let mut z = Array2::zeros((300, 300));
            let how = if morphing {
                morph::morph_into(&mut z, &a, &b, &field, w);
                Between::Morph {
                    field: &field,
                    reach: &reach,
                }
            } else {
                linear::blend_into(&mut z, &a, &b, w);
                Between::Blend
            };
            let src = InBetween {
                a: a.view(),
                b: b.view(),
                max_a: &ma,
                max_b: &mb,
                w,
                how,
            };
            let sigma = blend_sigma_m(0.08, 0.08, w as f64);
            // Check: the whole-grid estimate of this module — same crest, bit for bit.
            let (piece, whole) = (estimate_piecewise(&src, &g, sigma), estimate(&z, &g, sigma));
            assert!(whole.is_some());
            assert_eq!(piece, whole, "w {w} morph {morphing}");
        }
    }
    // Too little data for any window: both fall back to the same highest cell.
    let mut sparse = Array2::from_elem((90, 90), f32::NAN);
    sparse[[10, 10]] = 3.0;
    sparse[[50, 70]] = 4.0;
    assert_eq!(
        estimate_piecewise(&Whole::new(sparse.view()), &g, 0.1).map(|c| (c.row, c.col)),
        Some((50.0, 70.0))
    );
}

#[test]
fn the_smoothed_top_is_the_best_window_of_a_brute_force_scan() {
    use crate::interp::piecewise::Whole;
    // Check: brute force — every 7×7 window (cells with data, at least half of the window inside
    // the grid) averaged directly; the search must return the first cell of the highest mean.
    let g = geometry(150, 1.0);
    let mut z = with_noise(&surface(&g, dune(12.0, -20.0, 6.0)), 0.3, 5);
    for i in (0..150 * 150).step_by(13) {
        z[[i / 150, i % 150]] = f32::NAN;
    }
    let (rows, cols) = z.dim();
    let k = 3usize;
    let need = ((2 * k + 1) * (2 * k + 1) / 2) as u32;
    let mut best: Option<(f64, usize, usize)> = None;
    for r in 0..rows {
        for c in 0..cols {
            if !z[[r, c]].is_finite() {
                continue;
            }
            let (ra, rb) = (r.saturating_sub(k), (r + k + 1).min(rows));
            let (ca, cb) = (c.saturating_sub(k), (c + k + 1).min(cols));
            let (mut s, mut n) = (0.0f64, 0u32);
            for rr in ra..rb {
                for cc in ca..cb {
                    if z[[rr, cc]].is_finite() {
                        s += f64::from(z[[rr, cc]]);
                        n += 1;
                    }
                }
            }
            if n == 0 || n < need.min(((rb - ra) * (cb - ca)) as u32) {
                continue;
            }
            let mean = s / f64::from(n);
            if best.is_none_or(|(b, _, _)| mean > b) {
                best = Some((mean, r, c));
            }
        }
    }
    let want = best.map(|(_, r, c)| (r, c));
    assert_eq!(smoothed_top_piecewise(&Whole::new(z.view()), 3), want);
    // Two equal plateaus: the first in row order.
    let mut flat = Array2::from_elem((140, 140), 1.0f32);
    for (r0, c0) in [(100, 10), (20, 120)] {
        for r in r0..r0 + 9 {
            for c in c0..c0 + 9 {
                flat[[r, c]] = 4.0;
            }
        }
    }
    assert_eq!(
        smoothed_top_piecewise(&Whole::new(flat.view()), 3),
        Some((23, 123))
    );
}
