use std::fmt;

/// A refused plan: which input is wrong (or which limit is hit), its value,
/// and why.
///
/// The position of a planning error is the name of the input it concerns
/// (`k`, `eps_s`, `blocks`, ...), as the caller named it; the command line
/// maps these to its option names.
#[derive(Debug, Clone, PartialEq)]
pub struct Error {
    field: &'static str,
    kind: ErrorKind,
}

/// What went wrong.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum ErrorKind {
    /// A number outside the range the formula allows.
    OutOfRange {
        /// The value given.
        value: f64,
        /// The allowed range, in words (e.g. "strictly between 0 and 1").
        expected: &'static str,
    },
    /// A length that must be at least 1 is 0.
    Zero,
    /// More min-entropy than bits: `k > n`.
    EntropyAboveLength {
        /// The min-entropy given.
        k: f64,
        /// The input length.
        n: u64,
    },
    /// An output length outside the family's range (e.g. `m >= n` for the
    /// modified Toeplitz family).
    LengthOutsideFamily {
        /// The length asked for.
        m: u64,
        /// The largest length the family allows.
        max: u64,
        /// The family.
        family: &'static str,
    },
    /// The error target leaves nothing for the extractor once the fixed
    /// terms (certificate, seed, smoothing) are paid.
    BudgetExhausted {
        /// The total target.
        target: f64,
        /// What the fixed terms cost (for the whole run).
        fixed: f64,
    },
    /// The min-entropy is too small to give even one output bit.
    NoOutput {
        /// The min-entropy available.
        k: f64,
        /// The error allowed for the extractor term.
        eps_ext: f64,
    },
    /// A mode whose constants are not verified, used without the explicit
    /// flag that accepts them (`spec/hashing-and-composition.md` 6.4).
    Unverified {
        /// What is unverified.
        what: &'static str,
    },
    /// A condition the user must assert before this is allowed.
    NotAsserted {
        /// The condition, in words.
        condition: &'static str,
    },
    /// A recycled seed that does not fit in the output it is cut from
    /// (`spec/hashing-and-composition.md` 4.2).
    SeedDoesNotFit {
        /// Seed bits needed.
        needed: u64,
        /// Output bits available.
        available: u64,
    },
    /// An input length the construction cannot take (e.g. a two-source
    /// length that is not a prime with 2 as a primitive root).
    InvalidLength {
        /// The length given.
        n: u64,
        /// Why it is invalid.
        why: &'static str,
    },
    /// An entropy figure for a whole string asked to cover several blocks
    /// (`spec/hashing-and-composition.md` 4.1: a global bound gives no
    /// per-block bounds).
    CannotSplit {
        /// The number of blocks asked for.
        blocks: u64,
    },
    /// A size that does not fit the integer types of the plan.
    TooLarge {
        /// What overflowed, in words.
        what: &'static str,
    },
    /// Inputs the plan needs that were not given (by the names the
    /// planner gives them, e.g. `eps_s_x`): no input is taken as 0 or
    /// guessed silently.
    Missing {
        /// The inputs not given.
        inputs: Vec<&'static str>,
    },
    /// A min-entropy figure outside `[0, n]` for a raw string of `n` bits
    /// (also a negative or non-finite one).
    EntropyOutOfRange {
        /// The figure given.
        k: f64,
        /// The raw length.
        n: u64,
    },
    /// The error target leaves nothing for the extractor once the
    /// certification error and the smoothing charge are paid.
    NoExtractorBudget {
        /// The total target.
        target: f64,
        /// The certification error.
        cert_error: f64,
        /// The smoothing charge.
        smoothing_charge: f64,
    },
}

impl Error {
    /// An error about the input named `field`.
    pub fn new(field: &'static str, kind: ErrorKind) -> Self {
        Error { field, kind }
    }

    /// The input the error is about (its position).
    pub fn field(&self) -> &'static str {
        self.field
    }

    /// What went wrong.
    pub fn kind(&self) -> &ErrorKind {
        &self.kind
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let field = self.field;
        match &self.kind {
            ErrorKind::OutOfRange { value, expected } => {
                write!(f, "{field} = {value:e}: must be {expected}")
            }
            ErrorKind::Zero => write!(f, "{field} = 0: must be at least 1"),
            ErrorKind::EntropyAboveLength { k, n } => write!(
                f,
                "{field} = {k}: larger than the input length n = {n}; \
                 n bits hold at most n bits of min-entropy"
            ),
            ErrorKind::LengthOutsideFamily { m, max, family } => write!(
                f,
                "{field} = {m}: the {family} family gives at most {max} output bits here"
            ),
            ErrorKind::BudgetExhausted { target, fixed } => write!(
                f,
                "{field} = {target:e}: too small; the certificate, seed and smoothing terms \
                 alone cost {}, which leaves no error for the extractor",
                super::round::up4(*fixed)
            ),
            ErrorKind::NoOutput { k, eps_ext } => write!(
                f,
                "{field} = {k}: too little min-entropy for even one output bit \
                 with an extractor error of at most {}",
                super::round::down4(*eps_ext)
            ),
            ErrorKind::Unverified { what } => write!(
                f,
                "{field}: {what} rests on constants that are not verified; \
                 refused unless explicitly accepted as unverified"
            ),
            ErrorKind::NotAsserted { condition } => {
                write!(f, "{field}: allowed only if you assert that {condition}")
            }
            ErrorKind::SeedDoesNotFit { needed, available } => write!(
                f,
                "{field} = {needed}: the seed needs {needed} bits but the output it \
                 would be cut from has only {available}"
            ),
            ErrorKind::InvalidLength { n, why } => write!(f, "{field} = {n}: {why}"),
            ErrorKind::CannotSplit { blocks } => write!(
                f,
                "{field} = {blocks}: the entropy figure covers the whole string as one \
                 block and gives no bound per block, so it cannot be split into blocks"
            ),
            ErrorKind::TooLarge { what } => write!(f, "{field}: {what} is too large"),
            ErrorKind::Missing { inputs } => {
                write!(f, "{field}: not given: {}", inputs.join(", "))
            }
            ErrorKind::EntropyOutOfRange { k, n } => write!(
                f,
                "{field} = {k}: must lie between 0 and the raw length {n} bits"
            ),
            ErrorKind::NoExtractorBudget {
                target,
                cert_error,
                smoothing_charge,
            } => write!(
                f,
                "{field} = {target:e}: nothing is left for the extractor after the \
                 certification error {cert_error:e} and the smoothing charge {smoothing_charge:e}"
            ),
        }
    }
}

impl std::error::Error for Error {}

/// An error serializes as its message.
impl serde::Serialize for Error {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.collect_str(self)
    }
}
