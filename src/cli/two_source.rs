//! `sluice extract --extractor two-source` and `sluice verify` for it: the
//! seedless cyclic-shift two-source extractor (hashing spec 6).
//!
//! There is no seed and so no ledger: the second raw source Y takes the
//! seed's place in the extractor (see `sluice::extract::two_source`). One
//! block: the first n bits of X and of Y, n a valid length (6.1).

use super::common;
use super::extract::{Common, ExtractArgs, ExtractorArg, VerifyArgs};
use anyhow::{bail, Context};
use sluice::bits::Bits;
use sluice::extract::{Extractor, TwoSource};
use sluice::pipeline::{Run, Source};
use sluice::plan::two_source::largest_n;
use std::io::Write;
use std::path::Path;
use std::process::ExitCode;

/// Whether the command line asks for the two-source extractor.
pub fn wanted(c: &Common) -> bool {
    c.extractor == Some(ExtractorArg::TwoSource)
}

/// The planned extractor and both sources, cut to n bits.
struct Resolved {
    plan: TwoSource,
    x: Bits,
    y: Bits,
}

fn suggestion(limit: u64) -> String {
    match largest_n(limit) {
        Some(v) => format!("the largest valid n not above {limit} is {v}"),
        None => format!("no valid n is at most {limit} (the smallest is 3)"),
    }
}

#[cfg(unix)]
fn same_file(a: &Path, b: &Path) -> bool {
    use std::os::unix::fs::MetadataExt;
    match (std::fs::metadata(a), std::fs::metadata(b)) {
        (Ok(x), Ok(y)) => x.dev() == y.dev() && x.ino() == y.ino(),
        _ => false,
    }
}

#[cfg(not(unix))]
fn same_file(a: &Path, b: &Path) -> bool {
    match (std::fs::canonicalize(a), std::fs::canonicalize(b)) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    }
}

/// Checks the options that make no sense without a seed, reads both sources
/// and plans.
fn resolve(c: &Common) -> anyhow::Result<Resolved> {
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
    if ypath.as_os_str() == "-" {
        bail!("--second-source -: the second source must be a file, not standard input");
    }
    if c.input.as_os_str() != "-" && same_file(&c.input, ypath) {
        bail!(
            "{} and {} are the same file: the two sources must be independent",
            c.input.display(),
            ypath.display()
        );
    }
    if c.input_bits == Some(0) {
        bail!("--input-bits 0: the input length must be at least 1 bit");
    }
    let xf = c.files.input(&c.input);
    let read = |p: &Path| -> anyhow::Result<Bits> {
        let b = sluice::bits::io::read_bits(p, xf.format, xf.order, None)?;
        if b.is_empty() {
            bail!("{}: the file holds no bits", p.display());
        }
        Ok(b)
    };
    let x = read(&c.input)?;
    let y = read(ypath)?;
    let have = x.len().min(y.len()) as u64;
    let n = match c.input_bits {
        Some(n) => {
            for (p, b) in [(c.input.as_path(), &x), (ypath, &y)] {
                if (b.len() as u64) < n {
                    bail!(
                        "{}: {n} bits asked for (--input-bits), but it ends after {} bits",
                        p.display(),
                        b.len()
                    );
                }
            }
            n
        }
        None => {
            if x.len() != y.len() {
                bail!(
                    "{} holds {} bits and {} holds {}: give --input-bits N to use the first N bits of both ({})",
                    c.input.display(),
                    x.len(),
                    ypath.display(),
                    y.len(),
                    suggestion(have)
                );
            }
            have
        }
    };
    if !sluice::plan::two_source::valid_n(n) {
        let mut msg = format!(
            "n = {n} bits is not a valid two-source length (it must be a prime with 2 as a \
             primitive root modulo n); {}",
            suggestion(have)
        );
        if n < have {
            msg.push_str(&format!(" ({})", suggestion(n)));
        }
        msg.push_str(": pass it as --input-bits");
        bail!(msg);
    }
    let n = usize::try_from(n).context("--input-bits too large for this machine")?;
    if m == 0 || m >= n {
        bail!(
            "--output-bits {m} must be in 1..={} for two sources of {n} bits (hashing spec 6.1)",
            n - 1
        );
    }
    let (x, y) = (x.slice(0, n), y.slice(0, n));
    if x == y {
        bail!(
            "the first {n} bits of {} and {} are identical: the two sources must be independent",
            c.input.display(),
            ypath.display()
        );
    }
    let plan = TwoSource::with_engine(n, m, c.engine)?;
    Ok(Resolved { plan, x, y })
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

fn run_on<'a>(r: &'a Resolved, name: &Path, output: sluice::pipeline::BitFile) -> Run<'a> {
    Run {
        input: Source::Memory {
            bits: r.x.clone(),
            name: name.to_path_buf(),
        },
        input_bits: Some(r.x.len() as u64),
        extractor: &r.plan,
        seed: &r.y,
        output,
    }
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
    let r = resolve(c)?;
    print_cautions(c.quiet);
    let run = run_on(&r, &c.input, c.files.output(&a.output));
    let report = run.execute(|_| {})?;
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
    let r = resolve(c)?;
    let claimed = c.files.output(&a.claimed);
    let run = run_on(&r, &c.input, claimed.clone());
    let v = run.verify(&claimed, |_| {})?;
    super::extract::print_verdict(&v, c, &a.claimed)
}
