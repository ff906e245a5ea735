//! Atomic file output: write to a temporary name in the target folder, then rename.
//!
//! A rename within one folder is atomic on every filesystem we target, so a reader (or a
//! rerun after a crash) sees either the old file or the complete new one, never a torn one.
//!
//! The temporary is a hidden file named `.NAME.XXXXXX.partial` beside the target. A process
//! killed outright (SIGKILL, power loss) cannot remove it, so the writer holds an advisory
//! lock on it while it writes, which the kernel drops when the process dies: the next writer
//! of the same target removes the unlocked temporaries of that target before it starts, and
//! leaves alone those another live process is still writing (shards share a folder).

use std::fs;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use tempfile::NamedTempFile;

use crate::error::{Error, Result};

/// Bytes gathered before a write to the file. Parquet pages (tens to hundreds of KB) pass
/// straight through a buffer smaller than themselves, so it only gathers page headers and
/// small files; at 1 MB the buffers of three valuation files, touched at their first row
/// group's flush, were 3 MB of a long run's peak memory.
const WRITE_BUFFER_BYTES: usize = 64 * 1024;

/// A file being written under a temporary name; [`AtomicFile::commit`] puts it in place.
/// Dropped without commit, the temporary file is removed.
pub struct AtomicFile {
    target: PathBuf,
    temp: BufWriter<NamedTempFile>,
}

impl AtomicFile {
    /// Starts writing `target`, creating its folder if needed.
    pub fn create(target: impl AsRef<Path>) -> Result<Self> {
        let target = target.as_ref().to_path_buf();
        let folder = match target.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        fs::create_dir_all(&folder).map_err(|e| Error::io(&folder, e))?;
        let name = target
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        remove_abandoned(&folder, &name);
        let temp = tempfile::Builder::new()
            .prefix(&format!(".{name}."))
            .suffix(TEMP_SUFFIX)
            .tempfile_in(&folder)
            .map_err(|e| Error::io(&folder, e))?;
        // A filesystem without locks still gets atomic output; only the clean-up of a
        // killed writer's leftovers is lost.
        let _ = temp.as_file().try_lock();
        Ok(AtomicFile {
            target,
            temp: BufWriter::with_capacity(WRITE_BUFFER_BYTES, temp),
        })
    }

    /// The final path.
    pub fn target(&self) -> &Path {
        &self.target
    }

    /// The folder the file is written in.
    pub fn folder(&self) -> &Path {
        self.temp
            .get_ref()
            .path()
            .parent()
            .unwrap_or_else(|| Path::new("."))
    }

    /// Flushes what is written so far and opens the temporary file again for reading,
    /// so an output can be read back before it is committed.
    pub fn reopen(&mut self) -> Result<fs::File> {
        self.temp
            .flush()
            .and_then(|()| self.temp.get_ref().reopen())
            .map_err(|e| Error::io(&self.target, e))
    }

    /// Flushes, syncs and renames the file into place.
    pub fn commit(self) -> Result<()> {
        let target = self.target;
        let temp = self
            .temp
            .into_inner()
            .map_err(|e| Error::io(&target, e.into_error()))?;
        temp.as_file()
            .sync_all()
            .map_err(|e| Error::io(&target, e))?;
        // Temporary files are created owner-only; results are meant to be shared like any
        // other file the user writes.
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            temp.as_file()
                .set_permissions(fs::Permissions::from_mode(0o644))
                .map_err(|e| Error::io(&target, e))?;
        }
        temp.persist(&target)
            .map_err(|e| Error::io(&target, e.error))?;
        Ok(())
    }
}

/// Refuses a JSON document for `target` holding a NaN or an infinity, naming its key.
pub fn check_finite_json<T: serde::Serialize + ?Sized>(target: &Path, value: &T) -> Result<()> {
    match crate::io::finite::first_non_finite(value) {
        None => Ok(()),
        Some(at) => Err(Error::Numerical(format!(
            "{}: {at}; NaN and infinities are never written (JSON would show them as null)",
            target.display()
        ))),
    }
}

/// Suffix of every temporary output file.
pub const TEMP_SUFFIX: &str = ".partial";

/// Whether `file_name` is a temporary of the target `name` (`.NAME.XXXXXX.partial`).
pub fn is_temporary_of(file_name: &str, name: &str) -> bool {
    file_name
        .strip_prefix('.')
        .and_then(|rest| rest.strip_prefix(name))
        .and_then(|rest| rest.strip_prefix('.'))
        .and_then(|rest| rest.strip_suffix(TEMP_SUFFIX))
        .is_some_and(|middle| {
            !middle.is_empty() && middle.chars().all(|c| c.is_ascii_alphanumeric())
        })
}

/// Removes the temporaries of target `name` in `folder` that no live process holds locked:
/// those a killed writer left behind. Best effort: a failure here costs only disk space.
fn remove_abandoned(folder: &Path, name: &str) {
    let Ok(entries) = fs::read_dir(folder) else {
        return;
    };
    for entry in entries.flatten() {
        let file_name = entry.file_name();
        if !is_temporary_of(&file_name.to_string_lossy(), name) {
            continue;
        }
        let path = entry.path();
        let Ok(file) = fs::File::open(&path) else {
            continue;
        };
        if file.try_lock().is_ok() {
            let _ = fs::remove_file(&path);
        }
    }
}

impl Write for AtomicFile {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        self.temp.write(buf)
    }

    fn flush(&mut self) -> std::io::Result<()> {
        self.temp.flush()
    }
}

/// Writes `bytes` to `target` atomically.
pub fn write_bytes(target: impl AsRef<Path>, bytes: &[u8]) -> Result<()> {
    let mut file = AtomicFile::create(target)?;
    let path = file.target().to_path_buf();
    file.write_all(bytes).map_err(|e| Error::io(&path, e))?;
    file.commit()
}

/// Writes `value` as pretty JSON to `target` atomically.
/// A document with a NaN or an infinity anywhere is refused (JSON would show it as null).
pub fn write_json<T: serde::Serialize>(target: impl AsRef<Path>, value: &T) -> Result<()> {
    let target = target.as_ref();
    check_finite_json(target, value)?;
    let mut text = serde_json::to_string_pretty(value).map_err(|e| Error::Io {
        path: target.to_path_buf(),
        source: std::io::Error::other(e),
    })?;
    text.push('\n');
    write_bytes(target, text.as_bytes())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn abandoned_temporaries_are_removed_and_live_ones_kept() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("book.parquet");
        // Left by a killed writer: nobody holds its lock.
        let abandoned = dir.path().join(".book.parquet.dead01.partial");
        fs::write(&abandoned, b"half").unwrap();
        // Another target's temporary is not ours to touch.
        let other = dir.path().join(".paths.parquet.dead02.partial");
        fs::write(&other, b"half").unwrap();
        // Held by a live writer.
        let live = AtomicFile::create(&target).unwrap();
        assert!(!abandoned.exists(), "abandoned temporary kept");
        assert!(other.exists());
        let mut second = AtomicFile::create(&target).unwrap();
        let temporaries = || {
            fs::read_dir(dir.path())
                .unwrap()
                .filter(|e| {
                    is_temporary_of(
                        &e.as_ref().unwrap().file_name().to_string_lossy(),
                        "book.parquet",
                    )
                })
                .count()
        };
        assert_eq!(temporaries(), 2, "a live writer's temporary was removed");
        second.write_all(b"whole").unwrap();
        second.commit().unwrap();
        drop(live);
        assert_eq!(temporaries(), 0);
        assert_eq!(fs::read(&target).unwrap(), b"whole");
    }

    #[test]
    fn uncommitted_file_leaves_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("a.txt");
        {
            let mut f = AtomicFile::create(&target).unwrap();
            f.write_all(b"half").unwrap();
        }
        assert!(!target.exists());
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 0);
        assert!(is_temporary_of(".a.txt.Ab12x9.partial", "a.txt"));
        assert!(!is_temporary_of(".a.txt.Ab12x9.partial", "a"));
        assert!(!is_temporary_of(".a.txt.x.y.partial", "a.txt"));
        assert!(!is_temporary_of("a.txt", "a.txt"));
        let mut f = AtomicFile::create(&target).unwrap();
        f.write_all(b"read back").unwrap();
        let mut text = String::new();
        std::io::Read::read_to_string(&mut f.reopen().unwrap(), &mut text).unwrap();
        assert_eq!(text, "read back");
        drop(f);
        assert!(!target.exists());
        write_bytes(&target, b"whole").unwrap();
        assert_eq!(fs::read(&target).unwrap(), b"whole");
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            let mode = fs::metadata(&target).unwrap().permissions().mode();
            assert_eq!(mode & 0o777, 0o644);
        }
    }
}
