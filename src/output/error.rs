//! The error type shared by every output writer.

use std::path::PathBuf;

/// An error raised while producing an output file.
///
/// Every variant names the file it concerns, so a message printed to the
/// user always says which output failed.
#[derive(Debug, thiserror::Error)]
pub enum OutputError {
    /// Reading, writing, syncing or renaming a file failed.
    #[error("I/O error on {path}: {source}")]
    Io {
        /// File (or temporary file) being written.
        path: PathBuf,
        /// Underlying operating-system error.
        #[source]
        source: std::io::Error,
    },
    /// Encoding a PNG image failed.
    #[error("PNG encoding failed for {path}: {source}")]
    Png {
        /// Target PNG file.
        path: PathBuf,
        /// Underlying encoder error.
        #[source]
        source: image::ImageError,
    },
    /// The NetCDF library reported an error (its error types hold `Rc`, so
    /// only their text is kept here).
    #[error("NetCDF error on {path}: {message}")]
    NetCdf {
        /// Target NetCDF file.
        path: PathBuf,
        /// Text of the library's error.
        message: String,
    },
    /// The caller passed data that cannot be written (wrong lengths, bad
    /// names, too many records, ...).
    #[error("invalid output request for {path}: {message}")]
    InvalidInput {
        /// Target file, or `<in-memory frame>` when no file is involved.
        path: PathBuf,
        /// What was wrong.
        message: String,
    },
}

impl OutputError {
    /// Builds an [`OutputError::Io`] for `path`.
    pub fn io(path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        OutputError::Io {
            path: path.into(),
            source,
        }
    }

    /// Builds an [`OutputError::InvalidInput`] for `path`.
    pub fn invalid(path: impl Into<PathBuf>, message: impl Into<String>) -> Self {
        OutputError::InvalidInput {
            path: path.into(),
            message: message.into(),
        }
    }

    /// The file this error concerns.
    pub fn path(&self) -> &std::path::Path {
        match self {
            OutputError::Io { path, .. }
            | OutputError::Png { path, .. }
            | OutputError::NetCdf { path, .. }
            | OutputError::InvalidInput { path, .. } => path,
        }
    }
}
