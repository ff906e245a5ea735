//! Page buffers on disk, so that a Parquet writer's memory does not grow with its row groups.
//!
//! A Parquet column chunk must be contiguous in the file, yet rows arrive with all columns
//! interleaved, so a writer holds every column's finished pages until the row group closes.
//! Held on the heap that bound forces small row groups, and small row groups make a long
//! run's footer (column-chunk metadata the writer keeps until the file closes) grow with
//! the scenario count. Spilled to an unnamed temporary file beside the output, a finished
//! page costs one write and one read; row groups can then be as large as readers like,
//! and the writers' memory no longer grows with the scenario count.
//!
//! The temporaries have no name (`O_TMPFILE` where the filesystem has it, otherwise
//! unlinked at once), so even a killed process leaves nothing behind.

use std::fs::File;
use std::io::{Read, Seek, SeekFrom, Write};
use std::path::PathBuf;

use bytes::Bytes;
use parquet::arrow::arrow_writer::{PageKey, PageStore, PageStoreArgs, PageStoreFactory};
use parquet::errors::{ParquetError, Result};

/// Creates one [`SpillStore`] per column chunk, in `folder`.
#[derive(Debug, Clone)]
pub struct SpillFactory {
    folder: PathBuf,
}

impl SpillFactory {
    /// Spills into `folder` (the output's own, so the pages land on the same disk).
    pub fn new(folder: impl Into<PathBuf>) -> Self {
        SpillFactory {
            folder: folder.into(),
        }
    }
}

impl PageStoreFactory for SpillFactory {
    fn create(&self, _args: &PageStoreArgs<'_>) -> Result<Box<dyn PageStore>> {
        let file = tempfile::tempfile_in(&self.folder).map_err(|e| {
            ParquetError::General(format!(
                "cannot create a page buffer in {}: {e}",
                self.folder.display()
            ))
        })?;
        Ok(Box::new(SpillStore {
            file,
            end: 0,
            pages: Vec::new(),
        }))
    }
}

/// One column chunk's finished pages, appended to a temporary file.
#[derive(Debug)]
pub struct SpillStore {
    file: File,
    end: u64,
    pages: Vec<(u64, usize)>,
}

impl PageStore for SpillStore {
    fn put(&mut self, value: Bytes) -> Result<PageKey> {
        self.file.seek(SeekFrom::Start(self.end))?;
        self.file.write_all(&value)?;
        let key = PageKey::new(self.pages.len() as u64);
        self.pages.push((self.end, value.len()));
        self.end += value.len() as u64;
        Ok(key)
    }

    fn take(&mut self, key: PageKey) -> Result<Bytes> {
        let &(offset, len) = usize::try_from(key.get())
            .ok()
            .and_then(|i| self.pages.get(i))
            .ok_or_else(|| ParquetError::General(format!("no spilled page {}", key.get())))?;
        let mut page = vec![0u8; len];
        self.file.seek(SeekFrom::Start(offset))?;
        self.file.read_exact(&mut page)?;
        Ok(Bytes::from(page))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pages_come_back_as_written_in_any_order() {
        let dir = tempfile::tempdir().unwrap();
        let mut store = SpillStore {
            file: tempfile::tempfile_in(dir.path()).unwrap(),
            end: 0,
            pages: Vec::new(),
        };
        let a = store.put(Bytes::from_static(b"header")).unwrap();
        let b = store.put(Bytes::from(vec![7u8; 100_000])).unwrap();
        let c = store.put(Bytes::new()).unwrap();
        assert_eq!(&store.take(b).unwrap()[..], &vec![7u8; 100_000][..]);
        assert_eq!(&store.take(a).unwrap()[..], b"header");
        assert!(store.take(c).unwrap().is_empty());
        assert!(store.take(PageKey::new(3)).is_err());
        // Nothing named is left in the folder.
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
    }
}
