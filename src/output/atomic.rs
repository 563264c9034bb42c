//! Atomic file replacement: write to a temporary file in the target's
//! directory, flush and sync it, then rename it over the target.
//!
//! A rename within one directory is atomic on POSIX file systems, so an
//! interrupted run leaves either the previous file or the complete new one,
//! never a truncated file. Temporary files are named
//! `.<file name>.tmp-<pid>-<n>` and are removed when a write fails.

use std::fs::{File, OpenOptions};
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use super::OutputError;

/// Distinguishes temporary files of concurrent writers in one process.
static TMP_COUNTER: AtomicU64 = AtomicU64::new(0);

/// A temporary file that becomes `target` only when [`AtomicFile::commit`]
/// is called. Dropping it without committing deletes the temporary file.
#[derive(Debug)]
pub struct AtomicFile {
    target: PathBuf,
    tmp: PathBuf,
    committed: bool,
}

impl AtomicFile {
    /// Creates (empty) the temporary file for `target` in the same directory.
    pub fn create(target: &Path) -> Result<Self, OutputError> {
        let name = target
            .file_name()
            .ok_or_else(|| OutputError::invalid(target, "path has no file name"))?;
        let dir = match target.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        let n = TMP_COUNTER.fetch_add(1, Ordering::Relaxed);
        let mut tmp_name = std::ffi::OsString::from(".");
        tmp_name.push(name);
        tmp_name.push(format!(".tmp-{}-{}", std::process::id(), n));
        let tmp = dir.join(tmp_name);
        OpenOptions::new()
            .write(true)
            .create(true)
            .truncate(true)
            .open(&tmp)
            .map_err(|e| OutputError::io(&tmp, e))?;
        Ok(AtomicFile {
            target: target.to_path_buf(),
            tmp,
            committed: false,
        })
    }

    /// Path of the temporary file to write into.
    pub fn path_tmp(&self) -> &Path {
        &self.tmp
    }

    /// Final path the temporary file will be renamed to.
    pub fn target(&self) -> &Path {
        &self.target
    }

    /// Syncs the temporary file to disk and renames it over the target.
    ///
    /// The caller must have closed (or flushed) its own handles to the
    /// temporary file first.
    pub fn commit(mut self) -> Result<(), OutputError> {
        let f = File::open(&self.tmp).map_err(|e| OutputError::io(&self.tmp, e))?;
        f.sync_all().map_err(|e| OutputError::io(&self.tmp, e))?;
        drop(f);
        std::fs::rename(&self.tmp, &self.target).map_err(|e| OutputError::io(&self.target, e))?;
        self.committed = true;
        sync_parent_dir(&self.target);
        Ok(())
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        if !self.committed {
            let _ = std::fs::remove_file(&self.tmp);
        }
    }
}

/// Best-effort sync of the directory holding `path`, so the rename itself
/// survives a crash. Failures are ignored (not every platform supports it).
fn sync_parent_dir(path: &Path) {
    #[cfg(unix)]
    {
        let dir = match path.parent() {
            Some(p) if !p.as_os_str().is_empty() => p,
            _ => Path::new("."),
        };
        if let Ok(d) = File::open(dir) {
            let _ = d.sync_all();
        }
    }
    #[cfg(not(unix))]
    let _ = path;
}

/// Checks that `dir` can be created and written, by creating it and a small probe file that is
/// removed again: studies call this before any run so that an unwritable folder fails at once
/// instead of after the work.
pub fn ensure_writable(dir: &Path) -> Result<(), OutputError> {
    std::fs::create_dir_all(dir).map_err(|e| OutputError::io(dir, e))?;
    let probe = dir.join(format!(".tinct-probe-{}", std::process::id()));
    File::create(&probe).map_err(|e| OutputError::io(&probe, e))?;
    std::fs::remove_file(&probe).map_err(|e| OutputError::io(&probe, e))
}

/// Atomically replaces `path` with `bytes`.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<(), OutputError> {
    write_atomic_with(path, |w| w.write_all(bytes))
}

/// Atomically replaces `path` with whatever `f` writes into the buffered
/// temporary file. If `f` (or flushing/syncing) fails, the temporary file is
/// removed and the old `path`, if any, is left untouched.
pub fn write_atomic_with(
    path: &Path,
    f: impl FnOnce(&mut BufWriter<File>) -> io::Result<()>,
) -> Result<(), OutputError> {
    let atomic = AtomicFile::create(path)?;
    let tmp = atomic.path_tmp().to_path_buf();
    let file = OpenOptions::new()
        .write(true)
        .truncate(true)
        .open(&tmp)
        .map_err(|e| OutputError::io(&tmp, e))?;
    let mut w = BufWriter::new(file);
    f(&mut w).map_err(|e| OutputError::io(&tmp, e))?;
    let file = w.into_inner().map_err(|e| OutputError::io(&tmp, e.into_error()))?;
    file.sync_all().map_err(|e| OutputError::io(&tmp, e))?;
    drop(file);
    atomic.commit()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn dir_entries(dir: &Path) -> Vec<String> {
        let mut v: Vec<String> = std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }

    #[test]
    fn writes_and_replaces() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("a.txt");
        write_atomic(&p, b"first").unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"first");
        write_atomic(&p, b"second, longer").unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"second, longer");
        assert_eq!(dir_entries(d.path()), vec!["a.txt".to_string()]);
    }

    #[test]
    fn failed_write_keeps_old_file_and_removes_temp() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("b.txt");
        write_atomic(&p, b"old").unwrap();
        let r = write_atomic_with(&p, |w| {
            w.write_all(b"half a fi")?;
            Err(io::Error::other("interrupted"))
        });
        let err = r.unwrap_err();
        assert!(matches!(err, OutputError::Io { .. }));
        assert!(err.to_string().contains(".b.txt.tmp-"), "{err}");
        assert_eq!(std::fs::read(&p).unwrap(), b"old");
        assert_eq!(dir_entries(d.path()), vec!["b.txt".to_string()]);
    }

    #[test]
    fn atomic_file_drop_without_commit_deletes_temp() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("c.nc");
        {
            let a = AtomicFile::create(&p).unwrap();
            let name = a.path_tmp().file_name().unwrap().to_string_lossy().into_owned();
            assert!(name.starts_with(".c.nc.tmp-"), "{name}");
            std::fs::write(a.path_tmp(), b"data").unwrap();
            assert!(a.path_tmp().exists());
        }
        assert!(!p.exists());
        assert!(dir_entries(d.path()).is_empty());

        let a = AtomicFile::create(&p).unwrap();
        std::fs::write(a.path_tmp(), b"data").unwrap();
        a.commit().unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"data");
        assert_eq!(dir_entries(d.path()), vec!["c.nc".to_string()]);
    }

    #[test]
    fn missing_directory_is_an_error_naming_the_path() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("no_such_dir").join("x.png");
        let err = write_atomic(&p, b"x").unwrap_err();
        assert!(err.to_string().contains("no_such_dir"), "{err}");
        assert!(write_atomic(Path::new("/"), b"x").is_err());
    }
}
