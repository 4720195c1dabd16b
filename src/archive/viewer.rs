//! Record contents -> `data/viewer/index.html`: one self-contained page to look through a record in
//! any browser, offline, straight from the folder (`file://`), on a desk or on a phone.
//!
//! The page needs nothing outside the bag: no script, font, style or image from the network (a
//! Content-Security-Policy in the page forbids it), and no fetch of local files either (browsers
//! refuse those from `file://`). Its data are the record's own tables and frame index, embedded in
//! the page as JSON (`<script type="application/json" id="record">`); images, the video and the GIF
//! are referenced by relative paths inside the bag (`../frames/…`, `../maps/…`). The JSON lists
//! every file the page refers to (`files`), so tests can check each one against the manifest.
//!
//! The frame index is read by column name, never by position, so a column added later (or moved)
//! does not break the page; columns the page does not know are shown as they are, under "More about
//! this frame".
//!
//! What it shows: the title and the caution; the frame (PNG) with a slider that steps frame by frame,
//! survey dates marked under it (each a button that jumps to that survey); play/pause; the frame's
//! date, status (measured, or interpolated with method and surveys) and crest; the survey and
//! pair tables with units in the headers; the DoD maps and the transect chart; links to the video,
//! the GIF, the poster and the frames. Keys: ←/→ step, Home/End jump to the ends, space plays.

use std::path::Path;

use serde_json::{json, Value};

use super::table::{self, Table};
use super::{ExtraContent, ExtraFile, CAUTION};
use crate::change::{ChangeRecord, Figure};
use crate::error::{Error, Result};

/// Path of the page inside the payload.
pub const PAGE: &str = "viewer/index.html";

/// What the page is built from.
#[derive(Debug, Clone, Copy)]
pub struct ViewerInputs<'a> {
    /// Title of the run (the job's title).
    pub title: &'a str,
    /// The change record (survey and pair tables).
    pub record: &'a ChangeRecord,
    /// The figures written beside it (DoD maps, transect chart).
    pub figures: &'a [Figure],
    /// The other payload files (frames and their index, animation, video, poster, …).
    pub extra: &'a [ExtraFile],
    /// Playing rate of the animation, frames per second.
    pub fps: f64,
    /// Extra seconds each survey frame stays on screen when playing.
    pub hold_s: f64,
}

/// A column header split into words and unit: `net_volume_m3` -> ("net volume", "m³").
pub fn column_label(name: &str) -> (String, String) {
    const UNITS: [(&str, &str); 17] = [
        ("_m_per_yr", "m/yr"),
        ("_ft_per_yr", "ft/yr"),
        ("_usft_per_yr", "US ft/yr"),
        ("_m3", "m³"),
        ("_ft3", "ft³"),
        ("_usft3", "US ft³"),
        ("_yd3", "yd³"),
        ("_m2", "m²"),
        ("_ft2", "ft²"),
        ("_usft2", "US ft²"),
        ("_m", "m"),
        ("_usft", "US ft"),
        ("_ft", "ft"),
        ("_deg", "°"),
        ("_crs", "CRS units"),
        ("_years", "years"),
        ("_px", "px"),
    ];
    let (stem, unit) = UNITS
        .iter()
        .find_map(|(suffix, unit)| name.strip_suffix(suffix).map(|s| (s, *unit)))
        .unwrap_or((name, ""));
    (words(stem), unit.to_string())
}

/// Plain words for a column stem; a few terse names get spelled out.
fn words(stem: &str) -> String {
    let spelled = match stem {
        "lod" => "level of detection (LoD)",
        "lod_t" => "t of the LoD (1.96 = 95 %)",
        "sigma_z" => "vertical uncertainty σz (1σ)",
        "sigma_z_source" => "source of σz",
        "sigma_dod" => "σ of the difference",
        "volume_sigma_independent" => "± volume, independent cell errors (1σ)",
        "volume_bound_lod" => "± volume bound, all errors alike",
        "net_volume_sign" => "sign of the detected net",
        "net_volume_raw_sign" => "sign of the raw net",
        "detected_share" => "share of the area flagged as change",
        "nodata_share" => "share of cells without data",
        other => return other.replace('_', " "),
    };
    spelled.to_string()
}

fn table_json(t: &Table) -> Value {
    let columns: Vec<Value> = t
        .columns
        .iter()
        .map(|c| {
            let (label, unit) = column_label(c);
            json!({ "key": c, "label": label, "unit": unit })
        })
        .collect();
    json!({ "columns": columns, "rows": t.rows })
}

/// Splits one CSV line (RFC 4180 quoting) into fields.
fn csv_fields(line: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut cur = String::new();
    let mut quoted = false;
    let mut chars = line.chars().peekable();
    while let Some(c) = chars.next() {
        match (c, quoted) {
            ('"', true) if chars.peek() == Some(&'"') => {
                cur.push('"');
                chars.next();
            }
            ('"', true) => quoted = false,
            ('"', false) if cur.is_empty() => quoted = true,
            (',', false) => out.push(std::mem::take(&mut cur)),
            (c, _) => cur.push(c),
        }
    }
    out.push(cur);
    out
}

/// The frame index as columns and rows of text. Quoted fields never hold line breaks in the index
/// (times, ids and method names), so lines are records.
fn index_json(text: &str, source: &Path) -> Result<Value> {
    let mut lines = text.lines().filter(|l| !l.trim().is_empty());
    let header = lines.next().map(csv_fields).unwrap_or_default();
    for needed in ["file", "time", "status"] {
        if !header.iter().any(|h| h == needed) {
            return Err(Error::output(
                source,
                format!("the frame index has no `{needed}` column, which the viewer needs; this is a bug in dunereel"),
            ));
        }
    }
    let rows: Vec<Vec<String>> = lines.map(csv_fields).collect();
    if let Some((i, r)) = rows
        .iter()
        .enumerate()
        .find(|(_, r)| r.len() != header.len())
    {
        return Err(Error::output(
            source,
            format!(
                "line {} of the frame index has {} fields, the header {}; this is a bug in dunereel",
                i + 2,
                r.len(),
                header.len()
            ),
        ));
    }
    Ok(json!({ "columns": header, "rows": rows }))
}

fn extra_text(x: &ExtraFile) -> Result<String> {
    match &x.content {
        ExtraContent::Bytes(b) => Ok(String::from_utf8_lossy(b).into_owned()),
        ExtraContent::File(p) => std::fs::read_to_string(p).map_err(|e| Error::io(p, e)),
    }
}

/// Builds the page.
///
/// # Errors
/// `Error::Io` when the frame index cannot be read; `Error::Output` when it lacks a needed column
/// or the record cannot be tabulated (bugs).
pub fn page(inp: &ViewerInputs<'_>) -> Result<String> {
    let unit = inp.record.options.display_unit;
    let bug = |e: table::RowError| {
        Error::output(Path::new(PAGE), format!("cannot tabulate the record: {e}"))
    };
    let surveys = table::table(&inp.record.surveys, unit, &[]).map_err(bug)?;
    let pairs = table::table(&inp.record.pairs, unit, &[]).map_err(bug)?;

    let mut files: Vec<String> = Vec::new();
    let mut index = Value::Null;
    let mut gif = None;
    let mut video = None;
    let mut poster = None;
    for x in inp.extra {
        let name = x.name.as_str();
        if name == "frames/index.csv" {
            let source = match &x.content {
                ExtraContent::File(p) => p.clone(),
                ExtraContent::Bytes(_) => Path::new(name).to_path_buf(),
            };
            index = index_json(&extra_text(x)?, &source)?;
            files.push(name.to_string());
        } else if name.starts_with("animation/") {
            let lower = name.to_ascii_lowercase();
            if lower.ends_with(".mp4") {
                video = Some(name.to_string());
            } else if lower.ends_with(".gif") {
                gif = Some(name.to_string());
            }
            files.push(name.to_string());
        } else if name == "poster.png" {
            poster = Some(name.to_string());
            files.push(name.to_string());
        }
    }
    // Frame images named by the index.
    if let Some(rows) = index["rows"].as_array() {
        let col = index["columns"]
            .as_array()
            .and_then(|c| c.iter().position(|h| h == "file"));
        if let Some(col) = col {
            for r in rows {
                if let Some(f) = r[col].as_str() {
                    files.push(format!("frames/{f}"));
                }
            }
        }
    }
    let figures: Vec<Value> = inp
        .figures
        .iter()
        .map(|f| {
            files.push(f.file_name.clone());
            let caption = figure_caption(&f.file_name, inp.record);
            json!({ "file": f.file_name, "caption": caption, "width": f.frame.width, "height": f.frame.height })
        })
        .collect();
    files.push("tables/surveys.csv".into());
    files.push("tables/pairs.csv".into());
    files.push("README.txt".into());

    let data = json!({
        "title": inp.title,
        "unit": unit.symbol(),
        "fps": if inp.fps.is_finite() && inp.fps > 0.0 { inp.fps } else { 12.0 },
        "hold_s": inp.hold_s.max(0.0),
        "frames": index,
        "surveys": table_json(&surveys),
        "pairs": table_json(&pairs),
        "figures": figures,
        "video": video,
        "gif": gif,
        "poster": poster,
        "warnings": inp.record.warnings,
        "caution": CAUTION,
        "files": files,
    });
    // `</` inside a script element would end it early: write it as `<\/`, which JSON reads the same.
    let json_text = data.to_string().replace("</", "<\\/");
    Ok(TEMPLATE
        .replace("%%TITLE%%", &html_escape(inp.title))
        .replace("%%CAUTION%%", &html_escape(CAUTION))
        .replace("%%DATA%%", &json_text))
}

fn figure_caption(file: &str, record: &ChangeRecord) -> String {
    if file.starts_with("charts/") {
        return "Elevation profiles along the transect, one per survey, pale (oldest) to dark (latest)".into();
    }
    for p in &record.pairs {
        let stem = format!(
            "-{}-{}.png",
            crate::change::file_safe(&p.from_id),
            crate::change::file_safe(&p.to_id)
        );
        if file.starts_with("maps/dod-") && file.ends_with(&stem) {
            return format!(
                "Change from {} to {} (later minus earlier; red erosion, blue deposition over the relief; change within the level of detection not coloured). Net detected change: {}",
                p.from_date, p.to_date, p.net_volume_sign
            );
        }
    }
    file.to_string()
}

/// Escapes text for HTML element content and attribute values.
pub fn html_escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// Extracts the embedded JSON from a written page (for tests and checks).
pub fn embedded_data(html: &str) -> Option<Value> {
    let start = html.find(r#"<script type="application/json" id="record">"#)?;
    let body = &html[start..];
    let open = body.find('>')? + 1;
    let close = body.find("</script>")?;
    serde_json::from_str(&body[open..close]).ok()
}

const TEMPLATE: &str = include_str!("viewer.html");

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn column_labels_carry_their_units() {
        assert_eq!(
            column_label("net_volume_m3"),
            ("net volume".into(), "m³".into())
        );
        assert_eq!(
            column_label("migration_rate_m_per_yr"),
            ("migration rate".into(), "m/yr".into())
        );
        assert_eq!(column_label("area_ft2"), ("area".into(), "ft²".into()));
        assert_eq!(
            column_label("peak_x_crs"),
            ("peak x".into(), "CRS units".into())
        );
        assert_eq!(
            column_label("lod_usft"),
            ("level of detection (LoD)".into(), "US ft".into())
        );
        assert_eq!(column_label("lod_t").1, "");
        assert_eq!(
            column_label("survey_id"),
            ("survey id".into(), String::new())
        );
    }

    #[test]
    fn the_index_is_read_by_column_name() {
        let text =
            "status,frame,extra_col,file,time\nsurveyed,0,\"a, b\",f-0.png,2030-01-01T00:00:00\n";
        let v = index_json(text, Path::new("index.csv")).unwrap();
        assert_eq!(v["columns"][3], "file");
        assert_eq!(v["rows"][0][2], "a, b");
        let e = index_json("frame,time\n0,x\n", Path::new("index.csv")).unwrap_err();
        assert!(e.to_string().contains("`file`"), "{e}");
    }

    #[test]
    fn script_breakers_are_neutralised() {
        assert_eq!(html_escape("<b>&\"'"), "&lt;b&gt;&amp;&quot;&#39;");
        assert_eq!(csv_fields(r#"a,"b ""c""",d"#), vec!["a", "b \"c\"", "d"]);
    }
}
