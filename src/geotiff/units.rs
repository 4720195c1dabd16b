//! GeoKeys -> CRS code, horizontal and vertical units, and the raster type (area or point).
//!
//! Keys per OGC GeoTIFF 1.1 (REFERENCES.md §9). Messages are returned as text without the file name;
//! the caller adds it.

use super::keys::{self, GeoKeys};
use crate::grid::{LinearUnit, UnitSource};

/// The CRS facts the rest of the program needs.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Units {
    /// EPSG code of the projected CRS, if the file gives one.
    pub epsg: Option<u32>,
    /// Unit of the map coordinates.
    pub horizontal: LinearUnit,
    /// Where `horizontal` came from: the file, or assumed (metres).
    pub horizontal_source: UnitSource,
    /// Unit of the stored elevations.
    pub vertical: LinearUnit,
    /// Where `vertical` came from: the file, or assumed (metres).
    pub vertical_source: UnitSource,
    /// True for PixelIsPoint rasters.
    pub pixel_is_point: bool,
}

/// Reads model type, raster type, CRS code and units from the GeoKeys.
///
/// Units come from ProjLinearUnitsGeoKey / VerticalUnitsGeoKey when present. Writers often leave
/// them out when an EPSG code says it all (GDAL 3.6 writes only ProjectedCRSGeoKey and VerticalGeoKey
/// for EPSG:2227+6360, see tests/fixtures/geotiff), so next come a few well-known EPSG codes, then
/// the EPSG naming habit of ending a CRS name in `(ftUS)`, `(ft)` or `(m)` read from the citation
/// keys, and last metres, marked [`UnitSource::Assumed`] so the caller can warn (or apply what the
/// job states).
///
/// # Errors
/// A message naming the key at fault: a geographic or geocentric model (degrees are not supported),
/// or a unit code other than metre, foot or US survey foot.
pub fn units(keys: &GeoKeys) -> Result<Units, String> {
    match keys.short(keys::MODEL_TYPE) {
        Some(2) => {
            return Err(
                "GTModelTypeGeoKey (1024) = 2: the grid is in geographic coordinates (degrees); \
                        reproject it to a projected CRS in metres or feet"
                    .into(),
            )
        }
        Some(3) => {
            return Err(
                "GTModelTypeGeoKey (1024) = 3: geocentric coordinates are not supported; \
                        reproject the grid to a projected CRS in metres or feet"
                    .into(),
            )
        }
        _ => {}
    }
    let pixel_is_point = match keys.short(keys::RASTER_TYPE) {
        None | Some(1) => false,
        Some(2) => true,
        Some(other) => {
            log::warn!(
                "GTRasterTypeGeoKey (1025) = {other} is not defined; reading as PixelIsArea"
            );
            false
        }
    };
    // 0 is "undefined" and 32767 "user-defined" in GeoTIFF; neither is an EPSG code.
    let code = |id| keys.short(id).filter(|&c| c != 0 && c != 32767);
    let epsg = code(keys::PROJECTED_CRS).map(u32::from);
    let (horizontal_name, vertical_name) = crs_names(keys);
    let (horizontal, horizontal_source) = match code(keys::PROJ_LINEAR_UNITS) {
        Some(c) => (
            unit_key(c, "ProjLinearUnitsGeoKey (3076)", "reproject the grid to")?,
            UnitSource::File,
        ),
        None => match epsg
            .and_then(horizontal_unit_of_crs)
            .or_else(|| horizontal_name.and_then(unit_in_name))
        {
            Some(unit) => (unit, UnitSource::File),
            None => (LinearUnit::Metre, UnitSource::Assumed),
        },
    };
    let vertical_crs = code(keys::VERTICAL_CRS);
    let (vertical, vertical_source) = match code(keys::VERTICAL_UNITS) {
        Some(c) => (
            unit_key(c, "VerticalUnitsGeoKey (4099)", "convert the elevations to")?,
            UnitSource::File,
        ),
        None => match vertical_crs
            .and_then(vertical_unit_of_crs)
            .or_else(|| vertical_name.and_then(unit_in_name))
        {
            Some(unit) => (unit, UnitSource::File),
            None => (LinearUnit::Metre, UnitSource::Assumed),
        },
    };
    Ok(Units {
        epsg,
        horizontal,
        horizontal_source,
        vertical,
        vertical_source,
        pixel_is_point,
    })
}

fn unit_key(code: u16, key: &str, fix: &str) -> Result<LinearUnit, String> {
    LinearUnit::from_epsg(code).ok_or_else(|| {
        format!("{key} = {code} is not a unit this program reads; {fix} metres (9001), feet (9002) or US survey feet (9003)")
    })
}

/// Names of the horizontal and vertical CRS from the citation keys. A compound citation such as
/// "NAD83 / California zone 3 (ftUS) + NAVD88 height (ftUS)" (as GDAL writes it) is split at " + ".
fn crs_names(keys: &GeoKeys) -> (Option<&str>, Option<&str>) {
    let cited = keys
        .ascii(keys::CITATION)
        .map(|c| match c.split_once(" + ") {
            Some((h, v)) => (h, Some(v)),
            None => (c, None),
        });
    let horizontal = keys
        .ascii(keys::PROJECTED_CITATION)
        .or(cited.map(|(h, _)| h));
    let vertical = keys
        .ascii(keys::VERTICAL_CITATION)
        .or(cited.and_then(|(_, v)| v));
    (horizontal, vertical)
}

/// Unit from the EPSG naming habit of a trailing "(ftUS)", "(ft)" or "(m)" (from memory; checked
/// on the GDAL-written fixtures usft_f32.tif and ft_f32.tif).
fn unit_in_name(name: &str) -> Option<LinearUnit> {
    if name.contains("(ftUS)") || name.contains("(US survey foot)") {
        Some(LinearUnit::UsSurveyFoot)
    } else if name.contains("(ft)") || name.contains("(foot)") {
        Some(LinearUnit::Foot)
    } else if name.contains("(m)") || name.contains("(metre)") {
        Some(LinearUnit::Metre)
    } else {
        None
    }
}

/// Unit of a few well-known metric CRS families, from their EPSG code ranges (from memory):
/// WGS 84 / UTM north 32601–32660 and south 32701–32760, NAD83 / UTM 26901–26923,
/// ETRS89 / UTM 25828–25838, and Web Mercator 3857.
fn horizontal_unit_of_crs(epsg: u32) -> Option<LinearUnit> {
    match epsg {
        32601..=32660 | 32701..=32760 | 26901..=26923 | 25828..=25838 | 3857 => {
            Some(LinearUnit::Metre)
        }
        _ => None,
    }
}

/// Unit of a few common vertical CRSs. 6360 (NAVD88 height (ftUS)) and 8228 (NAVD88 height (ft)) are
/// confirmed by GDAL 3.6.2 on the fixtures; 5703 NAVD88 height, 5714 MSL height, 5773 EGM96 height,
/// 3855 EGM2008 height (metres) and 5702 NGVD29 height (ftUS) are from memory.
fn vertical_unit_of_crs(code: u16) -> Option<LinearUnit> {
    match code {
        5703 | 5714 | 5773 | 3855 => Some(LinearUnit::Metre),
        6360 | 5702 => Some(LinearUnit::UsSurveyFoot),
        8228 => Some(LinearUnit::Foot),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn units_from_keys() {
        let dir = [
            1, 1, 0, 4, 1024, 0, 1, 1, 1025, 0, 1, 2, 3072, 0, 1, 2227, 3076, 0, 1, 9003,
        ];
        let u = units(&GeoKeys::parse(&dir, &[], "").unwrap()).unwrap();
        assert_eq!(u.epsg, Some(2227));
        assert_eq!(u.horizontal, LinearUnit::UsSurveyFoot);
        assert_eq!(u.vertical, LinearUnit::Metre);
        assert!(u.pixel_is_point);
        let utm =
            GeoKeys::parse(&[1, 1, 0, 2, 3072, 0, 1, 32633, 4099, 0, 1, 9002], &[], "").unwrap();
        let u = units(&utm).unwrap();
        assert_eq!(
            (u.horizontal, u.vertical, u.pixel_is_point),
            (LinearUnit::Metre, LinearUnit::Foot, false)
        );
        let geographic = GeoKeys::parse(&[1, 1, 0, 1, 1024, 0, 1, 2], &[], "").unwrap();
        assert!(units(&geographic).unwrap_err().contains("degrees"));
        let odd = GeoKeys::parse(&[1, 1, 0, 1, 4099, 0, 1, 9036], &[], "").unwrap();
        assert!(units(&odd)
            .unwrap_err()
            .contains("VerticalUnitsGeoKey (4099) = 9036"));
    }

    #[test]
    fn units_from_codes_and_citations() {
        // Keys as GDAL 3.6.2 writes them for EPSG:2227+6360 (tests/fixtures/geotiff/usft_f32.tif):
        // no unit keys, only the CRS codes and a compound citation.
        let cite = "NAD83 / California zone 3 (ftUS) + NAVD88 height (ftUS)|";
        let dir = [
            1,
            1,
            0,
            3,
            1026,
            34737,
            cite.len() as u16,
            0,
            3072,
            0,
            1,
            2227,
            4096,
            0,
            1,
            6360,
        ];
        let u = units(&GeoKeys::parse(&dir, &[], cite).unwrap()).unwrap();
        assert_eq!(
            (u.horizontal, u.vertical),
            (LinearUnit::UsSurveyFoot, LinearUnit::UsSurveyFoot)
        );
        // A vertical CRS code this program does not know falls back to the citation's "(ft)".
        let cite = "Some grid (ft) + Local height (ft)|";
        let dir = [
            1,
            1,
            0,
            3,
            1026,
            34737,
            cite.len() as u16,
            0,
            3072,
            0,
            1,
            2222,
            4096,
            0,
            1,
            9999,
        ];
        let u = units(&GeoKeys::parse(&dir, &[], cite).unwrap()).unwrap();
        assert_eq!(
            (u.horizontal, u.vertical),
            (LinearUnit::Foot, LinearUnit::Foot)
        );
        // Nothing to go on: metres.
        let u = units(&GeoKeys::parse(&[1, 1, 0, 1, 3072, 0, 1, 2222], &[], "").unwrap()).unwrap();
        assert_eq!(
            (u.horizontal, u.vertical),
            (LinearUnit::Metre, LinearUnit::Metre)
        );
    }
}
