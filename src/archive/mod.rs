//! ChangeRecord + figures + extra files -> an archive folder laid out as a BagIt bag; and its check.
//!
//! Place in the pipeline: last. Layout of a written archive (payload paths under `data/`):
//!
//! ```text
//! ARCHIVE/
//!   bagit.txt  bag-info.txt  manifest-sha256.txt  tagmanifest-sha256.txt
//!   data/README.txt                  what every file and column means, warnings, caution
//!   data/run.json                    display unit, options as run, warnings
//!   data/tables/surveys.csv|json     one row per survey
//!   data/tables/pairs.csv|json       one row per pair (consecutive, then last against first)
//!   data/tables/landforms.csv|json   one row per moving landform of each pair, then `all`
//!   data/tables/transect.csv|json    profiles (only with a transect)
//!   data/maps/*.png  data/charts/*.png
//!   data/<extra files>               e.g. the animation and the job file as run
//!   data/viewer/index.html           the record as one offline web page (`viewer`), when the run adds it
//! ```
//!
//! Safety: everything is checked (names, extra files, the output folder) before the first byte is
//! written; the bag is built in a hidden sibling folder and renamed into place when complete, so a
//! failure leaves nothing half-written. An existing folder is replaced only with `overwrite`.

pub mod bagit;
pub mod replace;
pub mod table;
pub mod viewer;

use std::fs;
use std::path::{Path, PathBuf};

use crate::change::{ChangeRecord, Figure};
use crate::error::{Error, Result};
use crate::render::Frame;

pub use bagit::{verify, VerifyReport};
pub use replace::{check_replaceable, Protected};

/// How to write an archive.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct ArchiveOptions {
    /// Replace an existing archive folder. Default: false.
    pub overwrite: bool,
    /// `Bagging-Date` to write (YYYY-MM-DD); absent = today's date in UTC. Default: today.
    pub bagging_date: Option<chrono::NaiveDate>,
    /// Paths the archive folder may not be or contain (the job's inputs). Default: none.
    pub protected: Vec<Protected>,
    /// How the frames were drawn (view as resolved: vertical exaggeration used, framing, sun),
    /// written under `view` in `run.json`. Default: none.
    pub view: Option<serde_json::Value>,
}

/// Where the bytes of an extra payload file come from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ExtraContent {
    /// Copy this file.
    File(PathBuf),
    /// Write these bytes.
    Bytes(Vec<u8>),
}

/// A file the pipeline adds to the payload (the animation, the job file as run, …).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ExtraFile {
    /// Path inside `data/`, forward slashes, e.g. `animation/dunes.gif` or `job/job.yaml`.
    pub name: String,
    /// Its content.
    pub content: ExtraContent,
}

/// What [`write_archive`] wrote.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ArchiveReport {
    /// The archive folder.
    pub dir: PathBuf,
    /// Payload files (under `data/`).
    pub payload_files: usize,
    /// Payload bytes.
    pub payload_bytes: u64,
}

/// The caution printed in the archive's README.
pub const CAUTION: &str =
    "These figures support, and do not replace, the judgement of a licensed professional \
and the local regulations that apply.";

/// Writes the archive folder `dir`.
///
/// # Errors
/// `Error::Output` when `dir` exists and `overwrite` is off, or a payload name is unusable;
/// `Error::Input` when an extra file cannot be found; `Error::Io` when writing fails (the partly
/// written temporary folder is removed; `dir` is left as it was).
pub fn write_archive(
    dir: &Path,
    record: &ChangeRecord,
    figures: &[Figure],
    extra: &[ExtraFile],
    opts: &ArchiveOptions,
) -> Result<ArchiveReport> {
    let payload = plan_payload(record, figures, extra, opts)?;
    check_replaceable(dir, opts.overwrite, &opts.protected)?;
    let name = dir
        .file_name()
        .ok_or_else(|| {
            Error::output(
                dir,
                "is not a folder name; give a path ending in the archive folder's name",
            )
        })?
        .to_string_lossy()
        .into_owned();
    let parent = match dir.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    fs::create_dir_all(&parent).map_err(|e| Error::io(&parent, e))?;
    let tmp = parent.join(format!(".{name}.partial-{}", std::process::id()));
    if tmp.exists() {
        fs::remove_dir_all(&tmp).map_err(|e| Error::io(&tmp, e))?;
    }
    let date = opts
        .bagging_date
        .unwrap_or_else(|| chrono::Utc::now().date_naive())
        .to_string();
    let (payload_files, payload_bytes) = match build(&tmp, &payload, &date) {
        Ok(v) => v,
        Err(e) => {
            let _ = fs::remove_dir_all(&tmp);
            return Err(e);
        }
    };
    // Checked again at the last moment: the folder may have changed while the run was working.
    let swapped = check_replaceable(dir, opts.overwrite, &opts.protected)
        .and_then(|()| swap_into_place(&tmp, dir, &parent, &name));
    if let Err(e) = swapped {
        let _ = fs::remove_dir_all(&tmp);
        return Err(e);
    }
    log::info!(
        "archive written: {} ({payload_files} files, {payload_bytes} bytes)",
        dir.display()
    );
    Ok(ArchiveReport {
        dir: dir.to_path_buf(),
        payload_files,
        payload_bytes,
    })
}

/// One payload file to write: its path under `data/` and where its bytes come from.
enum Source<'a> {
    Text(String),
    Png(&'a Frame),
    Extra(&'a ExtraContent),
}

fn plan_payload<'a>(
    record: &ChangeRecord,
    figures: &'a [Figure],
    extra: &'a [ExtraFile],
    opts: &ArchiveOptions,
) -> Result<Vec<(String, Source<'a>)>> {
    let unit = record.options.display_unit;
    let bug = |e: table::RowError| {
        Error::output(
            Path::new("data/tables"),
            format!("cannot tabulate the record: {e}"),
        )
    };
    let surveys = table::table(&record.surveys, unit, &[]).map_err(bug)?;
    let pairs = table::table(&record.pairs, unit, &[]).map_err(bug)?;
    let landforms =
        table::table(&record.landforms, unit, crate::change::landform::COLUMNS).map_err(bug)?;
    let mut out: Vec<(String, Source<'a>)> = vec![
        (
            "README.txt".into(),
            Source::Text(readme(record, figures, extra)),
        ),
        (
            "run.json".into(),
            Source::Text(run_json(record, opts.view.as_ref())),
        ),
        ("tables/surveys.csv".into(), Source::Text(surveys.to_csv())),
        (
            "tables/surveys.json".into(),
            Source::Text(surveys.to_json()),
        ),
        ("tables/pairs.csv".into(), Source::Text(pairs.to_csv())),
        ("tables/pairs.json".into(), Source::Text(pairs.to_json())),
        (
            "tables/landforms.csv".into(),
            Source::Text(landforms.to_csv()),
        ),
        (
            "tables/landforms.json".into(),
            Source::Text(landforms.to_json()),
        ),
    ];
    if !record.transect.is_empty() {
        let t = table::table(&record.transect, unit, &[]).map_err(bug)?;
        out.push(("tables/transect.csv".into(), Source::Text(t.to_csv())));
        out.push(("tables/transect.json".into(), Source::Text(t.to_json())));
    }
    for f in figures {
        out.push((f.file_name.clone(), Source::Png(&f.frame)));
    }
    for x in extra {
        if let ExtraContent::File(p) = &x.content {
            if !p.is_file() {
                return Err(Error::input(
                    p,
                    format!(
                        "cannot be found to archive as data/{}; check the path",
                        x.name
                    ),
                ));
            }
        }
        out.push((x.name.clone(), Source::Extra(&x.content)));
    }
    let mut seen = std::collections::BTreeSet::new();
    for (name, _) in &out {
        check_name(name)?;
        if !seen.insert(name.to_ascii_lowercase()) {
            return Err(Error::output(
                Path::new(name),
                "two archive files would share this name (letter case ignored); rename one of them",
            ));
        }
    }
    Ok(out)
}

/// A payload name must be a plain relative path: no empty, `.` or `..` parts, no backslash, no control
/// characters.
fn check_name(name: &str) -> Result<()> {
    let ok = !name.is_empty()
        && !name.starts_with('/')
        && !name.contains('\\')
        && !name.chars().any(char::is_control)
        && name
            .split('/')
            .all(|p| !p.is_empty() && p != "." && p != "..");
    if ok {
        Ok(())
    } else {
        Err(Error::output(
            Path::new(name),
            "is not a usable archive file name; use a relative path with forward slashes and no `..`",
        ))
    }
}

fn build(tmp: &Path, payload: &[(String, Source<'_>)], date: &str) -> Result<(usize, u64)> {
    let data = tmp.join("data");
    let mut bytes = 0u64;
    for (name, src) in payload {
        let path = name.split('/').fold(data.clone(), |p, part| p.join(part));
        if let Some(dirname) = path.parent() {
            fs::create_dir_all(dirname).map_err(|e| Error::io(dirname, e))?;
        }
        match src {
            Source::Text(t) => fs::write(&path, t.as_bytes()).map_err(|e| Error::io(&path, e))?,
            Source::Png(frame) => {
                fs::write(&path, encode_png(frame)?).map_err(|e| Error::io(&path, e))?
            }
            Source::Extra(ExtraContent::Bytes(b)) => {
                fs::write(&path, b).map_err(|e| Error::io(&path, e))?
            }
            Source::Extra(ExtraContent::File(from)) => {
                fs::copy(from, &path).map_err(|e| Error::io(from, e))?;
            }
        }
        bytes += fs::metadata(&path).map_err(|e| Error::io(&path, e))?.len();
    }
    bagit::write_tags(tmp, date, concat!("dunereel ", env!("CARGO_PKG_VERSION")))?;
    Ok((payload.len(), bytes))
}

/// PNG bytes of a frame (RGBA, 8 bits a channel).
///
/// # Errors
/// `Error::Output` if the encoder refuses the frame (a frame whose buffer does not match its size).
pub fn encode_png(frame: &Frame) -> Result<Vec<u8>> {
    use image::ImageEncoder;
    let mut out = Vec::new();
    image::codecs::png::PngEncoder::new(&mut out)
        .write_image(
            &frame.rgba,
            frame.width,
            frame.height,
            image::ExtendedColorType::Rgba8,
        )
        .map_err(|e| {
            Error::output(
                Path::new("(png)"),
                format!("cannot encode a figure as PNG: {e}"),
            )
        })?;
    Ok(out)
}

fn swap_into_place(tmp: &Path, dir: &Path, parent: &Path, name: &str) -> Result<()> {
    if !dir.exists() {
        return fs::rename(tmp, dir).map_err(|e| Error::io(dir, e));
    }
    let old = parent.join(format!(".{name}.old-{}", std::process::id()));
    if old.exists() {
        fs::remove_dir_all(&old).map_err(|e| Error::io(&old, e))?;
    }
    fs::rename(dir, &old).map_err(|e| Error::io(dir, e))?;
    if let Err(e) = fs::rename(tmp, dir) {
        // Put the previous archive back so the user loses nothing.
        let _ = fs::rename(&old, dir);
        return Err(Error::io(dir, e));
    }
    if let Err(e) = fs::remove_dir_all(&old) {
        log::warn!(
            "could not remove the replaced archive {}: {e}",
            old.display()
        );
    }
    Ok(())
}

fn run_json(record: &ChangeRecord, view: Option<&serde_json::Value>) -> String {
    let value = serde_json::json!({
        "display_unit": record.options.display_unit,
        "options": record.options,
        "view": view,
        "warnings": record.warnings,
        "decimal_year_convention": "year + (t - Jan 1) / (length of that year); leap years have 366 days",
        "dod_sign": "later minus earlier; positive = deposition (surface raised), negative = erosion (lowered)",
        "note": crate::change::record::PAIR_NOTE,
        "caution": CAUTION,
    });
    // serde_json cannot fail on a Value; keep a readable fallback anyway.
    serde_json::to_string_pretty(&value).unwrap_or_else(|_| value.to_string()) + "\n"
}

fn readme(record: &ChangeRecord, figures: &[Figure], extra: &[ExtraFile]) -> String {
    let unit = record.options.display_unit;
    let tok = table::unit_token(unit);
    let mut s = String::new();
    let mut line = |t: &str| {
        s.push_str(t);
        s.push('\n');
    };
    line("CHANGE RECORD OF A DUNE FIELD");
    line("");
    line(&format!(
        "{} surveys, {} comparisons. Lengths in {sym}, areas in {sym}2, volumes in {sym}3 (column suffixes _{tok}, _{tok}2, _{tok}3).",
        record.surveys.len(),
        record.pairs.len(),
        sym = unit.symbol()
    ));
    if unit != crate::grid::LinearUnit::Metre {
        line("Every volume is also given in cubic yards (_yd3; international yard, 1 yd3 = 0.764554857984 m3).");
    }
    line("Map coordinates (columns ending _crs) are in the grids' own CRS units.");
    line("");
    line("Only the survey dates are measurements. Nothing is known of the surface between two surveys;");
    line("rates assume steady change over the interval (decimal years, actual year lengths).");
    line("");
    line("tables/surveys.*   one row per survey: source file and its SHA-256, CRS, extent, cell size, nodata");
    line("                   share, lowest/highest/mean elevation, highest point and its position, height,");
    line("                   volume and area above the reference elevation, the vertical uncertainty used.");
    line("tables/pairs.*     one row per comparison, DoD = later minus earlier (positive = deposition).");
    line("                   Level of detection LoD = t * sqrt(s1^2 + s2^2) (Brasington et al. 2003; Lane");
    line("                   et al. 2003). *_raw columns count every cell; the others count only cells whose");
    line("                   change reaches the LoD (Wheaton et al. 2010). volume_sigma_independent: A*s*sqrt(n),");
    line("                   independent cell errors; volume_bound_lod: A*LoD*n, all errors alike (upper bound).");
    line(
        "                   Detected change: beyond the LoD and in a patch of one sign of at least",
    );
    line("                   min_patch (a spatial-coherence filter after Wheaton et al. 2010); detected_share");
    line("                   is the share of the compared area flagged. Every net volume comes with its range:");
    line("                   net_volume_low/high_independent = net -/+ t*sigma_independent, and");
    line("                   net_volume_low/high_correlated = net -/+ bound_lod. net_volume_sign says in words");
    line("                   whether the sign is established: \"sign not established\" when the range includes");
    line("                   zero. The raw net has the same (net_volume_raw_sigma_independent, _raw_bound_lod,");
    line("                   _raw_sign) over every compared cell.");
    for l in budget_note(record) {
        line(&l);
    }
    line("tables/landforms.* one row per moving landform of each pair (regions of change beyond the LoD),");
    line("                   then the site-wide row `all`: centroid, detected change, and the migration");
    line("                   measured from the relief inside the region only.");
    if !record.transect.is_empty() {
        line("tables/transect.*  elevation profiles of every survey along the transect (bilinear samples).");
    }
    for f in figures {
        let what = if f.file_name.starts_with("maps/") {
            "DEM of difference map: detected change over a hillshade of the later survey, outlines at both dates"
        } else {
            "figure"
        };
        let what = if f.file_name.starts_with("charts/transect") {
            "transect chart: profiles by date (pale = oldest), crest shifts, vertical exaggeration stated"
        } else {
            what
        };
        line(&format!("{:<18} {what}", f.file_name));
    }
    // Extra files are described by their folder; a folder of many files gets one line.
    let mut groups: Vec<(&str, &str, usize)> = Vec::new();
    for x in extra {
        let key = x
            .name
            .split_once('/')
            .map_or(x.name.as_str(), |(dir, _)| dir);
        match groups.last_mut() {
            Some((k, _, n)) if *k == key => *n += 1,
            _ => groups.push((key, x.name.as_str(), 1)),
        }
    }
    for (key, first, n) in groups {
        let what = match key {
            "animation" => {
                "the animation (GIF, and MP4 video when asked); frames between surveys are interpolations, not measurements"
            }
            "frames" => {
                "the animation's frames as numbered PNGs, and index.csv saying which are surveyed"
            }
            "fields" => {
                "per pair, on the grids' georeference: displacement-A-B.tif (band 1 east, band 2 north, m), \
                 dod-A-B.tif (DEM of difference, later minus earlier, m, float32, nodata -9999), \
                 detected-A-B.tif (-1 erosion, 1 deposition, 0 not detected)"
            }
            "job" => "the job file as run",
            "poster.png" => "the surveys side by side, seen from one viewpoint",
            "viewer" => "the record as one web page: open it in a browser, no network needed",
            _ => "added by the run",
        };
        let name = if n > 1 {
            format!("{key}/ ({n} files)")
        } else {
            first.to_string()
        };
        line(&format!("{name:<18} {what}"));
    }
    line("run.json           options as run and all warnings.");
    line("");
    line("Integrity: the folder is a BagIt bag (RFC 8493). manifest-sha256.txt lists the SHA-256 of every file");
    line("under data/; any SHA-256 tool (e.g. `sha256sum -c manifest-sha256.txt` run in the bag folder) checks it.");
    line("");
    if record.warnings.is_empty() {
        line("Warnings: none.");
    } else {
        line("Warnings:");
        for w in &record.warnings {
            line(&format!("- {w}"));
        }
    }
    line("");
    line(CAUTION);
    s
}

/// Why the detected nets of consecutive pairs need not add up to the first-to-last net, with the
/// record's own figures (empty without a first-to-last pair).
fn budget_note(record: &ChangeRecord) -> Vec<String> {
    use crate::change::PairKind;
    let Some(whole) = record
        .pairs
        .iter()
        .find(|p| p.pair_kind == PairKind::FirstToLast)
    else {
        return Vec::new();
    };
    let steps: Vec<_> = record
        .pairs
        .iter()
        .filter(|p| p.pair_kind == PairKind::Consecutive)
        .collect();
    let unit = record.options.display_unit;
    let v = |m3: f64| m3 / unit.metres().powi(3);
    let sym = unit.symbol();
    let sum: f64 = steps.iter().map(|p| p.net_volume_m3).sum();
    let sum_raw: f64 = steps.iter().map(|p| p.net_volume_raw_m3).sum();
    let mut out = vec![
        String::new(),
        "Why the detected nets of consecutive pairs need not add up to the first-to-last net:".into(),
        format!(
            "  here the consecutive detected nets sum to {:.1} {sym}3, the first-to-last detected net is {:.1} {sym}3",
            v(sum),
            v(whole.net_volume_m3)
        ),
        format!(
            "  (raw nets: {:.1} against {:.1} {sym}3). Thresholding is not additive. A cell that changes a",
            v(sum_raw),
            v(whole.net_volume_raw_m3)
        ),
        "  little in every interval, each time within that pair's LoD, is counted in no consecutive pair".into(),
        "  but in the first-to-last pair once the changes add up beyond the LoD; change that reverses (sand".into(),
        "  laid down, then carried off) is counted twice in the consecutive pairs and not at all first to".into(),
        "  last; each pair has its own LoD and its own patches. Raw nets add up exactly only where every".into(),
        "  survey has data in the same cells. Neither figure is wrong; they answer different questions,".into(),
        "  and each carries its own range.".into(),
    ];
    out.push(String::new());
    out
}

#[cfg(test)]
mod tests;
