//! Elevation surface + its vertical uncertainty -> [`Crest`]: the crest of the highest landform,
//! estimated so that random survey error does not move it.
//!
//! The single highest cell of a noisy survey stands above the true crest by about the largest of
//! many noise draws (two to three σ on a broad crest), and that bias changes from survey to survey
//! and shrinks on blended in-between surfaces. Here the crest is instead the top of a least-squares
//! quadratic surface `z = a·u² + b·v² + c·uv + d·u + e·v + f` fitted to every cell of a square
//! neighbourhood, as in the multi-scale local quadratic of Wood (1996), which extends Evans' (1980)
//! 3×3 quadratic to any window size (both from memory: Evans, I.S. 1980, "An integrated system of
//! terrain analysis and slope mapping", Z. Geomorph. Suppl. 36; Wood, J. 1996, "The geomorphological
//! characterisation of digital elevation models", PhD thesis, University of Leicester).
//!
//! The neighbourhood is scaled to the survey's σ: it grows, one cell at a time from 5×5, until the
//! standard error of the fitted crest, `σ·√(gᵀ(XᵀX)⁻¹g)` (ordinary least squares, g the design row at
//! the crest), falls to [`TARGET_STANDARD_ERROR_M`], and stops growing as soon as the fit no longer
//! describes the surface (residual variance above σ² by more than three standard deviations of its
//! chi-square distribution, so curvature the quadratic cannot follow is not averaged away). The
//! search starts at the highest cell of a 7×7 moving mean and re-centres the window on the fitted
//! top until it stays put. Between surveys the caller passes the σ of the blend,
//! `√((1−w)²σ₀² + w²σ₁²)`.

use ndarray::Array2;

use crate::grid::GridGeometry;

/// The standard error, metres, the neighbourhood grows to reach: a tenth of the usual lidar σ on
/// bare sand (REFERENCES §12: 0.05–0.15 m, common practice, no source), below what a slide shows.
pub const TARGET_STANDARD_ERROR_M: f64 = 0.015;
/// Smallest half-width of the neighbourhood, cells (5×5: Evans' 3×3 leaves one degree of freedom
/// per coefficient, too few against noise).
pub const MIN_RADIUS_CELLS: usize = 2;
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
pub fn estimate(z: &Array2<f32>, geometry: &GridGeometry, sigma_z_m: f64) -> Option<Crest> {
    let sigma = if sigma_z_m.is_finite() && sigma_z_m > 0.0 {
        sigma_z_m
    } else {
        // A stated σ of 0 would make every window "misfit"; a millimetre stands for exact data.
        0.001
    };
    let (r0, c0) = smoothed_top(z, 3)?;
    let mut best: Option<Fit> = None;
    for radius in MIN_RADIUS_CELLS..=MAX_RADIUS_CELLS {
        let Some(fit) = fit_recentred(z, r0, c0, radius, sigma) else {
            break;
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
            row: f.row,
            col: f.col,
            x_crs: 0.0,
            y_crs: 0.0,
            radius_cells: f.radius,
            standard_error_m: f.standard_error_m,
            method: CrestMethod::QuadraticFit,
        },
        None => {
            let (v, r, c) = highest_cell(z)?;
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
pub fn highest_cell(z: &Array2<f32>) -> Option<(f32, usize, usize)> {
    let mut best: Option<(f32, usize, usize)> = None;
    for ((r, c), &v) in z.indexed_iter() {
        if v.is_finite() && best.is_none_or(|(b, _, _)| v > b) {
            best = Some((v, r, c));
        }
    }
    best
}

/// The cell where the mean over a (2k+1)² window (cells with data only) is highest.
fn smoothed_top(z: &Array2<f32>, k: usize) -> Option<(usize, usize)> {
    let (rows, cols) = z.dim();
    // Summed-area tables of values and of data counts, (rows+1) x (cols+1), f64.
    let w = cols + 1;
    let mut sum = vec![0.0f64; (rows + 1) * w];
    let mut cnt = vec![0u32; (rows + 1) * w];
    for r in 0..rows {
        let (mut rs, mut rc) = (0.0f64, 0u32);
        for c in 0..cols {
            let v = z[[r, c]];
            if v.is_finite() {
                rs += v as f64;
                rc += 1;
            }
            sum[(r + 1) * w + c + 1] = sum[r * w + c + 1] + rs;
            cnt[(r + 1) * w + c + 1] = cnt[r * w + c + 1] + rc;
        }
    }
    let mut best: Option<(f64, usize, usize)> = None;
    let need = ((2 * k + 1) * (2 * k + 1) / 2) as u32;
    for r in 0..rows {
        let (ra, rb) = (r.saturating_sub(k), (r + k + 1).min(rows));
        for c in 0..cols {
            if !z[[r, c]].is_finite() {
                continue;
            }
            let (ca, cb) = (c.saturating_sub(k), (c + k + 1).min(cols));
            let n = cnt[rb * w + cb] + cnt[ra * w + ca] - cnt[ra * w + cb] - cnt[rb * w + ca];
            if n < need.min(((rb - ra) * (cb - ca)) as u32) || n == 0 {
                continue;
            }
            let s = sum[rb * w + cb] + sum[ra * w + ca] - sum[ra * w + cb] - sum[rb * w + ca];
            let mean = s / n as f64;
            if best.is_none_or(|(b, _, _)| mean > b) {
                best = Some((mean, r, c));
            }
        }
    }
    best.map(|(_, r, c)| (r, c)).or_else(|| {
        // Data too sparse for any window: fall back to the highest cell.
        highest_cell(z).map(|(_, r, c)| (r, c))
    })
}

#[derive(Debug, Clone, Copy)]
struct Fit {
    elevation_m: f64,
    row: f64,
    col: f64,
    radius: usize,
    standard_error_m: f64,
    misfit: bool,
}

/// Fits at (r, c), then moves the window to the cell nearest the fitted top until it stays put
/// (at most eight moves; a ridge walks uphill along its crest line).
fn fit_recentred(z: &Array2<f32>, r: usize, c: usize, radius: usize, sigma: f64) -> Option<Fit> {
    let (rows, cols) = z.dim();
    let (mut r, mut c) = (r, c);
    let mut fit = fit_at(z, r, c, radius, sigma)?;
    for _ in 0..8 {
        let nr = fit.row.round().clamp(0.0, (rows - 1) as f64) as usize;
        let nc = fit.col.round().clamp(0.0, (cols - 1) as f64) as usize;
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

/// Least-squares quadratic over the (2·radius+1)² window centred on (r, c). The top is the
/// stationary point when the surface is a cap (negative definite) and the point lies inside the
/// window; otherwise (a ridge, a slope) the highest point of the fit on the window's cells.
fn fit_at(z: &Array2<f32>, r: usize, c: usize, radius: usize, sigma: f64) -> Option<Fit> {
    let (rows, cols) = z.dim();
    let k = radius as isize;
    let mut ata = [[0.0f64; 6]; 6];
    let mut atz = [0.0f64; 6];
    let mut n = 0usize;
    let row_of = |u: f64, v: f64| [u * u, v * v, u * v, u, v, 1.0];
    // Centre the values on the window's centre cell (or any cell) to keep the sums well scaled.
    let z0 = {
        let v = z[[r, c]];
        if v.is_finite() {
            v as f64
        } else {
            0.0
        }
    };
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
            let g = row_of(du as f64, dv as f64);
            let y = v as f64 - z0;
            for i in 0..6 {
                atz[i] += g[i] * y;
                for j in i..6 {
                    ata[i][j] += g[i] * g[j];
                }
            }
            n += 1;
        }
    }
    // At least two observations per coefficient, and most of the window with data.
    let full = (2 * radius + 1) * (2 * radius + 1);
    if n < 12 || n * 2 < full {
        return None;
    }
    for i in 0..6 {
        for j in 0..i {
            ata[i][j] = ata[j][i];
        }
    }
    let inv = invert6(&ata)?;
    let mut coef = [0.0f64; 6];
    for i in 0..6 {
        coef[i] = (0..6).map(|j| inv[i][j] * atz[j]).sum();
    }
    let [a, b, cc, d, e, f] = coef;
    let eval = |u: f64, v: f64| a * u * u + b * v * v + cc * u * v + d * u + e * v + f;
    // Stationary point: [2a c; c 2b]·(u, v) = −(d, e).
    let det = 4.0 * a * b - cc * cc;
    let kf = k as f64;
    let (u, v) = if a < 0.0 && det > 0.0 {
        let u = (-d * 2.0 * b + e * cc) / det;
        let v = (-2.0 * a * e + cc * d) / det;
        if u.abs() <= kf && v.abs() <= kf {
            (u, v)
        } else {
            best_cell(&eval, k)
        }
    } else {
        best_cell(&eval, k)
    };
    // Residuals against the stated σ.
    let mut rss = 0.0f64;
    for dv in -k..=k {
        let rr = r as isize + dv;
        if rr < 0 || rr >= rows as isize {
            continue;
        }
        for du in -k..=k {
            let cc2 = c as isize + du;
            if cc2 < 0 || cc2 >= cols as isize {
                continue;
            }
            let val = z[[rr as usize, cc2 as usize]];
            if val.is_finite() {
                let res = val as f64 - z0 - eval(du as f64, dv as f64);
                rss += res * res;
            }
        }
    }
    let dof = (n - 6) as f64;
    // Check: chi-square with ν degrees of freedom has mean ν and variance 2ν (textbook property,
    // from memory); residual sums beyond ν + 3·√(2ν) in units of σ² mean the model misses shape.
    let misfit = rss / (sigma * sigma) > dof + 3.0 * (2.0 * dof).sqrt();
    let g = row_of(u, v);
    let var_factor: f64 = (0..6)
        .map(|i| (0..6).map(|j| g[i] * inv[i][j] * g[j]).sum::<f64>())
        .sum();
    let resid_var = (rss / dof).max(sigma * sigma);
    Some(Fit {
        elevation_m: z0 + eval(u, v),
        row: r as f64 + v,
        col: c as f64 + u,
        radius,
        standard_error_m: (resid_var * var_factor.max(0.0)).sqrt(),
        misfit,
    })
}

/// The window cell where the fitted surface is highest (offsets from the centre).
fn best_cell(eval: &impl Fn(f64, f64) -> f64, k: isize) -> (f64, f64) {
    let mut best = (f64::MIN, 0.0, 0.0);
    for v in -k..=k {
        for u in -k..=k {
            let h = eval(u as f64, v as f64);
            if h > best.0 {
                best = (h, u as f64, v as f64);
            }
        }
    }
    (best.1, best.2)
}

/// Inverse of a symmetric positive definite 6×6 matrix by Gauss–Jordan elimination with partial
/// pivoting; None when it is singular.
fn invert6(m: &[[f64; 6]; 6]) -> Option<[[f64; 6]; 6]> {
    let mut a = *m;
    let mut inv = [[0.0f64; 6]; 6];
    for (i, row) in inv.iter_mut().enumerate() {
        row[i] = 1.0;
    }
    for col in 0..6 {
        let piv = (col..6).max_by(|&x, &y| a[x][col].abs().total_cmp(&a[y][col].abs()))?;
        if a[piv][col].abs() < 1e-12 {
            return None;
        }
        a.swap(col, piv);
        inv.swap(col, piv);
        let p = a[col][col];
        for j in 0..6 {
            a[col][j] /= p;
            inv[col][j] /= p;
        }
        for i in 0..6 {
            if i != col {
                let f = a[i][col];
                if f != 0.0 {
                    for j in 0..6 {
                        a[i][j] -= f * a[col][j];
                        inv[i][j] -= f * inv[col][j];
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
