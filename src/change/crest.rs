//! Elevation surface + its vertical uncertainty -> [`Crest`]: the crest of the highest landform,
//! estimated so that random survey error does not move it.
//!
//! The single highest cell of a noisy survey stands above the true crest by about the largest of
//! many noise draws (two to three σ on a broad crest), and that bias changes from survey to survey
//! and shrinks on blended in-between surfaces. Here the crest is instead the top of a least-squares
//! polynomial surface fitted to every cell of a square neighbourhood around the top: local
//! least-squares polynomial smoothing (Savitzky & Golay 1964, Anal. Chem. 36(8):1627–1639, from
//! memory) in two dimensions, as in the local quadratic of terrain analysis (Evans 1980, Z. Geomorph.
//! Suppl. 36; Wood 1996, PhD thesis, University of Leicester, who fits it over windows of any size;
//! both from memory). The degree is 4 rather than 2: a quadratic cannot follow the flanks of a
//! narrow dune and underestimates its top by several centimetres on the windows noise needs (measured
//! in the tests: −0.08 m on a 10 m-wide hummock), the quartic's bias is below 5 mm there.
//!
//! The neighbourhood is scaled to the survey's σ: it grows, one cell at a time from 7×7, until the
//! standard error of the fitted crest, `σ·√(gᵀ(XᵀX)⁻¹g)` (ordinary least squares, g the design row at
//! the crest), falls to [`TARGET_STANDARD_ERROR_M`], and stops growing as soon as the fit no longer
//! describes the surface (residual variance above σ² by more than three standard deviations of its
//! chi-square distribution). The search starts at the highest cell of a 7×7 moving mean and
//! re-centres the window on the fitted top until it stays put. Between surveys the caller passes
//! the σ of the blend, `√((1−w)²σ₀² + w²σ₁²)` ([`blend_sigma_m`]).

use ndarray::ArrayRef2;
use rayon::prelude::*;

use crate::grid::GridGeometry;
use crate::interp::piecewise::{self, Piecewise, Whole};

/// The standard error, metres, the neighbourhood grows to reach: a tenth of the usual lidar σ on
/// bare sand (REFERENCES §12: 0.05–0.15 m, common practice, no source), below what a slide shows.
pub const TARGET_STANDARD_ERROR_M: f64 = 0.015;
/// Smallest half-width of the neighbourhood, cells (7×7: 49 cells for 15 coefficients).
pub const MIN_RADIUS_CELLS: usize = 3;
/// Largest half-width, cells (41×41).
pub const MAX_RADIUS_CELLS: usize = 20;

/// How a crest figure was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CrestMethod {
    /// Top of the local quadratic fit.
    QuadraticFit,
    /// Too few cells with data around the top for a fit: the highest cell itself.
    HighestCell,
}

/// The crest of a surface.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Crest {
    /// Elevation of the crest on the grids' vertical datum, metres.
    pub elevation_m: f64,
    /// Fractional row of the crest (0 = centre of the first row).
    pub row: f64,
    /// Fractional column of the crest.
    pub col: f64,
    /// Map x of the crest, CRS units.
    pub x_crs: f64,
    /// Map y of the crest, CRS units.
    pub y_crs: f64,
    /// Half-width of the fitted neighbourhood, cells (0 for the highest-cell fallback).
    pub radius_cells: usize,
    /// Standard error of `elevation_m` from the fit, metres (σ for the fallback).
    pub standard_error_m: f64,
    /// Fit or fallback.
    pub method: CrestMethod,
}

/// Estimates the crest of `z` (NaN = nodata) for a surface of vertical uncertainty `sigma_z_m`.
/// None when every cell is nodata.
pub fn estimate(z: &ArrayRef2<f32>, geometry: &GridGeometry, sigma_z_m: f64) -> Option<Crest> {
    // The same search as for a surface made piece by piece: block maxima (one pass over the
    // grid) bound every tile, and only the tiles that can hold the top are scored.
    estimate_piecewise(&Whole::new(z.view()), geometry, sigma_z_m)
}

/// [`estimate`] of a surface computed piece by piece (an in-between surface, see
/// `interp::piecewise`): the top is found by a search that computes only the tiles that can hold
/// it, and the fits run on a window around it; the result is that of [`estimate`] on the whole
/// surface, bit for bit.
pub fn estimate_piecewise(
    src: &dyn Piecewise,
    geometry: &GridGeometry,
    sigma_z_m: f64,
) -> Option<Crest> {
    let sigma = if sigma_z_m.is_finite() && sigma_z_m > 0.0 {
        sigma_z_m
    } else {
        // A stated σ of 0 would make every window "misfit"; a millimetre stands for exact data.
        0.001
    };
    let (rows, cols) = src.dim();
    let top = smoothed_top_piecewise(src, 3)
        .or_else(|| piecewise::highest_cell(src).map(|(_, r, c)| (r, c)))?;
    // Every fit stays within FIT_REACH_CELLS of the top; outside the window nothing is read.
    let near =
        |x: usize, n: usize| x.saturating_sub(FIT_REACH_CELLS)..(x + FIT_REACH_CELLS + 1).min(n);
    let (rr, cc) = (near(top.0, rows), near(top.1, cols));
    let mut window = ndarray::Array2::zeros((rr.len(), cc.len()));
    src.fill(
        rr.clone(),
        cc.clone(),
        window.as_slice_mut().expect("a new array is row-major"),
    );
    estimate_near(
        &window,
        (rr.start, cc.start),
        (top.0 - rr.start, top.1 - cc.start),
        geometry,
        sigma,
        || piecewise::highest_cell(src),
    )
}

/// Cells from the top that the fits can reach: eight moves of at most a radius, then the window.
const FIT_REACH_CELLS: usize = 9 * MAX_RADIUS_CELLS + 1;

/// The fits of [`estimate`] around `(r0, c0)` of `z`, a window whose first cell is `origin` of the
/// grid (the whole grid when it is (0, 0)); `highest` gives the grid's highest cell for the
/// fallback. Coordinates in the result are the grid's.
fn estimate_near(
    z: &ArrayRef2<f32>,
    origin: (usize, usize),
    (r0, c0): (usize, usize),
    geometry: &GridGeometry,
    sigma: f64,
    highest: impl FnOnce() -> Option<(f32, usize, usize)>,
) -> Option<Crest> {
    let mut sigma = sigma;
    let mut best: Option<Fit> = None;
    for radius in MIN_RADIUS_CELLS..=MAX_RADIUS_CELLS {
        if let Some(f) = &best {
            if f.radius == MIN_RADIUS_CELLS && f.resid_sd_m < 0.5 * sigma {
                // Data far smoother than its stated σ (a noise-free model, a filtered product)
                // would hide misfit under the stated σ: judge by the scatter the smallest fit
                // left. (Half of σ: the scatter of 34 residuals varies by about 12 %, so noisy
                // data never takes this branch by chance.)
                sigma = f.resid_sd_m.max(0.001);
            }
        }
        let Some(fit) = fit_recentred(z, r0, c0, radius, sigma) else {
            if best.is_some() {
                break;
            }
            continue;
        };
        if fit.misfit && best.is_some() {
            break;
        }
        let done = fit.standard_error_m <= TARGET_STANDARD_ERROR_M;
        best = Some(fit);
        if done {
            break;
        }
    }
    let crest = match best {
        Some(f) => Crest {
            elevation_m: f.elevation_m,
            // The centre's grid row plus the fitted offset, as on the whole grid.
            row: (origin.0 + f.centre.0) as f64 + f.offset.0,
            col: (origin.1 + f.centre.1) as f64 + f.offset.1,
            x_crs: 0.0,
            y_crs: 0.0,
            radius_cells: f.radius,
            standard_error_m: f.standard_error_m,
            method: CrestMethod::QuadraticFit,
        },
        None => {
            let (v, r, c) = highest()?;
            Crest {
                elevation_m: v as f64,
                row: r as f64,
                col: c as f64,
                x_crs: 0.0,
                y_crs: 0.0,
                radius_cells: 0,
                standard_error_m: sigma,
                method: CrestMethod::HighestCell,
            }
        }
    };
    // Cell centres: x grows with columns, y falls with rows (rows run north to south).
    let (x00, y00) = geometry.cell_center(0, 0);
    Some(Crest {
        x_crs: x00 + crest.col * geometry.cell_x,
        y_crs: y00 - crest.row * geometry.cell_y,
        ..crest
    })
}

/// The highest finite cell: (elevation, row, col); the first in row order on ties.
pub fn highest_cell(z: &ArrayRef2<f32>) -> Option<(f32, usize, usize)> {
    let (_, cols) = z.dim();
    let laid_out = z.as_standard_layout();
    let zs = laid_out.as_slice().expect("standard layout");
    // The first highest cell of each chunk, side by side; then the chunks in order with a strict
    // comparison, so the first in row order wins a tie, as in a single scan.
    const CHUNK: usize = 1 << 16;
    let best_in = |(k, chunk): (usize, &[f32])| {
        let mut best: Option<(f32, usize)> = None;
        for (i, &v) in chunk.iter().enumerate() {
            if v.is_finite() && best.is_none_or(|(b, _)| v > b) {
                best = Some((v, k * CHUNK + i));
            }
        }
        best
    };
    let chunks: Vec<Option<(f32, usize)>> = zs.par_chunks(CHUNK).enumerate().map(best_in).collect();
    let mut best: Option<(f32, usize)> = None;
    for (v, i) in chunks.into_iter().flatten() {
        if best.is_none_or(|(b, _)| v > b) {
            best = Some((v, i));
        }
    }
    best.map(|(v, i)| (v, i / cols, i % cols))
}

/// The cell where the mean over a (2k+1)² window (cells with data only; at least half of the
/// window, or of its part inside the grid) is highest, the first in row order on ties. The search
/// (`interp::piecewise::search`) scores only tiles whose bound, the highest value within reach of
/// their windows, can beat the best mean so far; each window is summed along its rows, then down.
fn smoothed_top_piecewise(src: &dyn Piecewise, k: usize) -> Option<(usize, usize)> {
    let need = ((2 * k + 1) * (2 * k + 1) / 2) as u32;
    piecewise::search(src, k, |tile, values| {
        let (rows, cols) = tile.grid;
        let gr = tile.grown_rows.clone();
        // Sums and counts along each row of the grown window first (the 2k + 1 cells centred on
        // every column of the tile), then down the columns: 2(2k + 1) additions a cell instead
        // of (2k + 1)², which matters where many tiles must be scored (a flat survey).
        let width = tile.cols.len();
        let mut across = vec![(0.0f64, 0u32); gr.len() * width];
        for (i, r) in gr.clone().enumerate() {
            for (j, c) in tile.cols.clone().enumerate() {
                let (mut s, mut n) = (0.0f64, 0u32);
                for cc in c.saturating_sub(k)..(c + k + 1).min(cols) {
                    let v = tile.at(values, r, cc);
                    if v.is_finite() {
                        s += f64::from(v);
                        n += 1;
                    }
                }
                across[i * width + j] = (s, n);
            }
        }
        let mut best: Option<(f64, usize, usize)> = None;
        for r in tile.rows.clone() {
            let (ra, rb) = (r.saturating_sub(k), (r + k + 1).min(rows));
            for (j, c) in tile.cols.clone().enumerate() {
                if !tile.at(values, r, c).is_finite() {
                    continue;
                }
                let (ca, cb) = (c.saturating_sub(k), (c + k + 1).min(cols));
                let (mut s, mut n) = (0.0f64, 0u32);
                for rr in ra..rb {
                    let (rs, rn) = across[(rr - gr.start) * width + j];
                    s += rs;
                    n += rn;
                }
                if n < need.min(((rb - ra) * (cb - ca)) as u32) || n == 0 {
                    continue;
                }
                let mean = s / f64::from(n);
                if best.is_none_or(|(b, _, _)| mean > b) {
                    best = Some((mean, r, c));
                }
            }
        }
        best
    })
    .map(|(_, r, c)| (r, c))
}

#[derive(Debug, Clone, Copy)]
struct Fit {
    elevation_m: f64,
    /// The window's centre cell (row, col) in the array fitted.
    centre: (usize, usize),
    /// The top's offset from the centre, cells (rows, cols).
    offset: (f64, f64),
    radius: usize,
    standard_error_m: f64,
    resid_sd_m: f64,
    misfit: bool,
}

/// Fits at (r, c), then moves the window to the cell nearest the fitted top until it stays put
/// (at most eight moves; a ridge walks uphill along its crest line).
fn fit_recentred(z: &ArrayRef2<f32>, r: usize, c: usize, radius: usize, sigma: f64) -> Option<Fit> {
    let (rows, cols) = z.dim();
    let (mut r, mut c) = (r, c);
    let mut fit = fit_at(z, r, c, radius, sigma)?;
    for _ in 0..8 {
        let (row, col) = (r as f64 + fit.offset.0, c as f64 + fit.offset.1);
        let nr = row.round().clamp(0.0, (rows - 1) as f64) as usize;
        let nc = col.round().clamp(0.0, (cols - 1) as f64) as usize;
        if (nr, nc) == (r, c) {
            break;
        }
        (r, c) = (nr, nc);
        match fit_at(z, r, c, radius, sigma) {
            Some(f) => fit = f,
            None => break,
        }
    }
    Some(fit)
}

/// Exponents (i, j) of the terms uⁱ·vʲ of the fitted polynomial: every i + j ≤ 4.
const TERMS: [(i32, i32); NT] = [
    (0, 0),
    (1, 0),
    (0, 1),
    (2, 0),
    (1, 1),
    (0, 2),
    (3, 0),
    (2, 1),
    (1, 2),
    (0, 3),
    (4, 0),
    (3, 1),
    (2, 2),
    (1, 3),
    (0, 4),
];
/// Number of polynomial terms.
const NT: usize = 15;

fn design_row(u: f64, v: f64) -> [f64; NT] {
    let mut g = [0.0; NT];
    for (k, &(i, j)) in TERMS.iter().enumerate() {
        g[k] = u.powi(i) * v.powi(j);
    }
    g
}

/// Value, gradient and Hessian of the polynomial at (u, v).
fn poly_eval(coef: &[f64; NT], u: f64, v: f64) -> (f64, [f64; 2], [[f64; 2]; 2]) {
    let (mut f, mut gu, mut gv, mut huu, mut huv, mut hvv) = (0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
    let p = |x: f64, n: i32| if n < 0 { 0.0 } else { x.powi(n) };
    for (k, &(i, j)) in TERMS.iter().enumerate() {
        let (a, fi, fj) = (coef[k], i as f64, j as f64);
        f += a * p(u, i) * p(v, j);
        gu += a * fi * p(u, i - 1) * p(v, j);
        gv += a * fj * p(u, i) * p(v, j - 1);
        huu += a * fi * (fi - 1.0) * p(u, i - 2) * p(v, j);
        huv += a * fi * fj * p(u, i - 1) * p(v, j - 1);
        hvv += a * fj * (fj - 1.0) * p(u, i) * p(v, j - 2);
    }
    (f, [gu, gv], [[huu, huv], [huv, hvv]])
}

/// Least-squares polynomial of degree 4 over the (2·radius+1)² window centred on (r, c), in window
/// coordinates scaled to [−1, 1] so the normal equations stay well conditioned. The top is found
/// by Newton steps from the highest window cell of the fit, kept inside the window.
fn fit_at(z: &ArrayRef2<f32>, r: usize, c: usize, radius: usize, sigma: f64) -> Option<Fit> {
    let (rows, cols) = z.dim();
    let k = radius as isize;
    let scale = 1.0 / radius as f64;
    let mut ata = vec![[0.0f64; NT]; NT];
    let mut atz = [0.0f64; NT];
    let mut n = 0usize;
    // Values relative to the centre cell keep the sums well scaled.
    let z0 = {
        let v = z[[r, c]];
        if v.is_finite() {
            v as f64
        } else {
            0.0
        }
    };
    let mut cells = Vec::with_capacity((2 * radius + 1) * (2 * radius + 1));
    for dv in -k..=k {
        let rr = r as isize + dv;
        if rr < 0 || rr >= rows as isize {
            continue;
        }
        for du in -k..=k {
            let cc = c as isize + du;
            if cc < 0 || cc >= cols as isize {
                continue;
            }
            let v = z[[rr as usize, cc as usize]];
            if !v.is_finite() {
                continue;
            }
            let (u, w) = (du as f64 * scale, dv as f64 * scale);
            let g = design_row(u, w);
            let y = v as f64 - z0;
            for i in 0..NT {
                atz[i] += g[i] * y;
                for j in i..NT {
                    ata[i][j] += g[i] * g[j];
                }
            }
            cells.push((u, w, y));
            n += 1;
        }
    }
    // At least two observations per coefficient, and most of the window with data.
    let full = (2 * radius + 1) * (2 * radius + 1);
    if n < 2 * NT || n * 4 < full * 3 {
        return None;
    }
    // Mirror the upper triangle into the lower one.
    for i in 1..NT {
        let (upper, lower) = ata.split_at_mut(i);
        for (j, row) in upper.iter().enumerate() {
            lower[0][j] = row[i];
        }
    }
    let inv = invert(ata)?;
    let mut coef = [0.0f64; NT];
    for i in 0..NT {
        coef[i] = (0..NT).map(|j| inv[i][j] * atz[j]).sum();
    }
    // Start from the highest window cell of the fit, then Newton steps while the fit is a cap.
    let (mut u, mut v) = {
        let mut best = (f64::MIN, 0.0, 0.0);
        for &(cu, cv, _) in &cells {
            let h = poly_eval(&coef, cu, cv).0;
            if h > best.0 {
                best = (h, cu, cv);
            }
        }
        (best.1, best.2)
    };
    for _ in 0..12 {
        let (_, g, h) = poly_eval(&coef, u, v);
        let det = h[0][0] * h[1][1] - h[0][1] * h[0][1];
        if !(h[0][0] < 0.0 && det > 0.0) {
            break;
        }
        let du = -(h[1][1] * g[0] - h[0][1] * g[1]) / det;
        let dv = -(-h[0][1] * g[0] + h[0][0] * g[1]) / det;
        let (nu, nv) = ((u + du).clamp(-1.0, 1.0), (v + dv).clamp(-1.0, 1.0));
        if poly_eval(&coef, nu, nv).0 < poly_eval(&coef, u, v).0 {
            break;
        }
        (u, v) = (nu, nv);
        if du.hypot(dv) < 1e-9 {
            break;
        }
    }
    let rss: f64 = cells
        .iter()
        .map(|&(cu, cv, y)| (y - poly_eval(&coef, cu, cv).0).powi(2))
        .sum();
    let dof = (n - NT) as f64;
    // Check: chi-square with ν degrees of freedom has mean ν and variance 2ν (textbook property,
    // from memory); residual sums beyond ν + 3·√(2ν) in units of σ² mean the model misses shape.
    let misfit = rss / (sigma * sigma) > dof + 3.0 * (2.0 * dof).sqrt();
    let g = design_row(u, v);
    let var_factor: f64 = (0..NT)
        .map(|i| (0..NT).map(|j| g[i] * inv[i][j] * g[j]).sum::<f64>())
        .sum();
    let resid_var = (rss / dof).max(sigma * sigma);
    Some(Fit {
        elevation_m: z0 + poly_eval(&coef, u, v).0,
        centre: (r, c),
        offset: (v * radius as f64, u * radius as f64),
        radius,
        standard_error_m: (resid_var * var_factor.max(0.0)).sqrt(),
        resid_sd_m: (rss / dof).sqrt(),
        misfit,
    })
}

/// Inverse of a symmetric positive definite matrix by Gauss–Jordan elimination with partial
/// pivoting; None when it is singular.
fn invert(mut a: Vec<[f64; NT]>) -> Option<Vec<[f64; NT]>> {
    let mut inv = vec![[0.0f64; NT]; NT];
    for (i, row) in inv.iter_mut().enumerate() {
        row[i] = 1.0;
    }
    for col in 0..NT {
        let piv = (col..NT).max_by(|&x, &y| a[x][col].abs().total_cmp(&a[y][col].abs()))?;
        if a[piv][col].abs() < 1e-12 {
            return None;
        }
        a.swap(col, piv);
        inv.swap(col, piv);
        let p = a[col][col];
        for j in 0..NT {
            a[col][j] /= p;
            inv[col][j] /= p;
        }
        for i in 0..NT {
            if i != col {
                let f = a[i][col];
                if f != 0.0 {
                    let (src_a, src_i) = (a[col], inv[col]);
                    for j in 0..NT {
                        a[i][j] -= f * src_a[j];
                        inv[i][j] -= f * src_i[j];
                    }
                }
            }
        }
    }
    Some(inv)
}

/// σ of a blend `(1−w)·Z₀ + w·Z₁` of two surveys with independent errors σ₀ and σ₁.
pub fn blend_sigma_m(sigma0_m: f64, sigma1_m: f64, w: f64) -> f64 {
    ((1.0 - w) * sigma0_m).hypot(w * sigma1_m)
}

#[cfg(test)]
mod tests;
