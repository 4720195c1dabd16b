//! GeoTIFF model tags (33550, 33922, 34264) -> where the grid lies: corner origin and cell size.
//!
//! Raster-to-model per OGC GeoTIFF 1.1 (REFERENCES.md §9), for north-up grids only:
//! `X = X_tp + (I − I_tp)·Sx`, `Y = Y_tp − (J − J_tp)·Sy`, or the affine ModelTransformation with
//! zero rotation terms. The result always describes the outer corner of cell (0, 0): a PixelIsPoint
//! raster (integer raster coordinates at cell centres) is shifted by half a cell west and north.
//! Messages are returned as text without the file name; the caller adds it.

/// North-west corner and cell size, in the CRS's horizontal unit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Placement {
    /// Map x of the west edge of column 0.
    pub origin_x: f64,
    /// Map y of the north edge of row 0.
    pub origin_y: f64,
    /// Cell width (> 0).
    pub cell_x: f64,
    /// Cell height (> 0).
    pub cell_y: f64,
}

/// The model tags as read from the file; each is None when its tag is absent.
#[derive(Debug, Clone, Default)]
pub struct ModelTags {
    /// ModelPixelScale (33550): Sx, Sy, Sz.
    pub pixel_scale: Option<Vec<f64>>,
    /// ModelTiepoint (33922): I, J, K, X, Y, Z, repeated.
    pub tiepoints: Option<Vec<f64>>,
    /// ModelTransformation (34264): 16 values, row-major 4x4.
    pub transformation: Option<Vec<f64>>,
}

/// Places the raster on the map. `pixel_is_point` shifts the result so it describes corners.
///
/// # Errors
/// A message naming the tag at fault and the fix: no georeferencing, ground control points only,
/// a rotated or sheared transformation, a non-positive or non-finite scale.
pub fn place(tags: &ModelTags, pixel_is_point: bool) -> Result<Placement, String> {
    let mut p = match (&tags.pixel_scale, &tags.tiepoints, &tags.transformation) {
        (Some(scale), Some(tie), _) => from_scale_and_tiepoint(scale, tie)?,
        (_, None, Some(m)) => from_transformation(m)?,
        (None, Some(tie), _) if tie.len() > 6 => {
            return Err(format!(
                "has {} tiepoints in ModelTiepoint (tag 33922) but no ModelPixelScale (tag 33550): \
                 ground control points are not supported; rectify the grid to a north-up raster first",
                tie.len() / 6
            ))
        }
        (None, Some(_), _) => {
            return Err("has a ModelTiepoint (tag 33922) but no ModelPixelScale (tag 33550), so the cell \
                        size is unknown; write the GeoTIFF with its cell size (pixel scale)"
                .into())
        }
        (Some(_), None, None) => {
            return Err("has a ModelPixelScale (tag 33550) but no ModelTiepoint (tag 33922), so the grid's \
                        position is unknown; write the GeoTIFF with its map position (tiepoint)"
                .into())
        }
        (None, None, None) => {
            return Err("has no georeferencing: none of ModelPixelScale + ModelTiepoint (tags 33550, \
                        33922) or ModelTransformation (tag 34264) is present; export the grid as a \
                        GeoTIFF with its CRS and extent set"
                .into())
        }
    };
    if pixel_is_point {
        p.origin_x -= 0.5 * p.cell_x;
        p.origin_y += 0.5 * p.cell_y;
    }
    if ![p.origin_x, p.origin_y].iter().all(|v| v.is_finite()) {
        return Err(
            "georeferencing gives a non-finite grid origin; write the GeoTIFF again with a valid \
                    tiepoint or transformation"
                .into(),
        );
    }
    Ok(p)
}

/// A number as a message shows it: up to 7 decimals, in scientific notation when very
/// large or very small (Rust's `{}` would print 1e-300 as "0.000…" with 300 zeros).
pub(super) fn number(v: f64) -> String {
    let a = v.abs();
    if v == 0.0 || !v.is_finite() || (1e-4..1e9).contains(&a) {
        let s = format!("{v:.7}");
        let s = if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        };
        if v.is_finite() {
            s
        } else {
            format!("{v}")
        }
    } else {
        format!("{v:.6e}")
    }
}

fn from_scale_and_tiepoint(scale: &[f64], tie: &[f64]) -> Result<Placement, String> {
    let (sx, sy) = match scale {
        [sx, sy, ..] => (*sx, *sy),
        _ => {
            return Err(format!(
            "ModelPixelScale (tag 33550) has {} values, at least 2 (Sx, Sy) are needed; write the \
                 GeoTIFF again",
            scale.len()
        ))
        }
    };
    if sy < 0.0 && sy.is_finite() && sx > 0.0 {
        return Err(format!(
            "ModelPixelScale (tag 33550) has a negative Sy ({}): rows run south to north; flip the \
             grid to north-up (row 0 at the north edge) before using it",
            number(sy)
        ));
    }
    if !(sx > 0.0 && sy > 0.0 && sx.is_finite() && sy.is_finite()) {
        return Err(format!(
            "ModelPixelScale (tag 33550) gives cell size Sx = {}, Sy = {}; both must be positive \
             and finite; write the GeoTIFF again with the true cell size",
            number(sx),
            number(sy)
        ));
    }
    let [i, j, _k, x, y, _z] = match tie.get(..6) {
        Some(&[i, j, k, x, y, z]) => [i, j, k, x, y, z],
        _ => {
            return Err(format!(
            "ModelTiepoint (tag 33922) has {} values, 6 (I, J, K, X, Y, Z) are needed; write the \
                 GeoTIFF again",
            tie.len()
        ))
        }
    };
    if tie.len() > 6 {
        log::warn!(
            "ModelTiepoint holds {} tiepoints; using the first with the pixel scale",
            tie.len() / 6
        );
    }
    Ok(Placement {
        origin_x: x - i * sx,
        origin_y: y + j * sy,
        cell_x: sx,
        cell_y: sy,
    })
}

fn from_transformation(m: &[f64]) -> Result<Placement, String> {
    if m.len() != 16 {
        return Err(format!(
            "ModelTransformation (tag 34264) has {} values, 16 are needed (a 4x4 matrix); write the \
             GeoTIFF again",
            m.len()
        ));
    }
    // X = a·I + b·J + d, Y = e·I + f·J + h (row-major: a b c d / e f g h / ...).
    let (a, b, d, e, f, h) = (m[0], m[1], m[3], m[4], m[5], m[7]);
    // A rotation term below 1e-12 of the cell size is rounding in the writer, not a rotation
    // (common practice, no source).
    let tiny = 1e-12 * a.abs().max(f.abs());
    if b.abs() > tiny || e.abs() > tiny {
        return Err(format!(
            "ModelTransformation (tag 34264) rotates or shears the grid (terms b = {}, e = {}); only \
             north-up grids are supported; resample the grid to north-up (no rotation) before using it",
            number(b),
            number(e)
        ));
    }
    if f > 0.0 && a > 0.0 {
        return Err(format!(
            "ModelTransformation (tag 34264) has a positive y step ({}): rows run south to north; flip \
             the grid to north-up (row 0 at the north edge) before using it",
            number(f)
        ));
    }
    if !(a > 0.0 && f < 0.0 && a.is_finite() && f.is_finite()) {
        return Err(format!(
            "ModelTransformation (tag 34264) gives cell size {} x {}; both must be positive and finite; \
             write the GeoTIFF again with the true cell size",
            number(a),
            number(-f)
        ));
    }
    Ok(Placement {
        origin_x: d,
        origin_y: h,
        cell_x: a,
        cell_y: -f,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scale_tie(s: [f64; 3], t: [f64; 6]) -> ModelTags {
        ModelTags {
            pixel_scale: Some(s.to_vec()),
            tiepoints: Some(t.to_vec()),
            transformation: None,
        }
    }

    #[test]
    fn area_and_point_placement() {
        let tags = scale_tie(
            [1.0, 1.0, 0.0],
            [0.0, 0.0, 0.0, 500_000.0, 4_000_000.0, 0.0],
        );
        let area = place(&tags, false).unwrap();
        // Check: OGC GeoTIFF 1.1 raster-to-model, REFERENCES.md §9 — PixelIsArea: centre of col 10,
        // row 20 is (500010.5, 3999979.5); exact
        assert_eq!(area.origin_x + 10.5 * area.cell_x, 500_010.5);
        assert_eq!(area.origin_y - 20.5 * area.cell_y, 3_999_979.5);
        let point = place(&tags, true).unwrap();
        // Check: same source — PixelIsPoint: centre of col 10, row 20 is (500010, 3999980); exact
        assert_eq!(point.origin_x + 10.5 * point.cell_x, 500_010.0);
        assert_eq!(point.origin_y - 20.5 * point.cell_y, 3_999_980.0);
    }

    #[test]
    fn tiepoint_away_from_origin() {
        // Check: OGC GeoTIFF 1.1 raster-to-model, REFERENCES.md §9 — raster (I,J) = (4,2) at
        // (1000, 2000) with 2 m cells puts the corner of (0,0) at (992, 2004); hand-computed, exact
        let p = place(
            &scale_tie([2.0, 2.0, 0.0], [4.0, 2.0, 0.0, 1000.0, 2000.0, 0.0]),
            false,
        )
        .unwrap();
        assert_eq!(
            (p.origin_x, p.origin_y, p.cell_x, p.cell_y),
            (992.0, 2004.0, 2.0, 2.0)
        );
    }

    #[test]
    fn transformation_north_up_and_rotated() {
        let mut m = vec![0.0; 16];
        (m[0], m[3], m[5], m[7], m[15]) = (0.5, 300.0, -0.25, 700.0, 1.0);
        let tags = ModelTags {
            transformation: Some(m.clone()),
            ..Default::default()
        };
        let p = place(&tags, false).unwrap();
        assert_eq!(
            (p.origin_x, p.origin_y, p.cell_x, p.cell_y),
            (300.0, 700.0, 0.5, 0.25)
        );
        m[1] = 0.1;
        let err = place(
            &ModelTags {
                transformation: Some(m),
                ..Default::default()
            },
            false,
        )
        .unwrap_err();
        assert!(err.contains("34264") && err.contains("rotates"), "{err}");
    }

    #[test]
    fn refusals_name_the_tag() {
        let err = place(&ModelTags::default(), false).unwrap_err();
        assert!(
            err.contains("no georeferencing") && err.contains("33550"),
            "{err}"
        );
        let err = place(&scale_tie([0.0, 1.0, 0.0], [0.0; 6]), false).unwrap_err();
        assert!(err.contains("33550") && err.contains("positive"), "{err}");
        let err = place(&scale_tie([1.0, -1.0, 0.0], [0.0; 6]), false).unwrap_err();
        assert!(err.contains("south to north"), "{err}");
        let gcps = ModelTags {
            tiepoints: Some(vec![0.0; 12]),
            ..Default::default()
        };
        assert!(place(&gcps, false).unwrap_err().contains("ground control"));
    }

    #[test]
    fn tiny_and_huge_numbers_stay_short_in_messages() {
        // Found by the mutation test: a rotation term of 1e-300 was printed with 300 digits.
        assert_eq!(number(0.5), "0.5");
        assert_eq!(number(-2.0), "-2");
        assert_eq!(number(500_000.25), "500000.25");
        assert_eq!(number(1e-300), "1.000000e-300");
        assert_eq!(number(-3.5e20), "-3.500000e20");
        assert_eq!(number(f64::NAN), "NaN");
        let mut m = vec![0.0; 16];
        (m[0], m[1], m[3], m[5], m[7], m[15]) = (1.0, 1e-300, 10.0, -1.0, 20.0, 1.0);
        // 1e-300 is below the rounding tolerance relative to a cell size of 1: not a rotation.
        assert!(place(
            &ModelTags {
                transformation: Some(m.clone()),
                ..Default::default()
            },
            false
        )
        .is_ok());
        m[0] = 1e-290;
        m[5] = -1e-290;
        m[1] = 1e-250;
        let err = place(
            &ModelTags {
                transformation: Some(m),
                ..Default::default()
            },
            false,
        )
        .unwrap_err();
        assert!(err.len() < 300, "{err}");
        assert!(err.contains("1.000000e-250"), "{err}");
    }
}
