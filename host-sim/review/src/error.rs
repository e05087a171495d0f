//! The one error type of the review crate. Every variant names the file (or store) and, where
//! there is one, the byte offset, line or field that was wrong.

use std::fmt;
use std::path::{Path, PathBuf};

/// Why a review operation failed.
#[derive(Debug)]
#[non_exhaustive]
pub enum ReviewError {
    /// Reading or writing a file failed.
    Io {
        /// The file.
        path: PathBuf,
        /// The OS error.
        source: std::io::Error,
    },
    /// A file's structure is wrong at a byte offset (bad header, bad geometry).
    Format {
        /// The file (or a label for in-memory data).
        path: PathBuf,
        /// Byte offset of the problem.
        offset: usize,
        /// What is wrong.
        what: String,
    },
    /// A text file has a bad line or field.
    Parse {
        /// The file.
        path: PathBuf,
        /// 1-based line number.
        line: usize,
        /// The field or column.
        field: String,
        /// What is wrong.
        what: String,
    },
    /// A pond description is invalid.
    Pond {
        /// The pond file or pond id.
        origin: String,
        /// What is wrong (`field = value: rule`).
        what: String,
    },
    /// The store failed.
    Store {
        /// Which operation.
        op: String,
        /// The database's message.
        what: String,
    },
    /// The command line or an argument is wrong.
    Usage(String),
}

impl ReviewError {
    /// An I/O error on `path`.
    pub fn io(path: &Path, source: std::io::Error) -> Self {
        ReviewError::Io {
            path: path.to_path_buf(),
            source,
        }
    }
    /// A store error during `op`.
    pub fn store(op: &str, e: impl fmt::Display) -> Self {
        ReviewError::Store {
            op: op.to_string(),
            what: e.to_string(),
        }
    }
}

impl fmt::Display for ReviewError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ReviewError::Io { path, source } => write!(f, "{}: {source}", path.display()),
            ReviewError::Format { path, offset, what } => {
                write!(f, "{}: at byte offset {offset}: {what}", path.display())
            }
            ReviewError::Parse {
                path,
                line,
                field,
                what,
            } => write!(f, "{}: line {line}: field {field}: {what}", path.display()),
            ReviewError::Pond { origin, what } => write!(f, "pond {origin}: {what}"),
            ReviewError::Store { op, what } => write!(f, "store: {op}: {what}"),
            ReviewError::Usage(m) => write!(f, "{m}"),
        }
    }
}

impl std::error::Error for ReviewError {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        match self {
            ReviewError::Io { source, .. } => Some(source),
            _ => None,
        }
    }
}

impl From<rusqlite::Error> for ReviewError {
    fn from(e: rusqlite::Error) -> Self {
        ReviewError::store("sqlite", e)
    }
}

impl From<postgres::Error> for ReviewError {
    fn from(e: postgres::Error) -> Self {
        ReviewError::store("postgres", e)
    }
}
