//! The ledger's error type: a kind plus a position (file, line, byte).

use std::fmt;
use std::path::PathBuf;

/// Where a line sits in the journal.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Position {
    /// Line number, from 1.
    pub line: u64,
    /// Byte offset of the line's start.
    pub offset: u64,
}

/// What went wrong.
#[derive(Debug, thiserror::Error)]
pub enum ErrorKind {
    /// Reading or writing the journal.
    #[error("{0}")]
    Io(#[from] std::io::Error),
    /// The first line is not a journal start of this format.
    #[error("not a sluice journal: the first line must be a journal-started record of format \"sluice-journal/1\" ({found})")]
    NotOurs {
        /// What was found instead.
        found: String,
    },
    /// A line is not JSON.
    #[error("not a JSON record: {reason}")]
    NotJson {
        /// Parser message.
        reason: String,
    },
    /// A record kind this version does not know.
    #[error("unknown record kind {kind:?}")]
    UnknownKind {
        /// The kind.
        kind: String,
    },
    /// A field is missing or malformed.
    #[error("field {field}: {reason}")]
    BadField {
        /// The field.
        field: &'static str,
        /// Why.
        reason: String,
    },
    /// `seq` is not the line number (a line was deleted, inserted or moved).
    #[error(
        "sequence number {found}, expected {expected} (a line was deleted, inserted or moved)"
    )]
    Sequence {
        /// The line number.
        expected: u64,
        /// The record's `seq`.
        found: u64,
    },
    /// `prev` is not the digest of the previous line.
    #[error("chain broken: prev is {found}, but the previous line's SHA3-256 is {expected} (the previous line was changed, or this one was moved or forged)")]
    ChainBroken {
        /// Digest of the previous line.
        expected: String,
        /// The record's `prev`.
        found: String,
    },
    /// The last line has no newline: a write was cut off.
    #[error("torn last line: {bytes} bytes without a final newline (a write was cut off); `sluice ledger repair` removes it after saving a copy")]
    TornTail {
        /// Bytes of the torn line.
        bytes: u64,
    },
    /// A spending, timing or consistency rule.
    #[error("{0}")]
    Rule(#[from] Rule),
    /// A key this format does not have.
    #[error("unknown key {key:?} in a {kind} record (this version writes no such key)")]
    UnknownKey {
        /// The record kind.
        kind: String,
        /// The key.
        key: String,
    },
    /// A line that parses but is not written the way this program writes
    /// records (keys reordered, spaces, numbers spelt differently).
    #[error("the record is not in the form this program writes it (it was edited)")]
    NotCanonical,
    /// The head file says the journal had more records (truncated, or
    /// deleted and started again).
    #[error("the head file ({lines} records) says the journal had more records than the {have} it holds: records were removed (the journal was cut or replaced)")]
    HeadAhead {
        /// Records the head names.
        lines: u64,
        /// Records the journal holds.
        have: u64,
    },
    /// The line a head names has another digest.
    #[error("line {line} is not the one the head names: its SHA3-256 is {found}, the head says {expected} (the line was changed, or the journal was rewritten)")]
    HeadMismatch {
        /// The line.
        line: u64,
        /// The head's digest.
        expected: String,
        /// The line's digest.
        found: String,
    },
    /// The head file cannot be read.
    #[error("bad head file: {reason}")]
    BadHeadFile {
        /// Why.
        reason: String,
    },
    /// A journal would start beside a seed store that holds seeds.
    #[error("there is no journal, but the seed store {} holds {seeds} seed(s): the journal was deleted or moved, and a new one would forget their uses; restore the journal (or move the seed store away if you are sure those seeds were never used)", dir.display())]
    NewJournalBesideSeeds {
        /// Files in the store.
        seeds: u64,
        /// The store.
        dir: PathBuf,
    },
    /// The journal cannot be repaired automatically.
    #[error("nothing to repair: {reason}")]
    NotRepairable {
        /// Why.
        reason: String,
    },
}

/// The first 12 hex digits of a data digest: enough to find the record in
/// the private journal, without repeating the whole digest in messages.
fn short(d: &str) -> &str {
    d.get(..12).unwrap_or(d)
}

/// A rule a record breaks (`spec/hashing-and-composition.md` 4.1-4.6).
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum Rule {
    /// The seed is not registered.
    #[error("seed {seed} is not registered in this ledger")]
    UnknownSeed {
        /// Seed identifier.
        seed: String,
    },
    /// A seed identifier is registered twice.
    #[error("seed {seed} is already registered (line {line})")]
    DuplicateSeed {
        /// Seed identifier.
        seed: String,
        /// Its seed-created line.
        line: u64,
    },
    /// A value out of range.
    #[error("{field} = {value}: {expected}")]
    OutOfRange {
        /// The field.
        field: &'static str,
        /// The value, quoted.
        value: String,
        /// What is allowed.
        expected: &'static str,
    },
    /// Budgets are only ever lowered (4.3).
    #[error("budget rule: seed {seed} has budget {old:e}; a budget may only be lowered, not set to {new:e}")]
    BudgetRaised {
        /// Seed identifier.
        seed: String,
        /// Current budget.
        old: f64,
        /// Asked for.
        new: f64,
    },
    /// The use would take the seed past its budget (4.3).
    #[error("budget rule (README, \"Seeds and the ledger\"): seed {seed} has spent {spent:e} of its budget {budget:e} over {uses} use(s); this use would add {charge:e}, leaving no room; refused")]
    OverBudget {
        /// Seed identifier.
        seed: String,
        /// Already spent.
        spent: f64,
        /// This use's charge.
        charge: f64,
        /// The budget.
        budget: f64,
        /// Uses so far.
        uses: u64,
    },
    /// The seed was retired.
    #[error("seed {seed} was retired (line {line}) and may not be used")]
    Retired {
        /// Seed identifier.
        seed: String,
        /// The retire line.
        line: u64,
    },
    /// The raw data were never committed.
    #[error("timing rule (README, \"Seeds and the ledger\"): raw data {}.. were not committed to the ledger before this use; run `sluice ledger commit-raw FILE` when the data are produced", short(digest))]
    RawNotCommitted {
        /// Data digest.
        digest: String,
    },
    /// The raw data were committed after the seed was disclosed.
    #[error("timing rule (README, \"Seeds and the ledger\"): seed {seed} was disclosed at line {disclosed_line}, before the raw data {}.. were committed at line {raw_line}; a seed may only be used on raw data fixed before its disclosure", short(digest))]
    DisclosedBeforeRaw {
        /// Seed identifier.
        seed: String,
        /// Data digest.
        digest: String,
        /// The disclosure line.
        disclosed_line: u64,
        /// The commitment line.
        raw_line: u64,
    },
    /// The raw data were already extracted from.
    #[error("one extraction per raw data (README, \"Seeds and the ledger\"): raw data {}.. were already used at line {line}; extracting again needs an override that names the reason (--repeat-reason TEXT, recorded)", short(digest))]
    RawAlreadyUsed {
        /// Data digest.
        digest: String,
        /// The earlier use-reserved line.
        line: u64,
    },
    /// A device-independent run reusing a seed (4.1 rule 3).
    #[error("fresh-seed rule for device-independent data (README, \"Seeds and the ledger\"): seed {seed} was already used at line {line}; use a fresh seed, or assert that the certificate conditions on the earlier runs' raw outputs")]
    DeviceIndependentReuse {
        /// Seed identifier.
        seed: String,
        /// The earlier use.
        line: u64,
    },
    /// A use identifier reserved twice.
    #[error("use {use_id} is already reserved (line {line})")]
    DuplicateUse {
        /// Use identifier.
        use_id: String,
        /// The earlier line.
        line: u64,
    },
    /// Commit or abandon of a use that was never reserved.
    #[error("use {use_id} was never reserved")]
    UnknownUse {
        /// Use identifier.
        use_id: String,
    },
    /// Commit or abandon of a use already resolved.
    #[error("use {use_id} was already resolved at line {line}")]
    AlreadyResolved {
        /// Use identifier.
        use_id: String,
        /// The earlier line.
        line: u64,
    },
    /// A journal-started record anywhere but line 1.
    #[error("a journal-started record may only be the first line")]
    MisplacedStart,
    /// Time runs backwards.
    #[error("time {time} is earlier than the previous record's {previous}")]
    TimeBackwards {
        /// This record's time.
        time: u64,
        /// The previous record's.
        previous: u64,
    },
}

/// A ledger error with where it happened.
#[derive(Debug)]
pub struct Error {
    /// What went wrong.
    pub kind: ErrorKind,
    /// The journal file, if known.
    pub path: Option<PathBuf>,
    /// The line, if the error belongs to one.
    pub pos: Option<Position>,
}

impl Error {
    /// An error without a position.
    pub fn new(kind: ErrorKind) -> Self {
        Error {
            kind,
            path: None,
            pos: None,
        }
    }

    /// Adds the line position.
    pub fn at(mut self, pos: Position) -> Self {
        self.pos = Some(pos);
        self
    }

    /// Adds the file.
    pub fn in_file(mut self, path: &std::path::Path) -> Self {
        self.path = Some(path.to_path_buf());
        self
    }

    /// The line the error names, if any.
    pub fn line(&self) -> Option<u64> {
        self.pos.map(|p| p.line)
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if let Some(p) = &self.path {
            write!(f, "{}: ", p.display())?;
        }
        if let Some(p) = &self.pos {
            write!(f, "line {} (byte {}): ", p.line, p.offset)?;
        }
        write!(f, "{}", self.kind)
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

impl From<std::io::Error> for Error {
    fn from(e: std::io::Error) -> Self {
        Error::new(ErrorKind::Io(e))
    }
}

impl From<Rule> for Error {
    fn from(r: Rule) -> Self {
        Error::new(ErrorKind::Rule(r))
    }
}
