//! A run whose seed is accounted in the ledger (the composition and
//! single-use rules of the README's "Seeds and the ledger").
//!
//! The order is fixed here, not by the caller. First the ledger's rules are
//! checked as the journal stands (past the budget, a retired seed, a second
//! device-independent run without the cross-run assertion; and, when the
//! input's digest is known beforehand, the raw data's rules). Then the
//! input is read once: hashed into the output's temporary file and digested
//! in the same pass. Then the use is reserved under the journal lock with
//! the digest of the bits hashed (every rule again, including raw data not
//! committed before the seed's disclosure and raw data already used without
//! a reason; a new seed's record and store file go in with the same locked
//! append); only then is the output durably renamed; then the receipt; then
//! the use is committed. No output appears before its use is reserved.
//! A run that fails or is interrupted before reserving leaves the journal
//! unchanged and charges nothing. A failure after reserving (including
//! SIGINT or SIGTERM, when the command installed
//! [`crate::files::interrupt`]) removes what the run wrote and records the
//! use as abandoned: it stays charged. A run killed outright leaves its
//! reservation open; `sluice ledger abandon` resolves it once its output is
//! known not to exist (the run's lock file in `runs/` tells a dead run from
//! a live one).

use super::{Error as RunError, Report, Run};
use crate::files::{fault, interrupt, Replace};
use crate::ledger::{self, Body, Ledger};
use crate::seed::{self, PendingSeed, Store};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU8, Ordering};
use std::sync::Arc;

/// The use to reserve.
#[derive(Clone, Debug)]
pub struct UseSpec {
    /// Seed identifier.
    pub seed: String,
    /// Construction name.
    pub construction: String,
    /// Its defining integers.
    pub params: BTreeMap<String, u64>,
    /// The data digest the raw input must have, when it is known before
    /// the run (a certificate's): checked against the ledger before any
    /// work, and against the bits hashed before anything is reserved. The
    /// reservation records the digest of the bits hashed.
    pub input_digest: Option<String>,
    /// Blocks hashed with the seed.
    pub blocks: u64,
    /// Seed bits read.
    pub seed_bits: u64,
    /// Error charged: `L (2 eps_s + 2^s eps_ext)` (4.1, 4.4).
    pub error: f64,
    /// The raw data carry a device-independent certificate.
    pub device_independent: bool,
    /// The user asserted the cross-run condition of 4.1 rule 3.
    pub cross_run_asserted: bool,
    /// Reason to extract again from raw data already used (4.6).
    pub repeat_reason: Option<String>,
    /// The output file (recorded, absolute, in the reservation).
    pub output: PathBuf,
    /// The receipt file, removed with the output if the use is abandoned.
    pub receipt: Option<PathBuf>,
}

/// Errors of a ledgered run.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// The ledger refused or failed (nothing was produced when this comes
    /// from the reservation).
    #[error(transparent)]
    Ledger(#[from] ledger::Error),
    /// The seed store refused or failed (nothing was reserved).
    #[error(transparent)]
    Seed(#[from] seed::Error),
    /// The run failed (or its input was not the digest it must have)
    /// before its use was reserved: nothing was charged.
    #[error("{0}; nothing was reserved or charged")]
    Unreserved(RunError),
    /// The run did not digest its input (its length was not given), so
    /// there is nothing to reserve; nothing was charged.
    #[error("a run recorded in the ledger must know how many input bits it hashes (their digest is recorded); nothing was reserved or charged")]
    NoDigest,
    /// The run failed after its use was reserved; the use stays charged.
    #[error("{source}; use {use_id} stays charged to its seed ({resolution})")]
    Run {
        /// The use.
        use_id: String,
        /// The cause.
        source: RunError,
        /// What happened to the reservation.
        resolution: String,
    },
    /// A step after reserving (the new seed's store file, the digest, the
    /// receipt, the commit) failed; the output was removed.
    #[error("{reason}; use {use_id} stays charged to its seed ({resolution})")]
    After {
        /// The use.
        use_id: String,
        /// Why.
        reason: String,
        /// What happened to the reservation.
        resolution: String,
    },
}

/// What a ledgered run did.
#[derive(Clone, Debug)]
pub struct Outcome {
    /// The run's report.
    pub report: Report,
    /// The use identifier.
    pub use_id: String,
    /// The seed's account after the commit.
    pub seed_state: ledger::SeedState,
}

/// The absolute form of an output path, as recorded in the reservation.
fn absolute(p: &Path) -> PathBuf {
    let dir = crate::files::parent_dir(p);
    match (std::fs::canonicalize(dir), p.file_name()) {
        (Ok(d), Some(n)) => d.join(n),
        _ => std::path::absolute(p).unwrap_or_else(|_| p.to_path_buf()),
    }
}

/// Why an append of the reservation failed: before the records were
/// written (nothing reserved), or after (the new seed's store file).
enum ReserveError {
    Before(Box<Error>),
    After(Box<seed::Error>),
}

impl From<ledger::Error> for ReserveError {
    fn from(e: ledger::Error) -> Self {
        ReserveError::Before(Box::new(e.into()))
    }
}

/// Records the use as abandoned (still charged) unless it is already
/// resolved; returns how it ended, for messages.
fn abandon(ledger: &Ledger, use_id: &str, reason: &str, frozen: bool) -> String {
    let decide = |st: &ledger::State| {
        let open = st
            .uses
            .get(use_id)
            .is_some_and(|u| u.resolved_line.is_none());
        let bodies = if open {
            vec![Body::UseAbandoned {
                use_id: use_id.to_string(),
                reason: reason.to_string(),
            }]
        } else {
            Vec::new()
        };
        Ok::<_, ledger::Error>((bodies, open))
    };
    let res = if frozen {
        ledger.append_while_frozen(decide)
    } else {
        ledger.append(decide)
    };
    match res {
        Ok((true, _)) => "recorded as abandoned".to_string(),
        Ok((false, _)) => "already resolved".to_string(),
        Err(e) => format!(
            "left open: recording the abandon failed ({e}); resolve it with `sluice ledger abandon {use_id}`"
        ),
    }
}

/// How far a run got: what it wrote under the final names.
const NOTHING: u8 = 0;
const OUTPUT: u8 = 1;
const RECEIPT: u8 = 2;

/// Removes what this run wrote (never an older file it did not replace).
fn remove_outputs(spec: &UseSpec, stage: u8) -> bool {
    if stage >= OUTPUT {
        let _ = std::fs::remove_file(&spec.output);
    }
    if stage >= RECEIPT {
        if let Some(r) = &spec.receipt {
            let _ = std::fs::remove_file(r);
        }
    }
    stage >= OUTPUT
}

/// The reservation record of `spec` as use `use_id` of `input_digest`.
fn use_body(spec: &UseSpec, use_id: &str, input_digest: &str) -> Body {
    Body::UseReserved {
        use_id: use_id.to_string(),
        seed: spec.seed.clone(),
        construction: spec.construction.clone(),
        params: spec.params.clone(),
        input_digest: input_digest.to_string(),
        blocks: spec.blocks,
        seed_bits: spec.seed_bits,
        error: spec.error,
        device_independent: spec.device_independent,
        cross_run_asserted: spec.cross_run_asserted,
        repeat_reason: spec.repeat_reason.clone(),
        output: Some(absolute(&spec.output).display().to_string()),
    }
}

/// Checks the use against the ledger as it is now, before the work: the
/// rules that do not depend on the bits, and the raw data's rules when
/// `spec.input_digest` is known. A new seed is not in the journal yet (its
/// own checks run when it is registered with the reservation).
fn precheck(ledger: &Ledger, spec: &UseSpec, use_id: &str, new_seed: bool) -> Result<(), Error> {
    if new_seed {
        return Ok(());
    }
    let replay = ledger.read()?;
    if let Some(p) = replay.problem {
        return Err(p.into());
    }
    let st = &replay.state;
    let digest = spec.input_digest.as_deref();
    let body = use_body(spec, use_id, digest.unwrap_or(""));
    st.check_use(st.lines + 1, st.last_time, &body, digest.is_some())
        .map_err(|rule| ledger::Error::from(rule).in_file(&ledger.journal_path()))?;
    Ok(())
}

/// Reserves a use of `spec.seed` (after registering `new_seed`, in the same
/// locked append) and returns its identifier.
fn reserve(
    ledger: &Ledger,
    store: &Store,
    spec: &UseSpec,
    use_id: &str,
    input_digest: &str,
    new_seed: Option<&mut PendingSeed>,
) -> Result<(), ReserveError> {
    let mut bodies = Vec::new();
    let (check, file) = match new_seed {
        Some(p) => {
            bodies.push(p.body().clone());
            let (c, f) = p.parts();
            (Some(c), Some(f))
        }
        None => (None, None),
    };
    bodies.push(use_body(spec, use_id, input_digest));
    ledger.append_with(
        |st| {
            if let Some(c) = &check {
                c.check(store, st)
                    .map_err(|e| ReserveError::Before(Box::new(e.into())))?;
            }
            Ok::<_, ReserveError>((bodies, ()))
        },
        |_| match file {
            Some(f) => seed::finish_file(f).map_err(|e| ReserveError::After(Box::new(e))),
            None => Ok(()),
        },
    )?;
    Ok(())
}

/// Runs `run` as a use of a stored seed (or of `new_seed`, registered in
/// the same append as the reservation): reserve, write, rename, then
/// `after` (output digest and receipt digest), then commit. The output may
/// replace an existing file as `replace` allows.
#[allow(clippy::too_many_arguments)]
pub fn execute(
    ledger: &Ledger,
    store: &Store,
    spec: &UseSpec,
    mut new_seed: Option<PendingSeed>,
    run: &Run<'_>,
    replace: Replace,
    progress: impl FnMut(u64),
    after: impl FnOnce(&Report) -> Result<(String, Option<String>), String>,
) -> Result<Outcome, Error> {
    let use_id = ledger::random_id()?;
    let _run_lock = ledger.lock_run(&use_id)?;
    // The ledger's cleanup must be registered before ours (it runs first).
    ledger::register_freeze_on_interrupt();
    // From here on an interruption abandons the use once it is reserved
    // (still charged) and removes what the run wrote. Registered before the
    // reservation: the ledger's own cleanup (registered at this process's
    // first append, so it runs first) waits for an append in progress and
    // stops further ones, so the state read here is final.
    let stage = Arc::new(AtomicU8::new(NOTHING));
    let _on_signal = {
        let ledger = ledger.clone();
        let spec = spec.clone();
        let use_id = use_id.clone();
        interrupt::on_interrupt(move |signal| {
            let found = ledger
                .read()
                .ok()
                .and_then(|r| r.state.uses.get(&use_id).map(|u| u.committed));
            let Some(committed) = found else {
                return vec![
                    "the run was stopped before its use was reserved; nothing was charged"
                        .to_string(),
                ];
            };
            if committed {
                return vec![format!(
                    "use {use_id} had already been committed; its output {} is complete",
                    spec.output.display()
                )];
            }
            // Only files this run renamed into place (never an older output
            // it had not yet replaced).
            let mut existed = false;
            for p in std::iter::once(&spec.output).chain(spec.receipt.iter()) {
                if crate::files::atomic::renamed_here(p) {
                    existed |= p == &spec.output;
                    let _ = std::fs::remove_file(p);
                }
            }
            let how = abandon(&ledger, &use_id, &format!("interrupted by {signal}"), true);
            let mut lines = Vec::new();
            if existed {
                lines.push(format!(
                    "removed the output {} (its use was not committed)",
                    spec.output.display()
                ));
            }
            lines.push(format!(
                "use {use_id} of seed {}: {how}; it stays charged ({:e})",
                spec.seed, spec.error
            ));
            lines
        })
    };
    // Every rule that does not need the bits is checked before the work
    // (and the raw data's rules too when the digest is known beforehand):
    // a refusal costs no hashing and charges nothing.
    precheck(ledger, spec, &use_id, new_seed.is_some())?;
    // The input is read once: hashed into the output's temporary file and
    // digested in the same pass. Nothing is reserved yet, so a failure or
    // an interruption here charges nothing (the temporary file goes); no
    // output appears before its use is reserved.
    let (report, pending) = run
        .execute_to_temp(replace, progress)
        .map_err(Error::Unreserved)?;
    let Some(input_digest) = report.input_digest.clone() else {
        return Err(Error::NoDigest);
    };
    if let Some(want) = &spec.input_digest {
        if want != &input_digest {
            return Err(Error::Unreserved(RunError::DigestDiffers {
                path: run.input.name().to_path_buf(),
                expected_for: "the digest this run must hash".to_string(),
            }));
        }
    }
    fault::point("before-reserve");
    match reserve(
        ledger,
        store,
        spec,
        &use_id,
        &input_digest,
        new_seed.as_mut(),
    ) {
        Ok(()) => {}
        Err(ReserveError::Before(e)) => return Err(*e),
        Err(ReserveError::After(e)) => {
            let resolution = abandon(ledger, &use_id, &format!("seed store: {e}"), false);
            return Err(Error::After {
                use_id,
                reason: e.to_string(),
                resolution,
            });
        }
    }
    fault::point("after-reserve");
    if let Err(source) = pending.finish() {
        let resolution = abandon(ledger, &use_id, &source.to_string(), false);
        return Err(Error::Run {
            use_id,
            source,
            resolution,
        });
    }
    stage.store(OUTPUT, Ordering::SeqCst);
    let (output_digest, receipt_digest) = match after(&report) {
        Ok(v) => v,
        Err(reason) => {
            remove_outputs(spec, OUTPUT);
            let resolution = abandon(ledger, &use_id, &reason, false);
            return Err(Error::After {
                use_id,
                reason: format!("{reason}; the output was removed"),
                resolution,
            });
        }
    };
    stage.store(RECEIPT, Ordering::SeqCst);
    fault::point("before-commit");
    let res = ledger.append(|_| {
        Ok::<_, ledger::Error>((
            vec![Body::UseCommitted {
                use_id: use_id.clone(),
                output_digest,
                receipt_digest,
            }],
            (),
        ))
    });
    let state = match res {
        Ok(((), state)) => state,
        Err(e) => {
            // The journal is as before the commit (a failed append never
            // tears it): the use is still open, so its output goes.
            remove_outputs(spec, RECEIPT);
            let resolution = abandon(ledger, &use_id, &format!("commit failed: {e}"), false);
            return Err(Error::After {
                use_id,
                reason: format!("{e}; the output was removed"),
                resolution,
            });
        }
    };
    let seed_state = state.seeds.get(&spec.seed).cloned().unwrap_or_default();
    Ok(Outcome {
        report,
        use_id,
        seed_state,
    })
}
