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
    /// Smoothing parameter of the min-entropy figure (required with
    /// --min-entropy or --min-entropy-rate; 0 claims an exact min-entropy).
    #[arg(long, value_name = "EPS_S", conflicts_with = "certificate")]
    pub smoothing: Option<f64>,
    /// Failure term of the certification, once per certificate (required
    /// with --min-entropy or --min-entropy-rate; 0 claims a certification
    /// that cannot fail).
    #[arg(long, value_name = "EPS_C", conflicts_with = "certificate")]
    pub cert_error: Option<f64>,
    /// Use a certificate computed from counts typed in by the operator
    /// (unchecked: nothing ties its figure to the raw string); the operator
    /// vouches for the counts. Recorded in the receipt.
    #[arg(long)]
    pub trust_counts: bool,
    /// With a certificate and --seed-file: the operator keeps their own
    /// record of this seed's uses (sluice records none). Recorded in the
    /// receipt with a digest of the seed.
    #[arg(long)]
    pub own_seed_record: bool,
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
    /// Labels that must be shown with every figure derived from these
    /// inputs (and written into the receipt).
    pub labels: Vec<String>,
}

/// The label for a manual figure split over several blocks (issue: no way
/// to overstate security, item 8).
pub const PER_BLOCK_CLAIM_LABEL: &str = "per-block min-entropy is the operator's claim: each block's figure must hold given all earlier blocks; splitting a figure certified for the whole string by hand does not give that";

/// The labels a certificate carries into every derived figure.
pub fn certificate_labels(cert: &sluice::certify::certificate::Certificate) -> Vec<String> {
    let mut l: Vec<String> = cert.labels.clone();
    if !cert.device_independent && !l.iter().any(|x| x.contains("not device-independent")) {
        l.push("not device-independent".into());
    }
    l.push(format!(
        "certificate: {} model, bound {}, string {}",
        match cert.mode {
            sluice::certify::Mode::EntropyAccumulation => "entropy accumulation",
            sluice::certify::Mode::IidEstimate => "i.i.d. estimate (weaker)",
        },
        cert.bound_name(),
        cert.keep().name()
    ));
    l
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
            let ei = cert.extractor_input().map_err(|e| {
                anyhow::anyhow!(
                    "{}: {e}. Rule: a certificate is used only if its figure follows from its own parameters and counts. What to do: use the certificate sluice certify wrote, unedited",
                    path.display()
                )
            })?;
            if cert.record.form == "counts" && !self.trust_counts {
                anyhow::bail!(
                    "{}: refused: this certificate was computed from counts supplied by the operator; the round record was never read, so nothing ties its figure to the raw string. Rule: unchecked figures are used only on explicit request. What to do: certify the round file itself, or give --trust-counts to vouch for the counts (recorded in the receipt)",
                    path.display()
                );
            }
            let mut labels = certificate_labels(&cert);
            if cert.record.form == "counts" {
                labels.push("used with --trust-counts: the operator vouches for the counts".into());
            }
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
                labels,
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
        let (Some(eps_s), Some(eps_cert)) = (self.smoothing, self.cert_error) else {
            anyhow::bail!(
                "{}: refused: a min-entropy figure typed in needs its error terms. Rule: every error term enters the total; none is taken as 0 silently. What to do: give the smoothing parameter and the certification's failure term of your entropy claim (--smoothing EPS_S --cert-error EPS_C), or an explicit 0 for an exact claim that cannot fail",
                match (self.smoothing, self.cert_error) {
                    (None, None) => "--smoothing and --cert-error are missing",
                    (None, _) => "--smoothing is missing",
                    _ => "--cert-error is missing",
                }
            );
        };
        let mut labels = vec![
            "min-entropy figure typed in by the operator (not from a sluice certificate)"
                .to_string(),
        ];
        if eps_s == 0.0 {
            labels.push(
                "--smoothing 0: claims the min-entropy holds exactly, without smoothing".into(),
            );
        }
        if eps_cert == 0.0 {
            labels.push("--cert-error 0: claims the entropy certification cannot fail".into());
        }
        if blocks > 1 {
            labels.push(PER_BLOCK_CLAIM_LABEL.into());
        }
        let input = SelectorInput {
            n,
            k,
            scope: EntropyScope::PerBlock,
            can_abort: None,
            budget: Budget {
                eps_total: target,
                eps_cert,
                eps_seed: 0.0,
                blocks,
                eps_s,
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
            labels,
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
