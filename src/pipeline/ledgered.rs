//! A run whose seed is accounted in the ledger
//! (`spec/hashing-and-composition.md` 4.3 and 4.6).
//!
//! The order is fixed here, not by the caller: the use is reserved under
//! the journal lock before any output exists (the ledger's rules refuse it
//! past the budget, on raw data not committed before the seed's disclosure,
//! on raw data already used without a reason, or on a second
//! device-independent run without the cross-run assertion); then the output
//! is written and durably renamed; then the use is committed. A run that
//! fails before reserving leaves the journal unchanged; a reservation that
//! never commits stays charged (a failure after reserving is recorded as
//! abandoned, still charged).

use super::test_hook::point;
use super::{Error as RunError, Report, Run};
use crate::ledger::{self, Body, Ledger};
use std::collections::BTreeMap;

/// The use to reserve.
#[derive(Clone, Debug)]
pub struct UseSpec {
    /// Seed identifier.
    pub seed: String,
    /// Construction name.
    pub construction: String,
    /// Its defining integers.
    pub params: BTreeMap<String, u64>,
    /// Data digest of the raw input.
    pub input_digest: String,
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
}

/// Errors of a ledgered run.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// The ledger refused or failed (nothing was produced when this comes
    /// from the reservation).
    #[error(transparent)]
    Ledger(#[from] ledger::Error),
    /// The run failed after its use was reserved; the use stays charged.
    #[error("{source}; use {use_id} stays charged to its seed (recorded as abandoned)")]
    Run {
        /// The use.
        use_id: String,
        /// The cause.
        source: RunError,
    },
    /// The step after the output (digest, receipt) failed.
    #[error("{reason}; use {use_id} stays reserved and charged, not committed")]
    After {
        /// The use.
        use_id: String,
        /// Why.
        reason: String,
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

/// Reserves a use; `extra` records (a new seed's seed-created record) are
/// appended first, in the same locked append. Returns the use identifier.
pub fn reserve(ledger: &Ledger, spec: &UseSpec, extra: Vec<Body>) -> Result<String, ledger::Error> {
    let use_id = ledger::random_id()?;
    let mut bodies = extra;
    bodies.push(Body::UseReserved {
        use_id: use_id.clone(),
        seed: spec.seed.clone(),
        construction: spec.construction.clone(),
        params: spec.params.clone(),
        input_digest: spec.input_digest.clone(),
        blocks: spec.blocks,
        seed_bits: spec.seed_bits,
        error: spec.error,
        device_independent: spec.device_independent,
        cross_run_asserted: spec.cross_run_asserted,
        repeat_reason: spec.repeat_reason.clone(),
    });
    ledger.append(|_| Ok::<_, ledger::Error>((bodies, ())))?;
    Ok(use_id)
}

/// Runs `run` as a use of a stored seed: reserve, write, rename, then
/// `after` (output digest and receipt digest), then commit.
pub fn execute(
    ledger: &Ledger,
    spec: &UseSpec,
    extra: Vec<Body>,
    run: &Run<'_>,
    progress: impl FnMut(u64),
    after: impl FnOnce(&Report) -> Result<(String, Option<String>), String>,
) -> Result<Outcome, Error> {
    point("before-reserve");
    let use_id = reserve(ledger, spec, extra)?;
    point("after-reserve");
    let report = match run.execute(progress) {
        Ok(r) => r,
        Err(source) => {
            let reason = source.to_string();
            let _ = ledger.append(|_| {
                Ok::<_, ledger::Error>((
                    vec![Body::UseAbandoned {
                        use_id: use_id.clone(),
                        reason,
                    }],
                    (),
                ))
            });
            return Err(Error::Run { use_id, source });
        }
    };
    let (output_digest, receipt_digest) = after(&report).map_err(|reason| Error::After {
        use_id: use_id.clone(),
        reason,
    })?;
    point("before-commit");
    let ((), state) = ledger.append(|_| {
        Ok::<_, ledger::Error>((
            vec![Body::UseCommitted {
                use_id: use_id.clone(),
                output_digest,
                receipt_digest,
            }],
            (),
        ))
    })?;
    let seed_state = state.seeds.get(&spec.seed).cloned().unwrap_or_default();
    Ok(Outcome {
        report,
        use_id,
        seed_state,
    })
}
