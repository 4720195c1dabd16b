//! Output path -> a file written under a temporary name in the same folder and renamed into place
//! only when complete, so a failed run never leaves half a file behind.
//!
//! An existing file is replaced only when the caller asks for it (`overwrite`). The temporary file
//! sits beside the target so the final rename stays on one file system (and is atomic there). If the
//! writer is dropped without [`AtomicFile::commit`], the temporary file is removed.

use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

/// A file being written under a temporary name; see the module doc.
#[derive(Debug)]
pub struct AtomicFile {
    target: PathBuf,
    temp: PathBuf,
    writer: Option<BufWriter<File>>,
    overwrite: bool,
}

/// Checks that `path` may be written: its folder exists and, unless `overwrite`, nothing is there.
///
/// # Errors
/// [`Error::Output`] naming the path and the fix.
pub fn check_target(path: &Path, overwrite: bool) -> Result<()> {
    let parent = parent_of(path);
    if !parent.is_dir() {
        return Err(Error::output(
            path,
            format!(
                "the folder {} does not exist; create it or choose another output path",
                parent.display()
            ),
        ));
    }
    if path.is_dir() {
        return Err(Error::output(
            path,
            "is a folder; give a file name for this output",
        ));
    }
    if !overwrite && path.exists() {
        return Err(Error::output(
            path,
            "already exists; remove it, choose another output path, or ask for overwrite (--overwrite)",
        ));
    }
    Ok(())
}

fn parent_of(path: &Path) -> PathBuf {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

impl AtomicFile {
    /// Opens a temporary file beside `path` for writing.
    ///
    /// # Errors
    /// [`Error::Output`] if `path` exists and `overwrite` is false, or its folder is missing;
    /// [`Error::Io`] if the temporary file cannot be created.
    pub fn create(path: &Path, overwrite: bool) -> Result<AtomicFile> {
        check_target(path, overwrite)?;
        let name = path
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| "output".into());
        let temp = parent_of(path).join(format!(".{name}.partial-{}", std::process::id()));
        let file = File::create(&temp).map_err(|e| Error::io(&temp, e))?;
        Ok(AtomicFile {
            target: path.to_path_buf(),
            temp,
            writer: Some(BufWriter::new(file)),
            overwrite,
        })
    }

    /// The final path.
    pub fn path(&self) -> &Path {
        &self.target
    }

    /// Flushes, syncs and renames the file into place.
    ///
    /// # Errors
    /// [`Error::Output`] if a file appeared at the target meanwhile and overwrite was not asked;
    /// [`Error::Io`] if flushing or renaming fails. The temporary file is removed in every case.
    pub fn commit(mut self) -> Result<()> {
        let Some(writer) = self.writer.take() else {
            return Err(Error::output(
                &self.target,
                "was already committed; this is a bug in dunereel",
            ));
        };
        let file = writer
            .into_inner()
            .map_err(|e| Error::io(&self.temp, e.into_error()))?;
        file.sync_all().map_err(|e| Error::io(&self.temp, e))?;
        drop(file);
        if !self.overwrite && self.target.exists() {
            return Err(Error::output(
                &self.target,
                "appeared while it was being written; remove it or ask for overwrite (--overwrite)",
            ));
        }
        std::fs::rename(&self.temp, &self.target).map_err(|e| Error::io(&self.target, e))?;
        Ok(())
    }
}

impl Write for AtomicFile {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        match self.writer.as_mut() {
            Some(w) => w.write(buf),
            None => Err(std::io::Error::other("write after commit")),
        }
    }
    fn flush(&mut self) -> std::io::Result<()> {
        match self.writer.as_mut() {
            Some(w) => w.flush(),
            None => Ok(()),
        }
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        // Not committed (or commit failed): take the partial file away. Nothing to report if that
        // fails too; the name starts with a dot and says "partial".
        self.writer.take();
        if self.temp.exists() {
            let _ = std::fs::remove_file(&self.temp);
        }
    }
}

/// Writes a whole file atomically: `fill` writes the contents; on its error nothing is left behind.
///
/// # Errors
/// As [`AtomicFile::create`] and [`AtomicFile::commit`]; an error from `fill` is passed through.
pub fn write_atomic(
    path: &Path,
    overwrite: bool,
    fill: impl FnOnce(&mut AtomicFile) -> Result<()>,
) -> Result<()> {
    let mut f = AtomicFile::create(path, overwrite)?;
    fill(&mut f)?;
    f.commit()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn leftovers(dir: &Path) -> Vec<String> {
        std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect()
    }

    #[test]
    fn writes_then_renames() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.txt");
        write_atomic(&p, false, |f| {
            f.write_all(b"hello").map_err(|e| Error::io(&p, e))
        })
        .unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"hello");
        assert_eq!(leftovers(dir.path()), vec!["a.txt".to_string()]);
    }

    #[test]
    fn refuses_to_replace_unless_asked() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.txt");
        std::fs::write(&p, b"old").unwrap();
        let err = write_atomic(&p, false, |f| {
            f.write_all(b"new").map_err(|e| Error::io(&p, e))
        })
        .unwrap_err();
        let msg = err.to_string();
        assert!(matches!(err, Error::Output { .. }));
        assert!(msg.contains("a.txt") && msg.contains("overwrite"), "{msg}");
        assert_eq!(std::fs::read(&p).unwrap(), b"old");
        write_atomic(&p, true, |f| {
            f.write_all(b"new").map_err(|e| Error::io(&p, e))
        })
        .unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"new");
    }

    #[test]
    fn failure_leaves_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("b.gif");
        let r = write_atomic(&p, false, |f| {
            f.write_all(b"half").unwrap();
            Err(Error::output(&p, "simulated failure"))
        });
        assert!(r.is_err());
        assert!(
            leftovers(dir.path()).is_empty(),
            "{:?}",
            leftovers(dir.path())
        );
    }

    #[test]
    fn missing_folder_is_named() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("no/such/folder/c.png");
        let msg = AtomicFile::create(&p, false).unwrap_err().to_string();
        assert!(msg.contains("does not exist"), "{msg}");
    }
}
