//! `sluice extract --extractor two-source` and `sluice verify` for it: the
//! seedless cyclic-shift two-source extractor (hashing spec 6).
//!
//! There is no seed and so no ledger: the second raw source Y takes the
//! seed's place in the extractor (see `sluice::extract::two_source`). One
//! block: the first n bits of X and of Y, n a valid length (6.1).

use super::args::{Common, ExtractArgs, ExtractorArg, VerifyArgs};
use super::common;
use anyhow::bail;
use sluice::extract::Extractor;
use sluice::pipeline::two_source::{self, Resolved, TwoSourceJob};
use std::io::Write;
use std::path::Path;
use std::process::ExitCode;

/// Whether the command line asks for the two-source extractor.
pub fn wanted(c: &Common) -> bool {
    c.extractor == Some(ExtractorArg::TwoSource)
}

/// Checks the options that make no sense without a seed, then reads both
/// sources and plans (in the library).
fn resolve(c: &Common) -> anyhow::Result<(TwoSourceJob, Resolved)> {
    if c.seed_file.is_some() {
        bail!("--seed-file does not apply to --extractor two-source: it has no seed; give the second raw source with --second-source Y");
    }
    if c.allow_longer_seed {
        bail!("--allow-longer-seed does not apply to --extractor two-source (it has no seed)");
    }
    if c.block_bits.is_some() {
        bail!("--block-bits does not apply to --extractor two-source: it hashes one n-bit block of each source (use --input-bits N)");
    }
    if c.one_bit.is_some()
        || c.design.is_some()
        || c.field_bits.is_some()
        || c.design_factor.is_some()
    {
        bail!("--one-bit, --design, --design-factor and --field-bits apply to --extractor trevisan only");
    }
    let Some(ypath) = c.second_source.as_deref() else {
        bail!("--extractor two-source needs --second-source Y: the second raw source, independent of the first");
    };
    let Some(m) = c.output_bits else {
        bail!("--extractor two-source needs --output-bits M: the planner does not size two-source runs (see `sluice plan --two-source` for m_max and eps)");
    };
    let job = TwoSourceJob {
        input: c.files.input(&c.input),
        second: ypath.to_path_buf(),
        input_bits: c.input_bits,
        m,
        engine: c.engine,
    };
    let r = two_source::resolve(&job)?;
    Ok((job, r))
}

/// Prints the cautions that apply to a two-source run.
fn print_cautions(quiet: bool) {
    if !quiet {
        let mut err = std::io::stderr().lock();
        for line in common::two_source_cautions() {
            let _ = writeln!(err, "caution: {line}");
        }
    }
}

#[derive(serde::Serialize)]
struct ExtractJson<'a> {
    extractor: &'static str,
    engine: String,
    input_bits: usize,
    second_source_bits: usize,
    output_bits: u64,
    output: &'a Path,
    side_information: &'static str,
}

/// Runs `sluice extract --extractor two-source`.
pub fn run_extract(a: &ExtractArgs) -> anyhow::Result<ExitCode> {
    let c = &a.common;
    if a.ledgered.seed.is_some() || a.ledgered.new_seed {
        bail!("--seed and --new-seed do not apply to --extractor two-source: it uses no seed and no ledger");
    }
    if a.security.any_given() {
        bail!("the security inputs do not size a two-source run: give --output-bits M (see `sluice plan --two-source` for m_max and eps)");
    }
    if a.receipt.is_some() || a.receipt_output_digest {
        bail!("--receipt applies to planned runs only; a two-source run writes no receipt");
    }
    a.check_outputs(None)?;
    let (job, r) = resolve(c)?;
    print_cautions(c.quiet);
    let report = r.execute(
        &job,
        &c.files.output(&a.output),
        sluice::files::Replace::forced(a.force),
    )?;
    if c.json {
        let j = ExtractJson {
            extractor: r.plan.name(),
            engine: c.engine.to_string(),
            input_bits: r.plan.input_bits(),
            second_source_bits: r.plan.seed_bits(),
            output_bits: report.output_bits,
            output: &a.output,
            side_information: sluice::plan::two_source::CLASSICAL_LABEL,
        };
        if a.output.as_os_str() == "-" {
            eprintln!("{}", serde_json::to_string_pretty(&j)?);
        } else {
            common::print_json(&j)?;
        }
    } else {
        let mut err = std::io::stderr();
        writeln!(
            err,
            "two-source: {} bits of each source -> {} bits, engine {} ({})",
            r.plan.input_bits(),
            r.plan.output_bits(),
            c.engine,
            sluice::plan::two_source::CLASSICAL_LABEL
        )?;
        if a.output.as_os_str() != "-" {
            writeln!(err, "wrote {} (owner-only permissions)", a.output.display())?;
        }
    }
    Ok(ExitCode::SUCCESS)
}

/// Runs `sluice verify --extractor two-source`: exit 0 on match, 1 on
/// mismatch.
pub fn run_verify(a: &VerifyArgs) -> anyhow::Result<ExitCode> {
    let c = &a.common;
    if a.receipt.is_some() {
        bail!("--receipt: two-source runs write no receipt; give --extractor two-source --second-source Y --output-bits M");
    }
    let (job, r) = resolve(c)?;
    let v = r.verify(&job, &c.files.output(&a.claimed))?;
    print_verdict(&v, c, &a.claimed)
}

/// `sluice plan --two-source`: the output length and error of the seedless
/// two-source extractor (Dodis, Elbaz, Oliveira, Raz 2004; the
/// Markov-model figures only behind `--markov-unverified`).
#[derive(clap::Args, Debug, Clone)]
pub struct PlanTwoSource {
    /// Plan the seedless two-source extractor instead of the seeded ones
    /// (--min-entropy/--min-entropy-rate and --smoothing then describe the
    /// first source X)
    #[arg(long = "two-source")]
    pub two_source: bool,
    /// Two-source: min-entropy of the second source Y, in bits (of its raw
    /// --input-bits bits)
    #[arg(
        long = "second-min-entropy",
        value_name = "K2",
        requires = "two_source",
        conflicts_with = "second_min_entropy_rate"
    )]
    pub second_min_entropy: Option<f64>,
    /// Two-source: min-entropy of the second source per raw bit (0 to 1)
    #[arg(
        long = "second-min-entropy-rate",
        value_name = "R2",
        requires = "two_source"
    )]
    pub second_min_entropy_rate: Option<f64>,
    /// Two-source: smoothing parameter of the second source's figure
    #[arg(
        long = "second-smoothing",
        value_name = "EPS_S2",
        requires = "two_source"
    )]
    pub second_smoothing: Option<f64>,
    /// Two-source: also show the quantum-proof (Markov model) figures, whose
    /// constants are UNVERIFIED (recalled from Arnon-Friedman, Portmann,
    /// Scholz 2016)
    #[arg(long = "markov-unverified", requires = "two_source")]
    pub markov_unverified: bool,
    /// Two-source, Markov mode: accept the smoothing charge
    /// 2 (eps_s,X + eps_s,Y) as an assumption (README, "Without a seed: two independent raw
    /// sources")
    #[arg(long = "accept-markov-smoothing", requires = "markov_unverified")]
    pub accept_markov_smoothing: bool,
}

#[derive(serde::Serialize)]
struct PlanMode<'a> {
    label: &'static str,
    output_bits: Option<u64>,
    eps_extractor: Option<f64>,
    eps_total: Option<f64>,
    eps_total_rounded_up: Option<&'a str>,
    refused: Option<String>,
}

impl<'a> PlanMode<'a> {
    fn of(p: &'a sluice::plan::two_source::ModePlan) -> Self {
        PlanMode {
            label: p.label,
            output_bits: p.output_bits,
            eps_extractor: p.eps_extractor,
            eps_total: p.eps_total,
            eps_total_rounded_up: p.eps_total_rounded_up.as_deref(),
            refused: p.refused.as_ref().map(plan_message),
        }
    }
}

#[derive(serde::Serialize)]
struct PlanJson<'a> {
    raw_bits: u64,
    n: u64,
    dropped_bits: u64,
    k1: f64,
    k2: f64,
    smoothing_x: f64,
    smoothing_y: f64,
    smoothing_charge: f64,
    cert_error: f64,
    target_error: f64,
    eps_extractor_budget: f64,
    classical: PlanMode<'a>,
    markov_unverified: Option<PlanMode<'a>>,
    assumed_conditions: &'a [&'static str],
    cautions: Vec<&'static str>,
}

fn field_option(field: &str) -> &'static str {
    match field {
        "k1" => "--min-entropy",
        "k2" => "--second-min-entropy",
        "k1_rate" => "--min-entropy-rate",
        "k2_rate" => "--second-min-entropy-rate",
        "eps" => "--target-error",
        "eps_s_x" | "eps_s" => "--smoothing",
        "eps_s_y" => "--second-smoothing",
        "eps_cert" => "--cert-error",
        "n" | "raw_bits" => "--input-bits",
        _ => "plan --two-source",
    }
}

/// A planning error in the words of the command line (its options).
fn plan_message(e: &sluice::plan::Error) -> String {
    use sluice::plan::ErrorKind as K;
    let opt = field_option(e.field());
    match (e.field(), e.kind()) {
        ("raw_bits", K::Missing { .. }) => {
            "--input-bits: give the length of each raw string in bits".into()
        }
        ("eps", K::Missing { .. }) => {
            "--target-error: give the total error allowed (for example 1e-9)".into()
        }
        ("k1", K::Missing { .. }) => {
            "--two-source: give --min-entropy or --min-entropy-rate of the first source".into()
        }
        ("k2", K::Missing { .. }) => "--two-source: give --second-min-entropy or --second-min-entropy-rate of the second source".into(),
        ("error_terms", K::Missing { inputs }) => {
            let missing: Vec<&str> = inputs.iter().map(|f| field_option(f)).collect();
            format!(
                "{} missing: refused: the two min-entropy figures typed in need their error terms. Rule: every error term enters the total; none is taken as 0 silently. What to do: give the smoothing parameter of each source's figure and the certification's failure term (--smoothing EPS_X --second-smoothing EPS_Y --cert-error EPS_C), or an explicit 0 for an exact claim that cannot fail",
                missing.join(", ")
            )
        }
        ("k1_rate" | "k2_rate", K::OutOfRange { value, .. }) => format!(
            "{opt}: {value} is not a rate; it must lie between 0 and 1 (bits of min-entropy per raw bit)"
        ),
        (_, K::EntropyOutOfRange { k, n }) => {
            format!("{opt} = {k}: must lie between 0 and the raw length {n} bits")
        }
        ("raw_bits", K::InvalidLength { n, .. }) => format!(
            "--input-bits {n}: no valid two-source length is at most {n} (the smallest is 3)"
        ),
        (
            _,
            K::NoExtractorBudget {
                target,
                cert_error,
                smoothing_charge,
            },
        ) => format!(
            "--target-error {target:e}: nothing is left for the extractor after the certification error {cert_error:e} and the smoothing charge 2 (eps_s,X + eps_s,Y) = {smoothing_charge:e}"
        ),
        ("eps_s", K::NotAsserted { .. }) => {
            format!("{opt}: {e}; pass --accept-markov-smoothing to accept it as an assumption")
        }
        _ => format!("{opt}: {e}"),
    }
}

/// Runs `sluice plan --two-source`: maps the options to the library's
/// input, plans there, and prints.
pub fn run_plan(
    t: &PlanTwoSource,
    raw: Option<u64>,
    sec: &super::args::SecurityArgs,
    json: bool,
    quiet: bool,
) -> anyhow::Result<ExitCode> {
    use sluice::plan::round::up4;
    use sluice::plan::two_source as ts;
    if sec.certificate.is_some() {
        bail!("--certificate does not apply to --two-source: give --min-entropy (X) and --second-min-entropy (Y) of the raw strings");
    }
    if sec.blocks.is_some() {
        bail!("--blocks does not apply to --two-source: it hashes one n-bit string of each source");
    }
    if sec.seed_deficiency != 0.0 {
        bail!("--seed-deficiency does not apply to --two-source: it has no seed");
    }
    let input = ts::PlanInput {
        raw_bits: raw,
        k1: sec.min_entropy,
        k1_rate: sec.min_entropy_rate,
        k2: t.second_min_entropy,
        k2_rate: t.second_min_entropy_rate,
        smoothing_x: sec.smoothing,
        smoothing_y: t.second_smoothing,
        cert_error: sec.cert_error,
        target_error: sec.target_error,
        markov_unverified: t.markov_unverified,
        accept_markov_smoothing: t.accept_markov_smoothing,
    };
    let p = ts::plan(&input).map_err(|e| anyhow::anyhow!("{}", plan_message(&e)))?;
    let classical = PlanMode::of(&p.classical);
    let markov = p.markov_unverified.as_ref().map(PlanMode::of);
    let (raw, n, dropped, k1, k2) = (p.raw_bits, p.n, p.dropped_bits, p.k1, p.k2);
    let (charge, eps_cert, target, budget) = (
        p.smoothing_charge,
        p.cert_error,
        p.target_error,
        p.eps_extractor_budget,
    );
    if json {
        common::print_json(&PlanJson {
            raw_bits: raw,
            n,
            dropped_bits: dropped,
            k1,
            k2,
            smoothing_x: p.smoothing_x,
            smoothing_y: p.smoothing_y,
            smoothing_charge: charge,
            cert_error: eps_cert,
            target_error: target,
            eps_extractor_budget: budget,
            classical,
            markov_unverified: markov,
            assumed_conditions: &p.assumed_conditions,
            cautions: if quiet {
                Vec::new()
            } else {
                common::two_source_cautions().to_vec()
            },
        })?;
    } else {
        let mut out = std::io::stdout().lock();
        writeln!(
            out,
            "two-source (cyclic shift, seedless): raw strings of {raw} bits, n = {n} bits kept \
             (largest valid n), each min-entropy lowered by {dropped}: k1 = {k1}, k2 = {k2}"
        )?;
        writeln!(
            out,
            "smoothing charge 2 (eps_s,X + eps_s,Y) = {charge:e}, certification error {eps_cert:e}, \
             target total error {target:e}, left for the extractor {budget:e}"
        )?;
        writeln!(out)?;
        for m in std::iter::once(&classical).chain(markov.as_ref()) {
            match (m.output_bits, &m.refused) {
                (Some(bits), _) => writeln!(
                    out,
                    "{}: m = {bits} bits, extractor error {}, total error {}",
                    m.label,
                    up4(m.eps_extractor.unwrap_or(f64::NAN)),
                    m.eps_total_rounded_up.unwrap_or("-")
                )?,
                (None, Some(e)) => writeln!(out, "{}: no output: {e}", m.label)?,
                (None, None) => {}
            }
        }
        writeln!(out)?;
        writeln!(out, "Total error = eps_cert + 2 (eps_s,X + eps_s,Y) + eps_2src, rounded up; eps_2src = 2^(-(k1 + k2 - n - m + 1)/2) (classical).")?;
        for a in &p.assumed_conditions {
            writeln!(out, "Assumed: {a}.")?;
        }
        drop(out);
        if !quiet {
            let mut err = std::io::stderr().lock();
            writeln!(err)?;
            for c in common::two_source_cautions() {
                writeln!(err, "note: {c}")?;
            }
        }
    }
    match p.classical.refused {
        None => Ok(ExitCode::SUCCESS),
        Some(e) => Err(anyhow::anyhow!("{}", plan_message(&e))),
    }
}

/// Prints a verification verdict; exit 0 on match, 1 on mismatch.
pub fn print_verdict(
    v: &sluice::pipeline::Verdict,
    c: &Common,
    claimed: &Path,
) -> anyhow::Result<ExitCode> {
    if c.json {
        common::print_json(&v)?;
    } else if v.matches {
        println!(
            "match: {} bits of {} agree with the recomputed output",
            v.computed_bits,
            claimed.display()
        );
    } else {
        let first = v.first_difference.unwrap_or(0);
        println!(
            "MISMATCH: {} differs from the recomputed output; first differing bit {first}, {} differing bits over the common length",
            claimed.display(),
            v.differing_bits
        );
        if v.claimed_bits < v.computed_bits {
            println!(
                "the claimed output holds {} bits, the recomputed one {}",
                v.claimed_bits, v.computed_bits
            );
        }
        if v.extra_claimed_bits > 0 {
            println!(
                "the claimed output has {} bits beyond the recomputed {}",
                v.extra_claimed_bits, v.computed_bits
            );
        }
    }
    Ok(if v.matches {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    })
}
