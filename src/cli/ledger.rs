//! `sluice ledger`: commit raw data, verify, read and repair the journal.

use super::common::{self, FormatArg, OrderArg};
use anyhow::{bail, Context};
use sluice::ledger::{Body, Ledger, Record};
use sluice::pipeline::BitFile;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// The ledger folder: `--ledger DIR`, else `SLUICE_LEDGER`, else the user's
/// data folder (`.../sluice/ledger`).
pub fn ledger_dir(given: Option<&Path>) -> anyhow::Result<PathBuf> {
    if let Some(d) = given {
        return Ok(d.to_path_buf());
    }
    if let Some(d) = std::env::var_os("SLUICE_LEDGER").filter(|d| !d.is_empty()) {
        return Ok(PathBuf::from(d));
    }
    match dirs::data_dir() {
        Some(d) => Ok(d.join("sluice").join("ledger")),
        None => bail!("no ledger folder: give --ledger DIR or set SLUICE_LEDGER"),
    }
}

/// The `--ledger` option.
#[derive(clap::Args, Debug, Clone)]
pub struct LedgerOpt {
    /// Ledger folder (default: $SLUICE_LEDGER, else the user's data folder)
    #[arg(long, value_name = "DIR", global = true)]
    pub ledger: Option<PathBuf>,
}

impl LedgerOpt {
    /// Opens (without touching) the ledger.
    pub fn open(&self) -> anyhow::Result<Ledger> {
        Ok(Ledger::new(ledger_dir(self.ledger.as_deref())?))
    }
}

/// `sluice ledger`
#[derive(clap::Args, Debug)]
pub struct LedgerArgs {
    #[command(subcommand)]
    cmd: Cmd,
    #[command(flatten)]
    at: LedgerOpt,
}

#[derive(clap::Subcommand, Debug)]
enum Cmd {
    /// Record a raw file's data digest as soon as it is produced, before
    /// any seed is chosen for it
    CommitRaw {
        /// The raw file
        file: PathBuf,
        /// Where the data came from (free text, recorded)
        #[arg(long)]
        origin: String,
        /// File format
        #[arg(long, value_enum, default_value = "packed")]
        format: FormatArg,
        /// Bit order inside bytes
        #[arg(long = "bit-order", value_enum, default_value = "msb")]
        bit_order: OrderArg,
        /// Print JSON
        #[arg(long)]
        json: bool,
    },
    /// Check the chain, the record kinds, every rule and the head file;
    /// exit 0 only when all hold
    Verify {
        /// Also require the head printed by an earlier `ledger verify` and
        /// kept elsewhere (LINES:DIGEST, or DIGEST alone): the journal must
        /// hold that line unchanged (it may have grown since)
        #[arg(long, value_name = "LINES:HEX")]
        head: Option<String>,
        /// Print JSON
        #[arg(long)]
        json: bool,
    },
    /// List the records
    Log {
        /// Only records about this seed (and its uses)
        #[arg(long, value_name = "ID")]
        seed: Option<String>,
        /// Print JSON
        #[arg(long)]
        json: bool,
    },
    /// Print every record and the derived state as one JSON document
    Export {
        /// Print JSON (the only form)
        #[arg(long)]
        json: bool,
    },
    /// Resolve an open reservation whose run is gone and whose output does
    /// not exist: record the use as abandoned (it stays charged)
    Abandon {
        /// The use identifier (`ledger verify` lists open ones)
        #[arg(value_name = "USE")]
        use_id: String,
        /// Why (free text, recorded)
        #[arg(long, default_value = "the run ended without its output")]
        reason: String,
        /// Print JSON
        #[arg(long)]
        json: bool,
    },
    /// Cut off an unterminated last line (only that, and only past the head
    /// file), after saving a copy
    Repair {
        /// Print JSON
        #[arg(long)]
        json: bool,
    },
}

#[derive(serde::Serialize)]
struct VerifyJson {
    ok: bool,
    records: u64,
    head: String,
    /// `LINES:DIGEST`, to keep elsewhere and give to `--head` later.
    head_line: String,
    orphan_seed_files: Vec<String>,
    problem: Option<String>,
    first_bad_line: Option<u64>,
    unresolved_uses: Vec<sluice::ledger::UseState>,
    seeds: Vec<sluice::ledger::SeedState>,
}

/// Runs `sluice ledger`.
pub fn run(a: LedgerArgs) -> anyhow::Result<ExitCode> {
    let ledger = a.at.open()?;
    match a.cmd {
        Cmd::CommitRaw {
            file,
            origin,
            format,
            bit_order,
            json,
        } => {
            let f = BitFile {
                path: file.clone(),
                format: format.into(),
                order: bit_order.into(),
            };
            let (line, bits) = sluice::pipeline::job::commit_raw(&ledger, &f, &origin)?;
            if json {
                common::print_json(&serde_json::json!({
                    "file": file, "bits": bits, "line": line,
                }))?;
            } else {
                println!(
                    "committed {} ({bits} bits) at line {line} of {} (its digest stays in the private ledger)",
                    file.display(),
                    ledger.journal_path().display()
                );
            }
            Ok(ExitCode::SUCCESS)
        }
        Cmd::Verify { head, json } => {
            if !ledger.exists() && !ledger.head_path().exists() {
                bail!(
                    "{}: no journal here (nothing has been recorded in this ledger)",
                    ledger.journal_path().display()
                );
            }
            let r = ledger.read()?;
            let mut problem = r.problem.as_ref().map(|p| p.to_string());
            if problem.is_none() {
                if let Some(h) = &head {
                    problem = check_kept_head(&r, h).err();
                }
            }
            let known = &r.state.seeds;
            let orphans: Vec<String> = ledger
                .stored_seed_ids()
                .into_iter()
                .filter(|id| !known.contains_key(id))
                .collect();
            let v = VerifyJson {
                ok: problem.is_none(),
                records: r.state.lines,
                head: r.state.head.clone(),
                head_line: format!("{}:{}", r.state.lines, r.state.head),
                orphan_seed_files: orphans,
                first_bad_line: r.problem.as_ref().and_then(|p| p.line()),
                problem,
                unresolved_uses: r.state.unresolved().cloned().collect(),
                seeds: r.state.seeds.values().cloned().collect(),
            };
            if json {
                common::print_json(&v)?;
            } else {
                match &v.problem {
                    None => println!(
                        "ok: {} records, chain intact, every rule holds, head file agrees; head {} (keep it elsewhere and check later with --head {})",
                        v.records, v.head, v.head_line
                    ),
                    Some(p) => println!("FAILED: {p}"),
                }
                for u in &v.unresolved_uses {
                    let live = if ledger.run_in_progress(&u.use_id) {
                        "its run is still going"
                    } else {
                        "its run is gone; once its output is known not to exist, resolve it with `sluice ledger abandon USE`"
                    };
                    println!(
                        "flag: use {} of seed {} reserved at line {} never committed (stays charged: {:e}); {live}",
                        u.use_id, u.seed, u.reserved_line, u.error
                    );
                }
                for id in &v.orphan_seed_files {
                    println!(
                        "flag: the seed store holds {id}.seed.json, which no seed-created record names (records were removed, or the file was planted); it cannot be used"
                    );
                }
            }
            Ok(if v.ok {
                ExitCode::SUCCESS
            } else {
                ExitCode::from(1)
            })
        }
        Cmd::Abandon {
            use_id,
            reason,
            json,
        } => {
            let (u, line) = sluice::pipeline::seeds::abandon(&ledger, &use_id, &reason)?;
            if json {
                common::print_json(&serde_json::json!({
                    "use": use_id, "seed": u.seed, "abandoned_at_line": line, "charged": u.error,
                }))?;
            } else {
                println!(
                    "use {use_id} of seed {} recorded as abandoned at line {line}; it stays charged ({:e})",
                    u.seed, u.error
                );
            }
            Ok(ExitCode::SUCCESS)
        }
        Cmd::Log { seed, json } => {
            let r = ledger.read()?;
            if let Some(p) = r.problem {
                bail!("{p}");
            }
            let keep = |rec: &Record| match &seed {
                None => true,
                Some(id) => record_seed(&rec.body, &r.state).is_some_and(|s| &s == id),
            };
            let recs: Vec<&Record> = r.records.iter().filter(|x| keep(x)).collect();
            if json {
                common::print_json(&recs)?;
            } else {
                for rec in recs {
                    println!(
                        "{:>5} {} {}",
                        rec.seq,
                        common::utc(rec.time),
                        describe(&rec.body)
                    );
                }
            }
            Ok(ExitCode::SUCCESS)
        }
        Cmd::Export { json: _ } => {
            let r = ledger.read()?;
            if let Some(p) = r.problem {
                bail!("{p}");
            }
            common::print_json(&serde_json::json!({
                "format": sluice::ledger::record::FORMAT,
                "note": "private: holds raw-data and output digests; do not publish",
                "records": r.records,
                "state": r.state,
            }))?;
            Ok(ExitCode::SUCCESS)
        }
        Cmd::Repair { json } => {
            let (copy, dropped) = ledger
                .repair()
                .with_context(|| "ledger repair".to_string())?;
            if json {
                common::print_json(&serde_json::json!({"dropped_bytes": dropped, "copy": copy}))?;
            } else {
                println!(
                    "removed a torn last line of {dropped} bytes; the journal before repair is in {}; the repair is recorded",
                    copy.display()
                );
            }
            Ok(ExitCode::SUCCESS)
        }
    }
}

/// Checks a head kept elsewhere: `LINES:DIGEST` names one line, `DIGEST`
/// alone any line; the journal may have grown since.
fn check_kept_head(r: &sluice::ledger::Replay, kept: &str) -> Result<(), String> {
    let (lines, digest) = match kept.split_once(':') {
        Some((l, d)) => (
            Some(l.trim().parse::<u64>().map_err(|_| {
                format!("--head {kept:?}: expected LINES:DIGEST as printed by `ledger verify`")
            })?),
            d.trim(),
        ),
        None => (None, kept.trim()),
    };
    if !sluice::ledger::state::is_digest(digest) {
        return Err(format!(
            "--head {kept:?}: the digest must be 64 lower-case hex digits"
        ));
    }
    match lines {
        Some(l) => sluice::ledger::check_head(r, l, digest, None).map_err(|e| {
            format!("{e}; the journal does not hold the head kept elsewhere ({kept})")
        }),
        None => {
            if r.line_digests.iter().any(|d| d == digest) {
                Ok(())
            } else {
                Err(format!(
                    "no line of the journal has the digest {digest} kept elsewhere: the journal was rewritten or lost records (head now {})",
                    r.state.head
                ))
            }
        }
    }
}

/// The seed a record is about (uses map to their seed).
fn record_seed(b: &Body, st: &sluice::ledger::State) -> Option<String> {
    match b {
        Body::SeedCreated { seed, .. }
        | Body::BudgetSet { seed, .. }
        | Body::SeedDisclosed { seed, .. }
        | Body::SeedRetired { seed }
        | Body::UseReserved { seed, .. } => Some(seed.clone()),
        Body::UseCommitted { use_id, .. } | Body::UseAbandoned { use_id, .. } => {
            st.uses.get(use_id).map(|u| u.seed.clone())
        }
        _ => None,
    }
}

/// One line of `ledger log` (digests are shortened; the full ones stay in
/// the private journal).
fn describe(b: &Body) -> String {
    let short = |d: &str| d.chars().take(12).collect::<String>();
    match b {
        Body::JournalStarted { format } => format!("journal started ({format})"),
        Body::SeedCreated {
            seed,
            bits,
            source,
            deficiency,
            eps_seed,
            origin,
            budget,
            ..
        } => format!(
            "seed created {seed}: {bits} bits, source {source}, deficiency {deficiency}, eps_seed {eps_seed:e}, budget {budget:e}, origin {origin:?}"
        ),
        Body::BudgetSet { seed, budget } => format!("budget of {seed} lowered to {budget:e}"),
        Body::RawCommitted {
            digest,
            bits,
            origin,
        } => format!("raw committed {}.. ({bits} bits), origin {origin:?}", short(digest)),
        Body::SeedDisclosed { seed, how } => format!("seed {seed} disclosed ({how})"),
        Body::UseReserved {
            use_id,
            seed,
            construction,
            params,
            input_digest,
            blocks,
            error,
            repeat_reason,
            cross_run_asserted,
            ..
        } => {
            let mut s = format!(
                "use {use_id} reserved: seed {seed}, {construction} {params:?}, raw {}.., {blocks} block(s), charged {error:e}",
                short(input_digest)
            );
            if let Some(r) = repeat_reason {
                s.push_str(&format!(", repeat allowed: {r:?}"));
            }
            if *cross_run_asserted {
                s.push_str(", cross-run condition asserted");
            }
            s
        }
        Body::UseCommitted { use_id, .. } => format!("use {use_id} committed"),
        Body::UseAbandoned { use_id, reason } => {
            format!("use {use_id} abandoned (still charged): {reason}")
        }
        Body::SeedRetired { seed } => format!("seed {seed} retired"),
        Body::Repair {
            dropped_bytes,
            copy,
        } => format!("repair: dropped a torn tail of {dropped_bytes} bytes (copy {copy})"),
    }
}
