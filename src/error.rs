//! One error type for the whole crate.
//!
//! Every rejection of user input must say *where* (file, row, column or config key) and
//! *which rule* was broken, so the variants carry that context as fields rather than as
//! preformatted strings. The binary maps every error to exit code 2.

use std::path::PathBuf;

/// Everything that can go wrong in tailspan.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A value in one cell of a CSV input breaks a rule.
    #[error("{}: row {row}, column `{column}`: {rule}", file.display())]
    Cell {
        /// The input file.
        file: PathBuf,
        /// 1-based line number in the file (the header is line 1).
        row: usize,
        /// Column name from the header.
        column: String,
        /// The rule that was broken.
        rule: String,
    },
    /// A whole CSV row breaks a rule (duplicates, wrong field count).
    #[error("{}: row {row}: {rule}", file.display())]
    Row {
        /// The input file.
        file: PathBuf,
        /// 1-based line number in the file.
        row: usize,
        /// The rule that was broken.
        rule: String,
    },
    /// A file as a whole breaks a rule (empty, missing header, missing cells).
    #[error("{}: {rule}", file.display())]
    File {
        /// The input file.
        file: PathBuf,
        /// The rule that was broken.
        rule: String,
    },
    /// A configuration key holds a bad value.
    #[error("{}: config key `{key}`: {rule}", file.display())]
    Config {
        /// The config file.
        file: PathBuf,
        /// Dotted key, e.g. `projection.scenarios`.
        key: String,
        /// The rule that was broken.
        rule: String,
    },
    /// A command-line argument holds a bad value.
    #[error("argument `{arg}`: {rule}")]
    Argument {
        /// The argument name, e.g. `--law`.
        arg: String,
        /// The rule that was broken.
        rule: String,
    },
    /// A model could not be fitted or used on the data given.
    #[error("model `{model}`: {rule}")]
    Model {
        /// Model name, e.g. `lee-carter`.
        model: String,
        /// What went wrong and, where possible, what to do instead.
        rule: String,
    },
    /// A numerical guard tripped (a NaN or an out-of-range rate about to be written).
    #[error("numerical problem: {0}")]
    Numerical(String),
    /// Data handed to the report does not fit together (e.g. a matrix and its labels).
    #[error("report section `{section}`: {rule}")]
    Report {
        /// The report section at fault.
        section: String,
        /// The rule that was broken.
        rule: String,
    },
    /// Reading or writing a file failed.
    #[error("{}: {source}", path.display())]
    Io {
        /// The file involved.
        path: PathBuf,
        /// The underlying error.
        source: std::io::Error,
    },
    /// The Parquet or Arrow layer failed.
    #[error("{}: {message}", path.display())]
    Parquet {
        /// The file involved.
        path: PathBuf,
        /// The underlying message.
        message: String,
    },
}

/// Result with tailspan's [`Error`].
pub type Result<T, E = Error> = std::result::Result<T, E>;

impl Error {
    /// An I/O error on `path`.
    pub fn io(path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        Error::Io {
            path: path.into(),
            source,
        }
    }

    /// A config-key error.
    pub fn config(
        file: impl Into<PathBuf>,
        key: impl Into<String>,
        rule: impl Into<String>,
    ) -> Self {
        Error::Config {
            file: file.into(),
            key: key.into(),
            rule: rule.into(),
        }
    }

    /// A model error.
    pub fn model(model: impl Into<String>, rule: impl Into<String>) -> Self {
        Error::Model {
            model: model.into(),
            rule: rule.into(),
        }
    }

    /// A command-line argument error.
    pub fn argument(arg: impl Into<String>, rule: impl Into<String>) -> Self {
        Error::Argument {
            arg: arg.into(),
            rule: rule.into(),
        }
    }
}
