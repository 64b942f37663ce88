use std::fmt;

/// Where in the input a problem was found.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Position {
    /// The file or stream (as the caller names it, `-` for standard input).
    pub file: Option<String>,
    /// Line number in a round file, parameters file or summary (1-based).
    pub line: Option<u64>,
    /// The field or parameter concerned (for example `gamma` or `x`).
    pub field: Option<String>,
}

impl fmt::Display for Position {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if let Some(file) = &self.file {
            write!(f, "{file}: ")?;
        }
        match (&self.line, &self.field) {
            (Some(l), Some(n)) => write!(f, "line {l}, field {n}: "),
            (Some(l), None) => write!(f, "line {l}: "),
            (None, Some(n)) => write!(f, "{n}: "),
            (None, None) => Ok(()),
        }
    }
}

/// What went wrong in certification.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ErrorKind {
    /// A protocol parameter outside its domain (spec 8, input validation).
    #[error("value {value} is not allowed: {why}")]
    BadParameter {
        /// The value given, as text.
        value: String,
        /// The rule it breaks.
        why: &'static str,
    },
    /// A line of a round file that does not follow the format.
    #[error("{found:?} is not a round: {why}")]
    BadLine {
        /// The offending line (shortened to 40 characters).
        found: String,
        /// What the format expects.
        why: &'static str,
    },
    /// A non-test round whose inputs are not (0, 0) (spec 3.1).
    #[error("a generation round (test flag 0) has inputs x = {x}, y = {y}; the protocol gives every generation round the inputs (0, 0)")]
    GenerationInputs {
        /// Input of device A.
        x: u8,
        /// Input of device B.
        y: u8,
    },
    /// Counts that cannot belong together (for example more wins than test
    /// rounds).
    #[error("{what}")]
    InconsistentCounts {
        /// What does not fit.
        what: String,
    },
    /// A win fraction above the quantum maximum (spec 1 and 8).
    #[error("win fraction {w_obs:.6} ({wins} of {n_test} test rounds) is above the quantum maximum cos^2(pi/8) = 0.853553 {beyond}; quantum devices working as modelled cannot produce it (broken bookkeeping, biased inputs or signalling)")]
    AboveQuantum {
        /// The observed win fraction W / N_test.
        w_obs: f64,
        /// W.
        wins: u64,
        /// N_test.
        n_test: u64,
        /// How far above the maximum, in words.
        beyond: String,
    },
    /// A record that contradicts the protocol it claims to come from
    /// (misuse paths): names the rule and what to do.
    #[error("refused: {what}. Rule: {rule}. What to do: {todo}")]
    Refused {
        /// What was found.
        what: String,
        /// The rule it breaks.
        rule: &'static str,
        /// What the operator should do.
        todo: &'static str,
    },
    /// A parameters or counts file that does not follow its format.
    #[error("{what}")]
    Parameters {
        /// What is wrong.
        what: String,
    },
    /// Protocol parameters missing, or not fitting together (the message
    /// names the parameter as its option, `--name`, which is also its key
    /// in a parameters file).
    #[error("{what}")]
    Protocol {
        /// What is missing or does not fit.
        what: String,
    },
    /// A certificate JSON document that does not parse or does not validate.
    #[error("{0}")]
    Certificate(String),
    /// An operating-system error while reading a record stream.
    #[error("{0}")]
    Io(#[from] std::io::Error),
}

/// An error of the certification layer: a kind and a position.
#[derive(Debug)]
pub struct Error {
    kind: ErrorKind,
    position: Position,
}

impl Error {
    /// An error without position.
    pub fn new(kind: ErrorKind) -> Self {
        Error {
            kind,
            position: Position::default(),
        }
    }

    /// Sets the line number.
    pub fn at_line(mut self, line: u64) -> Self {
        self.position.line = Some(line);
        self
    }

    /// Sets the file or stream name (kept if one is set already).
    pub fn in_file(mut self, file: &str) -> Self {
        if self.position.file.is_none() {
            self.position.file = Some(file.to_string());
        }
        self
    }

    /// Sets the field or parameter name.
    pub fn in_field(mut self, field: &str) -> Self {
        self.position.field = Some(field.to_string());
        self
    }

    /// A [`ErrorKind::BadParameter`] error for parameter `name`.
    pub fn bad_parameter(name: &str, value: impl fmt::Display, why: &'static str) -> Self {
        Error::new(ErrorKind::BadParameter {
            value: value.to_string(),
            why,
        })
        .in_field(name)
    }

    /// What went wrong.
    pub fn kind(&self) -> &ErrorKind {
        &self.kind
    }

    /// Where.
    pub fn position(&self) -> &Position {
        &self.position
    }
}

impl From<std::io::Error> for Error {
    fn from(e: std::io::Error) -> Self {
        Error::new(ErrorKind::Io(e))
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}{}", self.position, self.kind)
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
