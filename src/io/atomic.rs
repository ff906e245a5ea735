//! Atomic file output: write to a temporary name in the target folder, then rename.
//!
//! A rename within one folder is atomic on every filesystem we target, so a reader (or a
//! rerun after a crash) sees either the old file or the complete new one, never a torn one.

use std::fs;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use tempfile::NamedTempFile;

use crate::error::{Error, Result};

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
        let temp = tempfile::Builder::new()
            .prefix(&format!(".{name}."))
            .suffix(".partial")
            .tempfile_in(&folder)
            .map_err(|e| Error::io(&folder, e))?;
        Ok(AtomicFile {
            target,
            temp: BufWriter::with_capacity(1 << 20, temp),
        })
    }

    /// The final path.
    pub fn target(&self) -> &Path {
        &self.target
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
pub fn write_json<T: serde::Serialize>(target: impl AsRef<Path>, value: &T) -> Result<()> {
    let target = target.as_ref();
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
    fn uncommitted_file_leaves_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("a.txt");
        {
            let mut f = AtomicFile::create(&target).unwrap();
            f.write_all(b"half").unwrap();
        }
        assert!(!target.exists());
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 0);
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
