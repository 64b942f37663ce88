//! State derived by replaying the journal, and the rules every new record
//! must keep (`spec/hashing-and-composition.md` 4.1, 4.3, 4.6). The same
//! [`State::check`] runs when a record is appended and when the journal is
//! verified, so a journal that replays is consistent by construction.

use super::error::Rule;
use super::record::Body;
use serde::Serialize;
use std::collections::BTreeMap;

/// Per-seed account, derived by replay (never stored).
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct SeedState {
    /// Seed identifier.
    pub seed: String,
    /// Its seed-created line.
    pub created_line: u64,
    /// Length in bits.
    pub bits: u64,
    /// `os`, `file` or `recycled`.
    pub source: String,
    /// Declared deficiency s.
    pub deficiency: f64,
    /// eps_seed (4.7).
    pub eps_seed: f64,
    /// Origin text.
    pub origin: String,
    /// Current budget.
    pub budget: f64,
    /// Reserved uses (committed, abandoned or open).
    pub uses: u64,
    /// Uses committed.
    pub committed: u64,
    /// Uses abandoned (still charged).
    pub abandoned: u64,
    /// Seed bits read over all uses.
    pub bits_consumed: u64,
    /// Error charged over all reserved uses (4.3).
    pub spent: f64,
    /// Line of the first disclosure, if any.
    pub disclosed_line: Option<u64>,
    /// Line of the retirement, if any.
    pub retired_line: Option<u64>,
    /// Line of the first use, if any.
    pub first_use_line: Option<u64>,
    /// The binding digest of its store file (see `Body::SeedCreated`).
    #[serde(skip)]
    pub store_digest: Option<String>,
}

impl SeedState {
    /// Budget left (never below 0).
    pub fn left(&self) -> f64 {
        (self.budget - self.spent).max(0.0)
    }
}

/// A reserved use and how it ended.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct UseState {
    /// Use identifier.
    pub use_id: String,
    /// Seed identifier.
    pub seed: String,
    /// The use-reserved line.
    pub reserved_line: u64,
    /// The use-committed or use-abandoned line.
    pub resolved_line: Option<u64>,
    /// Whether it committed.
    pub committed: bool,
    /// Error charged.
    pub error: f64,
    /// Where its output was to be written, if recorded.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub output: Option<String>,
}

/// The whole derived state.
#[derive(Clone, Debug, Default, Serialize)]
pub struct State {
    /// Seeds by identifier.
    pub seeds: BTreeMap<String, SeedState>,
    /// Uses by identifier.
    pub uses: BTreeMap<String, UseState>,
    /// Raw commitments: digest -> first line.
    pub raw: BTreeMap<String, u64>,
    /// Raw digests used: digest -> first use-reserved line.
    pub raw_used: BTreeMap<String, u64>,
    /// Records replayed.
    pub lines: u64,
    /// Time of the last record.
    pub last_time: u64,
    /// Digest of the last line (the head of the chain).
    pub head: String,
}

/// Relative slack for comparing a sum of charges with a budget: charges
/// are rounded-up figures, so a budget of exactly k charges admits k uses.
const BUDGET_SLACK: f64 = 1e-9;

/// 32 lower-case hex digits (seed and use identifiers).
pub fn is_id(s: &str) -> bool {
    s.len() == 32
        && s.bytes()
            .all(|b| b.is_ascii_digit() || (b'a'..=b'f').contains(&b))
}

/// 64 lower-case hex digits (digests).
pub fn is_digest(s: &str) -> bool {
    s.len() == 64
        && s.bytes()
            .all(|b| b.is_ascii_digit() || (b'a'..=b'f').contains(&b))
}

fn check_form(field: &'static str, v: &str, digest: bool) -> Result<(), Rule> {
    let ok = if digest { is_digest(v) } else { is_id(v) };
    if ok {
        Ok(())
    } else {
        Err(Rule::OutOfRange {
            field,
            value: v.to_string(),
            expected: if digest {
                "64 lower-case hex digits"
            } else {
                "32 lower-case hex digits"
            },
        })
    }
}

fn check_unit(field: &'static str, v: f64, open: bool) -> Result<(), Rule> {
    let ok = v.is_finite() && v < 1.0 && if open { v > 0.0 } else { v >= 0.0 };
    if ok {
        Ok(())
    } else {
        Err(Rule::OutOfRange {
            field,
            value: v.to_string(),
            expected: if open {
                "a number in (0, 1)"
            } else {
                "a number in [0, 1)"
            },
        })
    }
}

impl State {
    /// The seed, if registered.
    pub fn seed(&self, id: &str) -> Result<&SeedState, Rule> {
        self.seeds
            .get(id)
            .ok_or_else(|| Rule::UnknownSeed { seed: id.into() })
    }

    /// Uses reserved but never committed or abandoned.
    pub fn unresolved(&self) -> impl Iterator<Item = &UseState> {
        self.uses.values().filter(|u| u.resolved_line.is_none())
    }

    /// Checks that `body` may follow the records replayed so far, at `line`
    /// written at `time`.
    pub fn check(&self, line: u64, time: u64, body: &Body) -> Result<(), Rule> {
        self.check_parts(line, time, body, true)
    }

    /// Checks a use reservation against every rule that does not depend on
    /// its raw data (seed known and not retired, seed length, error, the
    /// device-independent single use, the budget), and against the raw
    /// data's rules too when `with_input` (its digest is known): what a run
    /// checks before its work, so a refusal costs no hashing. The rules are
    /// checked again, all of them, when the reservation is appended.
    pub fn check_use(
        &self,
        line: u64,
        time: u64,
        body: &Body,
        with_input: bool,
    ) -> Result<(), Rule> {
        self.check_parts(line, time, body, with_input)
    }

    fn check_parts(&self, line: u64, time: u64, body: &Body, with_input: bool) -> Result<(), Rule> {
        if line > 1 && time < self.last_time {
            return Err(Rule::TimeBackwards {
                time,
                previous: self.last_time,
            });
        }
        match body {
            Body::JournalStarted { .. } => {
                if line != 1 {
                    return Err(Rule::MisplacedStart);
                }
            }
            Body::SeedCreated {
                seed,
                bits,
                deficiency,
                eps_seed,
                budget,
                source,
                store_digest,
                ..
            } => {
                if let Some(d) = store_digest {
                    check_form("store_digest", d, true)?;
                }
                if !is_id(seed) {
                    return Err(Rule::OutOfRange {
                        field: "seed",
                        value: seed.clone(),
                        expected: "32 lower-case hex digits",
                    });
                }
                if let Some(s) = self.seeds.get(seed) {
                    return Err(Rule::DuplicateSeed {
                        seed: seed.clone(),
                        line: s.created_line,
                    });
                }
                if *bits == 0 {
                    return Err(Rule::OutOfRange {
                        field: "bits",
                        value: "0".into(),
                        expected: "at least 1 bit",
                    });
                }
                if !deficiency.is_finite() || *deficiency < 0.0 || *deficiency > *bits as f64 {
                    return Err(Rule::OutOfRange {
                        field: "deficiency",
                        value: deficiency.to_string(),
                        expected:
                            "between 0 and the seed length (see README, \"Seeds and the ledger\")",
                    });
                }
                check_unit("eps_seed", *eps_seed, false)?;
                if *eps_seed > 0.0 && *deficiency > 0.0 {
                    return Err(Rule::OutOfRange {
                        field: "deficiency",
                        value: deficiency.to_string(),
                        expected:
                            "0 for a seed described by its distance from uniform (see README, \"Seeds and the ledger\")",
                    });
                }
                check_unit("budget", *budget, true)?;
                if !["os", "file", "recycled"].contains(&source.as_str()) {
                    return Err(Rule::OutOfRange {
                        field: "source",
                        value: source.clone(),
                        expected: "os, file or recycled",
                    });
                }
            }
            Body::BudgetSet { seed, budget } => {
                let s = self.seed(seed)?;
                check_unit("budget", *budget, true)?;
                if *budget > s.budget {
                    return Err(Rule::BudgetRaised {
                        seed: seed.clone(),
                        old: s.budget,
                        new: *budget,
                    });
                }
            }
            Body::RawCommitted { digest, .. } => {
                if !is_digest(digest) {
                    return Err(Rule::OutOfRange {
                        field: "digest",
                        value: digest.clone(),
                        expected: "64 lower-case hex digits",
                    });
                }
            }
            Body::SeedDisclosed { seed, .. } | Body::SeedRetired { seed } => {
                self.seed(seed)?;
            }
            Body::UseReserved {
                use_id,
                seed,
                input_digest,
                seed_bits,
                error,
                device_independent,
                cross_run_asserted,
                repeat_reason,
                output,
                ..
            } => {
                check_form("use", use_id, false)?;
                if with_input {
                    check_form("input_digest", input_digest, true)?;
                }
                if output.as_deref().is_some_and(|o| o.is_empty()) {
                    return Err(Rule::OutOfRange {
                        field: "output",
                        value: String::new(),
                        expected: "a path",
                    });
                }
                if let Some(u) = self.uses.get(use_id) {
                    return Err(Rule::DuplicateUse {
                        use_id: use_id.clone(),
                        line: u.reserved_line,
                    });
                }
                let s = self.seed(seed)?;
                if let Some(l) = s.retired_line {
                    return Err(Rule::Retired {
                        seed: seed.clone(),
                        line: l,
                    });
                }
                if *seed_bits == 0 || *seed_bits > s.bits {
                    return Err(Rule::OutOfRange {
                        field: "seed_bits",
                        value: seed_bits.to_string(),
                        expected: "between 1 and the seed's length",
                    });
                }
                if !error.is_finite() || *error <= 0.0 {
                    return Err(Rule::OutOfRange {
                        field: "error",
                        value: error.to_string(),
                        expected: "a positive error",
                    });
                }
                if with_input {
                    let raw_line =
                        *self
                            .raw
                            .get(input_digest)
                            .ok_or_else(|| Rule::RawNotCommitted {
                                digest: input_digest.clone(),
                            })?;
                    if let Some(d) = s.disclosed_line {
                        if d < raw_line {
                            return Err(Rule::DisclosedBeforeRaw {
                                seed: seed.clone(),
                                digest: input_digest.clone(),
                                disclosed_line: d,
                                raw_line,
                            });
                        }
                    }
                    if let Some(&l) = self.raw_used.get(input_digest) {
                        if repeat_reason.as_deref().is_none_or(|r| r.trim().is_empty()) {
                            return Err(Rule::RawAlreadyUsed {
                                digest: input_digest.clone(),
                                line: l,
                            });
                        }
                    }
                }
                if *device_independent && !cross_run_asserted {
                    if let Some(l) = s.first_use_line {
                        return Err(Rule::DeviceIndependentReuse {
                            seed: seed.clone(),
                            line: l,
                        });
                    }
                }
                if s.spent + error > s.budget * (1.0 + BUDGET_SLACK) {
                    return Err(Rule::OverBudget {
                        seed: seed.clone(),
                        spent: s.spent,
                        charge: *error,
                        budget: s.budget,
                        uses: s.uses,
                    });
                }
            }
            Body::UseCommitted { use_id, .. } | Body::UseAbandoned { use_id, .. } => {
                check_form("use", use_id, false)?;
                if let Body::UseCommitted {
                    output_digest,
                    receipt_digest,
                    ..
                } = body
                {
                    check_form("output_digest", output_digest, true)?;
                    if let Some(d) = receipt_digest {
                        check_form("receipt_digest", d, true)?;
                    }
                }
                let u = self.uses.get(use_id).ok_or_else(|| Rule::UnknownUse {
                    use_id: use_id.clone(),
                })?;
                if let Some(l) = u.resolved_line {
                    return Err(Rule::AlreadyResolved {
                        use_id: use_id.clone(),
                        line: l,
                    });
                }
            }
            Body::Repair { .. } => {}
        }
        Ok(())
    }

    /// Applies a checked record.
    pub fn apply(&mut self, line: u64, time: u64, body: &Body, digest: String) {
        self.lines = line;
        self.last_time = time;
        self.head = digest;
        match body {
            Body::JournalStarted { .. } | Body::Repair { .. } => {}
            Body::SeedCreated {
                seed,
                bits,
                source,
                deficiency,
                eps_seed,
                origin,
                budget,
                store_digest,
            } => {
                self.seeds.insert(
                    seed.clone(),
                    SeedState {
                        seed: seed.clone(),
                        created_line: line,
                        bits: *bits,
                        source: source.clone(),
                        deficiency: *deficiency,
                        eps_seed: *eps_seed,
                        origin: origin.clone(),
                        budget: *budget,
                        store_digest: store_digest.clone(),
                        ..SeedState::default()
                    },
                );
            }
            Body::BudgetSet { seed, budget } => {
                if let Some(s) = self.seeds.get_mut(seed) {
                    s.budget = *budget;
                }
            }
            Body::RawCommitted { digest, .. } => {
                self.raw.entry(digest.clone()).or_insert(line);
            }
            Body::SeedDisclosed { seed, .. } => {
                if let Some(s) = self.seeds.get_mut(seed) {
                    s.disclosed_line.get_or_insert(line);
                }
            }
            Body::SeedRetired { seed } => {
                if let Some(s) = self.seeds.get_mut(seed) {
                    s.retired_line.get_or_insert(line);
                }
            }
            Body::UseReserved {
                use_id,
                seed,
                input_digest,
                seed_bits,
                error,
                output,
                ..
            } => {
                if let Some(s) = self.seeds.get_mut(seed) {
                    s.uses += 1;
                    s.bits_consumed += seed_bits;
                    s.spent += error;
                    s.first_use_line.get_or_insert(line);
                }
                self.raw_used.entry(input_digest.clone()).or_insert(line);
                self.uses.insert(
                    use_id.clone(),
                    UseState {
                        use_id: use_id.clone(),
                        seed: seed.clone(),
                        reserved_line: line,
                        resolved_line: None,
                        committed: false,
                        error: *error,
                        output: output.clone(),
                    },
                );
            }
            Body::UseCommitted { use_id, .. } | Body::UseAbandoned { use_id, .. } => {
                let committed = matches!(body, Body::UseCommitted { .. });
                if let Some(u) = self.uses.get_mut(use_id) {
                    u.resolved_line = Some(line);
                    u.committed = committed;
                    if let Some(s) = self.seeds.get_mut(&u.seed) {
                        if committed {
                            s.committed += 1;
                        } else {
                            s.abandoned += 1;
                        }
                    }
                }
            }
        }
    }
}
