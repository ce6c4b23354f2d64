//! The library's typed error. Every variant that concerns a file names it, so the
//! binary can print one clear line and exit non-zero.

use std::path::PathBuf;

/// Result alias used throughout the library.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Everything that can go wrong in burstbook's library code.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A file could not be opened, read or written.
    #[error("{path}: {source}")]
    Io {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// A file exists but its contents are wrong (truncated, bad header, bad values ...).
    #[error("{path}: {msg}")]
    BadInput { path: PathBuf, msg: String },
    /// A configuration or command-line value is out of range or inconsistent.
    #[error("invalid configuration: {0}")]
    Config(String),
    /// The catalogue refused an operation (schema from the future, not a catalogue, ...).
    #[error("catalogue {path}: {msg}")]
    Catalogue { path: PathBuf, msg: String },
    /// An SQLite error with the catalogue path for context.
    #[error("catalogue {path}: {source}")]
    Sqlite {
        path: PathBuf,
        #[source]
        source: rusqlite::Error,
    },
    /// A numerical procedure could not produce an answer (too few points, singular fit ...).
    #[error("{0}")]
    Numerical(String),
}

/// A TOML parse error of `text` on one line: where (line and column, 1-based) and
/// what, without the source excerpt the error's own display draws over several lines.
pub fn toml_message(text: &str, error: &toml::de::Error) -> String {
    match error.span() {
        Some(span) => {
            let before = &text[..span.start.min(text.len())];
            let line = before.matches('\n').count() + 1;
            let column = before.len() - before.rfind('\n').map_or(0, |i| i + 1) + 1;
            format!("line {line}, column {column}: {}", error.message())
        }
        None => error.message().to_string(),
    }
}

impl Error {
    /// Shorthand for [`Error::BadInput`].
    pub fn bad_input(path: impl Into<PathBuf>, msg: impl Into<String>) -> Self {
        Error::BadInput {
            path: path.into(),
            msg: msg.into(),
        }
    }

    /// Shorthand for [`Error::Io`].
    pub fn io(path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        Error::Io {
            path: path.into(),
            source,
        }
    }
}
