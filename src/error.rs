//! The library's error type.
//!
//! Every invalid input is reported as [`Error::Invalid`], which carries the file, line and
//! field it concerns when they are known. Code that validates a model without knowing where it
//! came from (the [`crate::geometry`] constructors, say) fills in only the field; the input
//! layer adds the file and line from the spans it recorded while parsing.

use std::fmt;
use std::path::PathBuf;

/// Where in the inputs a problem lies. Every part is optional: a plate built through the API
/// has no file, a file-level problem has no line.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Location {
    /// The input file.
    pub file: Option<PathBuf>,
    /// 1-based line in that file.
    pub line: Option<usize>,
    /// The field: a dotted TOML key (`edges.top.temperature`) or a CSV column name.
    pub field: Option<String>,
}

impl fmt::Display for Location {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let mut parts: Vec<String> = Vec::new();
        if let Some(file) = &self.file {
            parts.push(file.display().to_string());
        }
        if let Some(line) = self.line {
            parts.push(format!("line {line}"));
        }
        if let Some(field) = &self.field {
            parts.push(format!("field `{field}`"));
        }
        write!(f, "{}", parts.join(", "))
    }
}

/// All errors of the library.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// The inputs are invalid: the message says what is wrong and what to do.
    #[error("{}{message}", prefix(location))]
    Invalid {
        /// Where the problem lies.
        location: Location,
        /// What is wrong, and what to do about it.
        message: String,
    },
    /// A file could not be read or written.
    #[error("{}: {source}", path.display())]
    Io {
        /// The file concerned.
        path: PathBuf,
        /// The underlying error.
        source: std::io::Error,
        /// Whether the file was an input (a missing input is the user's to fix: exit 2).
        input: bool,
    },
    /// A computation failed in a way the inputs do not explain (a bug, or a numerical
    /// breakdown that should have been caught earlier).
    #[error("internal error: {0}")]
    Internal(String),
}

fn prefix(location: &Location) -> String {
    let s = location.to_string();
    if s.is_empty() { s } else { format!("{s}: ") }
}

impl Error {
    /// An invalid-input error about a field, with no file or line yet.
    pub fn invalid_field(field: impl Into<String>, message: impl Into<String>) -> Self {
        Error::Invalid {
            location: Location {
                field: Some(field.into()),
                ..Location::default()
            },
            message: message.into(),
        }
    }

    /// An invalid-input error with a full location.
    pub fn invalid_at(
        file: impl Into<PathBuf>,
        line: Option<usize>,
        field: Option<&str>,
        message: impl Into<String>,
    ) -> Self {
        Error::Invalid {
            location: Location {
                file: Some(file.into()),
                line,
                field: field.map(str::to_string),
            },
            message: message.into(),
        }
    }

    /// Fill in the file (and, through `line_of`, the line) of an invalid-input error that
    /// lacks them. `line_of` maps a field name to its line, when the caller knows it.
    pub fn in_file(
        self,
        file: impl Into<PathBuf>,
        line_of: impl Fn(&str) -> Option<usize>,
    ) -> Self {
        match self {
            Error::Invalid {
                mut location,
                message,
            } => {
                if location.file.is_none() {
                    location.file = Some(file.into());
                }
                if location.line.is_none() {
                    location.line = location.field.as_deref().and_then(line_of);
                }
                Error::Invalid { location, message }
            }
            other => other,
        }
    }

    /// The process exit status this error maps to: 2 for anything the user's inputs explain,
    /// 1 for the rest (README, exit status).
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Invalid { .. } => 2,
            Error::Io { input: true, .. } => 2,
            _ => 1,
        }
    }
}

/// The library's result type.
pub type Result<T, E = Error> = std::result::Result<T, E>;
