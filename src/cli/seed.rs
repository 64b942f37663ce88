//! `sluice seed`: create, import, list, show, reveal and retire seeds.
//! Seed bits are never printed, except by `seed show --reveal`, which
//! records the disclosure first.

use super::common::{self, FormatArg};
use super::ledger::LedgerOpt;
use anyhow::bail;
use sluice::bits::BitOrder;
use sluice::files::{Kind, Replace};
use sluice::ledger::SeedState;
use sluice::seed::{self, Origin, Store};
use std::path::PathBuf;
use std::process::ExitCode;

/// `sluice seed`
#[derive(clap::Args, Debug)]
pub struct SeedArgs {
    #[command(subcommand)]
    cmd: Cmd,
    #[command(flatten)]
    at: LedgerOpt,
}

#[derive(clap::Subcommand, Debug)]
enum Cmd {
    /// Draw a new seed from the operating system's random source
    New {
        /// Seed length in bits
        #[arg(long, value_name = "N")]
        bits: usize,
        /// Error budget of the seed, a number in (0, 1) (default 1e-6)
        #[arg(long, value_name = "EPS", value_parser = parse_budget)]
        budget: Option<f64>,
        /// Print JSON
        #[arg(long)]
        json: bool,
    },
    /// Register a seed held in a file, with your declared deficiency and origin
    Import {
        /// The seed file
        file: PathBuf,
        /// Declared min-entropy deficiency s in bits (README, "Seeds and the ledger")
        #[arg(long, value_name = "S")]
        deficiency: f64,
        /// Where the seed came from (free text, recorded)
        #[arg(long)]
        origin: String,
        /// The seed length the file must hold
        #[arg(long, value_name = "N")]
        bits: Option<usize>,
        /// File format
        #[arg(long, value_enum, default_value = "packed")]
        format: FormatArg,
        /// Error budget, in (0, 1) (default 1e-6)
        #[arg(long, value_name = "EPS", value_parser = parse_budget)]
        budget: Option<f64>,
        /// Print JSON
        #[arg(long)]
        json: bool,
    },
    /// Cut a seed from the end of an earlier sluice output (README, "Seeds and the ledger"):
    /// those bits are removed from the output file, never delivered
    Recycle {
        /// The earlier output (packed)
        output: PathBuf,
        /// Bits to cut from its end
        #[arg(long, value_name = "N")]
        bits: usize,
        /// The earlier output's total error (its receipt's eps_total),
        /// carried as the seed's eps_seed (README, "Seeds and the ledger")
        #[arg(long = "output-error", value_name = "EPS")]
        output_error: f64,
        /// Assert the recycling condition (README, "Seeds and the ledger"; recorded)
        #[arg(long = "assert-recycling-condition")]
        assert_condition: bool,
        /// Error budget, in (0, 1) (default 1e-6)
        #[arg(long, value_name = "EPS", value_parser = parse_budget)]
        budget: Option<f64>,
        /// Print JSON
        #[arg(long)]
        json: bool,
    },
    /// List the seeds and their accounts
    List {
        /// Print JSON
        #[arg(long)]
        json: bool,
    },
    /// Show one seed's account (never its bits unless --reveal)
    Show {
        /// Seed identifier
        id: String,
        /// Print the bits as hex (records the seed as disclosed first)
        #[arg(long)]
        reveal: bool,
        /// Print JSON
        #[arg(long)]
        json: bool,
    },
    /// Record a seed as disclosed; with -o, also write it to a file
    Reveal {
        /// Seed identifier
        id: String,
        /// Write the seed bits (packed) to this file, owner-only
        #[arg(short = 'o', long = "output", value_name = "FILE")]
        output: Option<PathBuf>,
        /// How it was disclosed (free text, recorded)
        #[arg(long, default_value = "revealed by the operator")]
        how: String,
        /// Replace an existing file at -o even if it is not a seed file
        /// written by sluice
        #[arg(long)]
        force: bool,
        /// Print JSON
        #[arg(long)]
        json: bool,
    },
    /// Lower a seed's budget (budgets are never raised)
    Budget {
        /// Seed identifier
        id: String,
        /// The new, lower budget in (0, 1)
        #[arg(value_parser = parse_budget)]
        budget: f64,
        /// Print JSON
        #[arg(long)]
        json: bool,
    },
    /// Retire a seed: no further use is allowed
    Retire {
        /// Seed identifier
        id: String,
        /// Print JSON
        #[arg(long)]
        json: bool,
    },
}

/// Parses a budget: a number in (0, 1).
pub fn parse_budget(s: &str) -> Result<f64, String> {
    let v: f64 = s
        .trim()
        .parse()
        .map_err(|_| format!("{s:?} is not a number; a budget is a number in (0, 1), e.g. 1e-6"))?;
    seed::check_budget(v).map_err(|e| e.to_string())
}

#[derive(serde::Serialize)]
struct SeedJson<'a> {
    #[serde(flatten)]
    state: &'a SeedState,
    left: f64,
    disclosed: bool,
    retired: bool,
}

fn seed_json(s: &SeedState) -> SeedJson<'_> {
    SeedJson {
        state: s,
        left: s.left(),
        disclosed: s.disclosed_line.is_some(),
        retired: s.retired_line.is_some(),
    }
}

fn print_created(id: &str, bits: usize, json: bool) -> anyhow::Result<()> {
    if json {
        common::print_json(&serde_json::json!({"seed": id, "bits": bits}))?;
    } else {
        println!("created seed {id} ({bits} bits); its bits are in the private seed store only");
    }
    Ok(())
}

/// Runs `sluice seed`.
pub fn run(a: SeedArgs) -> anyhow::Result<ExitCode> {
    let ledger = a.at.open()?;
    let store = Store::new(ledger.clone());
    let budget_or = |b: Option<f64>| b.unwrap_or(seed::DEFAULT_BUDGET);
    match a.cmd {
        Cmd::New { bits, budget, json } => {
            if bits == 0 {
                bail!("--bits 0: a seed holds at least 1 bit");
            }
            let s = Store::os_bits(bits)?;
            let id = store.register(&s, Origin::Os, budget_or(budget))?;
            print_created(&id, bits, json)?;
        }
        Cmd::Import {
            file,
            deficiency,
            origin,
            bits,
            format,
            budget,
            json,
        } => {
            let all = sluice::bits::io::read_bits(&file, format.into(), BitOrder::Msb, None)?;
            if let Some(n) = bits {
                // Packed files hold whole bytes: at most 7 pad bits, zero.
                let ok = all.len() == n
                    || (all.len() == n.div_ceil(8) * 8
                        && all.slice(n, all.len() - n).count_ones() == 0);
                if !ok {
                    bail!(
                        "{}: the seed file holds {} bits, not the {n} given with --bits; nothing was recorded",
                        file.display(),
                        all.len()
                    );
                }
            }
            let s = all.slice(0, bits.unwrap_or(all.len()));
            if s.is_empty() {
                bail!("{}: the seed file holds no bits", file.display());
            }
            let id = store.register(&s, Origin::File { deficiency, origin }, budget_or(budget))?;
            print_created(&id, s.len(), json)?;
        }
        Cmd::Recycle {
            output,
            bits,
            output_error,
            assert_condition,
            budget,
            json,
        } => {
            if !assert_condition {
                bail!(
                    "cutting a seed from an output needs --assert-recycling-condition: {} (see README, \"Seeds and the ledger\")",
                    sluice::plan::compose::RECYCLING_CONDITION
                );
            }
            let (id, keep) = sluice::pipeline::seeds::recycle(
                &store,
                &output,
                bits,
                output_error,
                budget_or(budget),
            )?;
            if !json {
                println!(
                    "{} now holds the first {keep} bits only (rounded up to whole bytes with zero bits); the cut bits are seed {id}",
                    output.display()
                );
            }
            print_created(&id, bits, json)?;
        }
        Cmd::List { json } => {
            let st = checked(&ledger)?;
            let v: Vec<_> = st.seeds.values().map(seed_json).collect();
            if json {
                common::print_json(&v)?;
            } else {
                println!(
                    "{:<32} {:>8} {:>5} {:>10} {:>10} flags",
                    "seed", "bits", "uses", "spent", "left"
                );
                for s in &v {
                    let mut flags = String::new();
                    if s.disclosed {
                        flags.push_str("disclosed ");
                    }
                    if s.retired {
                        flags.push_str("retired");
                    }
                    println!(
                        "{:<32} {:>8} {:>5} {:>10.3e} {:>10.3e} {flags}",
                        s.state.seed, s.state.bits, s.state.uses, s.state.spent, s.left
                    );
                }
            }
        }
        Cmd::Show { id, reveal, json } => {
            let st = checked(&ledger)?;
            let s = st.seed(&id)?.clone();
            let hex_bits = if reveal {
                let seed = store.load(&id)?;
                sluice::pipeline::seeds::disclose(&ledger, &id, "shown with seed show --reveal")?;
                Some(hex::encode(seed.bits.to_packed(BitOrder::Msb)))
            } else {
                None
            };
            if json {
                let mut v = serde_json::to_value(seed_json(&s))?;
                if let Some(h) = &hex_bits {
                    v["bits_hex"] = serde_json::Value::String(h.clone());
                }
                common::print_json(&v)?;
            } else {
                println!(
                    "seed {id}: {} bits, source {}, origin {:?}",
                    s.bits, s.source, s.origin
                );
                println!(
                    "  deficiency {} bits, eps_seed {:e}; uses {} ({} committed, {} abandoned, {} open); seed bits read {}",
                    s.deficiency,
                    s.eps_seed,
                    s.uses,
                    s.committed,
                    s.abandoned,
                    s.uses - s.committed - s.abandoned,
                    s.bits_consumed
                );
                println!(
                    "  spent {:e} of budget {:e}; left {:e}",
                    s.spent,
                    s.budget,
                    s.left()
                );
                // hashing spec 4.3: the error of everything made with the seed.
                println!(
                    "  all outputs made with this seed, taken together: error at most {:e} (spent + eps_seed), plus eps_cert of each certificate involved, once each",
                    s.spent + s.eps_seed
                );
                if let Some(l) = s.disclosed_line {
                    println!("  disclosed at line {l}: usable only on raw data committed before that line");
                }
                if let Some(l) = s.retired_line {
                    println!("  retired at line {l}");
                }
                if let Some(h) = hex_bits {
                    println!("  bits (hex, packed MSB first; now recorded as disclosed): {h}");
                }
            }
        }
        Cmd::Reveal {
            id,
            output,
            how,
            force,
            json,
        } => {
            if let Some(p) = &output {
                // Before the disclosure is recorded.
                let journal = ledger.journal_path();
                let head = ledger.head_path();
                common::check_output(
                    p,
                    Kind::SeedFile,
                    &[
                        (Some(journal.as_path()), "journal"),
                        (Some(head.as_path()), "head file"),
                    ],
                    force,
                )?;
            }
            // The disclosure is recorded before the bits leave.
            sluice::pipeline::seeds::reveal(
                &ledger,
                &store,
                &id,
                &how,
                output.as_deref().map(|p| (p, Replace::forced(force))),
            )?;
            if json {
                common::print_json(
                    &serde_json::json!({"seed": id, "disclosed": true, "written_to": output}),
                )?;
            } else {
                match &output {
                    Some(p) => println!(
                        "recorded seed {id} as disclosed and wrote it to {} (owner-only)",
                        p.display()
                    ),
                    None => println!("recorded seed {id} as disclosed"),
                }
                eprintln!("caution: from now on seed {id} may only be used on raw data committed to the ledger before this disclosure (README, \"Cautions\"); the output of any later use is only as good as that timing");
            }
        }
        Cmd::Budget { id, budget, json } => {
            sluice::pipeline::seeds::set_budget(&ledger, &id, budget)?;
            if json {
                common::print_json(&serde_json::json!({"seed": id, "budget": budget}))?;
            } else {
                println!("budget of seed {id} lowered to {budget:e}");
            }
        }
        Cmd::Retire { id, json } => {
            sluice::pipeline::seeds::retire(&ledger, &id)?;
            if json {
                common::print_json(&serde_json::json!({"seed": id, "retired": true}))?;
            } else {
                println!("retired seed {id}");
            }
        }
    }
    Ok(ExitCode::SUCCESS)
}

fn checked(ledger: &sluice::ledger::Ledger) -> anyhow::Result<sluice::ledger::State> {
    Ok(sluice::pipeline::seeds::checked_state(ledger)?)
}
