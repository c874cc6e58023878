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
    /// The caller asked a long computation to stop (its progress listener said so).
    #[error("interrupted")]
    Interrupted,
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
            Error::Interrupted => 130,
        }
    }
}

/// The most characters of a user's value that a message echoes (see [`shown`]).
pub const SHOWN_CHARS: usize = 40;

/// A user's value (a CSV field, a TOML value, an option value) as an error message echoes it:
/// at most [`SHOWN_CHARS`] characters (then `...`), control characters escaped as `\u{..}`,
/// so that a message stays one short readable line whatever the input held.
///
/// ```
/// use causeway::error::shown;
/// assert_eq!(shown("1.5e3"), "1.5e3");
/// assert_eq!(shown("a\0b\x0c"), "a\\u{0}b\\u{c}");
/// assert_eq!(shown(&"x".repeat(1000)), format!("{}...", "x".repeat(40)));
/// ```
pub fn shown(value: &str) -> String {
    let mut out = String::new();
    for (i, c) in value.chars().enumerate() {
        if i == SHOWN_CHARS {
            out.push_str("...");
            break;
        }
        push_escaped(&mut out, c);
    }
    out
}

/// A whole message made safe for one line of a terminal: control characters (line breaks
/// included) escaped, and every quoted run (between `'`, `"` or `` ` ``) longer than
/// [`SHOWN_CHARS`] cut as [`shown`] cuts a value. For messages built elsewhere (the TOML
/// parser's, the option parser's) that echo the user's text.
///
/// ```
/// use causeway::error::tidy;
/// let long = format!("invalid value '{}' for '--s'", "9".repeat(500));
/// assert_eq!(tidy(&long), format!("invalid value '{}...' for '--s'", "9".repeat(40)));
/// assert_eq!(tidy("bad\nline\0"), "bad\\u{a}line\\u{0}");
/// ```
pub fn tidy(message: &str) -> String {
    let mut out = String::new();
    let mut rest = message;
    while let Some(open) = rest.find(['\'', '"', '`']) {
        let quote = rest[open..].chars().next().unwrap_or('\'');
        let (before, after) = rest.split_at(open + 1);
        before.chars().for_each(|c| push_escaped(&mut out, c));
        match after.find(quote) {
            Some(close) => {
                out.push_str(&shown(&after[..close]));
                out.push(quote);
                rest = &after[close + 1..];
            }
            None => {
                out.push_str(&shown(after));
                return out;
            }
        }
    }
    rest.chars().for_each(|c| push_escaped(&mut out, c));
    out
}

fn push_escaped(out: &mut String, c: char) {
    if c.is_control() {
        out.push_str(&c.escape_unicode().to_string());
    } else {
        out.push(c);
    }
}

/// A message on one line: control characters (line breaks included) escaped, nothing cut.
/// The command line prints every error through this.
///
/// ```
/// assert_eq!(causeway::error::one_line("a\nb"), "a\\u{a}b");
/// ```
pub fn one_line(message: &str) -> String {
    let mut out = String::with_capacity(message.len());
    message.chars().for_each(|c| push_escaped(&mut out, c));
    out
}
