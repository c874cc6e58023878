//! The one error type of the crate.
//!
//! Every message is a single line that names the culprit (an option, a value, a file and line).
//! [`Error::exit_code`] maps bad input to exit status 2, as DESIGN.md promises.

use std::path::{Path, PathBuf};

/// Result alias used across the crate.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Everything that can go wrong, by whose fault.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// The user's input is wrong: a value, an option, a file's content.
    #[error("{0}")]
    Input(String),
    /// A file could not be read or written.
    #[error("{}: {source}", path.display())]
    Io {
        /// The file concerned.
        path: PathBuf,
        /// What the operating system said.
        source: std::io::Error,
    },
    /// A computation failed in a way the input did not announce.
    #[error("{0}")]
    Numerical(String),
}

impl Error {
    /// Shorthand for [`Error::Input`].
    ///
    /// ```
    /// let e = causeway::Error::input("q must be > 0, got -1");
    /// assert_eq!(e.exit_code(), 2);
    /// ```
    pub fn input(msg: impl Into<String>) -> Self {
        Error::Input(msg.into())
    }

    /// Wraps an I/O error with the path it concerns.
    pub fn io(path: &Path, source: std::io::Error) -> Self {
        Error::Io {
            path: path.to_path_buf(),
            source,
        }
    }

    /// Process exit status for this error: 2 for bad input (including unreadable input files),
    /// 1 otherwise.
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Input(_) | Error::Io { .. } => 2,
            Error::Numerical(_) => 1,
        }
    }
}
