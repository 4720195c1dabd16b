//! What `flow::estimate` returns: the field, the dominant displacement and the verdict.

use ndarray::{Array2, ArrayRef2};

/// The displacement field on the grid of the earlier survey, in metres, with its quality.
///
/// A field estimated on block means (`flow::estimate_within` on a large grid) is kept at that
/// resolution: one value per `step × step` block of grid cells, the block's value standing at the
/// block's centre. [`FlowField::row_at`] gives the field at any grid row, bilinearly interpolated,
/// so a 4096² pair costs the memory of a 1024² field (12 MB instead of 192 MB).
#[derive(Debug, Clone)]
pub struct FlowField {
    /// East component of the displacement from the earlier to the later survey, metres.
    pub east_m: Array2<f32>,
    /// North component of the displacement, metres (positive north, i.e. towards row 0).
    pub north_m: Array2<f32>,
    /// Per-cell quality from 0 to 1 (local NCC after warping); 0 where the vector was filled in
    /// rather than measured (flat, ramp, nodata, outlier, or below `min_quality`).
    pub quality: Array2<f32>,
    /// Cell width in metres the components were converted with (of the survey grid, not of the
    /// blocks).
    pub cell_size_m: f64,
    /// Grid cells per field value along each axis: 1 when the arrays have the grid's shape.
    pub step: usize,
    /// (rows, cols) of the survey grid the field belongs to.
    pub grid_dim: (usize, usize),
}

impl FlowField {
    /// A field of zero displacement and zero quality (what an untrusted result carries).
    pub fn zeros(rows: usize, cols: usize, cell_size_m: f64) -> Self {
        FlowField {
            east_m: Array2::zeros((rows, cols)),
            north_m: Array2::zeros((rows, cols)),
            quality: Array2::zeros((rows, cols)),
            cell_size_m,
            step: 1,
            grid_dim: (rows, cols),
        }
    }

    /// A field whose arrays have the grid's shape (`step` 1).
    pub fn full(
        east_m: Array2<f32>,
        north_m: Array2<f32>,
        quality: Array2<f32>,
        cell_size_m: f64,
    ) -> Self {
        let grid_dim = east_m.dim();
        FlowField {
            east_m,
            north_m,
            quality,
            cell_size_m,
            step: 1,
            grid_dim,
        }
    }

    /// East and north components along grid row `r`, one value per grid column, into `east` and
    /// `north` (resized to the grid's width). With `step` 1 they are copies of the arrays' row;
    /// otherwise each grid cell's centre is placed in block coordinates (block centres at whole
    /// numbers) and the blocks are interpolated bilinearly (`grid::sample_bilinear`).
    pub fn row_at(&self, r: usize, east: &mut Vec<f32>, north: &mut Vec<f32>) {
        self.row_at_with(r, &self.column_weights(), east, north);
    }

    /// Where each grid column falls between the blocks: (left block, right block, weight of the
    /// right one), for [`FlowField::row_at_with`]. Empty for a field at grid resolution.
    pub fn column_weights(&self) -> Vec<(u32, u32, f32)> {
        let (_, bcols) = self.east_m.dim();
        if self.step <= 1 || bcols == 0 {
            return Vec::new();
        }
        let k = self.step as f64;
        (0..self.grid_dim.1)
            .map(|c| {
                let cc = ((c as f64 + 0.5) / k - 0.5).clamp(0.0, (bcols - 1) as f64);
                let c0 = cc.floor() as usize;
                let c1 = (c0 + 1).min(bcols - 1);
                (c0 as u32, c1 as u32, (cc - c0 as f64) as f32)
            })
            .collect()
    }

    /// [`FlowField::row_at`] with the columns' places found once ([`FlowField::column_weights`]
    /// of this field), for callers that read many rows: the morph reads every row of every frame.
    pub fn row_at_with(
        &self,
        r: usize,
        columns: &[(u32, u32, f32)],
        east: &mut Vec<f32>,
        north: &mut Vec<f32>,
    ) {
        let cols = self.grid_dim.1;
        east.resize(cols, 0.0);
        north.resize(cols, 0.0);
        if self.step <= 1 {
            for (d, &v) in east.iter_mut().zip(self.east_m.row(r)) {
                *d = v;
            }
            for (d, &v) in north.iter_mut().zip(self.north_m.row(r)) {
                *d = v;
            }
            return;
        }
        assert!(
            columns.len() == cols || self.east_m.is_empty(),
            "column weights of this field"
        );
        self.blend_blocks(r, columns, east, north);
    }

    /// [`FlowField::row_at_with`] at some grid columns only (`at`, any order): `columns` holds
    /// their entries of [`FlowField::column_weights`] (unused for a field at grid resolution).
    /// The values are those `row_at_with` gives at the same columns, bit for bit.
    pub fn row_at_columns(
        &self,
        r: usize,
        at: &[usize],
        columns: &[(u32, u32, f32)],
        east: &mut Vec<f32>,
        north: &mut Vec<f32>,
    ) {
        east.resize(at.len(), 0.0);
        north.resize(at.len(), 0.0);
        if self.step <= 1 {
            let (er, nr) = (self.east_m.row(r), self.north_m.row(r));
            for ((e, n), &c) in east.iter_mut().zip(north.iter_mut()).zip(at) {
                (*e, *n) = (er[c], nr[c]);
            }
            return;
        }
        assert!(
            columns.len() == at.len() || self.east_m.is_empty(),
            "one column weight per column"
        );
        self.blend_blocks(r, columns, east, north);
    }

    /// The blocks around grid row `r` blended at the given column weights, one value per weight.
    fn blend_blocks(
        &self,
        r: usize,
        columns: &[(u32, u32, f32)],
        east: &mut [f32],
        north: &mut [f32],
    ) {
        // The same arithmetic as `grid::sample_bilinear` (fine-cell centres always fall inside
        // the blocks' span), with the row's two block rows and weights found once.
        let k = self.step as f64;
        let (brows, bcols) = self.east_m.dim();
        if brows == 0 || bcols == 0 {
            east.fill(f32::NAN);
            north.fill(f32::NAN);
            return;
        }
        let rr = ((r as f64 + 0.5) / k - 0.5).clamp(0.0, (brows - 1) as f64);
        let r0 = rr.floor() as usize;
        let r1 = (r0 + 1).min(brows - 1);
        let fr = (rr - r0 as f64) as f32;
        // A weight of 0 takes nothing, not even a NaN, as in `grid::sample_bilinear`.
        let pick = |v: f32, w: f32| if w == 0.0 { 0.0 } else { v * w };
        let blend = |z: &ArrayRef2<f32>, out: &mut [f32]| {
            // Rows as slices (no copy for the crate's own row-major arrays): indexing a slice
            // costs less than indexing a view, with the same values.
            let (top, bottom) = (z.row(r0), z.row(r1));
            let (top, bottom) = (top.as_standard_layout(), bottom.as_standard_layout());
            let top = top.as_slice().expect("standard layout");
            let bottom = bottom.as_slice().expect("standard layout");
            for (o, &(c0, c1, fc)) in out.iter_mut().zip(columns) {
                let (c0, c1) = (c0 as usize, c1 as usize);
                *o = pick(top[c0], (1.0 - fr) * (1.0 - fc))
                    + pick(top[c1], (1.0 - fr) * fc)
                    + pick(bottom[c0], fr * (1.0 - fc))
                    + pick(bottom[c1], fr * fc);
            }
        };
        blend(&self.east_m, east);
        blend(&self.north_m, north);
    }
}

/// The displacement of the landform as a whole.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Dominant {
    /// East component, metres.
    pub east_m: f64,
    /// North component, metres.
    pub north_m: f64,
    /// Length of the vector, metres.
    pub distance_m: f64,
    /// Direction of travel, compass degrees clockwise from north in [0, 360); 0 when the distance is 0.
    pub azimuth_deg: f64,
    /// NCC of the whole relief at the best whole-cell shift, -1 to 1 (the match quality).
    pub ncc: f64,
    /// Share of the landform's cells (relief more than `min_relief_m` above the base) whose vector
    /// was measured with quality at least `min_quality`; 0 when the dense field was not used.
    pub support: f64,
}

impl Dominant {
    /// A dominant displacement from east and north components in metres.
    pub fn from_components(east_m: f64, north_m: f64, ncc: f64, support: f64) -> Self {
        let distance_m = east_m.hypot(north_m);
        let azimuth_deg = crate::grid::azimuth_deg(east_m, north_m);
        Dominant {
            east_m,
            north_m,
            distance_m,
            azimuth_deg,
            ncc,
            support,
        }
    }
    /// Migration rate in metres per year over `years` (None unless `years` > 0).
    pub fn rate_m_per_yr(&self, years: f64) -> Option<f64> {
        (years.is_finite() && years > 0.0).then(|| self.distance_m / years)
    }
}

/// Whether the displacement can be trusted, and if not, why.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(tag = "verdict", rename_all = "kebab-case")]
pub enum Verdict {
    /// The field and the dominant displacement are usable for the morph and the record.
    Trusted,
    /// The two surveys share too few cells with data.
    LittleOverlap {
        /// Share of cells with data in both, out of those with data in either.
        share: f64,
        /// The `min_overlap` setting.
        required: f64,
    },
    /// At least one survey is too flat to match (relief standard deviation below the setting).
    NoTexture {
        /// Smaller of the two surveys' relief standard deviations, metres.
        relief_std_m: f64,
        /// The `min_relief_m` setting.
        required_m: f64,
    },
    /// The best match lies at the edge of the search disc: the true displacement may be larger.
    AtSearchLimit {
        /// Distance of the best match, metres.
        distance_m: f64,
        /// The `search_radius_m` setting.
        radius_m: f64,
    },
    /// The relief of the two surveys correlates too weakly at the best shift (reshaped, not moved).
    WeakMatch {
        /// Best whole-relief NCC found.
        ncc: f64,
        /// The `min_quality` setting.
        required: f64,
    },
    /// The two rasters differ in shape (a bug upstream: `align` guarantees one geometry).
    ShapeMismatch {
        /// (rows, cols) of the earlier raster.
        earlier: (usize, usize),
        /// (rows, cols) of the later raster.
        later: (usize, usize),
    },
}

impl Verdict {
    /// True for [`Verdict::Trusted`].
    pub fn is_trusted(&self) -> bool {
        matches!(self, Verdict::Trusted)
    }
}

impl std::fmt::Display for Verdict {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match *self {
            Verdict::Trusted => write!(f, "displacement trusted"),
            Verdict::LittleOverlap { share, required } => write!(
                f,
                "the surveys overlap on {:.0}% of their cells (at least {:.0}% needed); check the survey \
                 extents or lower flow.min_overlap",
                share * 100.0,
                required * 100.0
            ),
            Verdict::NoTexture { relief_std_m, required_m } => write!(
                f,
                "no texture to match: relief varies by {relief_std_m:.3} m (at least {required_m} m needed); \
                 nothing moves that can be followed, or lower flow.min_relief_m"
            ),
            Verdict::AtSearchLimit { distance_m, radius_m } => write!(
                f,
                "best match {distance_m:.1} m away, at the edge of the {radius_m} m search; raise \
                 flow.search_radius_m if the landform really moved that far"
            ),
            Verdict::WeakMatch { ncc, required } => write!(
                f,
                "the relief correlates only {ncc:.2} at the best shift (at least {required} needed); the \
                 landform changed shape more than it moved"
            ),
            Verdict::ShapeMismatch { earlier, later } => write!(
                f,
                "rasters differ in shape ({}x{} vs {}x{}); align the surveys first",
                earlier.0, earlier.1, later.0, later.1
            ),
        }
    }
}

/// Everything [`estimate`](super::estimate) finds for one pair of surveys.
#[derive(Debug, Clone)]
pub struct FlowResult {
    /// The dense field (zero with zero quality when the verdict is not `Trusted`).
    pub field: FlowField,
    /// The landform's displacement, when a correlation peak was found (also on some untrusted
    /// verdicts, for the warning).
    pub dominant: Option<Dominant>,
    /// Whether to use the result.
    pub verdict: Verdict,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn azimuth_is_compass_and_rate_is_per_year() {
        // Check: analytic — compass azimuth (clockwise from north) of unit moves; abs diff < 1e-9
        let az = |e: f64, n: f64| Dominant::from_components(e, n, 1.0, 1.0).azimuth_deg;
        assert!(az(0.0, 1.0).abs() < 1e-9);
        assert!((az(1.0, 0.0) - 90.0).abs() < 1e-9);
        assert!((az(0.0, -1.0) - 180.0).abs() < 1e-9);
        assert!((az(-1.0, 0.0) - 270.0).abs() < 1e-9);
        assert_eq!(az(0.0, 0.0), 0.0);
        let d = Dominant::from_components(7.5, 10.0, 1.0, 1.0);
        assert!((d.distance_m - 12.5).abs() < 1e-12);
        // Check: REFERENCES.md §7 — 12.5 m from 2019.2 to 2021.5 is 5.434783 m/yr; abs diff < 1e-6
        assert!((d.rate_m_per_yr(2021.5 - 2019.2).unwrap() - 5.434_783).abs() < 1e-6);
        assert!(d.rate_m_per_yr(0.0).is_none());
    }
}
