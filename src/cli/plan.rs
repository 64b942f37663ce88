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

/// The security inputs shared by `sluice plan` and `sluice extract`.
#[derive(clap::Args, Debug, Clone)]
pub struct SecurityArgs {
    /// Certified smooth min-entropy of each block, in bits.
    ///
    /// With several blocks, the bound must hold for each block given all
    /// earlier blocks (in an order fixed in advance) and the adversary.
    #[arg(long, value_name = "K", conflicts_with_all = ["min_entropy_rate", "certificate"])]
    pub min_entropy: Option<f64>,
    /// Certified smooth min-entropy per raw bit (0 to 1).
    #[arg(long, value_name = "R", conflicts_with = "certificate")]
    pub min_entropy_rate: Option<f64>,
    /// Take n, the min-entropy, the smoothing and the certification error
    /// from a certificate written by `sluice certify`.
    #[arg(long, value_name = "FILE")]
    pub certificate: Option<PathBuf>,
    /// Smoothing parameter of the min-entropy figure.
    #[arg(long, value_name = "EPS_S", conflicts_with = "certificate")]
    pub smoothing: Option<f64>,
    /// Failure term of the certification (once per certificate).
    #[arg(long, value_name = "EPS_C", conflicts_with = "certificate")]
    pub cert_error: Option<f64>,
    /// Total error allowed for everything produced with the seed.
    #[arg(long, value_name = "EPS")]
    pub target_error: Option<f64>,
    /// Number of blocks hashed with the one seed.
    #[arg(long, value_name = "L")]
    pub blocks: Option<u64>,
    /// Seed deficiency in bits: the seed's min-entropy is its length minus S.
    #[arg(long, value_name = "S", default_value_t = 0.0)]
    pub seed_deficiency: f64,
    /// What to optimise.
    #[arg(long, value_enum, default_value_t = ObjectiveArg::MostOutput)]
    pub objective: ObjectiveArg,
}

/// The selector's inputs, and the certificate they came from (if any).
pub struct Resolved {
    /// The inputs.
    pub input: SelectorInput,
    /// Whether the min-entropy was given as a rate (for error messages).
    pub rate_given: bool,
    /// The certificate, when the figures came from one.
    pub certificate: Option<(PathBuf, sluice::certify::certificate::Certificate, String)>,
}

impl SecurityArgs {
    /// Whether any figure that the selector needs was given.
    pub fn any_given(&self) -> bool {
        self.min_entropy.is_some()
            || self.min_entropy_rate.is_some()
            || self.certificate.is_some()
            || self.target_error.is_some()
    }

    /// Builds the selector input for blocks of `n` bits (`None`: from the
    /// certificate) and `blocks` blocks (when --blocks is not given).
    pub fn resolve(&self, n: Option<u64>, blocks: u64) -> anyhow::Result<Resolved> {
        let Some(target) = self.target_error else {
            anyhow::bail!("--target-error: give the total error allowed (for example 1e-9)");
        };
        let blocks = self.blocks.unwrap_or(blocks);
        if let Some(path) = &self.certificate {
            let text = std::fs::read_to_string(path)
                .with_context(|| format!("{}: cannot read the certificate", path.display()))?;
            let cert = sluice::certify::certificate::Certificate::from_json_str(&text)
                .with_context(|| format!("{}", path.display()))?;
            let ei = cert
                .extractor_input()
                .with_context(|| format!("{}", path.display()))?;
            if let Some(n) = n {
                if n != ei.n {
                    anyhow::bail!(
                        "{}: the certificate covers one string of {} bits as one block; \
                         the input here is {n} bits per block",
                        path.display(),
                        ei.n
                    );
                }
            }
            let digest = blake3::hash(text.as_bytes()).to_hex().to_string();
            let input = SelectorInput {
                n: ei.n,
                k: ei.k as f64,
                scope: if cert.per_block_bounds {
                    EntropyScope::PerBlock
                } else {
                    EntropyScope::WholeString
                },
                can_abort: Some(true),
                budget: Budget {
                    eps_total: target,
                    eps_cert: ei.eps_cert,
                    eps_seed: 0.0,
                    blocks,
                    eps_s: ei.eps_s,
                    seed_deficiency: self.seed_deficiency,
                },
                objective: self.objective.into(),
            };
            input.validate().map_err(|e| plan_error(e, false))?;
            return Ok(Resolved {
                input,
                rate_given: false,
                certificate: Some((path.clone(), cert, digest)),
            });
        }
        let n = n.ok_or_else(|| anyhow::anyhow!("--input-bits: give the block length in bits"))?;
        let k = match (self.min_entropy, self.min_entropy_rate) {
            (Some(k), _) => k,
            (None, Some(r)) => {
                if !(0.0..=1.0).contains(&r) {
                    anyhow::bail!(
                        "--min-entropy-rate: {r} is not a rate; it must lie between 0 and 1 \
                         (bits of min-entropy per raw bit)"
                    );
                }
                r * n as f64
            }
            (None, None) => {
                anyhow::bail!("give --min-entropy, --min-entropy-rate or --certificate")
            }
        };
        let input = SelectorInput {
            n,
            k,
            scope: EntropyScope::PerBlock,
            can_abort: None,
            budget: Budget {
                eps_total: target,
                eps_cert: self.cert_error.unwrap_or(0.0),
                eps_seed: 0.0,
                blocks,
                eps_s: self.smoothing.unwrap_or(0.0),
                seed_deficiency: self.seed_deficiency,
            },
            objective: self.objective.into(),
        };
        let rate_given = self.min_entropy.is_none();
        input.validate().map_err(|e| plan_error(e, rate_given))?;
        Ok(Resolved {
            input,
            rate_given,
            certificate: None,
        })
    }
}

impl From<ObjectiveArg> for Objective {
    fn from(o: ObjectiveArg) -> Objective {
        match o {
            ObjectiveArg::MostOutput => Objective::MostOutput,
            ObjectiveArg::ShortestSeed => Objective::ShortestSeed,
            ObjectiveArg::Fastest => Objective::Fastest,
        }
    }
}

/// Objective names on the command line.
#[derive(Clone, Copy, Debug, clap::ValueEnum)]
pub enum ObjectiveArg {
    /// The most output bits.
    MostOutput,
    /// The shortest seed.
    ShortestSeed,
    /// The least time per block on this machine.
    Fastest,
}

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

pub fn plan_error(e: sluice::plan::Error, rate_given: bool) -> anyhow::Error {
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
    let input = resolved.input;
    let rate_given = resolved.rate_given;
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
            common::CAUTIONS.to_vec()
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
pub fn speed_model() -> Calibration {
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
    // Through the one atomic writer (random temporary name, O_EXCL).
    sluice::files::atomic::write_all(
        path,
        sluice::files::Kind::SpeedCache,
        sluice::files::Replace::Any,
        &serde_json::to_vec_pretty(c)?,
    )?;
    Ok(())
}
