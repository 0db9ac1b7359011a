//! The error type of the library and the command line: one clear sentence for the user.
//!
//! Owns the rule that every failure reaching a user is a single sentence naming the file, the
//! problem and the fix, and maps kinds of failure to exit codes (2 for anything the user can
//! correct: bad input, bad options, outputs in the way; 1 for an internal failure).

use std::fmt;
use std::path::Path;

/// Whether the user can fix the failure (exit code 2) or not (1).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ErrorKind {
    /// An input file that cannot be used.
    Input,
    /// An option or value on the command line that cannot be used.
    Usage,
    /// An output that cannot be written.
    Output,
    /// A failure that is cairn's own fault.
    Internal,
}

/// A failure, described by one sentence.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Error {
    /// What kind of failure it is.
    pub kind: ErrorKind,
    /// The sentence shown to the user.
    pub message: String,
}

impl Error {
    /// A problem with an input file: "FILE: problem; fix."
    pub fn input(path: &Path, message: impl AsRef<str>) -> Self {
        Error {
            kind: ErrorKind::Input,
            message: format!("{}: {}", path.display(), message.as_ref()),
        }
    }

    /// A problem with an option.
    pub fn usage(message: impl Into<String>) -> Self {
        Error {
            kind: ErrorKind::Usage,
            message: message.into(),
        }
    }

    /// A problem with an output path.
    pub fn output(path: &Path, message: impl AsRef<str>) -> Self {
        Error {
            kind: ErrorKind::Output,
            message: format!("{}: {}", path.display(), message.as_ref()),
        }
    }

    /// A failure that should not happen.
    pub fn internal(message: impl Into<String>) -> Self {
        Error {
            kind: ErrorKind::Internal,
            message: message.into(),
        }
    }

    /// The process exit code for this failure.
    pub fn exit_code(&self) -> i32 {
        match self.kind {
            ErrorKind::Internal => 1,
            _ => 2,
        }
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for Error {}

/// Result with cairn's error.
pub type Result<T> = std::result::Result<T, Error>;
