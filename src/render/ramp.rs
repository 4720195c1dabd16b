//! Elevation or change value -> linear-light RGB: the colour ramps, and linear -> sRGB bytes.
//!
//! Elevation is coloured on one of two ramps ([`ElevationRamp`]), both light so that the shading,
//! not the colour, carries the form (REFERENCES.md §17: keep the ramp's lightness range modest):
//!
//! - `sand-coast` (the default), this project's own natural-colour ramp for sand coasts, from wet
//!   beach through dry beach and bare sand to vegetated dune and the highest dune sand. Its anchors
//!   were chosen here (no published source): low saturation (CIE L*a*b* chroma at most 23), CIE L*
//!   rising from about 75 to 92, so its luminance spans less than 1.8:1 while the default light
//!   makes lit and shaded 30° slopes differ by more than 2:1.
//! - `viridis`, a lighter treatment of viridis: each sRGB component `c` becomes `0.55 + 0.45·c`, which
//!   keeps its order of hues and rising lightness but lifts the dark violet end.
//!
//! Viridis (Smith & van der Walt 2015, the matplotlib default map; REFERENCES.md §10) is
//! perceptually uniform and readable with the common colour-vision deficiencies. It is rebuilt here
//! from nine anchors of the published 256-entry table, joined linearly in sRGB; the end anchors are
//! the REFERENCES.md §10 values, the seven inner ones are from memory. Change (DEM of difference)
//! uses a diverging red-white-blue map after ColorBrewer's RdBu (Harrower & Brewer 2003; anchors
//! from memory), zero at the exact midpoint, erosion warm and deposition cool.
//!
//! Shading happens in linear light; frames are encoded to sRGB (IEC 61966-2-1) last, through a
//! 4096-entry table so the encode is a lookup (REFERENCES.md §10 "shade in linear light, encode last").

/// Viridis anchors `(position, sRGB r, g, b)` in [0, 1]: entries 0, 32, …, 224, 255 of the table.
const VIRIDIS: [(f32, [f32; 3]); 9] = [
    (0.0, [0.267004, 0.004874, 0.329415]),
    (32.0 / 255.0, [0.282623, 0.140926, 0.457517]),
    (64.0 / 255.0, [0.229739, 0.322361, 0.545706]),
    (96.0 / 255.0, [0.163625, 0.471133, 0.558148]),
    (128.0 / 255.0, [0.127568, 0.566949, 0.550556]),
    (160.0 / 255.0, [0.134692, 0.658636, 0.517649]),
    (192.0 / 255.0, [0.369214, 0.788888, 0.382914]),
    (224.0 / 255.0, [0.741388, 0.873449, 0.149561]),
    (1.0, [0.993248, 0.906157, 0.143936]),
];

/// Sand-coast anchors `(position, sRGB 0-255)`, this project's own: wet beach, dry beach, bare sand,
/// vegetated dune, highest dune sand. Positions are shares of the animation's elevation range.
const SAND_COAST: [(f32, [u8; 3]); 5] = [
    (0.0, [190, 183, 164]),
    (0.15, [206, 194, 162]),
    (0.40, [222, 206, 166]),
    (0.70, [212, 218, 176]),
    (1.0, [236, 231, 208]),
];

/// Share of the sRGB scale kept by the light treatment of viridis (the rest is a lift toward white).
const VIRIDIS_LIGHT_KEEP: f32 = 0.45;

/// RdBu-like diverging anchors, erosion (negative, red) to deposition (positive, blue), sRGB 0-255.
const DIVERGING: [[u8; 3]; 11] = [
    [103, 0, 31],
    [178, 24, 43],
    [214, 96, 77],
    [244, 165, 130],
    [253, 219, 199],
    [247, 247, 247],
    [209, 229, 240],
    [146, 197, 222],
    [67, 147, 195],
    [33, 102, 172],
    [5, 48, 97],
];

/// Number of entries in a ramp table.
pub const RAMP_LEN: usize = 256;

/// sRGB decode of one channel in [0, 1] (IEC 61966-2-1).
pub fn srgb_to_linear(c: f32) -> f32 {
    if c <= 0.04045 {
        c / 12.92
    } else {
        ((c + 0.055) / 1.055).powf(2.4)
    }
}

/// sRGB encode of one linear channel in [0, 1] (IEC 61966-2-1).
pub fn linear_to_srgb(l: f32) -> f32 {
    let l = l.clamp(0.0, 1.0);
    if l <= 0.003_130_8 {
        12.92 * l
    } else {
        1.055 * l.powf(1.0 / 2.4) - 0.055
    }
}

/// Viridis at `t` in [0, 1], as sRGB components in [0, 1].
pub fn viridis_srgb(t: f32) -> [f32; 3] {
    let t = t.clamp(0.0, 1.0);
    let i = VIRIDIS
        .iter()
        .position(|a| a.0 >= t)
        .unwrap_or(VIRIDIS.len() - 1)
        .max(1);
    let (t0, c0) = VIRIDIS[i - 1];
    let (t1, c1) = VIRIDIS[i];
    let f = ((t - t0) / (t1 - t0)).clamp(0.0, 1.0);
    [0, 1, 2].map(|k| c0[k] + (c1[k] - c0[k]) * f)
}

/// The sand-coast ramp at `t` in [0, 1], as sRGB components in [0, 1].
pub fn sand_coast_srgb(t: f32) -> [f32; 3] {
    let t = t.clamp(0.0, 1.0);
    let i = SAND_COAST
        .iter()
        .position(|a| a.0 >= t)
        .unwrap_or(SAND_COAST.len() - 1)
        .max(1);
    let (t0, c0) = SAND_COAST[i - 1];
    let (t1, c1) = SAND_COAST[i];
    let f = ((t - t0) / (t1 - t0)).clamp(0.0, 1.0);
    [0, 1, 2].map(|k| (f32::from(c0[k]) + (f32::from(c1[k]) - f32::from(c0[k])) * f) / 255.0)
}

/// The light treatment of viridis at `t` in [0, 1], as sRGB components in [0, 1].
pub fn viridis_light_srgb(t: f32) -> [f32; 3] {
    viridis_srgb(t).map(|c| 1.0 - VIRIDIS_LIGHT_KEEP + VIRIDIS_LIGHT_KEEP * c)
}

/// The ramp that colours the terrain by elevation.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ElevationRamp {
    /// Natural colours of a sand coast (wet beach to vegetated dune), light and low in saturation.
    #[default]
    SandCoast,
    /// A lighter treatment of viridis.
    Viridis,
}

impl ElevationRamp {
    /// The name used in job files.
    pub fn name(self) -> &'static str {
        match self {
            ElevationRamp::SandCoast => "sand-coast",
            ElevationRamp::Viridis => "viridis",
        }
    }
    /// The ramp named `name` in a job file, if there is one.
    pub fn from_name(name: &str) -> Option<ElevationRamp> {
        match name {
            "sand-coast" => Some(ElevationRamp::SandCoast),
            "viridis" => Some(ElevationRamp::Viridis),
            _ => None,
        }
    }
    /// The ramp at `t` in [0, 1], as sRGB components in [0, 1] (for tables and legends).
    pub fn srgb(self, t: f32) -> [f32; 3] {
        match self {
            ElevationRamp::SandCoast => sand_coast_srgb(t),
            ElevationRamp::Viridis => viridis_light_srgb(t),
        }
    }
}

/// The diverging change ramp at `t` in [-1, 1] (0 = no change), as sRGB components in [0, 1].
pub fn diverging_srgb(t: f32) -> [f32; 3] {
    let x = (t.clamp(-1.0, 1.0) + 1.0) * 0.5 * (DIVERGING.len() - 1) as f32;
    let i = (x.floor() as usize).min(DIVERGING.len() - 2);
    let f = x - i as f32;
    [0, 1, 2].map(|k| {
        (DIVERGING[i][k] as f32 + (DIVERGING[i + 1][k] as f32 - DIVERGING[i][k] as f32) * f) / 255.0
    })
}

/// A 256-entry table of linear-light colours over [0, 1], built once per job.
#[derive(Debug, Clone)]
pub struct Ramp {
    table: Vec<[f32; 3]>,
}

impl Ramp {
    /// Tabulates `f` (sRGB in [0, 1]) at 256 evenly spaced points of [0, 1] and linearises it.
    pub fn from_srgb(f: impl Fn(f32) -> [f32; 3]) -> Ramp {
        let table = (0..RAMP_LEN)
            .map(|i| f(i as f32 / (RAMP_LEN - 1) as f32).map(srgb_to_linear))
            .collect();
        Ramp { table }
    }
    /// The default elevation ramp ([`ElevationRamp::SandCoast`]).
    pub fn elevation() -> Ramp {
        Ramp::elevation_on(ElevationRamp::default())
    }
    /// An elevation ramp.
    pub fn elevation_on(ramp: ElevationRamp) -> Ramp {
        Ramp::from_srgb(|t| ramp.srgb(t))
    }
    /// The change ramp (diverging, zero at the middle entry's edge) over [0, 1] = [-max, +max].
    pub fn change() -> Ramp {
        Ramp::from_srgb(|t| diverging_srgb(t * 2.0 - 1.0))
    }
    /// Linear colour at `t` in [0, 1] (clamped; NaN gives the first entry).
    #[inline]
    pub fn at(&self, t: f32) -> [f32; 3] {
        let i = (t * (RAMP_LEN - 1) as f32 + 0.5).clamp(0.0, (RAMP_LEN - 1) as f32) as usize;
        self.table[i]
    }
}

/// Size of the linear -> sRGB lookup table.
const ENCODE_LEN: usize = 4096;

/// Linear light in [0, 1] -> sRGB byte, by table lookup.
#[derive(Debug, Clone)]
pub struct Encoder {
    table: Vec<u8>,
}

impl Default for Encoder {
    fn default() -> Self {
        let table = (0..ENCODE_LEN)
            .map(|i| {
                let l = i as f32 / (ENCODE_LEN - 1) as f32;
                (linear_to_srgb(l) * 255.0 + 0.5) as u8
            })
            .collect();
        Encoder { table }
    }
}

impl Encoder {
    /// The sRGB byte of linear value `l` (clamped to [0, 1]).
    #[inline]
    pub fn byte(&self, l: f32) -> u8 {
        let i = (l * (ENCODE_LEN - 1) as f32 + 0.5).clamp(0.0, (ENCODE_LEN - 1) as f32) as usize;
        self.table[i]
    }
}

#[cfg(test)]
#[allow(clippy::excessive_precision)]
mod tests {
    use super::*;

    #[test]
    fn viridis_ends_match_published_values() {
        let to8 = |c: [f32; 3]| c.map(|v| (v * 255.0).round() as u8);
        // Check: Smith & van der Walt (2015) viridis LUT ends → sRGB8 (68,1,84) and (253,231,37);
        // REFERENCES.md §10; exact after rounding
        assert_eq!(to8(viridis_srgb(0.0)), [68, 1, 84]);
        assert_eq!(to8(viridis_srgb(1.0)), [253, 231, 37]);
        // Lightness rises monotonically along the ramp (a property of viridis that makes it readable
        // in grey); Rec. 709 luma as a proxy, common practice, no source.
        let luma = |c: [f32; 3]| 0.2126 * c[0] + 0.7152 * c[1] + 0.0722 * c[2];
        let mut last = -1.0;
        for i in 0..=100 {
            let y = luma(viridis_srgb(i as f32 / 100.0).map(srgb_to_linear));
            assert!(y > last, "luma not rising at {i}");
            last = y;
        }
    }

    /// Rec. 709 relative luminance of an sRGB colour (linear light).
    fn luminance(c: [f32; 3]) -> f32 {
        let l = c.map(srgb_to_linear);
        0.2126 * l[0] + 0.7152 * l[1] + 0.0722 * l[2]
    }

    #[test]
    fn elevation_ramps_are_light_and_rise_in_lightness() {
        for ramp in [ElevationRamp::SandCoast, ElevationRamp::Viridis] {
            let ys: Vec<f32> = (0..=100)
                .map(|i| luminance(ramp.srgb(i as f32 / 100.0)))
                .collect();
            // Lightness rises monotonically, so the ramp also reads in grey; Rec. 709 luminance as
            // the measure, common practice, no source.
            assert!(ys.windows(2).all(|w| w[1] > w[0]), "{}", ramp.name());
            let (lo, hi) = (ys[0], ys[100]);
            // Check: Imhof (1982), REFERENCES.md §17 — the ramp's lightness range stays modest so
            // shading carries the form; the bounds (1.8:1 sand coast, 3.5:1 light viridis, darkest
            // above 0.2) are this project's design values, common practice, no source.
            let most = if ramp == ElevationRamp::SandCoast {
                1.8
            } else {
                3.5
            };
            assert!(hi / lo < most && lo > 0.2, "{}: {lo} .. {hi}", ramp.name());
        }
        // The light viridis keeps viridis's ends in order: violet-grey low, yellow high.
        let (a, b) = (viridis_light_srgb(0.0), viridis_light_srgb(1.0));
        assert!(a[2] > a[1] && b[0] > b[2]);
        // The sand coast ramp is low in saturation: max − min component below 0.25 everywhere.
        for i in 0..=100 {
            let c = sand_coast_srgb(i as f32 / 100.0);
            let spread = c.iter().cloned().fold(f32::MIN, f32::max)
                - c.iter().cloned().fold(f32::MAX, f32::min);
            assert!(spread < 0.25, "{i}: {c:?}");
        }
        // End anchors as designed (wet beach, highest dune sand).
        let to8 = |c: [f32; 3]| c.map(|v| (v * 255.0).round() as u8);
        assert_eq!(to8(sand_coast_srgb(0.0)), [190, 183, 164]);
        assert_eq!(to8(sand_coast_srgb(1.0)), [236, 231, 208]);
        assert_eq!(
            ElevationRamp::from_name("sand-coast"),
            Some(ElevationRamp::SandCoast)
        );
        assert_eq!(
            ElevationRamp::from_name("viridis").map(|r| r.name()),
            Some("viridis")
        );
    }

    #[test]
    fn srgb_transfer_matches_standard() {
        // Check: IEC 61966-2-1 — decode(0.5) = 0.2140411, encode(0.5) = 0.7353570; REFERENCES.md §10; 1e-6
        assert!((srgb_to_linear(0.5) - 0.214_041_1).abs() < 1e-6);
        assert!((linear_to_srgb(0.5) - 0.735_357_0).abs() < 1e-6);
        // Check: IEC 61966-2-1 — encode(0.5) → 188/255; REFERENCES.md §10; exact byte
        assert_eq!(Encoder::default().byte(0.5), 188);
        let e = Encoder::default();
        assert_eq!(
            (e.byte(0.0), e.byte(1.0), e.byte(2.0), e.byte(-1.0)),
            (0, 255, 255, 0)
        );
    }

    #[test]
    fn diverging_is_white_at_zero_and_symmetric_in_lightness() {
        let w = diverging_srgb(0.0);
        assert!(w.iter().all(|&v| v > 0.96));
        let (lo, hi) = (diverging_srgb(-1.0), diverging_srgb(1.0));
        assert!(
            lo[0] > lo[2] && hi[2] > hi[0],
            "erosion warm, deposition cool"
        );
    }
}
