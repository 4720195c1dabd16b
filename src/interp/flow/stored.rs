//! A [`FlowResult`] as bytes, so that one part of a split job can estimate a pair's displacement
//! field and `assemble` can use it without estimating it again.
//!
//! Layout, all little-endian: the magic `DRFLOW01`; the verdict (a tag byte, then its numbers as
//! f64 bit patterns or u64); the dominant displacement (a presence byte, then six f64); the field's
//! cell size (f64), step, grid rows and columns, array rows and columns (u64 each); then the east,
//! north and quality arrays as f32, row by row. Numbers keep their exact bits (NaN included), so a
//! field read back is the field that was written, and the bag assembled from parts is the bag of a
//! one-machine run.

use ndarray::Array2;

use super::{Dominant, FlowField, FlowResult, Verdict};

const MAGIC: &[u8; 8] = b"DRFLOW01";

/// The bytes of `r` (see the module doc).
pub fn to_bytes(r: &FlowResult) -> Vec<u8> {
    let f = &r.field;
    let cells = f.east_m.len();
    let mut out = Vec::with_capacity(160 + 12 * cells);
    out.extend_from_slice(MAGIC);
    let f64s = |out: &mut Vec<u8>, v: &[f64]| {
        for x in v {
            out.extend_from_slice(&x.to_bits().to_le_bytes());
        }
    };
    let u64s = |out: &mut Vec<u8>, v: &[usize]| {
        for &x in v {
            out.extend_from_slice(&(x as u64).to_le_bytes());
        }
    };
    match r.verdict {
        Verdict::Trusted => out.push(0),
        Verdict::LittleOverlap { share, required } => {
            out.push(1);
            f64s(&mut out, &[share, required]);
        }
        Verdict::NoTexture {
            relief_std_m,
            required_m,
        } => {
            out.push(2);
            f64s(&mut out, &[relief_std_m, required_m]);
        }
        Verdict::AtSearchLimit {
            distance_m,
            radius_m,
        } => {
            out.push(3);
            f64s(&mut out, &[distance_m, radius_m]);
        }
        Verdict::WeakMatch { ncc, required } => {
            out.push(4);
            f64s(&mut out, &[ncc, required]);
        }
        Verdict::ShapeMismatch { earlier, later } => {
            out.push(5);
            u64s(&mut out, &[earlier.0, earlier.1, later.0, later.1]);
        }
    }
    match r.dominant {
        None => out.push(0),
        Some(d) => {
            out.push(1);
            f64s(
                &mut out,
                &[
                    d.east_m,
                    d.north_m,
                    d.distance_m,
                    d.azimuth_deg,
                    d.ncc,
                    d.support,
                ],
            );
        }
    }
    f64s(&mut out, &[f.cell_size_m]);
    let (rows, cols) = f.east_m.dim();
    u64s(&mut out, &[f.step, f.grid_dim.0, f.grid_dim.1, rows, cols]);
    for a in [&f.east_m, &f.north_m, &f.quality] {
        for v in a.iter() {
            out.extend_from_slice(&v.to_bits().to_le_bytes());
        }
    }
    out
}

/// Reads bytes written by [`to_bytes`].
///
/// # Errors
/// A short message when the bytes are not such a result (wrong magic, cut short, sizes that do not
/// add up).
pub fn from_bytes(bytes: &[u8]) -> Result<FlowResult, String> {
    let mut rd = Reader { bytes, at: 0 };
    if rd.take(8)? != MAGIC {
        return Err("not a stored displacement field".into());
    }
    let verdict = match rd.take(1)?[0] {
        0 => Verdict::Trusted,
        1 => Verdict::LittleOverlap {
            share: rd.f64()?,
            required: rd.f64()?,
        },
        2 => Verdict::NoTexture {
            relief_std_m: rd.f64()?,
            required_m: rd.f64()?,
        },
        3 => Verdict::AtSearchLimit {
            distance_m: rd.f64()?,
            radius_m: rd.f64()?,
        },
        4 => Verdict::WeakMatch {
            ncc: rd.f64()?,
            required: rd.f64()?,
        },
        5 => Verdict::ShapeMismatch {
            earlier: (rd.size()?, rd.size()?),
            later: (rd.size()?, rd.size()?),
        },
        t => return Err(format!("unknown verdict {t}")),
    };
    let dominant = match rd.take(1)?[0] {
        0 => None,
        1 => Some(Dominant {
            east_m: rd.f64()?,
            north_m: rd.f64()?,
            distance_m: rd.f64()?,
            azimuth_deg: rd.f64()?,
            ncc: rd.f64()?,
            support: rd.f64()?,
        }),
        t => return Err(format!("unknown dominant marker {t}")),
    };
    let cell_size_m = rd.f64()?;
    let (step, grid_rows, grid_cols, rows, cols) =
        (rd.size()?, rd.size()?, rd.size()?, rd.size()?, rd.size()?);
    let cells = rows
        .checked_mul(cols)
        .filter(|&n| n.checked_mul(12) == Some(bytes.len() - rd.at))
        .ok_or("the arrays' size does not match the file's length")?;
    let mut array = || -> Result<Array2<f32>, String> {
        let raw = rd.take(4 * cells)?;
        let v: Vec<f32> = raw
            .chunks_exact(4)
            .map(|b| f32::from_bits(u32::from_le_bytes(b.try_into().expect("4 bytes"))))
            .collect();
        Array2::from_shape_vec((rows, cols), v).map_err(|e| e.to_string())
    };
    let (east_m, north_m, quality) = (array()?, array()?, array()?);
    Ok(FlowResult {
        field: FlowField {
            east_m,
            north_m,
            quality,
            cell_size_m,
            step,
            grid_dim: (grid_rows, grid_cols),
        },
        dominant,
        verdict,
    })
}

struct Reader<'a> {
    bytes: &'a [u8],
    at: usize,
}

impl<'a> Reader<'a> {
    fn take(&mut self, n: usize) -> Result<&'a [u8], String> {
        let end = self.at.checked_add(n).filter(|&e| e <= self.bytes.len());
        let end = end.ok_or("cut short")?;
        let s = &self.bytes[self.at..end];
        self.at = end;
        Ok(s)
    }
    fn u64(&mut self) -> Result<u64, String> {
        Ok(u64::from_le_bytes(
            self.take(8)?.try_into().expect("8 bytes"),
        ))
    }
    fn f64(&mut self) -> Result<f64, String> {
        self.u64().map(f64::from_bits)
    }
    fn size(&mut self) -> Result<usize, String> {
        usize::try_from(self.u64()?).map_err(|_| "a size too large for this machine".into())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_result_reads_back_bit_for_bit_and_damage_is_refused() {
        // Check: analytic — writing what was read gives the same bytes (NaN bits included), and
        // every cut-short copy is refused.
        let f = FlowField {
            east_m: Array2::from_shape_fn((3, 4), |(r, c)| r as f32 - 0.25 * c as f32),
            north_m: Array2::from_shape_fn((3, 4), |(r, c)| if r == c { f32::NAN } else { 1.5 }),
            quality: Array2::from_elem((3, 4), 0.75),
            cell_size_m: 0.5,
            step: 3,
            grid_dim: (9, 11),
        };
        let verdicts = [
            Verdict::Trusted,
            Verdict::WeakMatch {
                ncc: f64::NAN,
                required: 0.3,
            },
            Verdict::ShapeMismatch {
                earlier: (1, 2),
                later: (3, 4),
            },
        ];
        for verdict in verdicts {
            let r = FlowResult {
                field: f.clone(),
                dominant: Some(Dominant::from_components(1.25, -2.0, 0.9, f64::NAN)),
                verdict,
            };
            let bytes = to_bytes(&r);
            let back = from_bytes(&bytes).unwrap();
            assert_eq!(to_bytes(&back), bytes);
            assert_eq!((back.field.step, back.field.grid_dim), (3, (9, 11)));
            assert_eq!(back.field.east_m, r.field.east_m);
            assert!(back.field.north_m[[1, 1]].is_nan());
            for n in [0, 8, 9, bytes.len() - 1] {
                assert!(from_bytes(&bytes[..n]).is_err(), "cut at {n}");
            }
        }
    }
}
