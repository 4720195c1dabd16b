//! GeoKeyDirectory (tag 34735) + GeoDoubleParams (34736) + GeoAsciiParams (34737) -> `GeoKeys`.
//!
//! Layout per OGC GeoTIFF 1.1 (OGC 19-008r4, REFERENCES.md §9): a header of four SHORTs
//! `{KeyDirectoryVersion = 1, KeyRevision, MinorRevision, NumberOfKeys}`, then four SHORTs per key
//! `{KeyID, TIFFTagLocation, Count, ValueOrOffset}`. Location 0 means the value is the SHORT itself;
//! 34736 and 34737 point into the double and ASCII parameter tags; 34735 points back into the
//! directory. Parsing never panics: every index is checked and a bad directory gives a message
//! naming the key at fault.

/// GTModelTypeGeoKey: 1 projected, 2 geographic, 3 geocentric.
pub const MODEL_TYPE: u16 = 1024;
/// GTRasterTypeGeoKey: 1 PixelIsArea, 2 PixelIsPoint.
pub const RASTER_TYPE: u16 = 1025;
/// GTCitationGeoKey: free text, usually the CRS name.
pub const CITATION: u16 = 1026;
/// ProjectedCRSGeoKey (called ProjectedCSTypeGeoKey in GeoTIFF 1.0).
pub const PROJECTED_CRS: u16 = 3072;
/// ProjectedCitationGeoKey (PCSCitationGeoKey in 1.0): name of the projected CRS.
pub const PROJECTED_CITATION: u16 = 3073;
/// ProjLinearUnitsGeoKey: EPSG unit-of-measure code of the map coordinates.
pub const PROJ_LINEAR_UNITS: u16 = 3076;
/// VerticalGeoKey (VerticalCSTypeGeoKey in 1.0): EPSG code of the vertical CRS.
pub const VERTICAL_CRS: u16 = 4096;
/// VerticalCitationGeoKey: name of the vertical CRS.
pub const VERTICAL_CITATION: u16 = 4097;
/// VerticalUnitsGeoKey: EPSG unit-of-measure code of the elevations.
pub const VERTICAL_UNITS: u16 = 4099;

/// Tag numbers a key may point into.
const TAG_KEY_DIRECTORY: u16 = 34735;
const TAG_DOUBLE_PARAMS: u16 = 34736;
const TAG_ASCII_PARAMS: u16 = 34737;

/// The value of one GeoKey.
#[derive(Debug, Clone, PartialEq)]
pub enum KeyValue {
    /// One or more SHORTs (inline, or from the directory itself).
    Shorts(Vec<u16>),
    /// Values from GeoDoubleParams.
    Doubles(Vec<f64>),
    /// Text from GeoAsciiParams, without the `|` terminator.
    Ascii(String),
}

/// Parsed GeoKeys, in directory order.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct GeoKeys {
    entries: Vec<(u16, KeyValue)>,
}

impl GeoKeys {
    /// Parses the three GeoTIFF key tags. `doubles` and `ascii` are empty when their tags are absent.
    ///
    /// # Errors
    /// A message (without the file name) naming the key or header field at fault.
    pub fn parse(dir: &[u16], doubles: &[f64], ascii: &str) -> Result<Self, String> {
        let [version, revision, minor, count] = match dir.get(..4) {
            Some(&[a, b, c, d]) => [a, b, c, d],
            _ => {
                return Err(format!(
                    "GeoKeyDirectory (tag 34735) has {} values, fewer than its 4-value header; \
                     the georeferencing is damaged, write the GeoTIFF again",
                    dir.len()
                ))
            }
        };
        if version != 1 {
            return Err(format!(
                "GeoKeyDirectory (tag 34735) has KeyDirectoryVersion {version}, only 1 is defined \
                 (OGC GeoTIFF 1.1); write the GeoTIFF again with a current tool"
            ));
        }
        if revision != 1 {
            log::warn!("GeoKeyDirectory revision {revision}.{minor}; reading it as revision 1");
        }
        let count = usize::from(count);
        let needed = 4 + 4 * count;
        if dir.len() < needed {
            return Err(format!(
                "GeoKeyDirectory (tag 34735) announces {count} keys ({needed} values) but holds only {} \
                 values; the file is damaged, write the GeoTIFF again",
                dir.len()
            ));
        }
        let mut entries = Vec::with_capacity(count);
        for entry in dir[4..needed].chunks_exact(4) {
            let (id, location, n, offset) = (
                entry[0],
                entry[1],
                usize::from(entry[2]),
                usize::from(entry[3]),
            );
            let value = match location {
                0 => KeyValue::Shorts(vec![entry[3]]),
                TAG_KEY_DIRECTORY => KeyValue::Shorts(
                    slice_at(dir, offset, n)
                        .ok_or_else(|| {
                            out_of_range(id, "GeoKeyDirectory (tag 34735)", offset, n, dir.len())
                        })?
                        .to_vec(),
                ),
                TAG_DOUBLE_PARAMS => KeyValue::Doubles(
                    slice_at(doubles, offset, n)
                        .ok_or_else(|| {
                            out_of_range(
                                id,
                                "GeoDoubleParams (tag 34736)",
                                offset,
                                n,
                                doubles.len(),
                            )
                        })?
                        .to_vec(),
                ),
                TAG_ASCII_PARAMS => {
                    let bytes = ascii.as_bytes();
                    let raw = slice_at(bytes, offset, n).ok_or_else(|| {
                        out_of_range(id, "GeoAsciiParams (tag 34737)", offset, n, bytes.len())
                    })?;
                    let text = String::from_utf8_lossy(raw);
                    KeyValue::Ascii(text.trim_end_matches(['|', '\0']).to_string())
                }
                other => {
                    log::warn!("GeoKey {id} points into tag {other}, which GeoTIFF does not define; key ignored");
                    continue;
                }
            };
            entries.push((id, value));
        }
        Ok(GeoKeys { entries })
    }

    /// The value of a key, if present.
    pub fn get(&self, id: u16) -> Option<&KeyValue> {
        self.entries.iter().find(|(k, _)| *k == id).map(|(_, v)| v)
    }

    /// The single SHORT of a key, if present and of that type.
    pub fn short(&self, id: u16) -> Option<u16> {
        match self.get(id) {
            Some(KeyValue::Shorts(v)) => v.first().copied(),
            _ => None,
        }
    }

    /// The text of an ASCII key, if present and of that type.
    pub fn ascii(&self, id: u16) -> Option<&str> {
        match self.get(id) {
            Some(KeyValue::Ascii(s)) => Some(s),
            _ => None,
        }
    }

    /// Number of keys parsed.
    #[cfg(test)]
    pub fn len(&self) -> usize {
        self.entries.len()
    }
}

fn slice_at<T>(values: &[T], offset: usize, n: usize) -> Option<&[T]> {
    values.get(offset..offset.checked_add(n)?)
}

fn out_of_range(id: u16, tag: &str, offset: usize, n: usize, len: usize) -> String {
    format!(
        "GeoKey {id} points at values {offset}..{} of {tag}, which holds only {len}; \
         the georeferencing is damaged, write the GeoTIFF again",
        offset + n
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn inline_double_and_ascii_keys() {
        // Check: OGC GeoTIFF 1.1 GeoKeyDirectory layout — header {1,1,0,N}, then {id, location, count,
        // value}; REFERENCES.md §9. Hand-built directory with one key of each storage kind.
        let dir = [
            1, 1, 0, 4, 1024, 0, 1, 1, 1026, 34737, 6, 0, 3072, 0, 1, 32611, 4099, 34736, 1, 1,
        ];
        let keys = GeoKeys::parse(&dir, &[0.5, 9003.0], "dunes|").unwrap();
        assert_eq!(keys.len(), 4);
        assert_eq!(keys.short(MODEL_TYPE), Some(1));
        assert_eq!(keys.short(PROJECTED_CRS), Some(32611));
        assert_eq!(keys.get(1026), Some(&KeyValue::Ascii("dunes".into())));
        assert_eq!(
            keys.get(VERTICAL_UNITS),
            Some(&KeyValue::Doubles(vec![9003.0]))
        );
        assert_eq!(keys.short(VERTICAL_UNITS), None);
        assert_eq!(keys.short(RASTER_TYPE), None);
    }

    #[test]
    fn key_count_beyond_directory_is_refused() {
        let err = GeoKeys::parse(&[1, 1, 0, 3, 1024, 0, 1, 1], &[], "").unwrap_err();
        assert!(err.contains("34735") && err.contains("3 keys"), "{err}");
    }

    #[test]
    fn short_header_and_bad_version_are_refused() {
        assert!(GeoKeys::parse(&[1, 1], &[], "")
            .unwrap_err()
            .contains("header"));
        assert!(GeoKeys::parse(&[2, 1, 0, 0], &[], "")
            .unwrap_err()
            .contains("KeyDirectoryVersion 2"));
    }

    #[test]
    fn offsets_outside_parameter_tags_are_refused() {
        let err =
            GeoKeys::parse(&[1, 1, 0, 1, 2049, 34737, 10, 60000], &[], "WGS 84|").unwrap_err();
        assert!(
            err.contains("GeoKey 2049") && err.contains("34737"),
            "{err}"
        );
        let err = GeoKeys::parse(&[1, 1, 0, 1, 2057, 34736, 2, 65535], &[1.0], "").unwrap_err();
        assert!(err.contains("34736"), "{err}");
    }

    #[test]
    fn unknown_location_is_skipped() {
        let keys =
            GeoKeys::parse(&[1, 1, 0, 2, 3072, 12345, 1, 0, 1025, 0, 1, 2], &[], "").unwrap();
        assert_eq!(keys.len(), 1);
        assert_eq!(keys.short(RASTER_TYPE), Some(2));
    }
}
