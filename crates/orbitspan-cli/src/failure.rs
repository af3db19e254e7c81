//! How the command line fails: the message on stderr and the exit code.
//!
//! Exit code 2: bad usage or bad input (the message names the file or option
//! and the problem); exit code 1: an internal error.

use std::fmt;
use std::path::Path;

/// Everything that can stop a command.
#[derive(Debug)]
pub enum CliError {
    /// The command line itself is wrong; `help` is printed after the message.
    Usage { message: String, help: &'static str },
    /// An error from the core crate (bad input or internal).
    Core(orbitspan_core::Error),
    /// A file or folder given on the command line cannot be read or written.
    Path { path: String, problem: String },
    /// Writing to standard output failed.
    Stdout(std::io::Error),
}

impl CliError {
    pub fn usage(message: impl Into<String>, help: &'static str) -> Self {
        CliError::Usage { message: message.into(), help }
    }

    /// A problem with `path`, e.g. `CliError::path(dir, format!("cannot create folder: {e}"))`.
    pub fn path(path: &Path, problem: impl Into<String>) -> Self {
        CliError::Path { path: path.display().to_string(), problem: problem.into() }
    }

    /// 2 for bad usage or bad input, 1 for internal errors.
    pub fn exit_code(&self) -> u8 {
        match self {
            CliError::Usage { .. } | CliError::Path { .. } => 2,
            CliError::Core(e) if e.is_bad_input() => 2,
            CliError::Core(_) | CliError::Stdout(_) => 1,
        }
    }

    /// The usage text to print after the message, for usage errors.
    pub fn help(&self) -> Option<&'static str> {
        match self {
            CliError::Usage { help, .. } => Some(help),
            _ => None,
        }
    }
}

/// The outcome of printing to stdout. A closed pipe (`orbitspan fit ... |
/// head`) is not an error: the reader has seen what it wanted, and the files
/// asked for with `--out` are still written.
pub fn printed(result: std::io::Result<()>) -> Result<(), CliError> {
    match result {
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        other => other.map_err(CliError::Stdout),
    }
}

impl fmt::Display for CliError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CliError::Usage { message, .. } => write!(f, "{message}"),
            CliError::Core(orbitspan_core::Error::Cancelled) => write!(f, "cancelled"),
            CliError::Core(e) => write!(f, "{e}"),
            CliError::Path { path, problem } => write!(f, "{path}: {problem}"),
            CliError::Stdout(e) => write!(f, "cannot write to standard output: {e}"),
        }
    }
}

impl From<orbitspan_core::Error> for CliError {
    fn from(e: orbitspan_core::Error) -> Self {
        CliError::Core(e)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use orbitspan_core::Error;

    #[test]
    fn exit_codes_follow_the_kind_of_error() {
        assert_eq!(CliError::usage("x", "").exit_code(), 2);
        assert_eq!(CliError::from(Error::file("a.png", "truncated")).exit_code(), 2);
        assert_eq!(CliError::from(Error::input("cell 7 does not divide 128")).exit_code(), 2);
        assert_eq!(CliError::path(Path::new("out"), "cannot create folder").exit_code(), 2);
        assert_eq!(CliError::from(Error::Internal("check failed".into())).exit_code(), 1);
    }

    #[test]
    fn a_closed_pipe_is_not_an_error() {
        use std::io::{Error as IoError, ErrorKind};
        assert!(printed(Err(IoError::from(ErrorKind::BrokenPipe))).is_ok());
        assert_eq!(printed(Err(IoError::from(ErrorKind::StorageFull))).unwrap_err().exit_code(), 1);
    }

    #[test]
    fn messages_name_the_file() {
        let e = CliError::from(Error::file("scan-3.tif", "pixel at row 1, column 2 is NaN"));
        assert_eq!(e.to_string(), "scan-3.tif: pixel at row 1, column 2 is NaN");
        let e = CliError::path(Path::new("out/report.json"), "cannot write: disk full");
        assert_eq!(e.to_string(), "out/report.json: cannot write: disk full");
    }
}
