//! Linear blend of two surveys: `Z_w = (1 − w)·Z_0 + w·Z_1`, cell by cell.
//!
//! The plainest in-between surface. It conserves volume but not shape: a dune that moves appears to
//! fade in one place and rise in another (see the morph for the alternative).

use ndarray::{Array2, ArrayRef2, Zip};
use rayon::prelude::*;

/// Writes the blend of `a` and `b` at fraction `w` into `out`. Nodata (NaN) in either input gives
/// nodata. At `w == 0` the result is `a` and at `w == 1` it is `b`, bit for bit.
///
/// # Panics
/// If the three arrays differ in shape (they come from one `AlignedStack`).
pub fn blend_into(out: &mut Array2<f32>, a: &ArrayRef2<f32>, b: &ArrayRef2<f32>, w: f32) {
    assert!(
        out.dim() == a.dim() && a.dim() == b.dim(),
        "blend of differently shaped grids"
    );
    let nan_if = |other: f32, v: f32| if other.is_nan() { f32::NAN } else { v };
    if w <= 0.0 {
        Zip::from(out)
            .and(a)
            .and(b)
            .for_each(|o, &x, &y| *o = nan_if(y, x));
    } else if w >= 1.0 {
        Zip::from(out)
            .and(a)
            .and(b)
            .for_each(|o, &x, &y| *o = nan_if(x, y));
    } else {
        let v = 1.0 - w;
        Zip::from(out)
            .and(a)
            .and(b)
            .par_for_each(|o, &x, &y| *o = v * x + w * y);
    }
}

/// The blend at fraction `w` at the cells `rows` × `cols` only, into `out` (row-major,
/// `rows.len() × cols.len()`): each value is the one [`blend_into`] gives that cell, bit for bit.
///
/// # Panics
/// If `a` and `b` differ in shape, `out` has the wrong length or an index is outside the grid.
pub fn blend_at_into(
    out: &mut [f32],
    a: &ArrayRef2<f32>,
    b: &ArrayRef2<f32>,
    w: f32,
    rows: &[usize],
    cols: &[usize],
) {
    assert!(
        a.dim() == b.dim() && out.len() == rows.len() * cols.len(),
        "blend of differently shaped grids"
    );
    let nan_if = |other: f32, v: f32| if other.is_nan() { f32::NAN } else { v };
    let v = 1.0 - w;
    let cell = |x: f32, y: f32| {
        if w <= 0.0 {
            nan_if(y, x)
        } else if w >= 1.0 {
            nan_if(x, y)
        } else {
            v * x + w * y
        }
    };
    out.par_chunks_mut(cols.len().max(1))
        .zip(rows.par_iter())
        .for_each(|(orow, &r)| {
            let (ar, br) = (a.row(r), b.row(r));
            for (o, &c) in orow.iter_mut().zip(cols) {
                *o = cell(ar[c], br[c]);
            }
        });
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ends_are_exact_and_middle_is_the_mean() {
        let a = Array2::from_shape_fn((5, 7), |(r, c)| 1.1 + 0.37 * r as f32 - 0.13 * c as f32);
        let b = Array2::from_shape_fn((5, 7), |(r, c)| 4.3 - 0.21 * r as f32 + 0.77 * c as f32);
        let mut out = Array2::zeros((5, 7));
        // Check: REFERENCES.md §5 — w=0 and w=1 reproduce the inputs bit-for-bit
        blend_into(&mut out, &a, &b, 0.0);
        assert_eq!(out, a);
        blend_into(&mut out, &a, &b, 1.0);
        assert_eq!(out, b);
        // Check: REFERENCES.md §5 linear blend — Z_0.25 = 0.75·a + 0.25·b; abs diff < 1e-6
        blend_into(&mut out, &a, &b, 0.25);
        for ((o, x), y) in out.iter().zip(&a).zip(&b) {
            assert!((o - (0.75 * x + 0.25 * y)).abs() < 1e-6);
        }
    }

    #[test]
    fn sampled_cells_equal_the_whole_grid() {
        let mut a =
            Array2::from_shape_fn((9, 11), |(r, c)| 1.1 + 0.37 * r as f32 - 0.13 * c as f32);
        let b = Array2::from_shape_fn((9, 11), |(r, c)| 4.3 - 0.21 * r as f32 + 0.77 * c as f32);
        a[[2, 3]] = f32::NAN;
        let (rs, cs) = ([0usize, 2, 8], [3usize, 4, 10]);
        for w in [0.0, 0.4, 1.0] {
            let mut whole = Array2::zeros((9, 11));
            blend_into(&mut whole, &a, &b, w);
            let mut some = vec![0.0; 9];
            blend_at_into(&mut some, &a, &b, w, &rs, &cs);
            // Check: common practice, no source — the same cell by either path, bit for bit.
            for (i, &r) in rs.iter().enumerate() {
                for (j, &c) in cs.iter().enumerate() {
                    assert_eq!(whole[[r, c]].to_bits(), some[i * 3 + j].to_bits());
                }
            }
        }
    }

    #[test]
    fn nodata_propagates() {
        let mut a = Array2::from_elem((2, 2), 1.0f32);
        let b = Array2::from_elem((2, 2), 3.0f32);
        a[[0, 1]] = f32::NAN;
        let mut out = Array2::zeros((2, 2));
        for w in [0.0, 0.5, 1.0] {
            blend_into(&mut out, &a, &b, w);
            assert!(out[[0, 1]].is_nan());
            assert!(out[[1, 1]].is_finite());
        }
    }
}
