//! Hidden working folders beside the output folder: their names, and clearing those that a killed
//! run left behind.
//!
//! A run works in `.<name>.frames-<pid>` (frames on their way into the archive) and builds the bag
//! in `.<name>.partial-<pid>`; when it replaces an earlier output, that one waits as
//! `.<name>.old-<pid>` until the new one is in place. A run that ends normally removes all three.
//! A run killed outright (SIGKILL, power loss) cannot, so the next run into the same place removes
//! the ones whose process is gone, and says so. An `.old-` folder whose replacement never arrived is
//! the user's previous output: it is put back rather than removed.
//!
//! Whether a process is alive is read from `/proc/<pid>`; where there is no `/proc` (not Linux),
//! nothing is cleared, since a live run's folders must never be taken from under it.

use std::fs;
use std::path::{Path, PathBuf};

/// The three kinds of working folder, by the word in their name.
const KINDS: [&str; 3] = ["frames", "partial", "old"];

/// A hidden sibling of the output folder for frames on their way into the archive.
pub(crate) fn scratch_path(folder: &Path) -> PathBuf {
    folder.with_file_name(format!(
        ".{}.frames-{}",
        folder_name(folder),
        std::process::id()
    ))
}

fn folder_name(folder: &Path) -> String {
    folder
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "out".into())
}

/// A working folder left beside `folder` by a run that is no longer running.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct Stale {
    /// The working folder.
    pub path: PathBuf,
    /// `frames`, `partial` or `old`.
    pub kind: &'static str,
    /// The process that made it.
    pub pid: u32,
}

/// Working folders beside `folder` whose process is gone (none where liveness cannot be told).
pub(crate) fn find_stale(folder: &Path) -> Vec<Stale> {
    let proc_root = Path::new("/proc");
    if !proc_root.join("self").exists() {
        return Vec::new();
    }
    let parent = match folder.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let prefix = format!(".{}.", folder_name(folder));
    let Ok(entries) = fs::read_dir(&parent) else {
        return Vec::new();
    };
    let mut out = Vec::new();
    for entry in entries.flatten() {
        let name = entry.file_name().to_string_lossy().into_owned();
        let Some(rest) = name.strip_prefix(&prefix) else {
            continue;
        };
        for kind in KINDS {
            let Some(pid) = rest
                .strip_prefix(kind)
                .and_then(|r| r.strip_prefix('-'))
                .and_then(|p| p.parse::<u32>().ok())
            else {
                continue;
            };
            let is_dir = entry.file_type().map(|t| t.is_dir()).unwrap_or(false);
            if is_dir && pid != std::process::id() && !proc_root.join(pid.to_string()).exists() {
                out.push(Stale {
                    path: entry.path(),
                    kind,
                    pid,
                });
            }
        }
    }
    out.sort_by(|a, b| a.path.cmp(&b.path));
    out
}

/// Removes (or, for an orphaned previous output, restores) the stale working folders beside
/// `folder`. Returns one note per folder handled, for the user.
pub(crate) fn clear_stale(folder: &Path) -> Vec<String> {
    let mut notes = Vec::new();
    for s in find_stale(folder) {
        let shown = s.path.display();
        if s.kind == "old" && !folder.exists() {
            match fs::rename(&s.path, folder) {
                Ok(()) => notes.push(format!(
                    "{shown}: an earlier output set aside by an interrupted run (process {}) was put back \
                     as {} before this run",
                    s.pid,
                    folder.display()
                )),
                Err(e) => notes.push(format!(
                    "{shown}: an earlier output set aside by an interrupted run could not be put back ({e}); \
                     move it by hand"
                )),
            }
            continue;
        }
        match fs::remove_dir_all(&s.path) {
            Ok(()) => notes.push(format!(
                "{shown}: removed a working folder left by an interrupted run (process {} is gone)",
                s.pid
            )),
            Err(e) => notes.push(format!(
                "{shown}: a working folder left by an interrupted run could not be removed ({e}); remove it by hand"
            )),
        }
    }
    for n in &notes {
        log::info!("{n}");
    }
    notes
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A process id that is certainly not running: above the kernel's largest (2^22).
    const GONE: u32 = 4_194_999;

    #[test]
    fn working_folders_of_dead_runs_are_cleared_and_live_ones_kept() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("site");
        fs::create_dir_all(d.path().join(format!(".site.frames-{GONE}/frames"))).unwrap();
        fs::create_dir_all(d.path().join(format!(".site.partial-{GONE}"))).unwrap();
        // Our own process is alive: its folder stays.
        let own = d
            .path()
            .join(format!(".site.frames-{}", std::process::id()));
        fs::create_dir_all(&own).unwrap();
        // Another site's working folder and a user's folder stay.
        fs::create_dir_all(d.path().join(format!(".other.frames-{GONE}"))).unwrap();
        fs::create_dir_all(d.path().join(".site.frames-notapid")).unwrap();
        let notes = clear_stale(&out);
        assert_eq!(notes.len(), 2, "{notes:?}");
        assert!(notes[0].contains("interrupted run"), "{notes:?}");
        let mut left: Vec<String> = fs::read_dir(d.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        left.sort();
        assert_eq!(
            left,
            vec![
                format!(".other.frames-{GONE}"),
                format!(".site.frames-{}", std::process::id()),
                ".site.frames-notapid".to_string(),
            ]
        );
    }

    #[test]
    fn an_orphaned_previous_output_is_put_back() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("site");
        let old = d.path().join(format!(".site.old-{GONE}"));
        fs::create_dir_all(&old).unwrap();
        fs::write(old.join("bagit.txt"), b"x").unwrap();
        let notes = clear_stale(&out);
        assert!(notes[0].contains("put back"), "{notes:?}");
        assert_eq!(fs::read(out.join("bagit.txt")).unwrap(), b"x");
        // With the new output in place, a leftover old one is removed instead.
        fs::create_dir_all(&old).unwrap();
        let notes = clear_stale(&out);
        assert!(notes[0].contains("removed"), "{notes:?}");
        assert!(!old.exists() && out.join("bagit.txt").exists());
    }
}
