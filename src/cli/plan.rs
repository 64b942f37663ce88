//! `sluice plan`: compares every construction for one set of security
//! inputs and picks one.
//!
//! The figures come from `sluice::plan::select` (pure); the speed column
//! comes from a short measurement on this machine (`sluice::plan::measure`),
//! cached in the user's cache folder.

use super::args::SecurityArgs;
use super::common;
use sluice::plan::compose;
use sluice::plan::measure::Calibration;
use sluice::plan::round::up4;
use sluice::plan::select::{self, human_seconds, SelectorInput};
use std::process::ExitCode;

/// Compare the extractors for your security inputs and pick one.
#[derive(clap::Args)]
pub struct PlanArgs {
    /// Length of each raw block, in bits (taken from --certificate if given).
    #[arg(long, value_name = "N", required_unless_present = "certificate")]
    input_bits: Option<u64>,
    #[command(flatten)]
    security: SecurityArgs,
    #[command(flatten)]
    two: super::two_source::PlanTwoSource,
    /// Print one JSON document instead of the table.
    #[arg(long)]
    json: bool,
    /// Do not print the cautions.
    #[arg(long)]
    quiet: bool,
}

pub fn plan_error(e: sluice::plan::Error, rate_given: bool) -> anyhow::Error {
    sluice::pipeline::security::plan_error(e, rate_given).into()
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
    if args.two.two_source {
        return super::two_source::run_plan(
            &args.two,
            args.input_bits,
            &args.security,
            args.json,
            args.quiet,
        );
    }
    let resolved = args.security.resolve(args.input_bits, 1)?;
    let labels = resolved.labels.clone();
    let input = resolved.input;
    let rate_given = resolved.rate_given;
    let speeds = speed_model();
    let sel = select::select(&input, &speeds).map_err(|e| plan_error(e, rate_given))?;
    if args.json {
        let mut r = report(&input, &sel, &speeds, !args.quiet);
        r.labels = labels;
        common::print_json(&r)?;
    } else {
        for l in &labels {
            println!("label: {l}");
        }
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
    for c in common::CAUTIONS {
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
            Ok(p) => {
                writeln!(
                    out,
                    "{mark} {name:<21} {:>12} {:>6.1}% {:>16} {:>11} {:>11} {:>14}",
                    p.m,
                    (1000.0 * p.kept).floor() / 10.0,
                    p.d,
                    ratio_cell(p.seed_per_output),
                    up4(p.eps_total),
                    time_cell(p.seconds_per_block)
                )?;
                if let Some(why) = &p.impractical {
                    writeln!(out, "    ({why}; never chosen)")?;
                }
            }
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
    impractical: Option<String>,
    trevisan: Option<sluice::plan::trevisan::TrevisanPlan>,
}

#[derive(serde::Serialize)]
struct JsonReport<'a> {
    labels: Vec<String>,
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
        labels: Vec::new(),
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
                    impractical: p.impractical.clone(),
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
            common::CAUTIONS.to_vec()
        } else {
            Vec::new()
        },
    }
}

pub use sluice::pipeline::security::speed_model;
