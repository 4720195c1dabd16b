//! Colours for charts, computed in CIE L*a*b*: sRGB (IEC 61966-2-1) <-> CIE XYZ <-> L*a*b* (CIE 15,
//! D65 white), and the sequential series of the transect chart.
//!
//! A series ordered by date gets one hue and steps of lightness, old pale and recent dark, at least
//! [`MIN_LIGHTNESS_STEP`] L* apart between neighbours, so the order reads without a legend and
//! without telling hues apart (no red–green pair can arise).

/// Smallest L* difference between neighbouring colours of a series.
pub const MIN_LIGHTNESS_STEP: f64 = 15.0;
/// Lightest and darkest L* of a series (the lightest still shows on white).
pub const SERIES_L: (f64, f64) = (82.0, 20.0);
/// Most colours a series can have with the lightness step kept.
pub const SERIES_MAX: usize = 1 + ((SERIES_L.0 - SERIES_L.1) / MIN_LIGHTNESS_STEP) as usize;
/// The series' hue angle h_ab in degrees (a blue).
const SERIES_HUE_DEG: f64 = 255.0;

// CIE 15 (2004) D65 reference white, Y = 1; REFERENCES.md §10 sRGB matrix (IEC 61966-2-1).
const WHITE: [f64; 3] = [0.950_47, 1.0, 1.088_83];

fn decode(c: f64) -> f64 {
    // Check: IEC 61966-2-1 sRGB transfer, REFERENCES.md §10
    if c <= 0.040_45 {
        c / 12.92
    } else {
        ((c + 0.055) / 1.055).powf(2.4)
    }
}

fn encode(l: f64) -> f64 {
    if l <= 0.003_130_8 {
        12.92 * l
    } else {
        1.055 * l.powf(1.0 / 2.4) - 0.055
    }
}

fn f(t: f64) -> f64 {
    const D: f64 = 6.0 / 29.0;
    if t > D * D * D {
        t.cbrt()
    } else {
        t / (3.0 * D * D) + 4.0 / 29.0
    }
}

fn f_inv(t: f64) -> f64 {
    const D: f64 = 6.0 / 29.0;
    if t > D {
        t * t * t
    } else {
        3.0 * D * D * (t - 4.0 / 29.0)
    }
}

/// CIE L*a*b* (D65) of an 8-bit sRGB colour.
pub fn srgb_to_lab(rgb: [u8; 3]) -> [f64; 3] {
    let [r, g, b] = rgb.map(|v| decode(v as f64 / 255.0));
    let x = 0.412_456_4 * r + 0.357_576_1 * g + 0.180_437_5 * b;
    let y = 0.212_672_9 * r + 0.715_152_2 * g + 0.072_175_0 * b;
    let z = 0.019_333_9 * r + 0.119_192_0 * g + 0.950_304_1 * b;
    let (fx, fy, fz) = (f(x / WHITE[0]), f(y / WHITE[1]), f(z / WHITE[2]));
    [116.0 * fy - 16.0, 500.0 * (fx - fy), 200.0 * (fy - fz)]
}

/// Linear sRGB of a L*a*b* colour (may fall outside [0, 1]: out of gamut).
fn lab_to_linear(lab: [f64; 3]) -> [f64; 3] {
    let fy = (lab[0] + 16.0) / 116.0;
    let fx = fy + lab[1] / 500.0;
    let fz = fy - lab[2] / 200.0;
    let (x, y, z) = (
        WHITE[0] * f_inv(fx),
        WHITE[1] * f_inv(fy),
        WHITE[2] * f_inv(fz),
    );
    [
        3.240_454_2 * x - 1.537_138_5 * y - 0.498_531_4 * z,
        -0.969_266_0 * x + 1.876_010_8 * y + 0.041_556_0 * z,
        0.055_643_4 * x - 0.204_025_9 * y + 1.057_225_2 * z,
    ]
}

/// 8-bit sRGB of a L*a*b* colour; None when it lies outside the sRGB gamut.
pub fn lab_to_srgb(lab: [f64; 3]) -> Option<[u8; 3]> {
    let lin = lab_to_linear(lab);
    if lin.iter().any(|&v| !(-1e-6..=1.0 + 1e-6).contains(&v)) {
        return None;
    }
    Some(lin.map(|v| (encode(v.clamp(0.0, 1.0)) * 255.0).round() as u8))
}

/// Hue angle h_ab in degrees [0, 360) and chroma C*ab of a L*a*b* colour.
pub fn hue_chroma(lab: [f64; 3]) -> (f64, f64) {
    (
        lab[2].atan2(lab[1]).to_degrees().rem_euclid(360.0),
        lab[1].hypot(lab[2]),
    )
}

/// `n` colours (1 to [`SERIES_MAX`]) of one hue, from pale (first) to dark (last), evenly spaced in
/// L*, each as saturated as the sRGB gamut allows up to C* = 45.
pub fn date_series(n: usize) -> Vec<[u8; 4]> {
    let n = n.clamp(1, SERIES_MAX);
    let (hi, lo) = SERIES_L;
    (0..n)
        .map(|i| {
            let l = if n == 1 {
                35.0
            } else {
                hi - (hi - lo) * i as f64 / (n - 1) as f64
            };
            let h = SERIES_HUE_DEG.to_radians();
            let mut c = 45.0;
            loop {
                if let Some([r, g, b]) = lab_to_srgb([l, c * h.cos(), c * h.sin()]) {
                    return [r, g, b, 255];
                }
                c -= 1.0;
                if c <= 0.0 {
                    let v = lab_to_srgb([l, 0.0, 0.0]).unwrap_or([128, 128, 128]);
                    return [v[0], v[1], v[2], 255];
                }
            }
        })
        .collect()
}

/// Which of `n` dated items a series of at most [`SERIES_MAX`] colours draws: all of them, or the
/// first, the last and evenly spaced ones between.
pub fn series_subset(n: usize) -> Vec<usize> {
    if n <= SERIES_MAX {
        return (0..n).collect();
    }
    let k = SERIES_MAX;
    let mut out: Vec<usize> = (0..k)
        .map(|i| ((i as f64) * (n - 1) as f64 / (k - 1) as f64).round() as usize)
        .collect();
    out.dedup();
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lab_of_reference_colours() {
        // Check: CIE 15 L*a*b* of sRGB white (255,255,255) = (100, 0, 0) under D65; analytic, abs diff < 0.01
        let w = srgb_to_lab([255, 255, 255]);
        assert!(
            (w[0] - 100.0).abs() < 0.01 && w[1].abs() < 0.01 && w[2].abs() < 0.01,
            "{w:?}"
        );
        // Check: CIE 15 — sRGB mid grey 119 has L* ≈ 50 (Y = 0.1845, L* = 50.03); hand-computed, abs diff < 0.05
        assert!((srgb_to_lab([119, 119, 119])[0] - 50.03).abs() < 0.05);
        // Check: from memory — sRGB red (255,0,0) is L*a*b* (53.24, 80.09, 67.20) under D65; abs diff < 0.1
        let r = srgb_to_lab([255, 0, 0]);
        assert!(
            (r[0] - 53.24).abs() < 0.1 && (r[1] - 80.09).abs() < 0.1 && (r[2] - 67.20).abs() < 0.1,
            "{r:?}"
        );
        // Round trip.
        for c in [[12u8, 200, 80], [250, 250, 10], [0, 0, 0]] {
            assert_eq!(lab_to_srgb(srgb_to_lab(c)), Some(c));
        }
    }

    #[test]
    fn series_steps_in_lightness_and_keeps_one_hue() {
        for n in 1..=SERIES_MAX {
            let s = date_series(n);
            assert_eq!(s.len(), n);
            let lab: Vec<[f64; 3]> = s.iter().map(|c| srgb_to_lab([c[0], c[1], c[2]])).collect();
            for w in lab.windows(2) {
                // Check: CIE 15 L* — neighbouring dates at least 15 L* apart, measured on the 8-bit colours
                assert!(w[0][0] - w[1][0] >= MIN_LIGHTNESS_STEP, "{n}: {w:?}");
            }
            for l in &lab {
                let (h, c) = hue_chroma(*l);
                // One hue (blue), so no red–green pair: h_ab within 25° of the series hue.
                assert!(c < 5.0 || (h - SERIES_HUE_DEG).abs() < 25.0, "{h} {c}");
            }
        }
        assert_eq!(series_subset(3), vec![0, 1, 2]);
        assert_eq!(series_subset(9), vec![0, 2, 4, 6, 8]);
    }
}
