//! Typed errors of the rung library.
//!
//! Every error says what was wrong and, where it came from a file, the file,
//! the line and the field, so that a tired observer can fix it at once.

use std::path::PathBuf;

/// Where in an input file a problem sits.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Location {
    /// The file, when the input came from one.
    pub file: Option<PathBuf>,
    /// 1-based line number, when known.
    pub line: Option<usize>,
    /// The field (column or key) name, when known.
    pub field: Option<String>,
}

impl std::fmt::Display for Location {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let mut parts = Vec::new();
        if let Some(p) = &self.file {
            parts.push(p.display().to_string());
        }
        if let Some(l) = self.line {
            parts.push(format!("line {l}"));
        }
        if let Some(c) = &self.field {
            parts.push(format!("field '{c}'"));
        }
        write!(f, "{}", parts.join(", "))
    }
}

/// Errors of the rung library.
#[derive(Debug, thiserror::Error)]
pub enum RungError {
    /// A value given by the user is outside what it may be.
    #[error("invalid {what}: {why}")]
    Invalid {
        /// What was given (e.g. "latitude").
        what: String,
        /// Why it is refused and what would be accepted.
        why: String,
    },
    /// Text that could not be parsed as the expected kind of value.
    #[error("cannot read {what} from '{text}': {why}")]
    Parse {
        /// The kind of value expected (e.g. "time").
        what: String,
        /// The offending text (cut to a readable length).
        text: String,
        /// Why, and what the accepted forms are.
        why: String,
    },
    /// A problem in an input file, with its place.
    #[error("{loc}: {msg}")]
    InFile {
        /// Where the problem is.
        loc: Location,
        /// What is wrong.
        msg: String,
    },
    /// A name that is not in a catalogue.
    #[error("unknown {what} '{name}'{hint}")]
    Unknown {
        /// The kind of thing (site, band, instrument, target).
        what: String,
        /// The name asked for.
        name: String,
        /// A hint listing what is known, starting with "; ".
        hint: String,
    },
    /// An instant outside the span where the ephemerides and time scales are valid.
    #[error(
        "{when} is outside rung's valid span ({from} to {to}): the Earth ephemeris (SOFA epv00) covers 1900-2100 and UTC starts in 1960"
    )]
    OutOfSpan {
        /// The offending instant, as text.
        when: String,
        /// Start of the valid span.
        from: &'static str,
        /// End of the valid span.
        to: &'static str,
    },
    /// A SOFA routine refused its input.
    #[error("SOFA routine {routine} failed with status {status}")]
    Sofa {
        /// Routine name.
        routine: &'static str,
        /// Its status code.
        status: i32,
    },
    /// The distance ladder cannot answer: a link of the chain is open, or
    /// the chain cannot be solved.
    #[error(transparent)]
    Ladder(#[from] crate::ladder::chain::ChainError),
    /// A file could not be read or written.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },
}

impl RungError {
    /// Shorthand for [`RungError::Invalid`].
    pub fn invalid(what: impl Into<String>, why: impl Into<String>) -> Self {
        RungError::Invalid {
            what: what.into(),
            why: why.into(),
        }
    }

    /// Shorthand for [`RungError::Parse`]; long text is cut to 60 characters.
    pub fn parse(what: impl Into<String>, text: &str, why: impl Into<String>) -> Self {
        let mut t: String = text.chars().take(60).collect();
        if text.chars().count() > 60 {
            t.push('…');
        }
        RungError::Parse {
            what: what.into(),
            text: t,
            why: why.into(),
        }
    }

    /// The same error naming `field` as its field (for an error in a file).
    pub fn with_field(self, field: &str) -> Self {
        match self {
            RungError::InFile { mut loc, msg } => {
                loc.field = Some(field.to_string());
                RungError::InFile { loc, msg }
            }
            other => other,
        }
    }

    /// Shorthand for an I/O error on a path.
    pub fn io(path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        RungError::Io {
            path: path.into(),
            source,
        }
    }
}

/// Text from a parser's message made safe for one line: control characters
/// become '?', and it is cut to `max` characters (with '…').
pub fn one_line_cut(text: &str, max: usize) -> String {
    let mut out: String = text
        .chars()
        .map(|c| if c.is_control() { '?' } else { c })
        .take(max)
        .collect();
    if text.chars().count() > max {
        out.push('…');
    }
    out
}

/// The 1-based line holding byte `offset` of `text` (a parser's error span).
/// An offset at the start of a line belongs to that line.
pub fn line_at(text: &str, offset: usize) -> usize {
    1 + text.as_bytes()[..offset.min(text.len())]
        .iter()
        .filter(|b| **b == b'\n')
        .count()
}

/// Result type of the rung library.
pub type Result<T> = std::result::Result<T, RungError>;
