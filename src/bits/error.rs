use std::fmt;
use std::path::{Path, PathBuf};

/// An error reading or parsing a bit string, with where it happened.
#[derive(Debug)]
pub struct Error {
    kind: ErrorKind,
    path: Option<PathBuf>,
    offset: Option<u64>,
}

/// What went wrong.
#[derive(Debug)]
#[non_exhaustive]
pub enum ErrorKind {
    /// A character that the format does not allow.
    BadChar {
        /// The byte found.
        found: u8,
        /// What the format expects there.
        expected: &'static str,
    },
    /// Hex input with an odd number of digits (the offset is the last digit).
    OddHexDigits,
    /// Fewer bits than asked for.
    TooShort {
        /// Bits asked for.
        wanted: u64,
        /// Bits the input holds.
        available: u64,
    },
    /// The input holds no bits at all where some are needed.
    Empty,
    /// An operating-system error.
    Io(std::io::Error),
}

impl Error {
    pub(crate) fn new(kind: ErrorKind) -> Self {
        Error {
            kind,
            path: None,
            offset: None,
        }
    }

    pub(crate) fn at_offset(mut self, offset: u64) -> Self {
        self.offset = Some(offset);
        self
    }

    /// Attaches the file name (kept if one is already set).
    pub fn in_file(mut self, path: &Path) -> Self {
        if self.path.is_none() {
            self.path = Some(path.to_path_buf());
        }
        self
    }

    /// What went wrong.
    pub fn kind(&self) -> &ErrorKind {
        &self.kind
    }

    /// The file, when known.
    pub fn path(&self) -> Option<&Path> {
        self.path.as_deref()
    }

    /// The byte offset in the file, when known.
    pub fn offset(&self) -> Option<u64> {
        self.offset
    }
}

impl From<std::io::Error> for Error {
    fn from(e: std::io::Error) -> Self {
        Error::new(ErrorKind::Io(e))
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if let Some(p) = &self.path {
            write!(f, "{}: ", display_path(p))?;
        }
        if let Some(o) = self.offset {
            write!(f, "byte {o}: ")?;
        }
        match &self.kind {
            ErrorKind::BadChar { found, expected } => {
                if found.is_ascii_graphic() {
                    write!(f, "found {:?}, expected {expected}", *found as char)
                } else {
                    write!(f, "found byte 0x{found:02x}, expected {expected}")
                }
            }
            ErrorKind::OddHexDigits => write!(
                f,
                "odd number of hexadecimal digits (each byte needs two); this digit has no partner"
            ),
            ErrorKind::TooShort { wanted, available } => write!(
                f,
                "{wanted} bits asked for, but the input ends after {available} bits"
            ),
            ErrorKind::Empty => write!(f, "the input holds no bits"),
            ErrorKind::Io(e) => write!(f, "{e}"),
        }
    }
}

impl std::error::Error for Error {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        match &self.kind {
            ErrorKind::Io(e) => Some(e),
            _ => None,
        }
    }
}

fn display_path(p: &Path) -> String {
    if p.as_os_str() == "-" {
        "<stdin>".to_string()
    } else {
        p.display().to_string()
    }
}
