//! Serializable rows -> a `Table` in the display unit -> CSV or JSON text.
//!
//! A row is any flat struct deriving `Serialize` (the change record's rows). Fields keep their order.
//! Unit conversion is driven by the field-name suffix, so the names always tell the unit:
//! `_m` lengths, `_m2` areas, `_m3` volumes, `_m_per_yr` rates. In feet the suffixes become `_ft`,
//! `_ft2`, `_ft3`, `_ft_per_yr`; in US survey feet `_usft`, … Values are divided by the unit's length
//! in metres (to the power 2 or 3). In feet, every volume column is followed by the same volume in
//! cubic yards (`_yd3`, international yard, 0.764554857984 m³), as US practice reports earthwork.
//! Every other field (`_crs` map coordinates, `_deg`, shares, counts,
//! text) is written as it is. In metres nothing is converted, so the numbers are exactly the record's.
//!
//! Precision: JSON keeps every digit. CSV, which people read, is rounded by the same suffixes to what
//! survey data supports: lengths and map coordinates to 0.001 (a millimetre, or a thousandth of a
//! foot), rates to 0.001 a year, areas and volumes to 0.1, angles to 0.01°. Whole numbers, shares and
//! other figures are written as they are. Common practice, no source: lidar and drone DEMs carry
//! centimetre-to-decimetre vertical error (REFERENCES.md §12), so a millimetre is already generous.

use serde::ser::{self, Impossible, Serialize, SerializeStruct, Serializer};
use serde_json::Value;

use crate::grid::LinearUnit;

/// Columns and rows of values, ready to write.
#[derive(Debug, Clone, PartialEq)]
pub struct Table {
    /// Column names, in field order, with the display unit in their suffix.
    pub columns: Vec<String>,
    /// One entry per row, one value per column (`Null` for missing).
    pub rows: Vec<Vec<Value>>,
}

/// Why a value could not be turned into a row (a bug: rows are flat structs).
#[derive(Debug)]
pub struct RowError(String);

impl std::fmt::Display for RowError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}
impl std::error::Error for RowError {}
impl ser::Error for RowError {
    fn custom<T: std::fmt::Display>(msg: T) -> Self {
        RowError(msg.to_string())
    }
}

/// The suffix token of a unit: `m`, `ft`, `usft`.
pub fn unit_token(unit: LinearUnit) -> &'static str {
    match unit {
        LinearUnit::Metre => "m",
        LinearUnit::Foot => "ft",
        LinearUnit::UsSurveyFoot => "usft",
    }
}

/// Renames a metre-suffixed column for `unit` and gives the power of length it carries (0 = none).
pub fn convert_name(name: &str, unit: LinearUnit) -> (String, i32) {
    let tok = unit_token(unit);
    for (suffix, power, tail) in [
        ("_m_per_yr", 1, "_per_yr"),
        ("_m3", 3, "3"),
        ("_m2", 2, "2"),
        ("_m", 1, ""),
    ] {
        if let Some(stem) = name.strip_suffix(suffix) {
            return (format!("{stem}_{tok}{tail}"), power);
        }
    }
    (name.to_string(), 0)
}

/// One cubic yard in cubic metres: the international yard of 0.9144 m, cubed.
// Check: NIST Handbook 44 (appendix C) — 1 cubic yard = 0.764554857984 m³ exactly; 0.9144^3
pub const CUBIC_YARD_M3: f64 = 0.764_554_857_984;

/// The cubic-yard column beside a `_m3` column: `net_volume_m3` -> `net_volume_yd3`.
pub fn yard_name(name: &str) -> String {
    format!("{}_yd3", name.strip_suffix("_m3").unwrap_or(name))
}

/// A value in cubic metres as cubic yards (text and missing values pass through).
fn cubic_yards(v: &Value) -> Value {
    match v.as_f64() {
        Some(x) => {
            serde_json::Number::from_f64(x / CUBIC_YARD_M3).map_or(Value::Null, Value::Number)
        }
        None => v.clone(),
    }
}

/// Converts a value in metres to the power `power` into `unit`.
pub fn convert_value(v: Value, power: i32, unit: LinearUnit) -> Value {
    if power == 0 || unit == LinearUnit::Metre {
        return v;
    }
    match v.as_f64() {
        Some(x) => serde_json::Number::from_f64(x / unit.metres().powi(power))
            .map_or(Value::Null, Value::Number),
        None => v,
    }
}

/// Turns rows into a table in the display unit.
///
/// # Errors
/// `RowError` when a row is not a flat struct (a bug in the caller).
pub fn table<T: Serialize>(
    items: &[T],
    unit: LinearUnit,
    empty_columns: &[&str],
) -> Result<Table, RowError> {
    let mut columns: Option<Vec<String>> = None;
    let mut rows = Vec::with_capacity(items.len());
    for item in items {
        let fields = item.serialize(RowSerializer)?;
        let mut names = Vec::with_capacity(fields.len());
        let mut row = Vec::with_capacity(fields.len());
        for (name, value) in fields {
            let (n, power) = convert_name(name, unit);
            // US practice reports earthwork in cubic yards beside cubic feet.
            let yards = (power == 3 && unit != LinearUnit::Metre).then(|| cubic_yards(&value));
            names.push(n);
            row.push(convert_value(value, power, unit));
            if let Some(v) = yards {
                names.push(yard_name(name));
                row.push(v);
            }
        }
        if columns.is_none() {
            columns = Some(names);
        }
        rows.push(row);
    }
    let columns = columns.unwrap_or_else(|| {
        let mut out = Vec::new();
        for n in empty_columns {
            let (name, power) = convert_name(n, unit);
            out.push(name);
            if power == 3 && unit != LinearUnit::Metre {
                out.push(yard_name(n));
            }
        }
        out
    });
    Ok(Table { columns, rows })
}

impl Table {
    /// CSV text (RFC 4180 quoting, `\n` line ends, header first; missing values empty).
    pub fn to_csv(&self) -> String {
        let mut out = String::new();
        push_csv_line(&mut out, self.columns.iter().map(|c| c.as_str().into()));
        let decimals: Vec<Option<usize>> = self.columns.iter().map(|c| csv_decimals(c)).collect();
        for row in &self.rows {
            push_csv_line(
                &mut out,
                row.iter().zip(&decimals).map(|(v, d)| csv_cell(v, *d)),
            );
        }
        out
    }

    /// JSON text: an array with one object per row, keys in column order.
    pub fn to_json(&self) -> String {
        let mut out = String::from("[");
        for (k, row) in self.rows.iter().enumerate() {
            out.push_str(if k == 0 { "\n  {" } else { ",\n  {" });
            for (i, (name, v)) in self.columns.iter().zip(row).enumerate() {
                out.push_str(if i == 0 { "\n    " } else { ",\n    " });
                out.push_str(&Value::String(name.clone()).to_string());
                out.push_str(": ");
                out.push_str(&v.to_string());
            }
            out.push_str("\n  }");
        }
        out.push_str(if self.rows.is_empty() { "]\n" } else { "\n]\n" });
        out
    }
}

/// Decimals a CSV column is rounded to, from its unit suffix (see the module doc); None = as it is.
pub fn csv_decimals(column: &str) -> Option<usize> {
    let ends = |tails: &[&str]| tails.iter().any(|t| column.ends_with(t));
    if ends(&["_m3", "_ft3", "_usft3", "_yd3", "_m2", "_ft2", "_usft2"]) {
        Some(1)
    } else if ends(&["_per_yr", "_m", "_ft", "_usft", "_crs"]) {
        Some(3)
    } else if column.ends_with("_deg") {
        Some(2)
    } else {
        None
    }
}

fn csv_cell(v: &Value, decimals: Option<usize>) -> std::borrow::Cow<'_, str> {
    match (v, decimals) {
        (Value::Null, _) => "".into(),
        (Value::String(s), _) => s.as_str().into(),
        (Value::Number(n), Some(d)) if n.is_f64() => {
            let x = n.as_f64().unwrap_or(f64::NAN);
            let s = format!("{x:.d$}");
            // No "-0.000": a value that rounds to zero is zero.
            if s.trim_start_matches('-')
                .chars()
                .all(|c| c == '0' || c == '.')
            {
                s.trim_start_matches('-').to_string().into()
            } else {
                s.into()
            }
        }
        (other, _) => other.to_string().into(),
    }
}

fn push_csv_line<'a>(out: &mut String, cells: impl Iterator<Item = std::borrow::Cow<'a, str>>) {
    for (i, c) in cells.enumerate() {
        if i > 0 {
            out.push(',');
        }
        if c.contains([',', '"', '\n', '\r']) {
            out.push('"');
            out.push_str(&c.replace('"', "\"\""));
            out.push('"');
        } else {
            out.push_str(&c);
        }
    }
    out.push('\n');
}

/// Serializes a flat struct into its (field name, value) pairs in declaration order.
struct RowSerializer;

/// Collects the fields of one struct.
struct RowFields(Vec<(&'static str, Value)>);

impl SerializeStruct for RowFields {
    type Ok = Vec<(&'static str, Value)>;
    type Error = RowError;
    fn serialize_field<T: ?Sized + Serialize>(
        &mut self,
        key: &'static str,
        value: &T,
    ) -> Result<(), RowError> {
        let v = serde_json::to_value(value).map_err(|e| RowError(format!("field {key}: {e}")))?;
        if v.is_object() || v.is_array() {
            return Err(RowError(format!(
                "field {key} is not a single value; rows must be flat"
            )));
        }
        self.0.push((key, v));
        Ok(())
    }
    fn end(self) -> Result<Self::Ok, RowError> {
        Ok(self.0)
    }
}

macro_rules! refuse {
    ($($name:ident($($arg:ty),*);)*) => {
        $(fn $name(self, $(_: $arg),*) -> Result<Self::Ok, RowError> {
            Err(RowError("a table row must be a struct".into()))
        })*
    };
}

impl Serializer for RowSerializer {
    type Ok = Vec<(&'static str, Value)>;
    type Error = RowError;
    type SerializeSeq = Impossible<Self::Ok, RowError>;
    type SerializeTuple = Impossible<Self::Ok, RowError>;
    type SerializeTupleStruct = Impossible<Self::Ok, RowError>;
    type SerializeTupleVariant = Impossible<Self::Ok, RowError>;
    type SerializeMap = Impossible<Self::Ok, RowError>;
    type SerializeStruct = RowFields;
    type SerializeStructVariant = Impossible<Self::Ok, RowError>;

    refuse! {
        serialize_bool(bool); serialize_i8(i8); serialize_i16(i16); serialize_i32(i32); serialize_i64(i64);
        serialize_u8(u8); serialize_u16(u16); serialize_u32(u32); serialize_u64(u64);
        serialize_f32(f32); serialize_f64(f64); serialize_char(char); serialize_str(&str);
        serialize_bytes(&[u8]); serialize_none(); serialize_unit(); serialize_unit_struct(&'static str);
        serialize_unit_variant(&'static str, u32, &'static str);
    }
    fn serialize_some<T: ?Sized + Serialize>(self, _: &T) -> Result<Self::Ok, RowError> {
        Err(RowError("a table row must be a struct".into()))
    }
    fn serialize_newtype_struct<T: ?Sized + Serialize>(
        self,
        _: &'static str,
        v: &T,
    ) -> Result<Self::Ok, RowError> {
        v.serialize(self)
    }
    fn serialize_newtype_variant<T: ?Sized + Serialize>(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: &T,
    ) -> Result<Self::Ok, RowError> {
        Err(RowError("a table row must be a struct".into()))
    }
    fn serialize_seq(self, _: Option<usize>) -> Result<Self::SerializeSeq, RowError> {
        Err(RowError("a table row must be a struct".into()))
    }
    fn serialize_tuple(self, _: usize) -> Result<Self::SerializeTuple, RowError> {
        Err(RowError("a table row must be a struct".into()))
    }
    fn serialize_tuple_struct(
        self,
        _: &'static str,
        _: usize,
    ) -> Result<Self::SerializeTupleStruct, RowError> {
        Err(RowError("a table row must be a struct".into()))
    }
    fn serialize_tuple_variant(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: usize,
    ) -> Result<Self::SerializeTupleVariant, RowError> {
        Err(RowError("a table row must be a struct".into()))
    }
    fn serialize_map(self, _: Option<usize>) -> Result<Self::SerializeMap, RowError> {
        Err(RowError("a table row must be a struct".into()))
    }
    fn serialize_struct(
        self,
        _: &'static str,
        len: usize,
    ) -> Result<Self::SerializeStruct, RowError> {
        Ok(RowFields(Vec::with_capacity(len)))
    }
    fn serialize_struct_variant(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: usize,
    ) -> Result<Self::SerializeStructVariant, RowError> {
        Err(RowError("a table row must be a struct".into()))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(serde::Serialize)]
    struct Row {
        id: &'static str,
        depth_m: f64,
        area_m2: f64,
        net_volume_m3: f64,
        rate_m_per_yr: Option<f64>,
        x_crs: f64,
        note: &'static str,
    }

    fn rows() -> Vec<Row> {
        vec![
            Row {
                id: "a",
                depth_m: 30.480_061,
                area_m2: 1.0,
                net_volume_m3: 1.0,
                rate_m_per_yr: None,
                x_crs: 5.0,
                note: "x, \"y\"",
            },
            Row {
                id: "b",
                depth_m: 1.0,
                area_m2: 0.0,
                net_volume_m3: -2.5,
                rate_m_per_yr: Some(0.3048),
                x_crs: 6.0,
                note: "",
            },
        ]
    }

    #[test]
    fn metres_pass_through_in_field_order() {
        let t = table(&rows(), LinearUnit::Metre, &[]).unwrap();
        assert_eq!(
            t.columns,
            [
                "id",
                "depth_m",
                "area_m2",
                "net_volume_m3",
                "rate_m_per_yr",
                "x_crs",
                "note"
            ]
        );
        let csv = t.to_csv();
        let mut lines = csv.lines();
        assert_eq!(
            lines.next().unwrap(),
            "id,depth_m,area_m2,net_volume_m3,rate_m_per_yr,x_crs,note"
        );
        assert_eq!(
            lines.next().unwrap(),
            "a,30.480,1.0,1.0,,5.000,\"x, \"\"y\"\"\""
        );
        // JSON keeps every digit; CSV is rounded to the millimetre and 0.1 m³ (module doc).
        let back: serde_json::Value = serde_json::from_str(&t.to_json()).unwrap();
        assert_eq!(back[1]["net_volume_m3"], -2.5);
        assert_eq!(back[0]["depth_m"], 30.480061);
        assert!(back[0]["rate_m_per_yr"].is_null());
    }

    #[test]
    fn feet_rename_and_convert() {
        let t = table(&rows(), LinearUnit::UsSurveyFoot, &[]).unwrap();
        assert_eq!(
            t.columns,
            [
                "id",
                "depth_usft",
                "area_usft2",
                "net_volume_usft3",
                "net_volume_yd3",
                "rate_usft_per_yr",
                "x_crs",
                "note"
            ]
        );
        // Check: 85 FR 62698 (NIST/NOAA 2020) — 30.4800610 m = 100 US ft; hand-computed, abs diff < 1e-6
        assert!((t.rows[0][1].as_f64().unwrap() - 100.0).abs() < 1e-6);
        // Check: 85 FR 62698 — 1 m2 = 3.2808333^2 = 10.763867 US ft2; hand-computed, abs diff < 1e-5
        assert!((t.rows[0][2].as_f64().unwrap() - 10.763_867).abs() < 1e-5);
        // Check: 85 FR 62698 — 1 m3 = (3937/1200)^3 = 35.314455 US ft3; hand-computed, abs diff < 1e-5
        assert!((t.rows[0][3].as_f64().unwrap() - 35.314_455).abs() < 1e-5);
        // Map coordinates stay in CRS units.
        assert_eq!(t.rows[0][6].as_f64().unwrap(), 5.0);
        // Feet bring a cubic-yard column right after every volume.
        assert_eq!(t.columns[4], "net_volume_yd3");
        // Check: NIST Handbook 44 — 1 yd³ = 0.764554857984 m³, so 1 m³ = 1.307950619 yd³; hand-computed, abs diff < 1e-9
        assert!((t.rows[0][4].as_f64().unwrap() - 1.307_950_619).abs() < 1e-9);
        let t = table(&rows(), LinearUnit::Foot, &[]).unwrap();
        assert_eq!(t.columns[3], "net_volume_ft3");
        assert_eq!(t.columns[4], "net_volume_yd3");
        // Check: NIST Handbook 44 — -2.5 m³ = -3.269876548 yd³ (-2.5 / 0.764554857984); abs diff < 1e-9
        assert!((t.rows[1][4].as_f64().unwrap() + 3.269_876_548).abs() < 1e-9);
        // 1 yd³ = 27 ft³ exactly (international units): the two columns agree.
        assert!(
            (t.rows[1][3].as_f64().unwrap() / t.rows[1][4].as_f64().unwrap() - 27.0).abs() < 1e-9
        );
        // Check: international foot 0.3048 m exactly (85 FR 62698 restates it) — 0.3048 m/yr = 1 ft/yr; abs diff < 1e-12
        assert!((t.rows[1][5].as_f64().unwrap() - 1.0).abs() < 1e-12);
        // Check: 85 FR 62698 — 1 m = 3.2808399 international ft = 3.2808333 US ft; abs diff < 1e-7
        assert!((t.rows[1][1].as_f64().unwrap() - 3.280_839_9).abs() < 1e-7);
        let us = table(&rows(), LinearUnit::UsSurveyFoot, &[]).unwrap();
        assert!((us.rows[1][1].as_f64().unwrap() - 3.280_833_3).abs() < 1e-7);
    }

    #[test]
    fn empty_tables_keep_a_header() {
        let t = table::<Row>(&[], LinearUnit::Foot, &["distance_m", "id"]).unwrap();
        assert_eq!(t.to_csv(), "distance_ft,id\n");
        let t = table::<Row>(&[], LinearUnit::Foot, &["net_volume_m3"]).unwrap();
        assert_eq!(t.to_csv(), "net_volume_ft3,net_volume_yd3\n");
        assert_eq!(t.to_json(), "[]\n");
    }
}
