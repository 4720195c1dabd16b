//! Synthetic dune fields for tests and benches (deterministic, invented coordinates).

use crate::grid::GridGeometry;
use crate::interp::Surface;

/// A synthetic field of transverse dunes (gentle stoss, steep lee, wandering crests, small ripples),
/// for tests and benches; deterministic.
pub fn synthetic_dunes(rows: usize, cols: usize, cell_m: f64) -> Surface {
    use crate::grid::LinearUnit;
    let geometry = GridGeometry {
        cols,
        rows,
        origin_x: 250_000.0,
        origin_y: 1_500_000.0,
        cell_x: cell_m,
        cell_y: cell_m,
        epsg: None,
        horizontal_unit: LinearUnit::Metre,
    };
    let w = cols as f64 * cell_m;
    let z = ndarray::Array2::from_shape_fn((rows, cols), |(r, c)| {
        let x = c as f64 * cell_m;
        let y = r as f64 * cell_m;
        let wave = w / 5.0;
        let phase = (x + 0.06 * w * (std::f64::consts::TAU * y / (0.7 * w)).sin()) / wave;
        let u = phase - phase.floor();
        // Stoss rises over 75 % of the wavelength, lee falls over 25 %.
        let prof = if u < 0.75 { u / 0.75 } else { (1.0 - u) / 0.25 };
        let prof = prof * prof * (3.0 - 2.0 * prof);
        let amp = 0.55 + 0.45 * (std::f64::consts::TAU * (y / (0.9 * w) + x / (2.3 * w))).sin();
        let ripple = 0.15 * (x / (3.0 * cell_m.max(0.5)) + 0.5 * (y / 7.0).sin()).sin();
        (2.0 + 9.0 * prof * amp + ripple + 1.5 * (y / w)) as f32
    });
    Surface {
        geometry,
        z,
        kind: crate::timeline::FrameKind::Measured { survey: 0 },
        samples: None,
    }
}
