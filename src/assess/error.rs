use std::fmt;

/// An error of the assessment layer: a bad parameter, with its name (the
/// position) and the value quoted.
#[derive(Debug, Clone, PartialEq)]
pub struct Error {
    kind: ErrorKind,
    /// Which parameter (or input) the error is about, e.g. `claimed entropy`.
    position: &'static str,
}

/// What went wrong.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum ErrorKind {
    /// A parameter outside its allowed range.
    OutOfRange {
        /// The value given, as text.
        value: String,
        /// The allowed range, in words.
        allowed: &'static str,
    },
}

impl Error {
    pub(crate) fn out_of_range(
        position: &'static str,
        value: impl fmt::Display,
        allowed: &'static str,
    ) -> Self {
        Error {
            kind: ErrorKind::OutOfRange {
                value: value.to_string(),
                allowed,
            },
            position,
        }
    }

    /// What went wrong.
    pub fn kind(&self) -> &ErrorKind {
        &self.kind
    }

    /// The parameter or input concerned.
    pub fn position(&self) -> &'static str {
        self.position
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match &self.kind {
            ErrorKind::OutOfRange { value, allowed } => {
                write!(f, "{}: {value} is out of range ({allowed})", self.position)
            }
        }
    }
}

impl std::error::Error for Error {}
