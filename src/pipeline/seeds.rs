//! Seed and ledger operations outside a run: cutting a seed from an
//! earlier output, disclosing a seed (and writing it out), lowering a
//! budget, retiring a seed, resolving a run that was killed. Each meets the
//! ledger, the seed store and files, so it lives here, beside the run
//! (`spec/hashing-and-composition.md` 4.2, 4.3, 4.6).

use super::job::JobError;
use crate::bits::{BitOrder, Bits, Format};
use crate::files::{AtomicFile, Kind, Replace};
use crate::ledger::{Body, Ledger, State, UseState};
use crate::seed::{Origin, Store};
use std::io::Write;
use std::path::Path;

fn refuse<T>(s: impl Into<String>) -> Result<T, JobError> {
    Err(JobError::Refused(s.into()))
}

/// The ledger's state, refusing a journal that does not verify.
pub fn checked_state(ledger: &Ledger) -> Result<State, JobError> {
    let r = ledger.read()?;
    if let Some(p) = r.problem {
        return refuse(p.to_string());
    }
    Ok(r.state)
}

/// Records that a seed left the trusted step (hashing spec 4.6).
pub fn disclose(ledger: &Ledger, id: &str, how: &str) -> Result<(), JobError> {
    ledger.append(|_| {
        Ok::<_, crate::ledger::Error>((
            vec![Body::SeedDisclosed {
                seed: id.to_string(),
                how: how.to_string(),
            }],
            (),
        ))
    })?;
    Ok(())
}

/// Records a seed as disclosed, then (only then) writes its bits to
/// `output` (packed, owner-only, atomically) when given; returns the bits.
pub fn reveal(
    ledger: &Ledger,
    store: &Store,
    id: &str,
    how: &str,
    output: Option<(&Path, Replace)>,
) -> Result<Bits, JobError> {
    let seed = store.load(id)?;
    checked_state(ledger)?.seed(id)?;
    // Record first: the disclosure must precede the bits leaving.
    disclose(ledger, id, how)?;
    if let Some((p, replace)) = output {
        let mut f = AtomicFile::create(p, Kind::SeedFile, replace)?;
        f.write_all(&seed.bits.to_packed(BitOrder::Msb))?;
        f.commit()?;
    }
    Ok(seed.bits)
}

/// Lowers a seed's budget (budgets are never raised: the ledger refuses).
pub fn set_budget(ledger: &Ledger, id: &str, budget: f64) -> Result<(), JobError> {
    ledger.append(|_| {
        Ok::<_, crate::ledger::Error>((
            vec![Body::BudgetSet {
                seed: id.to_string(),
                budget,
            }],
            (),
        ))
    })?;
    Ok(())
}

/// Retires a seed: no further use is allowed.
pub fn retire(ledger: &Ledger, id: &str) -> Result<(), JobError> {
    ledger.append(|_| {
        Ok::<_, crate::ledger::Error>((
            vec![Body::SeedRetired {
                seed: id.to_string(),
            }],
            (),
        ))
    })?;
    Ok(())
}

/// Cuts the last `bits` bits of an earlier output (a packed file written by
/// sluice) into a registered seed (hashing spec 4.2): the output keeps its
/// first bits only (those stay delivered; the cut bits are public from now
/// on and never delivered), then the seed is registered with the earlier
/// output's total error as its eps_seed. The caller has obtained the
/// operator's assertion of `plan::compose::RECYCLING_CONDITION`. Returns
/// the seed's identifier and the bits kept in the output.
pub fn recycle(
    store: &Store,
    output: &Path,
    bits: usize,
    output_error: f64,
    budget: f64,
) -> Result<(String, usize), JobError> {
    if !(output_error.is_finite() && (0.0..1.0).contains(&output_error)) {
        return refuse(format!("--output-error {output_error}: give the earlier output's total error, a number in [0, 1)"));
    }
    let all = crate::bits::io::read_bits(output, Format::Packed, BitOrder::Msb, None)?;
    // compose::recycle checks the fit and gives what stays delivered.
    let r = crate::plan::compose::recycle(all.len() as u64, bits as u64, true)?;
    let keep = r.delivered_bits as usize;
    let s = all.slice(keep, bits);
    // The seed bits are public from now on: never delivered, so they leave
    // the output before they become a seed (a failure in between loses
    // them; it never delivers them twice). The output is cut in place: it
    // stays an output.
    let mut f = AtomicFile::create(output, Kind::ExtractOutput, Replace::Any)?;
    f.write_all(&all.slice(0, keep).to_packed(BitOrder::Msb))?;
    f.commit()?;
    let id = store.register(
        &s,
        Origin::Recycled {
            eps_seed: output_error,
            origin: format!("last {bits} bits of the sluice output {}", output.display()),
            asserted: true,
        },
        budget,
    )?;
    Ok((id, keep))
}

/// Resolves a use whose run was killed (it stays charged): refused while
/// its run holds its lock file, or while its output exists. Returns the
/// use and the journal line of the abandon record.
pub fn abandon(ledger: &Ledger, use_id: &str, reason: &str) -> Result<(UseState, u64), JobError> {
    let state = checked_state(ledger)?;
    let Some(u) = state.uses.get(use_id).cloned() else {
        return refuse(format!(
            "use {use_id} is not in this ledger (`sluice ledger verify` lists the open ones)"
        ));
    };
    if let Some(l) = u.resolved_line {
        return refuse(format!(
            "use {use_id} was already resolved at line {l}; nothing to do"
        ));
    }
    if ledger.run_in_progress(use_id) {
        return refuse(format!("use {use_id}: its run is still going (it holds its lock file); wait for it to end, or stop it first"));
    }
    match &u.output {
        Some(out) if Path::new(out).exists() => return refuse(format!(
            "use {use_id}: its output {out} exists: the run may have finished without its commit; check the output (sluice verify), and remove it first if it must not be used; refused"
        )),
        Some(_) => {}
        None => return refuse(format!(
            "use {use_id}: its reservation does not say where the output went (written by an older version), so its absence cannot be checked; refused"
        )),
    }
    let reason = format!("resolved by `ledger abandon`: {reason}");
    let (line, _) = ledger.append(|st| {
        // Checked again under the lock.
        if st
            .uses
            .get(use_id)
            .is_some_and(|u| u.resolved_line.is_some())
        {
            return Err(JobError::Refused(format!(
                "use {use_id} was resolved meanwhile; nothing to do"
            )));
        }
        Ok((
            vec![Body::UseAbandoned {
                use_id: use_id.to_string(),
                reason,
            }],
            st.lines + 1,
        ))
    })?;
    ledger.remove_run_lock(use_id);
    Ok((u, line))
}
