//! GeoTIFF paths -> the text of a new, commented job file (`dunereel new`).
//!
//! Each grid's date comes from an ISO 8601 date in its file name (`2031-03-27`, or the basic form
//! `20310327` standing alone between non-digits), or, when the name has none, from the TIFF DateTime
//! tag (306, `YYYY:MM:DD HH:MM:SS`). Every grid is read in full, so a job drafted here passes the
//! grid checks of `dunereel check`. Surveys are sorted by date, paths are written relative to the job
//! file's folder, the output folder is named after the site, and the main options are listed with
//! their defaults as comments, ready to be switched on.
//!
//! Refused, naming the files: a name with two different dates, a grid with no date at all, two grids
//! on one date, a grid that cannot be read.

use std::path::{Component, Path, PathBuf};

use chrono::NaiveDate;

use crate::error::{Error, Result};
use crate::grid::UnitSource;

/// One grid with the date found for it.
#[derive(Debug, Clone, PartialEq, Eq)]
struct Found {
    path: PathBuf,
    date: NaiveDate,
    /// Where the date came from, for the comment beside the survey.
    from: &'static str,
    /// The file states no vertical unit: the draft says so beside the survey.
    unit_unstated: bool,
}

/// Dates written in a file name: extended `YYYY-MM-DD` anywhere, or basic `YYYYMMDD` standing
/// alone (not part of a longer run of digits). Only real calendar dates count.
pub fn dates_in_name(name: &str) -> Vec<NaiveDate> {
    let b = name.as_bytes();
    let digit = |i: usize| b.get(i).is_some_and(u8::is_ascii_digit);
    let mut out = Vec::new();
    let mut i = 0;
    while i < b.len() {
        if !digit(i) || (i > 0 && digit(i - 1)) {
            i += 1;
            continue;
        }
        let run = (i..b.len()).take_while(|&k| digit(k)).count();
        let text = &name[i..];
        let extended = run == 4
            && text.len() >= 10
            && b[i + 4] == b'-'
            && b[i + 7] == b'-'
            && (i + 5..i + 7).all(digit)
            && (i + 8..i + 10).all(digit)
            && !digit(i + 10);
        let parsed = if extended {
            NaiveDate::parse_from_str(&text[..10], "%Y-%m-%d").ok()
        } else if run == 8 {
            NaiveDate::parse_from_str(&text[..8], "%Y%m%d").ok()
        } else {
            None
        };
        if let Some(d) = parsed {
            if !out.contains(&d) {
                out.push(d);
            }
        }
        i += run.max(1);
    }
    out
}

/// The date of the TIFF DateTime tag (306), if the file has a readable one.
fn tiff_date(path: &Path) -> Option<NaiveDate> {
    let file = std::fs::File::open(path).ok()?;
    let mut dec = tiff::decoder::Decoder::new(std::io::BufReader::new(file)).ok()?;
    let text = dec.get_tag_ascii_string(tiff::tags::Tag::DateTime).ok()?;
    // TIFF 6.0: "YYYY:MM:DD HH:MM:SS"; from memory, and some writers use dashes.
    let day = text.trim().get(..10)?.replace(':', "-");
    NaiveDate::parse_from_str(&day, "%Y-%m-%d").ok()
}

fn find_date(path: &Path) -> Result<(NaiveDate, &'static str)> {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let dates = dates_in_name(&name);
    match dates.as_slice() {
        [d] => Ok((*d, "file name")),
        [] => tiff_date(path)
            .map(|d| (d, "TIFF DateTime tag"))
            .ok_or_else(|| {
                Error::input(
                path,
                "has no date in its name and no DateTime tag (306); rename it with the survey date \
                 (e.g. site-2031-03-27.tif)",
            )
            }),
        many => Err(Error::input(
            path,
            format!(
                "its name holds {} dates ({}); rename it so it holds only the survey date",
                many.len(),
                many.iter()
                    .map(NaiveDate::to_string)
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        )),
    }
}

/// `target` written relative to the folder `base` (both absolute), with forward slashes.
pub fn relative_path(target: &Path, base: &Path) -> String {
    let t: Vec<Component> = target.components().collect();
    let b: Vec<Component> = base.components().collect();
    let common = t.iter().zip(&b).take_while(|(x, y)| x == y).count();
    if common == 0 {
        return target.to_string_lossy().replace('\\', "/");
    }
    let mut parts: Vec<String> = vec!["..".into(); b.len() - common];
    parts.extend(
        t[common..]
            .iter()
            .map(|c| c.as_os_str().to_string_lossy().into_owned()),
    );
    parts.join("/")
}

/// A short site name from the grids' file names: what they share before the date, else their folder.
fn site_name(found: &[Found]) -> String {
    let stems: Vec<String> = found
        .iter()
        .map(|f| {
            let name = f
                .path
                .file_stem()
                .unwrap_or_default()
                .to_string_lossy()
                .into_owned();
            let cut = name
                .find(|c: char| c.is_ascii_digit())
                .unwrap_or(name.len());
            name[..cut]
                .trim_matches(|c: char| !c.is_alphanumeric())
                .to_string()
        })
        .collect();
    let first = stems.first().cloned().unwrap_or_default();
    if !first.is_empty() && stems.iter().all(|s| *s == first) {
        return first;
    }
    found
        .first()
        .and_then(|f| f.path.parent())
        .and_then(|p| p.file_name())
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "site".into())
}

/// A name safe in a folder path: lower-case letters, digits and dashes.
fn slug(name: &str) -> String {
    let s: String = name
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() {
                c.to_ascii_lowercase()
            } else {
                '-'
            }
        })
        .collect();
    let s = s
        .split('-')
        .filter(|p| !p.is_empty())
        .collect::<Vec<_>>()
        .join("-");
    if s.is_empty() {
        "site".into()
    } else {
        s
    }
}

/// Writes the text of a new job file for `grids`, to be saved as `job_path`.
///
/// # Errors
/// `Error::Input` naming the file: no date, several dates in one name, two grids on one date, a grid
/// that cannot be read (as `dunereel check` would say).
pub fn draft(grids: &[PathBuf], job_path: &Path) -> Result<String> {
    if grids.is_empty() {
        return Err(Error::input(
            job_path,
            "no grids given; list the survey GeoTIFFs after `dunereel new`",
        ));
    }
    let job_abs = std::path::absolute(job_path).map_err(|e| Error::io(job_path, e))?;
    let job_dir = job_abs.parent().unwrap_or(Path::new("/")).to_path_buf();
    let mut found = Vec::with_capacity(grids.len());
    for g in grids {
        let path = std::path::absolute(g).map_err(|e| Error::io(g, e))?;
        // The grid first: its reading checks the TIFF structure against the file's length, so the
        // DateTime tag read after it cannot ask for more than the file holds (found by the
        // mutation test of the readers).
        let (_, source) = crate::geotiff::read_grid(&path)?;
        let (date, from) = find_date(&path)?;
        found.push(Found {
            path,
            date,
            from,
            unit_unstated: source.vertical_unit_source == UnitSource::Assumed,
        });
    }
    found.sort_by(|a, b| a.date.cmp(&b.date).then(a.path.cmp(&b.path)));
    for w in found.windows(2) {
        if w[0].date == w[1].date {
            return Err(Error::input(
                &w[1].path,
                format!(
                    "has the same date ({}) as {}; a job holds one survey per date: leave one out, or \
                     rename the one whose date is wrong",
                    w[1].date,
                    w[0].path.display()
                ),
            ));
        }
    }
    if found.len() < 2 {
        return Err(Error::input(
            &found[0].path,
            "is the only grid; a job needs at least two dated surveys to show change",
        ));
    }
    let site = site_name(&found);
    let (first, last) = (found[0].date, found[found.len() - 1].date);
    let mut t = String::new();
    let shown = job_path.display();
    t.push_str(&format!(
        "# Job file for {site}, drafted by `dunereel new` from {} grids.\n",
        found.len()
    ));
    t.push_str(&format!(
        "# Check it with `dunereel check {shown}`, then render it with `dunereel render {shown}`.\n"
    ));
    t.push_str("# Every key is explained in the README's job file section.\n");
    t.push_str("format_version: 1\n");
    t.push_str(&format!(
        "title: {}\n\n",
        yaml_text(&format!(
            "{site}, {}-{}",
            first.format("%Y"),
            last.format("%Y")
        ))
    ));
    t.push_str("surveys:\n");
    for f in &found {
        t.push_str(&format!(
            "  - date: {}            # from the {}\n    grid: {}\n",
            f.date,
            f.from,
            yaml_text(&relative_path(&f.path, &job_dir))
        ));
        t.push_str("    # sigma_z_m: 0.10          # vertical uncertainty (1 sigma) of this survey, in metres\n");
        if f.unit_unstated {
            t.push_str(
                "    # vertical_unit: metre     # the file does not say; set metre, foot or us-survey-foot\n",
            );
        }
    }
    t.push_str(
        "\n# timeline:\n\
         #   frames_per_year: 12\n\
         #   fps: 12\n\
         #   hold_s: 1.0\n\
         # in_between:\n\
         #   method: morph            # or linear\n\
         # view:\n\
         #   width: 960\n\
         #   height: 540\n\
         #   orbit_deg: 0\n\
         # sun:\n\
         #   azimuth_deg: 315         # default: behind the viewer's left shoulder, turning with the view\n\
         #   altitude_deg: 40\n\
         # water:\n\
         #   level_m: 1.0             # a tidal datum or flood level, same vertical datum as the grids\n\
         # change:\n\
         #   reference_elevation_m: 0.0\n\
         #   display_unit: metre      # or foot, us-survey-foot\n\
         #   lod_t: 1.96              # level of detection = lod_t x the pair's combined sigma_z_m\n\
         #   min_patch_m2: 4          # smallest patch of change counted; default 4 cells at lod_t 1.96, 0 = no filter\n\
         #   default_sigma_z_m: 0.15  # for surveys without sigma_z_m (better: state it per survey)\n\
         #   transect: [[x1, y1], [x2, y2]]\n\n",
    );
    t.push_str(&format!(
        "output:\n  folder: {}\n  # gif: animation.gif\n  # png_frames: true\n",
        yaml_text(&format!("out/{}", slug(&site)))
    ));
    Ok(t)
}

/// A YAML scalar for text: plain when safe, else double-quoted.
fn yaml_text(s: &str) -> String {
    let plain = !s.is_empty()
        && s.chars()
            .all(|c| c.is_alphanumeric() || " ,._/-()".contains(c))
        && !s.starts_with(['-', ' '])
        && !s.contains(": ")
        && !s.ends_with(' ');
    if plain {
        s.to_string()
    } else {
        format!("{:?}", s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn d(y: i32, m: u32, day: u32) -> NaiveDate {
        NaiveDate::from_ymd_opt(y, m, day).unwrap()
    }

    #[test]
    fn dates_are_found_in_names() {
        // Check: ISO 8601-1:2019 calendar dates, extended (YYYY-MM-DD) and basic (YYYYMMDD) forms;
        // REFERENCES.md §8
        assert_eq!(
            dates_in_name("quellan-2031-03-27.tif"),
            vec![d(2031, 3, 27)]
        );
        assert_eq!(
            dates_in_name("ridge_20310327_dem.tif"),
            vec![d(2031, 3, 27)]
        );
        assert_eq!(dates_in_name("tile_123456789.tif"), vec![]);
        assert_eq!(dates_in_name("2031-02-30.tif"), vec![], "no such day");
        assert_eq!(
            dates_in_name("diff-2030-01-01-2031-01-01.tif"),
            vec![d(2030, 1, 1), d(2031, 1, 1)]
        );
        assert_eq!(
            dates_in_name("site-2031-03-27-v2.tif"),
            vec![d(2031, 3, 27)]
        );
    }

    #[test]
    fn paths_are_relative_to_the_job() {
        assert_eq!(
            relative_path(Path::new("/a/b/grids/x.tif"), Path::new("/a/b/jobs")),
            "../grids/x.tif"
        );
        assert_eq!(
            relative_path(Path::new("/a/b/x.tif"), Path::new("/a/b")),
            "x.tif"
        );
    }

    #[test]
    fn names_and_slugs() {
        assert_eq!(slug("North Ridge (east)"), "north-ridge-east");
        assert_eq!(
            yaml_text("North ridge, 2030-2034"),
            "North ridge, 2030-2034"
        );
        assert_eq!(yaml_text("a: b"), "\"a: b\"");
    }

    #[test]
    fn a_damaged_date_tag_is_refused_before_it_is_read() {
        // Found by the mutation test: the DateTime tag was read with the decoder's own limits, so
        // a damaged count had it reserve up to 256 MiB for a file of a few hundred bytes. Now the
        // grid is read (and its structure checked) first.
        use tiff::encoder::{colortype::Gray32Float, TiffEncoder};
        use tiff::tags::Tag;
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("undated.tif");
        {
            let mut out = std::io::BufWriter::new(std::fs::File::create(&path).unwrap());
            let mut enc = TiffEncoder::new(&mut out).unwrap();
            let mut image = enc.new_image::<Gray32Float>(3, 2).unwrap();
            let d = image.encoder();
            d.write_tag(Tag::ModelPixelScaleTag, &[1.0, 1.0, 0.0][..])
                .unwrap();
            d.write_tag(Tag::ModelTiepointTag, &[0.0, 0.0, 0.0, 10.0, 20.0, 0.0][..])
                .unwrap();
            d.write_tag(Tag::DateTime, "2031:03:27 10:00:00").unwrap();
            image.write_data(&[1.0f32; 6]).unwrap();
        }
        // The undamaged file gives its date.
        assert_eq!(
            find_date(&path).unwrap(),
            (d(2031, 3, 27), "TIFF DateTime tag")
        );
        // Its DateTime entry (little-endian classic TIFF) with a count of 100 million.
        let mut b = std::fs::read(&path).unwrap();
        let ifd = u32::from_le_bytes(b[4..8].try_into().unwrap()) as usize;
        let n = u16::from_le_bytes(b[ifd..ifd + 2].try_into().unwrap()) as usize;
        let entry = (0..n)
            .map(|i| ifd + 2 + 12 * i)
            .find(|&e| u16::from_le_bytes(b[e..e + 2].try_into().unwrap()) == 306)
            .unwrap();
        b[entry + 4..entry + 8].copy_from_slice(&100_000_000u32.to_le_bytes());
        std::fs::write(&path, &b).unwrap();
        let e = draft(std::slice::from_ref(&path), &dir.path().join("job.yaml"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("tag 306 declares 100000000 values"), "{e}");
    }
}
