//! A folder with a `data/` payload -> BagIt tag files; and a bag folder -> a `VerifyReport`.
//!
//! Layout after IETF RFC 8493 (BagIt 1.0, REFERENCES.md §11): `bagit.txt` (version and encoding),
//! `data/` (the payload), `manifest-sha256.txt` (one line per payload file: lower-case hex SHA-256,
//! two spaces, the path from the bag's top with forward slashes), `bag-info.txt` (`Bagging-Date`,
//! `Payload-Oxum` = octets.files, `Bag-Software-Agent`) and `tagmanifest-sha256.txt` (the same for
//! the three tag files). Two spaces between checksum and path make the manifests readable by the
//! common `sha256sum -c` as well. In paths, CR, LF and `%` are percent-encoded as the RFC asks.

use std::collections::{BTreeMap, BTreeSet};
use std::fs;
use std::path::{Path, PathBuf};

use rayon::prelude::*;
use sha2::{Digest, Sha256};

use super::replace::is_os_litter;
use crate::change::record::{hex, sha256_file};
use crate::error::{Error, Result};

/// Contents of `bagit.txt`.
pub const BAGIT_TXT: &str = "BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n";
/// Payload manifest file name.
pub const MANIFEST: &str = "manifest-sha256.txt";
/// Tag manifest file name.
pub const TAG_MANIFEST: &str = "tagmanifest-sha256.txt";
/// Bag metadata file name.
pub const BAG_INFO: &str = "bag-info.txt";
/// Declaration file name.
pub const BAGIT: &str = "bagit.txt";

/// SHA-256 of bytes as lower-case hex.
pub fn sha256_hex(bytes: &[u8]) -> String {
    hex(&Sha256::digest(bytes))
}

/// Percent-encodes CR, LF and `%` in a manifest path (RFC 8493 §2.1.3).
pub fn encode_path(p: &str) -> String {
    p.replace('%', "%25")
        .replace('\r', "%0D")
        .replace('\n', "%0A")
}

/// Reverses [`encode_path`].
pub fn decode_path(p: &str) -> String {
    p.replace("%0D", "\r")
        .replace("%0d", "\r")
        .replace("%0A", "\n")
        .replace("%0a", "\n")
        .replace("%25", "%")
}

/// One manifest line.
pub fn manifest_line(sha_hex: &str, path: &str) -> String {
    format!("{sha_hex}  {}\n", encode_path(path))
}

/// `Payload-Oxum` value: total octets, a dot, number of files.
pub fn payload_oxum(octets: u64, files: usize) -> String {
    format!("{octets}.{files}")
}

/// Every file under `root/sub`, as paths relative to `root` with forward slashes, sorted.
///
/// # Errors
/// `Error::Io` when a folder cannot be listed.
pub fn list_files(root: &Path, sub: &str) -> Result<Vec<String>> {
    let mut out = Vec::new();
    let start = if sub.is_empty() {
        root.to_path_buf()
    } else {
        root.join(sub)
    };
    walk(&start, sub, &mut out)?;
    out.sort();
    Ok(out)
}

fn walk(dir: &Path, rel: &str, out: &mut Vec<String>) -> Result<()> {
    let entries = fs::read_dir(dir).map_err(|e| Error::io(dir, e))?;
    for entry in entries {
        let entry = entry.map_err(|e| Error::io(dir, e))?;
        let name = entry.file_name().to_string_lossy().into_owned();
        let rel_name = if rel.is_empty() {
            name
        } else {
            format!("{rel}/{name}")
        };
        let ty = entry.file_type().map_err(|e| Error::io(&entry.path(), e))?;
        if ty.is_dir() {
            walk(&entry.path(), &rel_name, out)?;
        } else {
            out.push(rel_name);
        }
    }
    Ok(())
}

fn join_rel(root: &Path, rel: &str) -> PathBuf {
    rel.split('/')
        .fold(root.to_path_buf(), |p, part| p.join(part))
}

/// Writes the tag files of a bag whose payload already sits in `root/data`.
///
/// # Errors
/// `Error::Io` on any read or write failure.
pub fn write_tags(root: &Path, bagging_date: &str, agent: &str) -> Result<()> {
    let files = list_files(root, "data")?;
    let hashed: Vec<Result<(String, u64)>> = files
        .par_iter()
        .map(|rel| {
            let p = join_rel(root, rel);
            let len = fs::metadata(&p).map_err(|e| Error::io(&p, e))?.len();
            Ok((sha256_file(&p)?, len))
        })
        .collect();
    let mut manifest = String::new();
    let mut octets = 0u64;
    for (rel, h) in files.iter().zip(hashed) {
        let (sha, len) = h?;
        octets += len;
        manifest.push_str(&manifest_line(&sha, rel));
    }
    let info = format!(
        "Bagging-Date: {bagging_date}\nPayload-Oxum: {}\nBag-Software-Agent: {agent}\n",
        payload_oxum(octets, files.len())
    );
    let mut tags = String::new();
    for (name, body) in [
        (BAGIT, BAGIT_TXT),
        (BAG_INFO, info.as_str()),
        (MANIFEST, manifest.as_str()),
    ] {
        write(&root.join(name), body.as_bytes())?;
        tags.push_str(&manifest_line(&sha256_hex(body.as_bytes()), name));
    }
    write(&root.join(TAG_MANIFEST), tags.as_bytes())
}

fn write(path: &Path, bytes: &[u8]) -> Result<()> {
    fs::write(path, bytes).map_err(|e| Error::io(path, e))
}

/// What [`verify`] found.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct VerifyReport {
    /// Payload files (under `data/`) whose checksum matched or was compared.
    pub payload_checked: usize,
    /// Tag files (`bagit.txt`, `bag-info.txt`, `manifest-sha256.txt`) compared against the tag manifest.
    pub tags_checked: usize,
    /// Files a manifest lists that are not there.
    pub missing: Vec<String>,
    /// Files present that no manifest lists.
    pub extra: Vec<String>,
    /// Payload files whose checksum differs from their line in `manifest-sha256.txt`.
    pub altered: Vec<String>,
    /// Tag files whose checksum differs from their line in `tagmanifest-sha256.txt`. When the payload
    /// manifest is among them, the manifest itself was edited, and a payload "altered" above may be an
    /// edited manifest line rather than an edited file.
    pub altered_tags: Vec<String>,
    /// Files left out of the check: operating-system litter such as `.DS_Store` (not failures).
    pub ignored: Vec<String>,
    /// Anything else wrong: a malformed manifest line, a wrong `bagit.txt`, a `Payload-Oxum` that
    /// does not add up.
    pub problems: Vec<String>,
}

impl VerifyReport {
    /// True when nothing is missing, extra, altered or otherwise wrong (ignored litter is fine).
    pub fn is_intact(&self) -> bool {
        self.missing.is_empty()
            && self.extra.is_empty()
            && self.altered.is_empty()
            && self.altered_tags.is_empty()
            && self.problems.is_empty()
    }

    /// True when the payload manifest itself no longer matches the tag manifest.
    pub fn manifest_edited(&self) -> bool {
        self.altered_tags.iter().any(|t| t == MANIFEST)
    }

    /// One line per finding, for people: ignored litter, altered tag files, altered, missing and
    /// extra files, other problems.
    pub fn lines(&self) -> Vec<String> {
        let mut out: Vec<String> = self
            .ignored
            .iter()
            .map(|f| format!("ignored: {f} (left by the operating system, not part of the record)"))
            .collect();
        out.extend(
            self.altered_tags.iter().map(|f| {
                format!("altered tag file: {f} (differs from its line in {TAG_MANIFEST})")
            }),
        );
        let how = if self.manifest_edited() {
            format!("differs from its line in the edited {MANIFEST} (the line or the file changed)")
        } else {
            format!("altered (differs from its line in {MANIFEST})")
        };
        out.extend(self.altered.iter().map(|f| format!("{f}: {how}")));
        out.extend(self.missing.iter().map(|f| format!("missing: {f}")));
        out.extend(self.extra.iter().map(|f| format!("extra: {f}")));
        out.extend(self.problems.iter().map(|p| format!("problem: {p}")));
        out
    }

    /// The verdict in one sentence with the fix, for a bag that is not intact.
    pub fn summary(&self) -> String {
        format!(
            "the archive does not match its manifests ({} missing, {} extra, {} altered, {} altered tag \
             files, {} other problems); restore missing or altered files from a trusted copy and move \
             extra files out",
            self.missing.len(),
            self.extra.len(),
            self.altered.len(),
            self.altered_tags.len(),
            self.problems.len()
        )
    }
}

/// Parses manifest text into path -> checksum; malformed lines go to `problems`.
fn parse_manifest(name: &str, text: &str, problems: &mut Vec<String>) -> BTreeMap<String, String> {
    let mut out = BTreeMap::new();
    if !text.is_empty() && !text.ends_with('\n') {
        problems.push(format!(
            "{name}: the last line is not terminated by a line break"
        ));
    }
    for (i, line) in text.lines().enumerate() {
        let line = line.strip_suffix('\r').unwrap_or(line);
        let parsed = line.split_once([' ', '\t']).and_then(|(sum, rest)| {
            let path = rest.trim_start_matches([' ', '\t']);
            let ok =
                sum.len() == 64 && sum.bytes().all(|b| b.is_ascii_hexdigit()) && !path.is_empty();
            ok.then(|| (sum.to_ascii_lowercase(), decode_path(path)))
        });
        match parsed {
            Some((sum, path)) => {
                if out.insert(path.clone(), sum).is_some() {
                    problems.push(format!("{name} line {}: {path} is listed twice", i + 1));
                }
            }
            None => problems.push(format!(
                "{name} line {}: not a SHA-256 checksum (64 hex digits), spaces and a path",
                i + 1
            )),
        }
    }
    out
}

fn read_text(path: &Path, name: &str, report: &mut VerifyReport) -> Option<String> {
    match fs::read(path) {
        Ok(bytes) => match String::from_utf8(bytes) {
            Ok(s) => Some(s),
            Err(_) => {
                report.problems.push(format!("{name} is not valid UTF-8"));
                Some(String::new())
            }
        },
        Err(_) => {
            report.missing.push(name.to_string());
            None
        }
    }
}

/// Checks each listed file's checksum; files that cannot be read count as missing. Returns how
/// many were compared and which differ.
fn check_listed(
    root: &Path,
    listed: &BTreeMap<String, String>,
    missing: &mut Vec<String>,
) -> (usize, Vec<String>) {
    let results: Vec<(String, Option<bool>)> = listed
        .par_iter()
        .map(|(rel, sum)| {
            let p = join_rel(root, rel);
            let ok = if p.is_file() {
                sha256_file(&p).ok().map(|h| &h == sum)
            } else {
                None
            };
            (rel.clone(), ok)
        })
        .collect();
    let (mut compared, mut differ) = (0, Vec::new());
    for (rel, ok) in results {
        match ok {
            None => missing.push(rel),
            Some(true) => compared += 1,
            Some(false) => {
                compared += 1;
                differ.push(rel);
            }
        }
    }
    (compared, differ)
}

/// Checks a bag folder: every file listed in the manifests is present and unchanged, no file is
/// present that is not listed, `bagit.txt` declares BagIt 1.0 and `Payload-Oxum` adds up
/// (RFC 8493 §2.1.3 payload manifest; §3, a valid bag). Operating-system litter (`.DS_Store`,
/// `Thumbs.db`, `desktop.ini`) is reported as ignored, not as extra.
///
/// # Errors
/// `Error::Input` when `dir` is not a folder, or is not a bag at all (no `bagit.txt`); `Error::Io`
/// when it cannot be listed.
pub fn verify(dir: &Path) -> Result<VerifyReport> {
    if !dir.is_dir() {
        return Err(Error::input(
            dir,
            "is not a folder; give the archive folder written by a run",
        ));
    }
    if !dir.join(BAGIT).is_file() {
        return Err(Error::input(
            dir,
            format!(
                "is not a bag: it has no {BAGIT}; give the output folder of a dunereel run (the folder \
                 that holds {BAGIT}, {MANIFEST} and data/)"
            ),
        ));
    }
    let mut report = VerifyReport::default();
    if let Some(text) = read_text(&dir.join(BAGIT), BAGIT, &mut report) {
        if text != BAGIT_TXT {
            report.problems.push(format!(
                "{BAGIT} does not read exactly `{}`",
                BAGIT_TXT.replace('\n', " / ")
            ));
        }
    }
    let payload = match read_text(&dir.join(MANIFEST), MANIFEST, &mut report) {
        Some(t) => parse_manifest(MANIFEST, &t, &mut report.problems),
        None => BTreeMap::new(),
    };
    for rel in payload.keys().filter(|r| !r.starts_with("data/")) {
        report
            .problems
            .push(format!("{MANIFEST} lists {rel}, which is outside data/"));
    }
    let (n, altered) = check_listed(dir, &payload, &mut report.missing);
    report.payload_checked = n;
    report.altered = altered;
    let (litter, present): (Vec<String>, Vec<String>) = if dir.join("data").is_dir() {
        list_files(dir, "data")?
    } else {
        Vec::new()
    }
    .into_iter()
    .partition(|p| is_os_litter(p) && !payload.contains_key(p));
    report.ignored.extend(litter);
    let listed: BTreeSet<&String> = payload.keys().collect();
    report
        .extra
        .extend(present.iter().filter(|p| !listed.contains(p)).cloned());

    let tags = match read_text(&dir.join(TAG_MANIFEST), TAG_MANIFEST, &mut report) {
        Some(t) => parse_manifest(TAG_MANIFEST, &t, &mut report.problems),
        None => BTreeMap::new(),
    };
    let (n, altered) = check_listed(dir, &tags, &mut report.missing);
    report.tags_checked = n;
    report.altered_tags = altered;
    for rel in list_files(dir, "")? {
        let is_tag = tags.contains_key(&rel)
            || rel == TAG_MANIFEST
            || rel == BAGIT
            || rel == MANIFEST
            || rel == BAG_INFO;
        if rel.starts_with("data/") || is_tag {
            continue;
        }
        if is_os_litter(&rel) {
            report.ignored.push(rel);
        } else {
            report.extra.push(rel);
        }
    }
    if let Ok(info) = fs::read_to_string(dir.join(BAG_INFO)) {
        let stated = info
            .lines()
            .find_map(|l| l.strip_prefix("Payload-Oxum:"))
            .map(str::trim);
        let mut octets = 0u64;
        for rel in &present {
            octets += fs::metadata(join_rel(dir, rel))
                .map(|m| m.len())
                .unwrap_or(0);
        }
        let actual = payload_oxum(octets, present.len());
        match stated {
            Some(s) if s == actual => {}
            Some(s) => report.problems.push(format!(
                "{BAG_INFO}: Payload-Oxum {s} but the payload holds {actual}"
            )),
            None => report
                .problems
                .push(format!("{BAG_INFO} has no Payload-Oxum")),
        }
    }
    report.missing.sort();
    report.missing.dedup();
    report.extra.sort();
    report.extra.dedup();
    report.altered.sort();
    report.altered_tags.sort();
    report.ignored.sort();
    Ok(report)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sha256_vectors() {
        // Check: FIPS 180-4 SHA-256 — "abc"; REFERENCES.md §11, exact
        assert_eq!(
            sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
        // Check: FIPS 180-4 SHA-256 — empty message; REFERENCES.md §11, exact
        assert_eq!(
            sha256_hex(b""),
            "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"
        );
        // Check: FIPS 180-4 SHA-256 — 448-bit message "abcdbcde…nopq"; REFERENCES.md §11, exact
        assert_eq!(
            sha256_hex(b"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"),
            "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"
        );
    }

    #[test]
    fn one_file_bag() {
        let dir = tempfile::tempdir().unwrap();
        fs::create_dir(dir.path().join("data")).unwrap();
        fs::write(dir.path().join("data/a.txt"), b"abc").unwrap();
        write_tags(dir.path(), "2030-01-01", "test").unwrap();
        let manifest = fs::read_to_string(dir.path().join(MANIFEST)).unwrap();
        // Check: RFC 8493 manifest line for data/a.txt holding "abc" (FIPS 180-4 digest); REFERENCES.md §11, exact
        assert_eq!(
            manifest,
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad  data/a.txt\n"
        );
        let info = fs::read_to_string(dir.path().join(BAG_INFO)).unwrap();
        // Check: RFC 8493 Payload-Oxum = octets.files — 3.1; REFERENCES.md §11, exact
        assert!(info.contains("Payload-Oxum: 3.1\n"), "{info}");
        assert!(info.contains("Bagging-Date: 2030-01-01\n"));
        assert_eq!(
            fs::read_to_string(dir.path().join(BAGIT)).unwrap(),
            BAGIT_TXT
        );
        let report = verify(dir.path()).unwrap();
        assert!(report.is_intact(), "{report:?}");
        assert_eq!((report.payload_checked, report.tags_checked), (1, 3));
    }

    #[test]
    fn an_edited_manifest_line_is_reported_as_such() {
        let dir = tempfile::tempdir().unwrap();
        fs::create_dir(dir.path().join("data")).unwrap();
        fs::write(dir.path().join("data/a.txt"), b"abc").unwrap();
        write_tags(dir.path(), "2030-01-01", "test").unwrap();
        // One hex digit of the payload manifest changed: the file is intact, the manifest is not.
        let m = dir.path().join(MANIFEST);
        let text = fs::read_to_string(&m).unwrap().replacen("ba78", "ba79", 1);
        fs::write(&m, text).unwrap();
        let r = verify(dir.path()).unwrap();
        // Check: RFC 8493 §2.1.3 and §3 — the tag manifest covers manifest-sha256.txt, so an edited
        // manifest line shows as an altered tag file; hand-made case
        assert_eq!(r.altered_tags, vec![MANIFEST.to_string()]);
        assert!(r.manifest_edited());
        assert_eq!(r.altered, vec!["data/a.txt".to_string()]);
    }

    #[test]
    fn a_folder_without_bagit_txt_is_not_a_bag() {
        let dir = tempfile::tempdir().unwrap();
        fs::write(dir.path().join("notes.txt"), b"x").unwrap();
        let msg = verify(dir.path()).unwrap_err().to_string();
        assert!(
            msg.contains("is not a bag") && msg.contains("bagit.txt"),
            "{msg}"
        );
    }

    #[test]
    fn os_litter_is_ignored_not_failed() {
        let dir = tempfile::tempdir().unwrap();
        fs::create_dir(dir.path().join("data")).unwrap();
        fs::write(dir.path().join("data/a.txt"), b"abc").unwrap();
        write_tags(dir.path(), "2030-01-01", "test").unwrap();
        fs::write(dir.path().join(".DS_Store"), b"x").unwrap();
        fs::write(dir.path().join("data/Thumbs.db"), b"y").unwrap();
        let r = verify(dir.path()).unwrap();
        assert!(r.is_intact(), "{r:?}");
        assert_eq!(
            r.ignored,
            vec![".DS_Store".to_string(), "data/Thumbs.db".to_string()]
        );
    }

    #[test]
    fn percent_encoding_round_trips() {
        // Check: RFC 8493 §2.1.3 — CR, LF and % in paths are percent-encoded; from memory for the clause number
        assert_eq!(encode_path("data/a%b\nc\r"), "data/a%25b%0Ac%0D");
        assert_eq!(decode_path(&encode_path("data/x%0A%\n")), "data/x%0A%\n");
    }

    #[test]
    fn malformed_lines_are_reported() {
        let mut p = Vec::new();
        let m = parse_manifest("m", "abc data/x\nba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad  data/a.txt\n", &mut p);
        assert_eq!(m.len(), 1);
        assert_eq!(p.len(), 1);
        assert!(p[0].contains("line 1"));
    }
}
