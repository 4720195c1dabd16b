//! Lengths in the job file: a plain number is metres; `{ value: 7.2, unit: us-survey-foot }` is
//! converted to metres on reading.
//!
//! The rule, documented in the README: every job key ending in `_m` holds metres, and any of them
//! may instead be written as a value with its unit (`metre`, `foot`, `us-survey-foot`), so figures
//! taken from a survey report in feet need no conversion by hand. Map coordinates (area of interest,
//! transect) are not lengths of this kind: they are in the grids' CRS unit.

use serde::{Deserialize, Deserializer};

use crate::grid::LinearUnit;

/// A length as written in the job file.
#[derive(Deserialize)]
#[serde(untagged)]
enum Written {
    /// A number: metres.
    Metres(f64),
    /// A number with its unit.
    WithUnit { value: f64, unit: LinearUnit },
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct WithUnitStrict {
    value: f64,
    unit: LinearUnit,
}

impl Written {
    fn metres(self) -> f64 {
        match self {
            Written::Metres(m) => m,
            Written::WithUnit { value, unit } => value * unit.metres(),
        }
    }
}

fn read<'de, D: Deserializer<'de>>(d: D) -> Result<Written, D::Error> {
    // Parse once as a YAML value so the error can say what a length may look like.
    let v = serde_yaml::Value::deserialize(d)?;
    if let Some(x) = v.as_f64() {
        return Ok(Written::Metres(x));
    }
    match serde_yaml::from_value::<WithUnitStrict>(v) {
        Ok(w) => Ok(Written::WithUnit {
            value: w.value,
            unit: w.unit,
        }),
        Err(e) => Err(serde::de::Error::custom(format!(
            "a length is a number of metres, or a value with its unit such as `{{ value: 7.2, unit: \
             us-survey-foot }}` (units: metre, foot, us-survey-foot); here: {e}"
        ))),
    }
}

/// Deserialises a length in metres (see the module doc).
///
/// # Errors
/// A message saying what a length may look like.
pub fn metres<'de, D: Deserializer<'de>>(d: D) -> Result<f64, D::Error> {
    read(d).map(Written::metres)
}

/// Deserialises an optional length in metres (see the module doc).
///
/// # Errors
/// A message saying what a length may look like.
pub fn opt_metres<'de, D: Deserializer<'de>>(d: D) -> Result<Option<f64>, D::Error> {
    let v = Option::<serde_yaml::Value>::deserialize(d)?;
    match v {
        None | Some(serde_yaml::Value::Null) => Ok(None),
        Some(v) => read(v)
            .map(|w| Some(w.metres()))
            .map_err(serde::de::Error::custom),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Deserialize)]
    struct T {
        #[serde(deserialize_with = "metres")]
        a_m: f64,
        #[serde(default, deserialize_with = "opt_metres")]
        b_m: Option<f64>,
    }

    #[test]
    fn numbers_are_metres_and_units_convert() {
        let t: T = serde_yaml::from_str("a_m: 2.5\n").unwrap();
        assert_eq!((t.a_m, t.b_m), (2.5, None));
        let t: T = serde_yaml::from_str(
            "a_m: { value: 100, unit: us-survey-foot }\nb_m: { value: 10, unit: foot }\n",
        )
        .unwrap();
        // Check: 85 FR 62698 (NIST/NOAA 2020) — 100 US survey ft = 30.4800610 m; REFERENCES.md §8, abs diff < 1e-7
        assert!((t.a_m - 30.480_061_0).abs() < 1e-7, "{}", t.a_m);
        // Check: international foot = 0.3048 m exactly; REFERENCES.md §8
        assert_eq!(t.b_m, Some(3.048));
    }

    #[test]
    fn a_wrong_length_says_what_a_length_is() {
        let e = serde_yaml::from_str::<T>("a_m: { value: 3, unit: yard }\n")
            .err()
            .unwrap()
            .to_string();
        assert!(
            e.contains("us-survey-foot") && e.contains("a length is"),
            "{e}"
        );
    }
}
