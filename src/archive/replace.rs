//! An existing output folder -> may it be replaced? Only when dunereel made it and nothing else is in it.
//!
//! `--overwrite` (or `output.overwrite: true`) asks to replace a previous run's output, never to
//! delete whatever folder the output path happens to name. So a folder is replaced only when:
//!
//! - it is not, and does not contain, anything the job reads (the job file's folder, a survey grid,
//!   the drape image, the shell grid): those are "protected" paths, compared after resolving links;
//! - it is a BagIt bag (`bagit.txt`) whose `bag-info.txt` names dunereel as the software that made it;
//! - every file in it is a tag file of the bag or a payload file listed in its manifest, so nothing
//!   of the user's would be lost. Litter that file managers leave behind (`.DS_Store`, `Thumbs.db`,
//!   `desktop.ini`) is the one exception: it is not the user's work, and it is named in a note.
//!
//! The replacement itself (old folder moved aside, removed only after the new one is in place) is
//! done by `archive::write_archive`; this module only decides.

use std::collections::BTreeSet;
use std::fs;
use std::path::{Path, PathBuf};

use super::bagit::{self, BAGIT, BAG_INFO, MANIFEST, TAG_MANIFEST};
use crate::error::{Error, Result};

/// File names that operating systems and file managers drop into folders on their own. They are
/// ignored by `verify` and may be removed with a replaced output folder. Common practice, no source.
pub const OS_LITTER: [&str; 3] = [".DS_Store", "Thumbs.db", "desktop.ini"];

/// True when the last part of a slash-separated path is one of [`OS_LITTER`].
pub fn is_os_litter(rel: &str) -> bool {
    let name = rel.rsplit('/').next().unwrap_or(rel);
    OS_LITTER.contains(&name)
}

/// Something the job reads, which no output folder may be, or contain.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Protected {
    /// What it is, for the message: "the job file's folder", "survey grid", …
    pub what: String,
    /// Its path.
    pub path: PathBuf,
}

/// Checks that the output folder `dir` may be written: it does not exist, or it may be replaced
/// (see the module doc) and replacing was asked for.
///
/// # Errors
/// `Error::Output` naming what would be lost and the fix: the folder exists and `overwrite` is off;
/// it is or holds a protected path; it is not a dunereel output; it holds files its manifests do not
/// list. `Error::Io` when it cannot be listed.
pub fn check_replaceable(dir: &Path, overwrite: bool, protected: &[Protected]) -> Result<()> {
    // A protected path inside the output folder is refused whether or not the folder exists yet:
    // a missing output folder cannot hold one, so this only bites on existing folders.
    let meta = match fs::symlink_metadata(dir) {
        Ok(m) => m,
        Err(_) => return Ok(()),
    };
    let canonical = dir.canonicalize().map_err(|e| Error::io(dir, e))?;
    for p in protected {
        let resolved = p.path.canonicalize().unwrap_or_else(|_| p.path.clone());
        if resolved.starts_with(&canonical) {
            let how = if resolved == canonical { "is" } else { "holds" };
            return Err(Error::output(
                dir,
                format!(
                    "this output folder {how} the {} {}; writing the output here would delete it. \
                     Choose an output folder outside your inputs (output.folder or --output)",
                    p.what,
                    p.path.display()
                ),
            ));
        }
    }
    if !meta.is_dir() {
        return Err(Error::output(
            dir,
            "exists and is not a folder; choose another output folder (output.folder or --output)",
        ));
    }
    if !overwrite {
        return Err(Error::output(
            dir,
            "the output folder already exists; choose another output.folder, or pass --overwrite \
             (or set output.overwrite: true) to replace an earlier dunereel output there",
        ));
    }
    let foreign = foreign_files(dir)?;
    if !foreign.is_empty() {
        let shown: Vec<&str> = foreign.iter().take(5).map(String::as_str).collect();
        let more = if foreign.len() > shown.len() {
            format!(" and {} more", foreign.len() - shown.len())
        } else {
            String::new()
        };
        return Err(Error::output(
            dir,
            format!(
                "--overwrite replaces only a folder written by dunereel, and this one holds {} file(s) \
                 no dunereel run made ({}{more}); they would be lost. Move them out, or choose another \
                 output folder",
                foreign.len(),
                shown.join(", ")
            ),
        ));
    }
    Ok(())
}

/// The files in `dir` that a dunereel bag does not account for (sorted; OS litter left out).
/// A folder that is not a dunereel bag at all gets one entry saying so, first.
fn foreign_files(dir: &Path) -> Result<Vec<String>> {
    let all: Vec<String> = bagit::list_files(dir, "")?
        .into_iter()
        .filter(|f| !is_os_litter(f))
        .collect();
    let made_by_us = fs::read_to_string(dir.join(BAG_INFO))
        .map(|t| {
            t.lines().any(|l| {
                l.strip_prefix("Bag-Software-Agent:")
                    .is_some_and(|v| v.trim().starts_with("dunereel"))
            })
        })
        .unwrap_or(false)
        && dir.join(BAGIT).is_file();
    if !made_by_us {
        let mut out = vec![format!(
            "it is not a dunereel output: no {BAGIT} or no `Bag-Software-Agent: dunereel` in {BAG_INFO}"
        )];
        out.extend(all.into_iter().take(5));
        return Ok(out);
    }
    let mut known: BTreeSet<String> = [BAGIT, BAG_INFO, MANIFEST, TAG_MANIFEST]
        .iter()
        .map(|s| s.to_string())
        .collect();
    for manifest in [MANIFEST, TAG_MANIFEST] {
        if let Ok(text) = fs::read_to_string(dir.join(manifest)) {
            for line in text.lines() {
                if let Some((_, path)) = line.split_once([' ', '\t']) {
                    known.insert(bagit::decode_path(path.trim_start_matches([' ', '\t'])));
                }
            }
        }
    }
    Ok(all.into_iter().filter(|f| !known.contains(f)).collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn bag(dir: &Path) {
        fs::create_dir_all(dir.join("data")).unwrap();
        fs::write(dir.join("data/a.txt"), b"abc").unwrap();
        bagit::write_tags(dir, "2030-01-01", "dunereel 0.1.0").unwrap();
    }

    #[test]
    fn a_missing_folder_may_be_written() {
        let d = tempfile::tempdir().unwrap();
        check_replaceable(&d.path().join("new"), false, &[]).unwrap();
    }

    #[test]
    fn an_earlier_output_is_replaced_only_when_asked() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("out");
        bag(&out);
        let msg = check_replaceable(&out, false, &[]).unwrap_err().to_string();
        assert!(msg.contains("--overwrite"), "{msg}");
        check_replaceable(&out, true, &[]).unwrap();
        // Litter from a file manager does not make it the user's.
        fs::write(out.join("data/.DS_Store"), b"x").unwrap();
        check_replaceable(&out, true, &[]).unwrap();
    }

    #[test]
    fn a_file_the_manifests_do_not_list_is_named() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("out");
        bag(&out);
        fs::write(out.join("notes.txt"), b"mine").unwrap();
        fs::write(out.join("data/extra.csv"), b"mine too").unwrap();
        let msg = check_replaceable(&out, true, &[]).unwrap_err().to_string();
        assert!(
            msg.contains("notes.txt") && msg.contains("data/extra.csv") && msg.contains("2 file"),
            "{msg}"
        );
    }

    #[test]
    fn a_folder_of_someone_else_is_refused() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("grids");
        fs::create_dir_all(&out).unwrap();
        fs::write(out.join("2030.tif"), b"II*\0").unwrap();
        let msg = check_replaceable(&out, true, &[]).unwrap_err().to_string();
        assert!(
            msg.contains("not a dunereel output") && msg.contains("2030.tif"),
            "{msg}"
        );
        // A bag made by another program is not ours either.
        let other = d.path().join("other");
        fs::create_dir_all(other.join("data")).unwrap();
        fs::write(other.join("data/a.txt"), b"abc").unwrap();
        bagit::write_tags(&other, "2030-01-01", "some other packer").unwrap();
        let msg = check_replaceable(&other, true, &[])
            .unwrap_err()
            .to_string();
        assert!(msg.contains("not a dunereel output"), "{msg}");
    }

    #[test]
    fn inputs_are_protected_even_inside_an_earlier_output() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("out");
        bag(&out);
        let grid = out.join("data/a.txt");
        let p = [Protected {
            what: "survey grid".into(),
            path: grid,
        }];
        let msg = check_replaceable(&out, true, &p).unwrap_err().to_string();
        assert!(msg.contains("holds the survey grid"), "{msg}");
        let p = [Protected {
            what: "job file's folder".into(),
            path: out.clone(),
        }];
        let msg = check_replaceable(&out, true, &p).unwrap_err().to_string();
        assert!(msg.contains("is the job file's folder"), "{msg}");
        // An ancestor of an input is refused too.
        let msg = check_replaceable(d.path(), true, &p)
            .unwrap_err()
            .to_string();
        assert!(msg.contains("holds the job file's folder"), "{msg}");
    }
}
