//! The one error type at the core crate's boundary.
//!
//! Every message says what went wrong and where (file, image index, offending
//! value) and, where there is one, how to fix it. Front ends map
//! [`Error::is_bad_input`] to "bad input" (CLI exit code 2) and everything else
//! to "internal error".

use thiserror::Error;

/// Errors from the core crate.
#[derive(Debug, Error)]
pub enum Error {
    /// A file could not be read or decoded; `file` names it.
    #[error("{file}: {problem}")]
    File { file: String, problem: String },
    /// The stack, the settings or a model do not fit together.
    #[error("{0}")]
    Input(String),
    /// The user cancelled a long computation.
    #[error("cancelled")]
    Cancelled,
    /// A numerical check inside the core failed: a bug, please report it.
    #[error("internal error: {0}")]
    Internal(String),
}

impl Error {
    /// Shorthand for a problem with one named file.
    pub fn file(file: impl Into<String>, problem: impl Into<String>) -> Self {
        Error::File { file: file.into(), problem: problem.into() }
    }
    /// Shorthand for a problem with the input or settings.
    pub fn input(problem: impl Into<String>) -> Self {
        Error::Input(problem.into())
    }
    /// True for errors caused by what the user gave (files, settings, models).
    pub fn is_bad_input(&self) -> bool {
        matches!(self, Error::File { .. } | Error::Input(_))
    }
}

/// Result with the core [`Error`].
pub type Result<T> = std::result::Result<T, Error>;
