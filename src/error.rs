//! The crate's error type: a kind that decides the exit code, and a one-line message that
//! carries its context (file, line, column, offending value).

use std::fmt;

/// What went wrong, at the granularity the command line needs.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ErrorKind {
    /// Malformed input file, job, predicate or option value.
    Input,
    /// An output path exists and `--force` was not given.
    Exists,
    /// Writing (or preparing to write) a file failed at the operating-system level:
    /// a full disk, a denied permission.
    Io,
}

/// An error with its kind and full context.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Error {
    kind: ErrorKind,
    message: String,
}

impl Error {
    /// A bad-input error.
    pub fn input(message: impl Into<String>) -> Error {
        Error {
            kind: ErrorKind::Input,
            message: message.into(),
        }
    }

    /// An output-exists error.
    pub fn exists(message: impl Into<String>) -> Error {
        Error {
            kind: ErrorKind::Exists,
            message: message.into(),
        }
    }

    /// An I/O error on `path`.
    pub fn io(path: &std::path::Path, err: std::io::Error) -> Error {
        Error {
            kind: ErrorKind::Io,
            message: format!("{}: {err}", path.display()),
        }
    }

    /// A failure reading a file the user named (a job, table or dump): bad input.
    pub fn read(path: &std::path::Path, err: std::io::Error) -> Error {
        Error {
            kind: ErrorKind::Input,
            message: format!("{}: {err}", path.display()),
        }
    }

    /// The kind.
    pub fn kind(&self) -> ErrorKind {
        self.kind
    }

    /// The same error with `context: ` put in front of its message.
    pub fn context(self, context: impl fmt::Display) -> Error {
        Error {
            kind: self.kind,
            message: format!("{context}: {}", self.message),
        }
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for Error {}

/// Crate-wide result.
pub type Result<T> = std::result::Result<T, Error>;

/// Adds context to errors of any displayable type, turning them into bad-input errors.
pub trait Context<T> {
    /// Wraps the error as `Error::input("{ctx}: {err}")`.
    fn ctx(self, ctx: impl fmt::Display) -> Result<T>;
}

impl<T, E: fmt::Display> Context<T> for std::result::Result<T, E> {
    fn ctx(self, ctx: impl fmt::Display) -> Result<T> {
        self.map_err(|e| Error::input(format!("{ctx}: {e}")))
    }
}
