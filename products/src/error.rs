//! One error type for every product, so the host can report "which file, what went wrong".

use std::fmt;
use std::path::{Path, PathBuf};

/// A product could not be checked, written or read; says which file (if any) and why.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ProductError {
    path: Option<PathBuf>,
    message: String,
}

impl ProductError {
    /// An error about the file at `path`.
    pub fn file(path: &Path, message: impl Into<String>) -> Self {
        Self { path: Some(path.to_path_buf()), message: message.into() }
    }

    /// An error about the content itself, before any file is involved.
    pub fn content(message: impl Into<String>) -> Self {
        Self { path: None, message: message.into() }
    }

    /// The same error, now naming the file it was meant for.
    pub fn in_file(self, path: &Path) -> Self {
        Self { path: Some(path.to_path_buf()), message: self.message }
    }

    /// The file concerned, if any.
    pub fn path(&self) -> Option<&Path> {
        self.path.as_deref()
    }

    /// What went wrong, without the file name.
    pub fn message(&self) -> &str {
        &self.message
    }
}

impl fmt::Display for ProductError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match &self.path {
            Some(path) => write!(f, "{}: {}", path.display(), self.message),
            None => f.write_str(&self.message),
        }
    }
}

impl std::error::Error for ProductError {}
