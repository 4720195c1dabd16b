//! Decoded TIFF samples (any integer or float type, one or more interleaved bands) -> band 1 as f32
//! metres, NaN for nodata.
//!
//! One pass over a slice, no allocation per cell; single-band float32 in metres is masked in place.
//! A sample equals nodata when it matches the GDAL_NODATA value at the sample's own precision;
//! non-finite samples (and values that overflow f32) are nodata too.

use tiff::decoder::DecodingResult;

/// A stored sample type that can become an elevation.
trait Sample: Copy {
    fn as_f64(self) -> f64;
    /// True when the sample equals the nodata value, compared at the sample's own precision.
    fn is_nodata(self, nodata: f64) -> bool;
}

macro_rules! int_sample {
    ($($t:ty),*) => {$(
        impl Sample for $t {
            #[inline]
            fn as_f64(self) -> f64 { self as f64 }
            #[inline]
            fn is_nodata(self, nodata: f64) -> bool { self as f64 == nodata }
        }
    )*};
}
int_sample!(u8, i8, u16, i16, u32, i32, u64, i64);

impl Sample for f32 {
    #[inline]
    fn as_f64(self) -> f64 {
        f64::from(self)
    }
    // A float32 band's nodata is meant at float32 precision: "0.1" marks the f32 nearest 0.1.
    #[inline]
    fn is_nodata(self, nodata: f64) -> bool {
        self == nodata as f32
    }
}

impl Sample for f64 {
    #[inline]
    fn as_f64(self) -> f64 {
        self
    }
    #[inline]
    fn is_nodata(self, nodata: f64) -> bool {
        self == nodata
    }
}

/// Band 1 of the decoded buffer as metres, NaN for nodata and non-finite values.
pub fn to_metres(
    decoded: DecodingResult,
    cells: usize,
    factor: f64,
    nodata: f64,
) -> Result<Vec<f32>, String> {
    match decoded {
        // Single-band float32: convert in the decoded buffer, no second allocation.
        DecodingResult::F32(mut v) if v.len() == cells => {
            let nd = nodata as f32;
            if factor == 1.0 {
                for x in v.iter_mut() {
                    if *x == nd || !x.is_finite() {
                        *x = f32::NAN;
                    }
                }
            } else {
                for x in v.iter_mut() {
                    let z = (f64::from(*x) * factor) as f32;
                    *x = if *x == nd || !z.is_finite() {
                        f32::NAN
                    } else {
                        z
                    };
                }
            }
            Ok(v)
        }
        DecodingResult::U8(v) => convert(&v, cells, factor, nodata),
        DecodingResult::I8(v) => convert(&v, cells, factor, nodata),
        DecodingResult::U16(v) => convert(&v, cells, factor, nodata),
        DecodingResult::I16(v) => convert(&v, cells, factor, nodata),
        DecodingResult::U32(v) => convert(&v, cells, factor, nodata),
        DecodingResult::I32(v) => convert(&v, cells, factor, nodata),
        DecodingResult::U64(v) => convert(&v, cells, factor, nodata),
        DecodingResult::I64(v) => convert(&v, cells, factor, nodata),
        DecodingResult::F32(v) => convert(&v, cells, factor, nodata),
        DecodingResult::F64(v) => convert(&v, cells, factor, nodata),
        DecodingResult::F16(_) => {
            Err("float16 samples are not supported; write the grid as float32".to_string())
        }
    }
}

fn convert<T: Sample>(
    src: &[T],
    cells: usize,
    factor: f64,
    nodata: f64,
) -> Result<Vec<f32>, String> {
    if cells == 0 || !src.len().is_multiple_of(cells) {
        return Err(format!(
            "decoded {} samples, which is not a whole number of bands of {cells} cells; the file is damaged",
            src.len()
        ));
    }
    let stride = src.len() / cells;
    let mut out = vec![0.0f32; cells];
    for (o, s) in out.iter_mut().zip(src.chunks_exact(stride)) {
        let v = s[0];
        let z = (v.as_f64() * factor) as f32;
        *o = if v.is_nodata(nodata) || !z.is_finite() {
            f32::NAN
        } else {
            z
        };
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn conversion_masks_nodata_and_scales() {
        // Check: 85 FR 62698 (NIST/NOAA 2020) — 1 US survey ft = 1200/3937 m; 100 US ft = 30.480061 m,
        // abs diff < 1e-4 (f32)
        let us_ft = 1200.0 / 3937.0;
        let z = convert(&[100i16, -9999, 0], 3, us_ft, -9999.0).unwrap();
        assert!((f64::from(z[0]) - 30.480_061).abs() < 1e-4);
        assert!(z[1].is_nan());
        assert_eq!(z[2], 0.0);
        // Interleaved two-band samples: band 1 is every second value.
        let z = convert(&[1.0f64, 50.0, f64::INFINITY, 60.0], 2, 1.0, f64::NAN).unwrap();
        assert_eq!(z[0], 1.0);
        assert!(z[1].is_nan());
        assert!(convert(&[1u8, 2, 3], 2, 1.0, f64::NAN).is_err());
    }

    #[test]
    fn float32_in_place_path_masks() {
        let z = to_metres(
            DecodingResult::F32(vec![1.5, -9999.0, f32::NAN, f32::INFINITY]),
            4,
            1.0,
            -9999.0,
        )
        .unwrap();
        assert_eq!(z[0], 1.5);
        assert!(z[1..].iter().all(|v| v.is_nan()));
        // Check: 0.3048 m per international foot (1959 agreement, from memory); 10 ft = 3.048 m,
        // abs diff < 1e-6
        let z = to_metres(DecodingResult::F32(vec![10.0, -9999.0]), 2, 0.3048, -9999.0).unwrap();
        assert!((z[0] - 3.048).abs() < 1e-6 && z[1].is_nan());
    }
}
