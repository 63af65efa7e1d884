//! The library's one error type.

use std::fmt;
use std::path::{Path, PathBuf};

/// Result alias used throughout the library.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Where in an input a problem was found: a file and, when known, a line.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Location {
    /// The file as the user named it.
    pub file: PathBuf,
    /// One-based line number, when the problem belongs to one line.
    pub line: Option<usize>,
}

impl Location {
    /// A location covering a whole file.
    pub fn file(file: impl AsRef<Path>) -> Location {
        Location {
            file: file.as_ref().to_path_buf(),
            line: None,
        }
    }

    /// A location at one line of a file.
    pub fn line(file: impl AsRef<Path>, line: usize) -> Location {
        Location {
            file: file.as_ref().to_path_buf(),
            line: Some(line),
        }
    }
}

impl fmt::Display for Location {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        // A file name is user content: its control characters are escaped.
        let file = excerpt(&self.file.display().to_string(), usize::MAX);
        match self.line {
            Some(line) => write!(f, "{file}:{line}"),
            None => write!(f, "{file}"),
        }
    }
}

/// Everything that can go wrong in whorl's library code.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// An input file (spectrum, manifest, bundle) is unusable as given.
    #[error("{at}: {reason}")]
    Input {
        /// File and line.
        at: Location,
        /// What is wrong, in one sentence.
        reason: String,
        /// What the user can do about it.
        hint: String,
    },
    /// A command-level value (technique, solvent, unit, formula) is not valid.
    #[error("{reason}")]
    Invalid {
        /// What is wrong.
        reason: String,
        /// What the user can do about it.
        hint: String,
    },
    /// The library folder is missing, not a library, or from an incompatible version.
    #[error("library {path}: {reason}")]
    Library {
        /// The library folder.
        path: PathBuf,
        /// What is wrong.
        reason: String,
        /// What the user can do about it.
        hint: String,
    },
    /// No record with this id.
    #[error("no {kind} with id {id} in this library")]
    NotFound {
        /// "spectrum", "compound", ...
        kind: &'static str,
        /// The id asked for.
        id: i64,
    },
    /// The metadata query could not be parsed.
    #[error("metadata query '{}' is not valid: {reason}", excerpt(query, 80))]
    Query {
        /// The query as given.
        query: String,
        /// Parser message.
        reason: String,
    },
    /// The library kept changing (another process writing) while derived data was built
    /// from it; treated as a busy library.
    #[error("the library kept changing while its {what} was built")]
    Changing {
        /// What was being built.
        what: String,
    },
    /// SQLite failed.
    #[error("database: {0}")]
    Sqlite(#[from] rusqlite::Error),
    /// The text index failed.
    #[error("text index: {0}")]
    Tantivy(#[from] tantivy::TantivyError),
    /// An I/O operation failed.
    #[error("{context}: {source}")]
    Io {
        /// What was being done, naming the path.
        context: String,
        /// The underlying error.
        source: std::io::Error,
    },
    /// JSON (de)serialisation of a stored record failed.
    #[error("stored record is not valid JSON: {0}")]
    Json(#[from] serde_json::Error),
}

impl Error {
    /// A suggestion for the user, when there is one.
    pub fn hint(&self) -> Option<&str> {
        match self {
            Error::Input { hint, .. }
            | Error::Invalid { hint, .. }
            | Error::Library { hint, .. } => Some(hint.as_str()).filter(|h| !h.is_empty()),
            Error::NotFound {
                kind: "compound", ..
            } => Some("run `whorl compound list` to see the compound ids in this library"),
            Error::NotFound { .. } => Some("run `whorl list` to see the ids in this library"),
            Error::Query { .. } => Some(
                "use field:value terms joined by AND/OR, e.g. `tag:solvent AND formula:C7H8`; quote phrases",
            ),
            e if e.is_busy() => Some(
                "another whorl process is writing to this library; wait for it to finish and run the command again \
                 (WHORL_BUSY_TIMEOUT_MS sets how long to wait)",
            ),
            Error::Changing { .. } => Some(
                "another whorl process kept writing to this library; run the command again when it has finished",
            ),
            Error::Sqlite(rusqlite::Error::SqliteFailure(f, _))
                if f.code == rusqlite::ErrorCode::DiskFull =>
            {
                Some(
                    "the disk is full: nothing was written; free some space and run the command again",
                )
            }
            Error::Sqlite(_) => {
                Some("keep a copy of the library folder, run `whorl check`, and report the message")
            }
            Error::Tantivy(_) => {
                Some("the text index is derived data: `whorl check` rebuilds it from the database")
            }
            Error::Io { .. } => Some(
                "check that the path exists, that you may read and write it, and that the disk has room",
            ),
            Error::Json(_) => Some(
                "a stored record is damaged; keep a copy of the library folder and report the message",
            ),
        }
    }

    /// A short, stable, machine-readable name of the kind of error, for JSON errors (the CLI's
    /// `--json` and the server's answers): `input`, `invalid`, `query`, `not-found`, `library`,
    /// `busy`, `disk-full`, `database`, `text-index`, `io`, `stored-record`.
    pub fn kind(&self) -> &'static str {
        match self {
            e if e.is_busy() => "busy",
            Error::Input { .. } => "input",
            Error::Invalid { .. } => "invalid",
            Error::Query { .. } => "query",
            Error::NotFound { .. } => "not-found",
            Error::Library { .. } => "library",
            Error::Changing { .. } => "busy",
            Error::Sqlite(rusqlite::Error::SqliteFailure(f, _))
                if f.code == rusqlite::ErrorCode::DiskFull =>
            {
                "disk-full"
            }
            Error::Sqlite(_) => "database",
            Error::Tantivy(_) => "text-index",
            Error::Io { .. } => "io",
            Error::Json(_) => "stored-record",
        }
    }

    /// The file and line an input error is about, when there is one.
    pub fn location(&self) -> Option<&Location> {
        match self {
            Error::Input { at, .. } => Some(at),
            _ => None,
        }
    }

    /// True when SQLite gave up waiting for another process's write lock.
    pub fn is_busy(&self) -> bool {
        matches!(self, Error::Changing { .. })
            || matches!(self, Error::Sqlite(rusqlite::Error::SqliteFailure(f, _))
            if matches!(f.code, rusqlite::ErrorCode::DatabaseBusy | rusqlite::ErrorCode::DatabaseLocked))
    }

    /// True when the error is about the user's input rather than the machine.
    pub fn is_input(&self) -> bool {
        matches!(
            self,
            Error::Input { .. }
                | Error::Invalid { .. }
                | Error::Query { .. }
                | Error::NotFound { .. }
        )
    }

    /// Shorthand for an [`Error::Input`].
    pub fn input(at: Location, reason: impl Into<String>, hint: impl Into<String>) -> Error {
        Error::Input {
            at,
            reason: reason.into(),
            hint: hint.into(),
        }
    }

    /// Shorthand for an [`Error::Invalid`].
    pub fn invalid(reason: impl Into<String>, hint: impl Into<String>) -> Error {
        Error::Invalid {
            reason: reason.into(),
            hint: hint.into(),
        }
    }

    /// Wraps an I/O error with what was being done.
    pub fn io(context: impl Into<String>, source: std::io::Error) -> Error {
        Error::Io {
            context: context.into(),
            source,
        }
    }
}

/// A short excerpt of text from a file or a user, safe to put in a message: control
/// characters (a newline, NUL, the ESC that starts a terminal escape sequence) written as
/// `\n`, `\0`, `\u{1b}` and the like, and at most `max_chars` characters kept, the rest
/// replaced by `…`. Messages quote file content only through it, so a 2 MB token or a
/// forged line never reaches the terminal whole.
pub fn excerpt(text: &str, max_chars: usize) -> String {
    let mut out = String::new();
    for (n, c) in text.chars().enumerate() {
        if n == max_chars {
            out.push('…');
            break;
        }
        match c {
            '\n' => out.push_str("\\n"),
            '\r' => out.push_str("\\r"),
            '\t' => out.push_str("\\t"),
            '\0' => out.push_str("\\0"),
            c if c.is_control() || is_invisible_format(c) => {
                out.push_str(&c.escape_unicode().to_string())
            }
            c => out.push(c),
        }
    }
    out
}

/// Characters that change how text reads without showing themselves: bidirectional
/// overrides and isolates (the "Trojan Source" characters, Boucher & Anderson, 2021) and the
/// zero-width ones.
fn is_invisible_format(c: char) -> bool {
    matches!(c, '\u{200b}'..='\u{200f}' | '\u{202a}'..='\u{202e}' | '\u{2066}'..='\u{2069}' | '\u{feff}')
}

#[cfg(test)]
mod excerpt_tests {
    use super::excerpt;

    #[test]
    fn control_characters_are_escaped_and_long_text_cut() {
        // ECMA-48 (5th edition, 1991), section 5.4: a control sequence starts with ESC [.
        assert_eq!(excerpt("a\u{1b}[31mred", 80), "a\\u{1b}[31mred");
        assert_eq!(excerpt("x\ny\0", 80), "x\\ny\\0");
        assert_eq!(excerpt(&"z".repeat(2_000_000), 5), "zzzzz…");
        assert_eq!(excerpt("abc", 3), "abc");
        assert_eq!(excerpt("a\u{202e}b", 9), "a\\u{202e}b");
    }
}
