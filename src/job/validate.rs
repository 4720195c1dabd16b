//! Schema mirror -> `Job`: defaults, paths, dates and ranges, with messages that name the key.

use std::path::Path;

use chrono::{Datelike, NaiveDate};

use super::schema::{JobFile, OutputEntry};
use super::{
    ColourBy, Job, Method, OutputSpec, ShellSurvey, StableGround, SurveySpec, FORMAT_VERSION,
};
use crate::align::AreaOfInterest;
use crate::error::{Error, Result};
use crate::render::ramp::ElevationRamp;
use crate::render::ShellOptions;
use crate::timeline::FramePlan;

/// Longest `flow.*` length accepted, in metres: far beyond any dune's move between two surveys.
pub const MAX_FLOW_LENGTH_M: f64 = 10_000.0;

/// Most frames a job may ask for (about 14 minutes at 12 fps): a guard against typos such as
/// `frames_per_year: 12000`.
pub const MAX_FRAMES: usize = 10_000;

/// Turns a YAML parse error into a job error with its line, a did-you-mean for unknown keys, and
/// what to do for every kind of mistake the parser reports.
pub(super) fn yaml_error(path: &Path, job_text: &str, e: &serde_yaml::Error) -> Error {
    let raw = e.to_string();
    // serde_yaml appends " at line L column C"; the place already says it.
    let text = raw.split(" at line ").next().unwrap_or(&raw).to_string();
    // The reader reports a bad character by its byte offset ("at position N") and places it at
    // line 1 column 1; count the lines to the offset instead.
    let offset_place = text
        .split(" at position ")
        .nth(1)
        .and_then(|n| n.trim().parse::<usize>().ok())
        .filter(|&n| n <= job_text.len())
        .map(|n| {
            let before = &job_text.as_bytes()[..n];
            let line = before.iter().filter(|&&c| c == b'\n').count() + 1;
            let column = n - before
                .iter()
                .rposition(|&c| c == b'\n')
                .map_or(0, |i| i + 1)
                + 1;
            (line, column)
        });
    let place = match (offset_place, e.location()) {
        (Some((line, column)), _) => format!("line {line} column {column}"),
        (None, Some(l)) => format!("line {} column {}", l.line(), l.column()),
        (None, None) => "job file".to_string(),
    };
    let text = text
        .split(" at position ")
        .next()
        .unwrap_or(&text)
        .to_string();
    // A tab where YAML expects indentation: the parser's own words do not say so.
    let tab_line = e
        .location()
        .and_then(|l| job_text.lines().nth(l.line().saturating_sub(1)))
        .is_some_and(|line| line.contains('\t'));
    if tab_line || (text.contains("cannot start any token") && job_text.contains('\t')) {
        return Error::job(
            path,
            place,
            "this line holds a tab character; YAML does not allow tabs for indentation, indent with spaces",
        );
    }
    let text = plain_words(&text);
    let hint = suggestion(&text)
        .map(|s| format!("; did you mean `{s}`?"))
        .unwrap_or_default();
    let fix = if text.contains("missing field") {
        "; add it (see the job file section of the README)"
    } else if text.contains("unknown field") {
        "; remove it or correct its spelling"
    } else if text.contains("unknown variant") {
        "; use one of the values listed"
    } else if text.contains("duplicate field") {
        "; keep one of them and remove the other"
    } else if text.contains("control characters are not allowed") {
        "; the file holds a byte that is not text here, save the job file again as plain UTF-8 text"
    } else if text.contains("recursion limit exceeded") {
        "; the value is nested too deeply (job values nest only a few levels), correct it"
    } else if text.contains("repetition limit exceeded") {
        "; anchors and aliases expand to too much text, write the values out instead"
    } else if text.contains("expected") && (text.contains("found") || text.contains("invalid")) {
        "; correct the value (the README's job file section gives each key's kind of value)"
    } else {
        // Everything else is YAML syntax: an unclosed bracket or quote, a lost indentation.
        "; check the YAML on this line and the one before it: indent with spaces, put a space after \
         each colon and close every bracket and quote"
    };
    Error::job(path, place, brief_quotes(&format!("{text}{hint}{fix}")))
}

/// The first number in a parsed job that is infinite or not a number (`.nan`, `.inf`, `1e309`),
/// with its key path (`water.level_m`, `change.transect[1][0]`). No job value may be one: the
/// stage checks that follow compare ranges, and a NaN passes every comparison it fails.
pub(super) fn non_finite(v: &serde_yaml::Value, at: String) -> Option<(String, f64)> {
    use serde_yaml::Value;
    let join = |key: &str| {
        if at.is_empty() {
            key.to_string()
        } else {
            format!("{at}.{key}")
        }
    };
    match v {
        // Beyond f32's range counts too: options stored as f32 would turn it into infinity.
        Value::Number(n) => n
            .as_f64()
            .filter(|x| !(x.is_finite() && x.abs() <= f64::from(f32::MAX)))
            .map(|x| (at, x)),
        Value::Sequence(items) => items
            .iter()
            .enumerate()
            .find_map(|(i, item)| non_finite(item, format!("{at}[{i}]"))),
        Value::Mapping(m) => m.iter().find_map(|(k, item)| {
            let key = match k {
                Value::String(s) => s.clone(),
                other => serde_yaml::to_string(other)
                    .unwrap_or_default()
                    .trim()
                    .to_string(),
            };
            non_finite(item, join(&key))
        }),
        Value::Tagged(t) => non_finite(&t.value, at),
        Value::Null | Value::Bool(_) | Value::String(_) => None,
    }
}

/// Longest path shown whole in a message; a longer one keeps its start and its end.
const PATH_CHARS: usize = 160;

/// A path as a message shows it: whole, or its first and last 70 characters around "…" when
/// longer than [`PATH_CHARS`] (a mangled job may name a path of any length).
fn shown(p: &Path) -> String {
    let text = p.display().to_string();
    let n = text.chars().count();
    if n <= PATH_CHARS {
        return text;
    }
    let head: String = text.chars().take(70).collect();
    let tail: String = text.chars().skip(n - 70).collect();
    format!("{head}…{tail}")
}

/// Deepest nesting of flow brackets (`[` and `{`) accepted. A job nests a few levels (the
/// stable-ground polygons are the deepest, at 3); serde_yaml itself stops at 128.
pub(super) const MAX_FLOW_DEPTH: usize = 64;

/// Where flow brackets first nest deeper than [`MAX_FLOW_DEPTH`], as (line, column).
///
/// Checked before the YAML parser runs: its scanner revisits every open bracket for each new
/// token, so its time grows with the square of the depth (20 000 brackets, 40 kB of text, took
/// 2.4 s; a megabyte of them would take most of an hour). Every bracket counts, in quotes and
/// comments too: telling those apart needs the parser this check protects (a quote mark inside
/// a plain text is not a quote, found by the mutation test), and no job holds 64 unclosed
/// brackets in a text.
pub(super) fn too_deep(text: &str) -> Option<(usize, usize)> {
    let (mut depth, mut line, mut column) = (0usize, 1usize, 0usize);
    for c in text.chars() {
        column += 1;
        match c {
            '\n' => (line, column) = (line + 1, 0),
            '[' | '{' => {
                depth += 1;
                if depth > MAX_FLOW_DEPTH {
                    return Some((line, column));
                }
            }
            ']' | '}' => depth = depth.saturating_sub(1),
            _ => {}
        }
    }
    None
}

/// Longest quoted text ("…" or `…`) kept whole in a message; longer quotes are cut with "…".
const QUOTE_CHARS: usize = 60;

/// Longest message head (what is wrong) kept whole; the fix after the last "; " is always kept.
const HEAD_CHARS: usize = 320;

/// A message with every quoted text cut to [`QUOTE_CHARS`] characters, so a value of 100 000
/// characters in the job (or a whole line the parser quotes) cannot bury the message.
///
/// Only the part before the last "; " (what is wrong) is cut; the fix after it is kept whole. A
/// quote mark with no partner (a mangled path may hold one) opens nothing, and a head still longer
/// than [`HEAD_CHARS`] is cut there.
pub(super) fn brief_quotes(message: &str) -> String {
    let (head, fix) = match message.rfind("; ") {
        Some(i) => message.split_at(i),
        None => (message, ""),
    };
    let chars: Vec<char> = head.chars().collect();
    let mut out = String::with_capacity(head.len().min(1024) + fix.len());
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        out.push(c);
        i += 1;
        if c != '"' && c != '`' {
            continue;
        }
        let Some(len) = chars[i..].iter().position(|&d| d == c) else {
            continue;
        };
        out.extend(&chars[i..i + len.min(QUOTE_CHARS)]);
        if len > QUOTE_CHARS {
            out.push('…');
        }
        out.push(c);
        i += len + 1;
    }
    if out.chars().count() > HEAD_CHARS {
        out = out.chars().take(HEAD_CHARS).chain(['…']).collect();
    }
    out.push_str(fix);
    out
}

/// The parser's type words in the user's words: `u32` is "a whole number", `f64` "a number".
fn plain_words(text: &str) -> String {
    let mut out = text.to_string();
    // "expected internally tagged enum Dither", "expected enum Unit": type names mean nothing to
    // the user.
    for (rust, plain) in [
        (
            "expected internally tagged enum ",
            "expected a map of keys with `kind`",
        ),
        ("expected enum ", "expected one of the words this key takes"),
    ] {
        while let Some(i) = out.find(rust) {
            let name_start = i + rust.len();
            let name_end = out[name_start..]
                .find(|c: char| !c.is_alphanumeric() && c != '_')
                .map_or(out.len(), |k| name_start + k);
            out.replace_range(i..name_end, plain);
        }
    }
    // "expected struct SurveyEntry": the type's name means nothing to the user.
    while let Some(i) = out.find("expected struct ") {
        let name_start = i + "expected struct ".len();
        let name_end = out[name_start..]
            .find(|c: char| !c.is_alphanumeric() && c != '_')
            .map_or(out.len(), |k| name_start + k);
        let name = &out[name_start..name_end];
        let plain = if name == "WithUnitStrict" {
            "expected a number or a value with its unit"
        } else {
            "expected a map of keys"
        };
        out.replace_range(i..name_end, plain);
    }
    for (rust, plain) in [
        ("expected u8", "expected a whole number"),
        ("expected u16", "expected a whole number"),
        ("expected u32", "expected a whole number"),
        ("expected u64", "expected a whole number"),
        ("expected usize", "expected a whole number"),
        ("expected i32", "expected a whole number"),
        ("expected i64", "expected a whole number"),
        ("expected f32", "expected a number"),
        ("expected f64", "expected a number"),
        ("expected a boolean", "expected true or false"),
        ("invalid type: floating point", "found the decimal number"),
        ("invalid type: string", "found the text"),
        ("invalid type: integer", "found the whole number"),
        ("invalid type: sequence", "found a list"),
        ("invalid type: map", "found a map of keys"),
        ("invalid value: integer", "the whole number"),
        ("invalid type: unit value", "found nothing (an empty value)"),
        (
            "untagged and internally tagged enums do not support enum input",
            "found a value marked with a YAML tag (`!name`), which job files do not use",
        ),
        (
            "invalid type: enum",
            "found a value marked with a YAML tag (`!name`)",
        ),
        ("invalid type: boolean", "found"),
    ] {
        out = out.replace(rust, plain);
    }
    out
}

/// For "unknown field `x`, expected one of `a`, `b`", the closest expected name, if close enough.
fn suggestion(text: &str) -> Option<String> {
    let rest = text.split("unknown field `").nth(1)?;
    let unknown = rest.split('`').next()?;
    let expected = rest.split("expected").nth(1)?;
    let candidates: Vec<&str> = expected.split('`').skip(1).step_by(2).collect();
    candidates
        .into_iter()
        .map(|c| (strsim::levenshtein(unknown, c), c))
        .filter(|(d, c)| *d <= 2.max(c.len() / 3))
        .min()
        .map(|(_, c)| c.to_string())
}

/// Why a date text is not a calendar date, in words: a day the month does not have, a month past 12,
/// or a text not in the form YYYY-MM-DD.
fn date_problem(text: &str) -> String {
    let parts: Vec<&str> = text.split('-').collect();
    let nums: Option<Vec<u32>> = parts.iter().map(|p| p.parse().ok()).collect();
    if let (3, Some(n)) = (parts.len(), nums) {
        let (y, m, d) = (n[0] as i32, n[1], n[2]);
        if parts[0].len() == 4 && !(1..=12).contains(&m) {
            return format!(
                "\"{text}\": there is no month {m}; months run from 01 to 12 (YYYY-MM-DD), correct the month"
            );
        }
        if parts[0].len() == 4 && d > 0 {
            if let Some(first) = NaiveDate::from_ymd_opt(y, m, 1) {
                let next = if m == 12 {
                    NaiveDate::from_ymd_opt(y + 1, 1, 1)
                } else {
                    NaiveDate::from_ymd_opt(y, m + 1, 1)
                };
                if let Some(next) = next {
                    let days = (next - first).num_days();
                    if i64::from(d) > days {
                        return format!(
                            "\"{text}\": {} {y} has {days} days, so day {d} does not exist; check the survey date",
                            first.format("%B")
                        );
                    }
                }
            }
        }
    }
    format!("\"{text}\" is not a calendar date; write it as YYYY-MM-DD (ISO 8601), e.g. 2031-03-27")
}

pub(super) fn resolve(path: &Path, text: String, f: JobFile) -> Result<Job> {
    let here = path.parent().unwrap_or(Path::new("."));
    let bad = |place: &str, msg: String| Error::job(path, place, msg);

    if f.format_version != FORMAT_VERSION {
        return Err(bad(
            "format_version",
            format!(
                "this program reads job format {FORMAT_VERSION}, the file says {}; write `format_version: {FORMAT_VERSION}`",
                f.format_version
            ),
        ));
    }
    if f.title.trim().is_empty() {
        return Err(bad(
            "title",
            "the title is empty; give the animation a title".into(),
        ));
    }
    if f.surveys.len() < 2 {
        return Err(bad(
            "surveys",
            format!(
                "{} survey(s) listed; at least two dated grids are needed to show change, list another survey",
                f.surveys.len()
            ),
        ));
    }

    let mut surveys: Vec<SurveySpec> = Vec::with_capacity(f.surveys.len());
    for (i, s) in f.surveys.iter().enumerate() {
        let key = |k: &str| format!("surveys[{i}].{k}");
        let date = NaiveDate::parse_from_str(s.date.trim(), "%Y-%m-%d")
            .map_err(|_| bad(&key("date"), date_problem(s.date.trim())))?;
        if !(1900..=2200).contains(&date.year()) {
            return Err(bad(
                &key("date"),
                format!("{date} is outside the years 1900 to 2200; check the year"),
            ));
        }
        if let Some(prev) = surveys.last() {
            if date == prev.date {
                return Err(bad(
                    &key("date"),
                    format!(
                        "{date} repeats the date of surveys[{}]; keep one survey per date",
                        i - 1
                    ),
                ));
            }
            if date < prev.date {
                return Err(bad(
                    &key("date"),
                    format!(
                        "{date} comes before surveys[{}] ({}); list surveys oldest first",
                        i - 1,
                        prev.date
                    ),
                ));
            }
        }
        let grid = tidy(&here.join(&s.grid));
        if !grid.is_file() {
            return Err(bad(
                &key("grid"),
                format!(
                    "no file at {} (paths are relative to the job file's folder); correct the path",
                    shown(&grid)
                ),
            ));
        }
        if let Some(sigma) = s.sigma_z_m {
            if !(sigma > 0.0 && sigma < 10.0) {
                return Err(bad(
                    &key("sigma_z_m"),
                    format!("{sigma} m is not a plausible vertical uncertainty; give one standard deviation in metres, e.g. 0.1"),
                ));
            }
        }
        if !(s.vertical_offset_m.is_finite() && s.vertical_offset_m.abs() <= 100.0) {
            return Err(bad(
                &key("vertical_offset_m"),
                format!("{} m is not a plausible datum difference; give the metres to add to this survey's elevations, between -100 and 100", s.vertical_offset_m),
            ));
        }
        let id = s.id.clone().unwrap_or_else(|| date.to_string());
        if id.is_empty() || id.contains(['/', '\\']) {
            return Err(bad(
                &key("id"),
                format!("\"{id}\" can't be used as an id; use letters, digits and dashes"),
            ));
        }
        if let Some(j) = surveys.iter().position(|o| o.id == id) {
            return Err(bad(
                &key("id"),
                format!("id \"{id}\" is used by surveys[{j}] too; ids must be unique"),
            ));
        }
        surveys.push(SurveySpec {
            id,
            date,
            grid,
            label: s.label.clone(),
            sigma_z_m: s.sigma_z_m,
            vertical_offset_m: s.vertical_offset_m,
            vertical_unit: s.vertical_unit,
            horizontal_unit: s.horizontal_unit,
        });
    }

    let area_of_interest = match &f.area_of_interest {
        None => None,
        Some(a) => {
            let ok = [a.west, a.south, a.east, a.north]
                .iter()
                .all(|v| v.is_finite());
            if !ok || a.west >= a.east || a.south >= a.north {
                return Err(bad(
                    "area_of_interest",
                    "needs west < east and south < north, in map coordinates of the grids' CRS; \
                     correct the four values"
                        .into(),
                ));
            }
            Some(AreaOfInterest {
                west: a.west,
                south: a.south,
                east: a.east,
                north: a.north,
            })
        }
    };

    let t = &f.timeline;
    let frame_plan = match (t.frames_per_year, t.total_frames) {
        (Some(_), Some(_)) => {
            return Err(bad(
                "timeline",
                "give frames_per_year or total_frames, not both".into(),
            ));
        }
        (Some(r), None) if !(r > 0.0 && r <= 1000.0) => {
            return Err(bad(
                "timeline.frames_per_year",
                format!("{r} is out of range; use a number above 0 and at most 1000"),
            ));
        }
        (Some(r), None) => FramePlan::PerYear(r),
        (None, Some(n)) if n < surveys.len() || n > MAX_FRAMES => {
            return Err(bad(
                "timeline.total_frames",
                format!("{n} is out of range; use at least one frame per survey ({}) and at most {MAX_FRAMES}", surveys.len()),
            ));
        }
        (None, Some(n)) => FramePlan::Total(n),
        (None, None) => FramePlan::PerYear(12.0),
    };
    let dates: Vec<NaiveDate> = surveys.iter().map(|s| s.date).collect();
    let frames: usize = crate::timeline::steps_per_interval(&dates, frame_plan)
        .iter()
        .sum::<usize>()
        + 1;
    if frames > MAX_FRAMES {
        return Err(bad(
            "timeline.frames_per_year",
            format!("the surveys span {} days, which would make {frames} frames (limit {MAX_FRAMES}); lower frames_per_year", (dates[dates.len() - 1] - dates[0]).num_days()),
        ));
    }
    if !(t.fps > 0.0 && t.fps <= 100.0) {
        return Err(bad(
            "timeline.fps",
            format!(
                "{} frames per second is out of range; use a value in (0, 100]",
                t.fps
            ),
        ));
    }
    if !(t.hold_s >= 0.0 && t.hold_s <= 60.0) {
        return Err(bad(
            "timeline.hold_s",
            format!("{} s is out of range; use 0 to 60 seconds", t.hold_s),
        ));
    }

    let parse_method = |place: &str, s: &str| match s {
        "linear" => Ok(Method::Linear),
        "morph" => Ok(Method::Morph),
        other => Err(bad(
            place,
            format!("\"{other}\" is not a method; use `linear` or `morph`"),
        )),
    };
    let default_method = match &f.in_between.method {
        Some(m) => parse_method("in_between.method", m)?,
        // The morph keeps a moving dune whole; pairs it cannot follow fall back to the linear
        // blend with a warning (see `run::prepare`).
        None => Method::Morph,
    };
    let intervals = surveys.len() - 1;
    let methods = match &f.in_between.per_interval {
        None => vec![default_method; intervals],
        Some(list) if list.len() != intervals => {
            return Err(bad(
                "in_between.per_interval",
                format!("{} entries for {intervals} intervals between {} surveys; give one method per interval", list.len(), surveys.len()),
            ));
        }
        Some(list) => list
            .iter()
            .enumerate()
            .map(|(i, m)| parse_method(&format!("in_between.per_interval[{i}]"), m))
            .collect::<Result<Vec<_>>>()?,
    };

    let v = &f.view;
    if !(16..=8192).contains(&v.width) || !(16..=8192).contains(&v.height) {
        return Err(bad(
            "view.width",
            format!(
                "a frame of {} x {} pixels is out of range; use 16 to 8192 on each side",
                v.width, v.height
            ),
        ));
    }
    let s = &f.sun;
    if let Some(az) = s.azimuth_deg {
        if !(0.0..360.0).contains(&az) {
            return Err(bad(
                "sun.azimuth_deg",
                format!("{az} is out of range; use compass degrees in [0, 360), or leave it out for light from behind the viewer's left shoulder"),
            ));
        }
    }
    if !(s.altitude_deg > 0.0 && s.altitude_deg <= 90.0) {
        return Err(bad(
            "sun.altitude_deg",
            format!(
                "{} puts the sun at or below the horizon; use degrees above the horizon in (0, 90]",
                s.altitude_deg
            ),
        ));
    }

    // The same ranges as the renderer's (`render::Renderer::new`), checked here so the message
    // names the job's key (`sun.…`) and says what to write.
    let d = crate::render::LightOptions::default();
    for (name, val, lo, hi, default) in [
        ("ambient", s.ambient, 0.0, 1.0, d.ambient),
        ("diffuse", s.diffuse, 0.0, 2.0, d.diffuse),
        ("specular", s.specular, 0.0, 1.0, d.specular),
        ("shininess", s.shininess, 1.0, 1000.0, d.shininess),
        (
            "shadow_softness_cells",
            s.shadow_softness_cells,
            0.0,
            10.0,
            d.shadow_softness_cells,
        ),
        (
            "hollow_darkening",
            s.hollow_darkening,
            0.0,
            1.0,
            d.hollow_darkening,
        ),
    ] {
        if !(lo..=hi).contains(&val) {
            return Err(bad(
                &format!("sun.{name}"),
                format!("{val} is out of range; use {lo} to {hi} (the default is {default})"),
            ));
        }
    }
    if !(s.intensity > 0.0 && s.intensity <= 10.0) {
        return Err(bad(
            "sun.intensity",
            format!(
                "{} is out of range; use a value above 0 and at most 10 (1 is full sunlight)",
                s.intensity
            ),
        ));
    }

    let shell_survey = match f.shell.survey.as_str() {
        "none" => ShellSurvey::None,
        "first" => ShellSurvey::First,
        "previous" => ShellSurvey::Previous,
        "grid" => ShellSurvey::Grid,
        other => {
            return Err(bad(
                "shell.survey",
                format!("\"{other}\" is not a choice; use `none`, `first`, `previous` or `grid`"),
            ));
        }
    };
    let shell_grid = match (&f.shell.grid, shell_survey) {
        (Some(g), ShellSurvey::Grid) => {
            let p = tidy(&here.join(g));
            if !p.is_file() {
                return Err(bad(
                    "shell.grid",
                    format!("no file at {} (paths are relative to the job file's folder); correct the path", shown(&p)),
                ));
            }
            Some(p)
        }
        (None, ShellSurvey::Grid) => {
            return Err(bad(
                "shell.grid",
                "`survey: grid` needs `grid:`, the path of the grid to draw as the shell; add it, or \
                 choose another shell.survey"
                    .into(),
            ));
        }
        (Some(_), _) => {
            return Err(bad(
                "shell.grid",
                "is only used with `survey: grid`; add that or remove `grid`".into(),
            ));
        }
        (None, _) => None,
    };
    if f.colour.drape.is_some() && f.colour.by != "drape" {
        return Err(bad(
            "colour.drape",
            format!(
                "is set but colour.by is `{}`; write `by: drape` to drape the image, or remove `drape`",
                f.colour.by
            ),
        ));
    }
    let colour = match (f.colour.by.as_str(), f.colour.since.as_str()) {
        ("elevation", _) => ColourBy::Elevation,
        ("drape", _) => {
            let Some(image) = &f.colour.drape else {
                return Err(bad(
                    "colour.drape",
                    "is missing; `by: drape` needs an RGB GeoTIFF, e.g. `drape: orthophoto.tif`"
                        .into(),
                ));
            };
            let path = tidy(&here.join(image));
            if !path.is_file() {
                return Err(bad(
                    "colour.drape",
                    format!(
                        "no file at {} (paths are relative to the job file's folder); correct the path",
                        shown(&path)
                    ),
                ));
            }
            ColourBy::Drape { path }
        }
        ("change", since @ ("first" | "previous")) => {
            if let Some(l) = f.colour.limit_m {
                if !(l > 0.0 && l < 1000.0) {
                    return Err(bad(
                        "colour.limit_m",
                        format!("{l} m is out of range; give a change in metres above 0, e.g. 2"),
                    ));
                }
            }
            let since = if since == "first" {
                ShellSurvey::First
            } else {
                ShellSurvey::Previous
            };
            ColourBy::Change {
                since,
                limit_m: f.colour.limit_m,
            }
        }
        ("change", other) => {
            return Err(bad(
                "colour.since",
                format!("\"{other}\" is not a choice; use `first` or `previous`"),
            ));
        }
        (other, _) => {
            return Err(bad(
                "colour.by",
                format!("\"{other}\" is not a choice; use `elevation`, `change` or `drape`"),
            ));
        }
    };
    let Some(elevation_ramp) = ElevationRamp::from_name(&f.colour.ramp) else {
        return Err(bad(
            "colour.ramp",
            format!(
                "\"{}\" is not a ramp; use `sand-coast` (natural sand colours) or `viridis`",
                f.colour.ramp
            ),
        ));
    };
    f.flow.validate().map_err(|m| bad("flow", m))?;
    // The displacement search visits every shift within these lengths; a typo such as
    // `search_radius_m: 4e38` would overflow it (found by the mutation test of the readers).
    for (key, v) in [
        ("flow.window_m", f.flow.window_m),
        ("flow.search_radius_m", f.flow.search_radius_m),
        ("flow.fill_radius_m", f.flow.fill_radius_m),
    ] {
        if v > MAX_FLOW_LENGTH_M {
            return Err(bad(
                key,
                format!(
                    "{v} m is more than the {MAX_FLOW_LENGTH_M} m this program searches; give the \
                         largest distance the dune can have moved between two surveys, e.g. 60"
                ),
            ));
        }
    }
    if !f.labels.status {
        return Err(bad(
            "labels.status",
            "the measured/interpolated mark can't be turned off: frames between surveys must say they are not measurements; remove this key".into(),
        ));
    }
    if !(1..=256).contains(&f.animation.colours) {
        return Err(bad(
            "animation.colours",
            format!("{} is out of range; use 2 to 256", f.animation.colours),
        ));
    }
    let (coregister, stable_ground) = resolve_stable_ground(path, here, &f)?;
    f.video.validate().map_err(|m| match m.split_once(": ") {
        Some((key, rest)) => bad(key, rest.to_string()),
        None => bad("video", m),
    })?;
    let output = resolve_output(path, here, &f.output)?;
    if output.video.is_some() {
        // OpenH264 takes frames up to 3840 × 2160 either way round.
        let (w, h) = (f.view.width & !1, f.view.height & !1);
        if w.max(h) > 3840 || w.min(h) > 2160 || w.min(h) < 2 {
            return Err(bad(
                "output.video",
                format!("the H.264 encoder takes frames from 2 up to 3840 x 2160 (either way round), the view is {} x {}; lower view.width/view.height or remove output.video", f.view.width, f.view.height),
            ));
        }
    }
    Ok(Job {
        path: path.to_path_buf(),
        text,
        title: f.title.trim().to_string(),
        surveys,
        area_of_interest,
        frame_plan,
        fps: t.fps,
        hold_s: t.hold_s,
        methods,
        view: f.view,
        sun: f.sun,
        colour,
        elevation_ramp,
        water: f.water,
        shell_survey,
        shell_grid,
        shell: ShellOptions {
            rgb: f.shell.rgb,
            opacity: f.shell.opacity,
            min_gap_m: f.shell.min_gap_m,
            full_gap_m: f.shell.full_gap_m,
        },
        flow: f.flow,
        labels: f.labels,
        credit: f.credit,
        animation: f.animation,
        poster: f.poster,
        video: f.video,
        change: f.change,
        coregister,
        stable_ground,
        output,
    })
}

fn resolve_stable_ground(
    path: &Path,
    here: &Path,
    f: &JobFile,
) -> Result<(crate::coregister::CoregOptions, Option<StableGround>)> {
    let bad = |place: &str, msg: String| Error::job(path, place, msg);
    let s = &f.stable_ground;
    if !(s.min_slope_deg.is_finite()
        && s.max_slope_deg.is_finite()
        && 0.0 <= s.min_slope_deg
        && s.min_slope_deg < s.max_slope_deg
        && s.max_slope_deg <= 85.0)
    {
        return Err(bad(
            "stable_ground.min_slope_deg",
            format!(
                "slopes {} to {} degrees are not a range; give 0 <= min_slope_deg < max_slope_deg <= 85, e.g. 3 and 60",
                s.min_slope_deg, s.max_slope_deg
            ),
        ));
    }
    if !(s.buffer_m.is_finite() && (0.0..=1000.0).contains(&s.buffer_m)) {
        return Err(bad(
            "stable_ground.buffer_m",
            format!(
                "{} m is out of range; give 0 to 1000 m, e.g. 10",
                s.buffer_m
            ),
        ));
    }
    if !(10..=100_000_000).contains(&s.min_cells) {
        return Err(bad(
            "stable_ground.min_cells",
            format!(
                "{} is out of range; give 10 or more cells, e.g. 1000",
                s.min_cells
            ),
        ));
    }
    let given = match (&s.polygons, &s.mask) {
        (Some(_), Some(_)) => {
            return Err(bad(
                "stable_ground",
                "give `polygons` or `mask`, not both".into(),
            ))
        }
        (Some(polys), None) => {
            if polys.is_empty() {
                return Err(bad(
                    "stable_ground.polygons",
                    "is empty; list at least one polygon of [x, y] vertices, or remove the key to let the tool find stable ground".into(),
                ));
            }
            for (i, p) in polys.iter().enumerate() {
                if p.len() < 3 || p.iter().flatten().any(|v| !v.is_finite()) {
                    return Err(bad(
                        &format!("stable_ground.polygons[{i}]"),
                        "needs at least three [x, y] vertices with finite map coordinates (CRS units)".into(),
                    ));
                }
            }
            Some(StableGround::Polygons(polys.clone()))
        }
        (None, Some(m)) => {
            let p = tidy(&here.join(m));
            if !p.is_file() {
                return Err(bad(
                    "stable_ground.mask",
                    format!("no file at {} (paths are relative to the job file's folder); correct the path", shown(&p)),
                ));
            }
            Some(StableGround::Mask(p))
        }
        (None, None) => None,
    };
    Ok((
        crate::coregister::CoregOptions {
            enabled: f.coregister,
            min_slope_deg: s.min_slope_deg,
            max_slope_deg: s.max_slope_deg,
            min_cells: s.min_cells,
            buffer_m: s.buffer_m,
        },
        given,
    ))
}

/// Removes `.` and `name/..` pairs without touching the file system, so records show
/// `/data/demo-data/a.tif` rather than `/data/jobs/../demo-data/a.tif`.
fn tidy(p: &Path) -> std::path::PathBuf {
    use std::path::Component;
    let mut out = std::path::PathBuf::new();
    for c in p.components() {
        match c {
            Component::CurDir => {}
            Component::ParentDir
                if matches!(out.components().next_back(), Some(Component::Normal(_))) =>
            {
                out.pop();
            }
            other => out.push(other),
        }
    }
    out
}

fn resolve_output(path: &Path, here: &Path, o: &OutputEntry) -> Result<OutputSpec> {
    if o.folder.trim().is_empty() {
        return Err(Error::job(
            path,
            "output.folder",
            "is empty; name a folder for the run's outputs",
        ));
    }
    if let Some(g) = &o.gif {
        let plain = Path::new(g)
            .file_name()
            .map(|n| n == g.as_str())
            .unwrap_or(false);
        if !plain || !g.to_ascii_lowercase().ends_with(".gif") {
            return Err(Error::job(
                path,
                "output.gif",
                format!("\"{g}\" should be a plain file name ending in .gif (it is written inside output.folder)"),
            ));
        }
    }
    if let Some(v) = &o.video {
        let plain = Path::new(v)
            .file_name()
            .map(|n| n == v.as_str())
            .unwrap_or(false);
        let stem_ok = v.len() > 4 && !v.starts_with('.');
        if !plain || !stem_ok || !v.to_ascii_lowercase().ends_with(".mp4") {
            return Err(Error::job(
                path,
                "output.video",
                format!("\"{v}\" should be a plain file name ending in .mp4, such as dunes.mp4 (it is written inside output.folder, beside the GIF)"),
            ));
        }
        if o.gif.as_deref().is_some_and(|g| g.eq_ignore_ascii_case(v)) {
            return Err(Error::job(
                path,
                "output.video",
                format!("\"{v}\" is also the GIF's name; give the video its own name"),
            ));
        }
    }
    Ok(OutputSpec {
        folder: tidy(&here.join(&o.folder)),
        gif: o.gif.clone(),
        video: o.video.clone(),
        png_frames: o.png_frames,
        poster: o.poster,
        overwrite: o.overwrite,
    })
}

#[cfg(test)]
mod tests {
    use super::super::parse;
    use super::*;

    fn job_dir() -> tempfile::TempDir {
        let d = tempfile::tempdir().unwrap();
        std::fs::write(d.path().join("a.tif"), b"x").unwrap();
        std::fs::write(d.path().join("b.tif"), b"x").unwrap();
        d
    }

    const MINIMAL: &str = "format_version: 1\ntitle: Test dune\nsurveys:\n  - { date: 2030-05-01, grid: a.tif }\n  - { date: 2032-05-01, grid: b.tif }\noutput: { folder: out }\n";

    #[test]
    fn minimal_job_gets_defaults() {
        let d = job_dir();
        let job = parse(&d.path().join("job.yaml"), MINIMAL.into()).unwrap();
        assert_eq!(job.surveys.len(), 2);
        assert_eq!(job.surveys[0].id, "2030-05-01");
        assert_eq!(job.surveys[1].grid, d.path().join("b.tif"));
        assert_eq!(job.frame_plan, FramePlan::PerYear(12.0));
        // The morph is the default in-between method.
        assert_eq!(job.methods, vec![Method::Morph]);
        assert_eq!(job.output.gif.as_deref(), Some("animation.gif"));
        assert_eq!(job.output.video, None);
        assert_eq!(job.video.quality, 7);
        assert!(!job.output.overwrite);
    }

    #[test]
    fn video_name_and_quality_are_taken() {
        let d = job_dir();
        let text = MINIMAL.replace("folder: out", "folder: out, video: Dunes.MP4")
            + "video: { quality: 9 }\n";
        let job = parse(&d.path().join("job.yaml"), text).unwrap();
        assert_eq!(job.output.video.as_deref(), Some("Dunes.MP4"));
        assert_eq!(job.video.quality, 9);
        let e = err(
            &(MINIMAL.replace("folder: out", "folder: out, video: dune.mp4")
                + "video: { qualty: 9 }\n"),
        );
        assert!(e.contains("did you mean `quality`"), "{e}");
    }

    fn err(text: &str) -> String {
        let d = job_dir();
        parse(&d.path().join("job.yaml"), text.into())
            .unwrap_err()
            .to_string()
    }

    #[test]
    fn section_options_parse() {
        let d = job_dir();
        let text = format!(
            "{MINIMAL}animation: {{ dither: {{ kind: ordered, spread: 4 }}, colours: 64 }}\nshell: {{ survey: previous }}\nwater: {{ level_m: 1.5 }}\nflow: {{ search_radius_m: 30 }}\nlabels: {{ inset_chart: false }}\nchange: {{ display_unit: us-survey-foot }}\n"
        );
        let job = parse(&d.path().join("job.yaml"), text).unwrap();
        assert_eq!(job.animation.colours, 64);
        assert_eq!(job.shell_survey, ShellSurvey::Previous);
        assert_eq!(job.water.level_m, Some(1.5));
        assert!(!job.labels.inset_chart);
        assert_eq!(
            job.change.display_unit,
            crate::grid::LinearUnit::UsSurveyFoot
        );
        let text = format!("{MINIMAL}animation: {{ dither: {{ kind: none }} }}\n");
        assert!(parse(&d.path().join("job.yaml"), text).is_ok());
        let e = err(&format!("{MINIMAL}labels: {{ status: false }}\n"));
        assert!(e.contains("labels.status"), "{e}");
        let e = err(&format!("{MINIMAL}labels: {{ crest_shows: height }}\n"));
        assert!(
            e.contains("labels.crest_shows") && e.contains("height-above-reference"),
            "{e}"
        );
        let text = format!("{MINIMAL}labels: {{ crest_shows: height-above-reference }}\n");
        let job = parse(&d.path().join("job.yaml"), text).unwrap();
        assert_eq!(
            job.labels.crest_shows,
            crate::annotate::CrestFigure::HeightAboveReference
        );
    }

    #[test]
    fn coregistration_keys() {
        let d = job_dir();
        let job = parse(&d.path().join("job.yaml"), MINIMAL.into()).unwrap();
        assert!(job.coregister.enabled);
        assert_eq!(job.stable_ground, None);
        assert_eq!(job.surveys[0].vertical_offset_m, 0.0);
        let text = format!(
            "{}coregister: false\nstable_ground: {{ polygons: [[[0, 0], [10, 0], [10, 10]]], min_cells: 50 }}\n",
            MINIMAL.replace("b.tif }", "b.tif, vertical_offset_m: 0.12 }")
        );
        let job = parse(&d.path().join("job.yaml"), text).unwrap();
        assert!(!job.coregister.enabled);
        assert_eq!(job.coregister.min_cells, 50);
        assert_eq!(job.surveys[1].vertical_offset_m, 0.12);
        assert!(matches!(job.stable_ground, Some(StableGround::Polygons(ref p)) if p.len() == 1));
        let text = format!("{MINIMAL}stable_ground: {{ mask: ./a.tif }}\n");
        let job = parse(&d.path().join("job.yaml"), text).unwrap();
        assert_eq!(
            job.stable_ground,
            Some(StableGround::Mask(d.path().join("a.tif")))
        );
    }

    #[test]
    fn paths_are_tidied() {
        assert_eq!(
            tidy(Path::new("/a/jobs/../data/./x.tif")),
            Path::new("/a/data/x.tif")
        );
        assert_eq!(tidy(Path::new("../x")), Path::new("../x"));
    }

    #[test]
    fn unknown_key_suggests_the_right_one() {
        let e = err(&MINIMAL.replace("title:", "titel:"));
        assert!(
            e.contains("line 2") && e.contains("did you mean `title`"),
            "{e}"
        );
        let e = err(&MINIMAL.replace("grid: b.tif", "gird: b.tif"));
        assert!(e.contains("did you mean `grid`"), "{e}");
    }

    #[test]
    fn impossible_and_disordered_dates() {
        // Check: Gregorian calendar — February 2031 has 28 days (2031 is not a leap year); common practice
        let e = err(&MINIMAL.replace("2032-05-01", "2031-02-30"));
        assert!(
            e.contains("surveys[1].date")
                && e.contains("February 2031 has 28 days, so day 30 does not exist"),
            "{e}"
        );
        let e = err(&MINIMAL.replace("2032-05-01", "2031-13-01"));
        assert!(e.contains("there is no month 13"), "{e}");
        let e = err(&MINIMAL.replace("2032-05-01", "1 May 2032"));
        assert!(
            e.contains("not a calendar date") && e.contains("YYYY-MM-DD"),
            "{e}"
        );
        let e = err(&MINIMAL.replace("2032-05-01", "2029-05-01"));
        assert!(
            e.contains("surveys[1].date") && e.contains("oldest first"),
            "{e}"
        );
        let e = err(&MINIMAL.replace("2032-05-01", "2030-05-01"));
        assert!(e.contains("repeats"), "{e}");
    }

    #[test]
    fn drape_path_resolves_against_the_job_folder() {
        let d = job_dir();
        let text = format!("{MINIMAL}colour: {{ by: drape, drape: ./a.tif }}\n");
        let job = parse(&d.path().join("job.yaml"), text).unwrap();
        assert_eq!(
            job.colour,
            ColourBy::Drape {
                path: d.path().join("a.tif")
            }
        );
    }

    #[test]
    fn other_mistakes_name_their_key() {
        let cases = [
            (
                MINIMAL.replace("b.tif }", "missing.tif }"),
                "surveys[1].grid",
            ),
            (
                MINIMAL.replace("  - { date: 2032-05-01, grid: b.tif }\n", ""),
                "surveys",
            ),
            (
                MINIMAL.replace("format_version: 1", "format_version: 7"),
                "format_version",
            ),
            (
                format!("{MINIMAL}sun: {{ altitude_deg: -5 }}\n"),
                "sun.altitude_deg",
            ),
            (
                format!("{MINIMAL}timeline: {{ frames_per_year: 5, total_frames: 9 }}\n"),
                "timeline",
            ),
            (
                format!("{MINIMAL}in_between: {{ method: wobble }}\n"),
                "in_between.method",
            ),
            (
                format!("{MINIMAL}shell: {{ survey: grid }}\n"),
                "shell.grid",
            ),
            (
                format!("{MINIMAL}shell: {{ survey: first, grid: a.tif }}\n"),
                "shell.grid",
            ),
            (
                format!("{MINIMAL}area_of_interest: {{ west: 5, south: 0, east: 1, north: 9 }}\n"),
                "area_of_interest",
            ),
            (
                MINIMAL.replace("folder: out", "folder: out, gif: x/y.gif"),
                "output.gif",
            ),
            (
                format!("{MINIMAL}colour: {{ by: drape }}\n"),
                "colour.drape",
            ),
            (
                MINIMAL.replace("folder: out", "folder: out, video: films/dune.mp4"),
                "output.video",
            ),
            (
                MINIMAL.replace("folder: out", "folder: out, video: dune.mov"),
                "output.video",
            ),
            (
                MINIMAL.replace("folder: out", "folder: out, video: .mp4"),
                "output.video",
            ),
            (
                format!("{MINIMAL}video: {{ quality: 0 }}\n"),
                "video.quality",
            ),
            (
                MINIMAL.replace("folder: out", "folder: out, video: v.mp4")
                    + "view: { width: 4096, height: 2160 }\n",
                "output.video",
            ),
            (
                format!("{MINIMAL}video: {{ quality: 11 }}\n"),
                "video.quality",
            ),
            (
                format!("{MINIMAL}colour: {{ by: drape, drape: photo.tif }}\n"),
                "colour.drape",
            ),
            (
                format!("{MINIMAL}colour: {{ drape: a.tif }}\n"),
                "colour.drape",
            ),
            (
                MINIMAL.replace("b.tif }", "b.tif, vertical_offset_m: .nan }"),
                "surveys[1].vertical_offset_m",
            ),
            (
                format!("{MINIMAL}stable_ground: {{ mask: a.tif, polygons: [[[0, 0], [1, 0], [1, 1]]] }}\n"),
                "stable_ground",
            ),
            (
                format!("{MINIMAL}stable_ground: {{ polygons: [[[0, 0], [1, 0]]] }}\n"),
                "stable_ground.polygons[0]",
            ),
            (
                format!("{MINIMAL}stable_ground: {{ mask: nowhere.tif }}\n"),
                "stable_ground.mask",
            ),
            (
                format!("{MINIMAL}stable_ground: {{ min_slope_deg: 30, max_slope_deg: 10 }}\n"),
                "stable_ground.min_slope_deg",
            ),
        ];
        for (text, key) in cases {
            let e = err(&text);
            assert!(e.contains(key), "expected `{key}` in: {e}");
        }
        let e = err(&MINIMAL.replace("title: Test dune\n", "title: 12\nview: { width: wide }\n"));
        assert!(e.contains("line 3"), "{e}");
    }

    // Each test below pins a defect the mutation test of the readers found
    // (tests/mutation_readers.rs); the case it came from is named.

    #[test]
    fn deep_brackets_are_refused_before_the_parser_runs() {
        // "nesting 20000 deep": 40 kB of brackets kept the YAML scanner busy for 2.4 s, and the
        // time grows with the square of the depth.
        let deep = MINIMAL.replace(
            "title: Test dune",
            &format!("title: {}", "[".repeat(200_000)),
        );
        let e = err(&deep);
        assert!(e.contains("line 2 column 72"), "{e}");
        assert!(e.contains("nest more than 64 deep"), "{e}");
        // Balanced brackets pass however many; the deepest real job (polygons) passes.
        assert_eq!(
            too_deep(&format!("title: \"{}\"\n", "[]".repeat(1000))),
            None
        );
        assert_eq!(too_deep("p: [[[0, 0], [1, 0], [1, 1]]]\n"), None);
        // A quote mark inside a plain text ("byte edit 127 := '") hid 20 000 brackets from an
        // earlier version of this check.
        assert!(too_deep(&format!("title: east 'dune\nx: {}", "[".repeat(100))).is_some());
        assert_eq!(too_deep(&format!("t: {}", "[".repeat(65))), Some((1, 68)));
    }

    #[test]
    fn every_parser_complaint_says_what_to_do() {
        // "line 1 repeated", "value at 922 := !!binary …", a truncated flow map, a byte 0x01.
        for (text, want) in [
            (
                format!("format_version: 1\n{MINIMAL}"),
                "keep one of them and remove the other",
            ),
            (
                format!("{MINIMAL}animation: {{ dither: {{ kind: sparkle }} }}\n"),
                "use one of the values listed",
            ),
            (
                MINIMAL.replace("folder: out }", "folder: out"),
                "close every bracket and quote",
            ),
            (
                MINIMAL.replace("Test dune", "Test\u{1}dune"),
                "save the job file again as plain UTF-8",
            ),
            (
                MINIMAL.replace("title: Test dune", "title: [1]"),
                "correct the value",
            ),
            (
                MINIMAL.replace("format_version: 1", "format_version: ~"),
                "found nothing (an empty value)",
            ),
            (
                MINIMAL.replace("a.tif }", "a.tif, sigma_z_m: [1] }"),
                "expected a number or a value with its unit",
            ),
            (
                MINIMAL.replace("{ date: 2030-05-01, grid: a.tif }", "[1]"),
                "expected a map of keys",
            ),
        ] {
            let e = err(&text);
            assert!(e.contains(want), "expected `{want}` in: {e}");
            assert!(!e.contains("struct "), "{e}");
        }
        // A control character is placed on its own line, not at line 1 column 1.
        let e = err(&MINIMAL.replace("b.tif }", "b.tif\u{1} }"));
        assert!(e.contains("line 5 column"), "{e}");
    }

    #[test]
    fn long_values_are_cut_in_messages() {
        // "value at 596 := a long value (200000 bytes)": the message quoted all of it.
        let e = err(&MINIMAL.replace(
            "title: Test dune",
            &format!("title: Test\nview: {{ width: {} }}", "x".repeat(200_000)),
        ));
        assert!(e.len() < 400, "{} bytes: {}", e.len(), &e[..300]);
        assert!(e.contains("x…\""), "{e}");
        let e = err(&MINIMAL.replace("grid: a.tif", &format!("grid: {}.tif", "é".repeat(20_000))));
        assert!(e.chars().count() < 500, "{e}");
        assert!(e.contains("correct the path"), "{e}");
        assert_eq!(brief_quotes("a \"short\" one"), "a \"short\" one");
        let cut = brief_quotes(&format!("x `{}` y", "q".repeat(100)));
        assert_eq!(cut, format!("x `{}…` y", "q".repeat(QUOTE_CHARS)));
    }

    #[test]
    fn date_and_survey_count_messages_carry_a_fix() {
        // "a date := 2041-00-10" and a job cut after its first survey.
        let e = err(&MINIMAL.replace("2030-05-01", "2030-00-10"));
        assert!(e.contains("correct the month"), "{e}");
        let one = "format_version: 1\ntitle: T\nsurveys:\n  - { date: 2030-05-01, grid: a.tif }\noutput: { folder: out }\n";
        assert!(err(one).contains("list another survey"));
    }

    #[test]
    fn a_large_file_is_not_read_as_a_job() {
        let d = job_dir();
        let big = d.path().join("big.yaml");
        let f = std::fs::File::create(&big).unwrap();
        f.set_len(super::super::MAX_JOB_BYTES + 1).unwrap();
        let e = super::super::load(&big).unwrap_err().to_string();
        assert!(e.contains("far more than a job file"), "{e}");
    }

    #[test]
    fn numbers_that_are_not_finite_are_refused_with_their_key() {
        // "value at 816 := .nan" (water.level_m) and "-.inf" (water.opacity) passed the reader and
        // reached the renderer's checks, which word them without a fix.
        for (text, key) in [
            (
                format!("{MINIMAL}water: {{ level_m: .nan }}\n"),
                "water.level_m",
            ),
            (
                format!("{MINIMAL}water: {{ opacity: -.inf }}\n"),
                "water.opacity",
            ),
            (
                format!("{MINIMAL}change: {{ transect: [[0, 0], [-.inf, 1]] }}\n"),
                "change.transect[1][0]",
            ),
            (
                MINIMAL.replace("a.tif }", "a.tif, sigma_z_m: { value: .inf, unit: foot } }"),
                "surveys[0].sigma_z_m.value",
            ),
        ] {
            let e = err(&text);
            assert!(e.contains(&format!("{key}: ")), "expected `{key}` in: {e}");
            assert!(e.contains("write an ordinary number"), "{e}");
        }
        // A title that reads like a number is text, and passes.
        let d = job_dir();
        assert!(parse(
            &d.path().join("job.yaml"),
            MINIMAL.replace("Test dune", "'.nan'")
        )
        .is_ok());
    }

    #[test]
    fn sun_options_are_checked_under_their_own_key() {
        // "value at 1133 := -1" (sun.shadow_softness_cells): the renderer refused it as
        // `light.shadow_softness_cells`, a key the job does not have, and said no fix.
        for (entry, key) in [
            ("shadow_softness_cells: -1", "sun.shadow_softness_cells"),
            ("hollow_darkening: 4294967296", "sun.hollow_darkening"),
            ("ambient: 1.5", "sun.ambient"),
            ("shininess: 0", "sun.shininess"),
            ("intensity: 0", "sun.intensity"),
        ] {
            let e = err(&format!("{MINIMAL}sun: {{ {entry} }}\n"));
            assert!(e.contains(&format!("{key}: ")), "expected `{key}` in: {e}");
            assert!(e.contains("use "), "{e}");
        }
    }

    #[test]
    fn findings_of_the_long_run_stay_fixed() {
        // "search_radius_m: 3.4028236e38": the displacement search overflowed (a panic in a debug
        // build, a search without end in a release build).
        let e = err(&format!("{MINIMAL}flow: {{ search_radius_m: 3.4e30 }}\n"));
        assert!(
            e.contains("flow.search_radius_m: ") && e.contains("e.g. 60"),
            "{e}"
        );
        // "spread: 3.4028236e38" became an infinite f32.
        let e = err(&format!(
            "{MINIMAL}animation: {{ dither: {{ kind: ordered, spread: 3.5e38 }} }}\n"
        ));
        assert!(e.contains("animation.dither.spread: "), "{e}");
        // "dither: null": the parser named the enum type.
        let e = err(&format!("{MINIMAL}animation: {{ dither: null }}\n"));
        assert!(
            e.contains("expected a map of keys with `kind`") && !e.contains("enum"),
            "{e}"
        );
        // "survey: grid" without a grid: now says what to do.
        let e = err(&format!("{MINIMAL}shell: {{ survey: grid }}\n"));
        assert!(e.contains("add it"), "{e}");
        // A path holding one quote mark: the fix after it survives whole.
        let e = err(&MINIMAL.replace("grid: a.tif", "grid: 'a\"b.tif'"));
        assert!(e.ends_with("correct the path"), "{e}");
        assert_eq!(brief_quotes("a \"b; fix `c`"), "a \"b; fix `c`");
        let long = format!("x {}; fix", "y".repeat(1000));
        assert_eq!(
            brief_quotes(&long).chars().count(),
            HEAD_CHARS + 1 + "; fix".len()
        );
    }

    #[test]
    fn yaml_tags_are_named_in_words() {
        // "value at 1582 := !custom 3" on animation.dither.spread: serde's words about enums.
        let e = err(&format!(
            "{MINIMAL}animation: {{ dither: {{ kind: ordered, spread: !custom 3 }} }}\n"
        ));
        assert!(e.contains("YAML tag") && !e.contains("enum"), "{e}");
    }
}
