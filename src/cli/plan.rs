//! `sluice plan`: compares every construction for one set of security
//! inputs and picks one.
//!
//! The figures come from `sluice::plan::select` (pure); the speed column
//! comes from a short measurement on this machine (`sluice::plan::measure`),
//! cached in the user's cache folder.

use super::common;
use anyhow::Context;
use sluice::extract::Extractor;
use sluice::plan::compose::{self, Budget};
use sluice::plan::measure::{self, Calibration};
use sluice::plan::round::up4;
use sluice::plan::select::{self, human_seconds, EntropyScope, Objective, SelectorInput, WorkUnit};
use std::path::PathBuf;
use std::process::ExitCode;
use std::time::Duration;

/// Compare the extractors for your security inputs and pick one.
#[derive(clap::Args)]
pub struct PlanArgs {
    /// Length of each raw block, in bits.
    #[arg(long, value_name = "N")]
    input_bits: u64,
    /// Certified smooth min-entropy of each block, in bits.
    ///
    /// With several blocks, the bound must hold for each block given all
    /// earlier blocks (in an order fixed in advance) and the adversary.
    #[arg(long, value_name = "K", required_unless_present = "min_entropy_rate")]
    min_entropy: Option<f64>,
    /// Certified smooth min-entropy per raw bit (0 to 1).
    #[arg(long, value_name = "R", conflicts_with = "min_entropy")]
    min_entropy_rate: Option<f64>,
    /// Smoothing parameter of the min-entropy figure.
    #[arg(long, value_name = "EPS_S", default_value_t = 0.0)]
    smoothing: f64,
    /// Failure term of the certification (once per certificate).
    #[arg(long, value_name = "EPS_C", default_value_t = 0.0)]
    cert_error: f64,
    /// Total error allowed for everything produced with the seed.
    #[arg(long, value_name = "EPS")]
    target_error: f64,
    /// Number of blocks hashed with the one seed.
    #[arg(long, value_name = "L", default_value_t = 1)]
    blocks: u64,
    /// Seed deficiency in bits: the seed's min-entropy is its length minus S.
    #[arg(long, value_name = "S", default_value_t = 0.0)]
    seed_deficiency: f64,
    /// What to optimise.
    #[arg(long, value_enum, default_value_t = ObjectiveArg::MostOutput)]
    objective: ObjectiveArg,
    /// Print one JSON document instead of the table.
    #[arg(long)]
    json: bool,
    /// Do not print the cautions.
    #[arg(long)]
    quiet: bool,
}

#[derive(Clone, Copy, clap::ValueEnum)]
enum ObjectiveArg {
    /// The most output bits.
    MostOutput,
    /// The shortest seed.
    ShortestSeed,
    /// The least time per block on this machine.
    Fastest,
}

/// The cautions printed once unless `--quiet`.
const CAUTIONS: [&str; 4] = [
    "The output is only as good as the min-entropy claim and the assumptions of the \
     certification behind it.",
    "Seeds must be independent of the source and of any adversary, and must not be \
     disclosed before the raw data they are used on exist.",
    "Reusing a seed adds its error each time: every block hashed with it counts in the total.",
    "Whether the error figure suffices is for the standards and evaluators that apply to \
     your application to decide.",
];

/// Maps a planning error's field to the option that set it.
fn option_for(field: &str) -> &'static str {
    match field {
        "n" => "--input-bits",
        "k" => "--min-entropy",
        "eps_s" => "--smoothing",
        "eps_cert" => "--cert-error",
        "eps_total" | "eps_ext" => "--target-error",
        "blocks" => "--blocks",
        "seed_deficiency" => "--seed-deficiency",
        _ => "plan",
    }
}

fn plan_error(e: sluice::plan::Error, rate_given: bool) -> anyhow::Error {
    let option = match e.field() {
        "k" if rate_given => "--min-entropy-rate",
        f => option_for(f),
    };
    anyhow::anyhow!("{option}: {e}")
}

/// Seed bits per output bit, readable from 1e-6 to 1e12.
fn ratio_cell(x: f64) -> String {
    if (1e-3..1e7).contains(&x) {
        format!("{x:.3}")
    } else {
        format!("{x:.2e}")
    }
}

pub fn run(args: PlanArgs) -> anyhow::Result<ExitCode> {
    let k = match (args.min_entropy, args.min_entropy_rate) {
        (Some(k), _) => k,
        (None, Some(r)) => {
            if !(0.0..=1.0).contains(&r) {
                anyhow::bail!(
                    "--min-entropy-rate: {r} is not a rate; it must lie between 0 and 1 \
                     (bits of min-entropy per raw bit)"
                );
            }
            r * args.input_bits as f64
        }
        (None, None) => anyhow::bail!("give --min-entropy or --min-entropy-rate"),
    };
    let input = SelectorInput {
        n: args.input_bits,
        k,
        scope: EntropyScope::PerBlock,
        can_abort: None,
        budget: Budget {
            eps_total: args.target_error,
            eps_cert: args.cert_error,
            eps_seed: 0.0,
            blocks: args.blocks,
            eps_s: args.smoothing,
            seed_deficiency: args.seed_deficiency,
        },
        objective: match args.objective {
            ObjectiveArg::MostOutput => Objective::MostOutput,
            ObjectiveArg::ShortestSeed => Objective::ShortestSeed,
            ObjectiveArg::Fastest => Objective::Fastest,
        },
    };
    let rate_given = args.min_entropy.is_none();
    input.validate().map_err(|e| plan_error(e, rate_given))?;
    let speeds = speed_model();
    let sel = select::select(&input, &speeds).map_err(|e| plan_error(e, rate_given))?;
    if args.json {
        common::print_json(&report(&input, &sel, &speeds, !args.quiet))?;
    } else {
        print_table(&input, &sel)?;
        if !args.quiet {
            print_cautions()?;
        }
    }
    match sel.chosen {
        Some(_) => Ok(ExitCode::SUCCESS),
        None => Err(anyhow::anyhow!("{}", sel.reason)),
    }
}

fn print_cautions() -> anyhow::Result<()> {
    use std::io::Write;
    let mut err = std::io::stderr().lock();
    writeln!(err)?;
    for c in CAUTIONS {
        writeln!(err, "note: {c}")?;
    }
    Ok(())
}

fn time_cell(s: Option<f64>) -> String {
    s.map(human_seconds)
        .unwrap_or_else(|| "not measured".into())
}

fn print_table(input: &SelectorInput, sel: &select::Selection) -> anyhow::Result<()> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    writeln!(
        out,
        "n = {} bits per block, min-entropy {} bits (smoothing {:e}), {} block(s) with one \
         seed, seed deficiency {} bits, certification error {:e}, target total error {:e}",
        input.n,
        input.k,
        input.budget.eps_s,
        input.budget.blocks,
        input.budget.seed_deficiency,
        input.budget.eps_cert,
        input.budget.eps_total
    )?;
    writeln!(out)?;
    writeln!(
        out,
        "  {:<21} {:>12} {:>7} {:>16} {:>11} {:>11} {:>14}",
        "construction",
        "output bits",
        "kept",
        "seed bits",
        "seed/output",
        "total error",
        "time/block"
    )?;
    for (i, row) in sel.rows.iter().enumerate() {
        let mark = if sel.chosen == Some(i) { "*" } else { " " };
        let name = row.construction.name();
        match &row.outcome {
            Ok(p) => writeln!(
                out,
                "{mark} {name:<21} {:>12} {:>6.1}% {:>16} {:>11} {:>11} {:>14}",
                p.m,
                (1000.0 * p.kept).floor() / 10.0,
                p.d,
                ratio_cell(p.seed_per_output),
                up4(p.eps_total),
                time_cell(p.seconds_per_block)
            )?,
            Err(e) => writeln!(out, "{mark} {name:<21} refused: {e}")?,
        }
    }
    writeln!(out)?;
    match sel.chosen {
        Some(i) => writeln!(
            out,
            "choice: {}: {}.",
            sel.rows[i].construction.name(),
            sel.reason
        )?,
        None => writeln!(out, "no choice: {}.", sel.reason)?,
    }
    writeln!(
        out,
        "Total error = eps_cert + L (2 eps_s + 2^s eps_ext), rounded up; leftover-hash form: \
         conservative."
    )?;
    for c in select::assumed_conditions(input) {
        writeln!(out, "Assumed: {c}.")?;
    }
    match input.can_abort {
        Some(abort) => writeln!(out, "Meaning: {}.", compose::meaning(abort))?,
        None => {
            writeln!(out, "Meaning: {}.", compose::meaning(false))?;
            writeln!(
                out,
                "If the certification can abort: {}.",
                compose::meaning(true)
            )?;
        }
    }
    Ok(())
}

#[derive(serde::Serialize)]
struct JsonRow {
    construction: String,
    planned: Option<JsonPlanned>,
    refused: Option<String>,
}

#[derive(serde::Serialize)]
struct JsonPlanned {
    output_bits: u64,
    kept_fraction: f64,
    seed_bits: u64,
    seed_bits_per_output_bit: f64,
    eps_ext: f64,
    eps_total: f64,
    eps_total_rounded_up: String,
    seconds_per_block: Option<f64>,
    trevisan: Option<sluice::plan::trevisan::TrevisanPlan>,
}

#[derive(serde::Serialize)]
struct JsonReport<'a> {
    inputs: &'a SelectorInput,
    rows: Vec<JsonRow>,
    chosen: Option<String>,
    reason: &'a str,
    total_error_formula: &'static str,
    leftover_hash_form: &'static str,
    meaning: &'static str,
    meaning_if_certification_can_abort: &'static str,
    assumed_conditions: Vec<&'static str>,
    speed_calibration: &'a Calibration,
    cautions: Vec<&'static str>,
}

fn report<'a>(
    input: &'a SelectorInput,
    sel: &'a select::Selection,
    speeds: &'a Calibration,
    cautions: bool,
) -> JsonReport<'a> {
    JsonReport {
        inputs: input,
        rows: sel
            .rows
            .iter()
            .map(|r| JsonRow {
                construction: r.construction.name(),
                planned: r.outcome.as_ref().ok().map(|p| JsonPlanned {
                    output_bits: p.m,
                    kept_fraction: p.kept,
                    seed_bits: p.d,
                    seed_bits_per_output_bit: p.seed_per_output,
                    eps_ext: p.eps_ext,
                    eps_total: p.eps_total,
                    eps_total_rounded_up: up4(p.eps_total),
                    seconds_per_block: p.seconds_per_block,
                    trevisan: p.trevisan.clone(),
                }),
                refused: r.outcome.as_ref().err().map(|e| e.to_string()),
            })
            .collect(),
        chosen: sel.chosen.map(|i| sel.rows[i].construction.name()),
        reason: &sel.reason,
        total_error_formula: "eps_cert + eps_seed + L (2 eps_s + 2^s eps_ext)",
        leftover_hash_form: "conservative",
        meaning: compose::meaning(false),
        meaning_if_certification_can_abort: compose::meaning(true),
        assumed_conditions: select::assumed_conditions(input),
        speed_calibration: speeds,
        cautions: if cautions {
            CAUTIONS.to_vec()
        } else {
            Vec::new()
        },
    }
}

/// Hashing extractor plans for calibration. `crate::extract` gains
/// `Toeplitz::new(n, m)` and `ModifiedToeplitz::new(n, m)` when the lead
/// merges them; connect them here (until then these units are "not
/// measured").
fn hashing_extractor(unit: WorkUnit, n: usize, m: usize) -> Option<Box<dyn Extractor>> {
    match unit {
        WorkUnit::ToeplitzProduct => sluice::extract::Toeplitz::new(n, m)
            .ok()
            .map(|e| Box::new(e) as Box<dyn Extractor>),
        WorkUnit::ModifiedToeplitzProduct => sluice::extract::ModifiedToeplitz::new(n, m)
            .ok()
            .map(|e| Box::new(e) as Box<dyn Extractor>),
        _ => None,
    }
}

/// Identifies what a cached calibration was measured for.
fn cache_key() -> String {
    let hashing: Vec<&str> = [WorkUnit::ToeplitzProduct, WorkUnit::ModifiedToeplitzProduct]
        .into_iter()
        .filter(|u| hashing_extractor(*u, 64, 32).is_some())
        .map(|u| match u {
            WorkUnit::ToeplitzProduct => "toeplitz",
            _ => "modified-toeplitz",
        })
        .collect();
    format!(
        "sluice {} / {} / {}",
        env!("CARGO_PKG_VERSION"),
        sluice::gf2::Backend::detect().name(),
        hashing.join(",")
    )
}

#[derive(serde::Serialize, serde::Deserialize)]
struct Cached {
    key: String,
    calibration: Calibration,
}

fn cache_path() -> Option<PathBuf> {
    dirs::cache_dir().map(|d| d.join("sluice").join("plan-speed.json"))
}

/// The speed model: from the cache when it matches this build and machine,
/// else measured now (a few milliseconds per unit) and cached. A cache that
/// cannot be read or written is not an error: the model is measured again.
fn speed_model() -> Calibration {
    let key = cache_key();
    let path = cache_path();
    if let Some(p) = &path {
        if let Ok(text) = std::fs::read_to_string(p) {
            if let Ok(c) = serde_json::from_str::<Cached>(&text) {
                if c.key == key {
                    return c.calibration;
                }
            }
        }
    }
    let calibration = measure::calibrate(&hashing_extractor, Duration::from_millis(5));
    if let Some(p) = &path {
        let _ = save(
            p,
            &Cached {
                key,
                calibration: calibration.clone(),
            },
        );
    }
    calibration
}

fn save(path: &std::path::Path, c: &Cached) -> anyhow::Result<()> {
    let dir = path.parent().context("cache path has no folder")?;
    std::fs::create_dir_all(dir)?;
    let tmp = path.with_extension("json.tmp");
    std::fs::write(&tmp, serde_json::to_vec_pretty(c)?)?;
    std::fs::rename(&tmp, path)?;
    Ok(())
}
