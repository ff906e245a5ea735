//! Input fingerprints recorded in every output, so a result can be traced to its inputs.

use std::path::Path;

use serde::Serialize;
use sha2::{Digest, Sha256};

use crate::error::{Error, Result};

/// An input file and the SHA-256 of its bytes.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InputHash {
    /// What the file is to the run: `config`, `experience`, `book` or `curve`.
    pub role: &'static str,
    /// The path as given (relative to the config's folder when it came from the config).
    pub path: String,
    /// Lower-case hexadecimal SHA-256.
    pub sha256: String,
}

/// SHA-256 of the file at `path`, which plays `role` in the run.
pub fn hash_file(role: &'static str, path: &Path) -> Result<InputHash> {
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, e))?;
    let digest = Sha256::digest(&bytes);
    let sha256 = digest.iter().map(|b| format!("{b:02x}")).collect();
    Ok(InputHash {
        role,
        path: path.display().to_string(),
        sha256,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn matches_the_published_test_vector() {
        // FIPS 180-2 appendix B.1: SHA-256("abc").
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("abc");
        std::fs::write(&path, b"abc").unwrap();
        assert_eq!(
            hash_file("config", &path).unwrap().sha256,
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }
}
