//! `sluice extract` and `sluice verify` with an explicit seed file.

use super::args::{Common, DesignArg, ExtractArgs, ExtractorArg, OneBitArg, VerifyArgs};
use super::common;
use super::two_source::print_verdict;
use anyhow::bail;
use sluice::extract::spec::Family;
use sluice::extract::trevisan::{DesignKind, OneBit};
use sluice::extract::whole_run::WholeRun;
use sluice::pipeline::job::{
    self, AutoPlan, Checked, Choice, Job, Layout, Observer, ReceiptOptions, SeedChoice, VerifyJob,
};
use sluice::pipeline::Report;
use sluice::plan::lhl::Family as HashFamily;
use sluice::plan::select::Construction;
use std::io::Write;
use std::path::Path;
use std::process::ExitCode;

/// The family an explicit run names (the Trevisan options are required
/// exactly when the extractor is Trevisan).
fn explicit_family(c: &Common, e: ExtractorArg) -> anyhow::Result<Family> {
    let given = c.one_bit.is_some()
        || c.design.is_some()
        || c.field_bits.is_some()
        || c.design_factor.is_some();
    if e != ExtractorArg::Trevisan {
        if given {
            bail!("--one-bit, --design, --design-factor and --field-bits apply to --extractor trevisan only");
        }
        return Ok(match e {
            ExtractorArg::Toeplitz => Family::Toeplitz,
            ExtractorArg::ModifiedToeplitz => Family::ModifiedToeplitz,
            _ => Family::TwoSource,
        });
    }
    let one_bit = c
        .one_bit
        .ok_or_else(|| anyhow::anyhow!("--extractor trevisan needs --one-bit ph|ip"))?;
    let design = c
        .design
        .ok_or_else(|| anyhow::anyhow!("--extractor trevisan needs --design poly|block"))?;
    let field_bits = match (one_bit, c.field_bits) {
        (OneBitArg::Ph, Some(l)) => l,
        (OneBitArg::Ph, None) => bail!("--one-bit ph needs --field-bits L (the field GF(2^L))"),
        (OneBitArg::Ip, None) => 0,
        (OneBitArg::Ip, Some(_)) => bail!("--field-bits applies to --one-bit ph only"),
    };
    Ok(Family::Trevisan {
        one_bit: one_bit.into(),
        design: design.into(),
        field_bits,
        design_factor: c.design_factor.unwrap_or(1),
        prime: None,
    })
}

impl From<OneBitArg> for OneBit {
    fn from(o: OneBitArg) -> OneBit {
        match o {
            OneBitArg::Ph => OneBit::Ph,
            OneBitArg::Ip => OneBit::Ip,
        }
    }
}

impl From<DesignArg> for DesignKind {
    fn from(d: DesignArg) -> DesignKind {
        match d {
            DesignArg::Poly => DesignKind::Poly,
            DesignArg::Block => DesignKind::Block,
        }
    }
}

/// The layout given explicitly on the command line.
fn explicit_layout(c: &Common) -> anyhow::Result<Layout> {
    match (c.extractor, c.output_bits) {
        (Some(e), Some(m)) => Ok(Layout {
            family: explicit_family(c, e)?,
            m,
            block_bits: c.block_bits,
            input_bits: c.input_bits,
        }),
        (None, Some(_)) => bail!(
            "--output-bits needs --extractor (or leave both out and give the security inputs)"
        ),
        _ => bail!(
            "give --extractor and --output-bits, or the security inputs \
             (--min-entropy, --min-entropy-rate or --certificate, and --target-error) \
             so the planner can choose"
        ),
    }
}

/// The construction `--extractor` asks the planner for.
fn construction_of(e: ExtractorArg, c: &Common) -> anyhow::Result<Construction> {
    Ok(match e {
        ExtractorArg::Toeplitz => Construction::Hash {
            family: HashFamily::Toeplitz,
        },
        ExtractorArg::ModifiedToeplitz => Construction::Hash {
            family: HashFamily::ModifiedToeplitz,
        },
        ExtractorArg::TwoSource => {
            bail!("--extractor two-source needs --output-bits M: the planner does not size two-source runs")
        }
        ExtractorArg::Trevisan => {
            if c.field_bits.is_some() {
                bail!("--field-bits: with the security inputs the planner chooses the field; leave it out");
            }
            Construction::Trevisan {
                one_bit: c.one_bit.unwrap_or(OneBitArg::Ph).into(),
                design: c.design.unwrap_or(DesignArg::Poly).into(),
                c: c.design_factor.unwrap_or(1),
            }
        }
    })
}

/// Shows what a job does: the cautions and the planner's choice before
/// hashing, then a progress bar (on a terminal only).
struct Shown<'a> {
    quiet: bool,
    what: &'a str,
    bar: Option<indicatif::ProgressBar>,
}

impl Observer for Shown<'_> {
    fn whole_run(&mut self, plan: &WholeRun) {
        if !self.quiet {
            eprintln!("{}", whole_run_line(plan));
        }
    }
    fn ready(&mut self, auto: Option<&AutoPlan>, bar_total: u64) {
        if self.what == "extracting" {
            common::print_cautions(self.quiet);
            if let Some(p) = auto {
                let mut e = std::io::stderr().lock();
                for line in p.summary(self.quiet) {
                    let _ = writeln!(e, "{line}");
                }
            }
        }
        self.bar = Some(common::progress_bits(bar_total, self.what));
    }
    fn progress(&mut self, done: u64) {
        if let Some(b) = &self.bar {
            b.set_position(done);
        }
    }
    fn finished(&mut self) {
        if let Some(b) = &self.bar {
            b.finish_and_clear();
        }
    }
}

/// One line with a whole-run block's layout, memory and time (the time
/// from a small product timed now, scaled by the work).
fn whole_run_line(plan: &WholeRun) -> String {
    let e = plan.estimate();
    let layout = if e.in_memory {
        "input and seed in memory".to_string()
    } else {
        format!(
            "{} tile(s) of {} input x {} output bits, {} pass(es) over the input",
            e.tiles, e.block_bits, e.chunk_bits, e.input_passes
        )
    };
    let secs = sluice::extract::whole_run::seconds_per_work(plan.engine()) * e.work;
    let size = |b: u64| {
        if b >= 1 << 30 {
            format!("{:.1} GiB", b as f64 / (1u64 << 30) as f64)
        } else {
            format!("{:.0} MiB", (b as f64 / (1u64 << 20) as f64).ceil())
        }
    };
    let seed = if e.beside.seed_bytes > 0 {
        format!(
            ", {} of it the seed held in memory",
            size(e.beside.seed_bytes)
        )
    } else {
        String::new()
    };
    format!(
        "one block of {} bits as a whole run on engine {}: {layout}; about {} of working memory{seed} (limit {}) and {}",
        plan.input_bits(),
        plan.engine(),
        size(e.memory_bytes),
        size(sluice::pipeline::memory_limit()),
        if e.work > 0.0 {
            format!("about {secs:.0} s of hashing")
        } else {
            "a few seconds of hashing".into()
        }
    )
}

pub fn describe(r: &Report, engine: &str, name: &str, m: usize, d: usize) -> String {
    let mut s = format!(
        "{}: {} block(s) of {} bits -> {} bits each ({} bits in all), seed {} bits, engine {}",
        name, r.blocks, r.block_bits, m, r.output_bits, d, engine
    );
    if r.trailing_bits_unused > 0 {
        s.push_str(&format!(
            "\nnote: the last {} input bits do not fill a block and were not hashed",
            r.trailing_bits_unused
        ));
    }
    s
}

#[derive(serde::Serialize)]
struct ExtractJson<'a> {
    extractor: &'static str,
    engine: String,
    input_bits_per_block: usize,
    output_bits_per_block: usize,
    seed_bits: usize,
    output: &'a Path,
    receipt: Option<&'a Path>,
    #[serde(flatten)]
    report: &'a Report,
}

#[derive(serde::Serialize)]
struct LedgeredJson<'a> {
    extractor: &'static str,
    output: &'a Path,
    receipt: &'a Path,
    seed: &'a str,
    new_seed: bool,
    #[serde(rename = "use")]
    use_id: &'a str,
    charged: f64,
    eps_total: f64,
    seed_uses: u64,
    seed_spent: f64,
    seed_left: f64,
    #[serde(flatten)]
    report: &'a Report,
}

/// Runs `sluice extract`: parses the options into a [`Job`], runs it,
/// prints what it did.
pub fn run_extract(a: ExtractArgs) -> anyhow::Result<ExitCode> {
    if super::two_source::wanted(&a.common) {
        return super::two_source::run_extract(&a);
    }
    no_second_source(&a.common)?;
    if let Some(b) = a.common.memory_limit {
        sluice::pipeline::set_memory_limit(b);
    }
    let c = &a.common;
    let lu = &a.ledgered;
    let ledgered = lu.active();
    if ledgered {
        if !a.security.any_given() {
            bail!(
                "--seed and --new-seed charge the use's error to the seed: give the security inputs \
                 (--min-entropy, --min-entropy-rate or --certificate, and --target-error) so the planner computes it"
            );
        }
        if a.output.as_os_str() == "-" {
            bail!(
                "a run recorded in the ledger writes a file (its digest is recorded): give -o FILE"
            );
        }
    }
    let auto_mode =
        ledgered || c.output_bits.is_none() && c.extractor.is_none() || a.security.any_given();
    let receipt_path = if auto_mode { a.receipt_path() } else { None };
    if auto_mode && receipt_path.is_none() {
        bail!("the output goes to standard output: give --receipt FILE for the receipt");
    }
    // Before anything is read or reserved: a refused output costs nothing.
    a.check_outputs(receipt_path.as_deref())?;
    let (choice, block_bits, input_bits) = if auto_mode {
        if c.output_bits.is_some() {
            bail!(
                "--output-bits and the security inputs exclude each other: give one or the other"
            );
        }
        let construction = c.extractor.map(|e| construction_of(e, c)).transpose()?;
        (
            Choice::Planned {
                security: a.security.security(),
                construction,
            },
            c.block_bits,
            c.input_bits,
        )
    } else {
        let l = explicit_layout(c)?;
        (
            Choice::Explicit {
                family: l.family,
                m: l.m,
            },
            l.block_bits,
            l.input_bits,
        )
    };
    let job = Job {
        input: c.files.input(&c.input),
        input_bits,
        block_bits,
        choice,
        engine: c.engine,
        seed: if ledgered {
            lu.seed_choice()
        } else {
            match &c.seed_file {
                Some(path) => SeedChoice::File {
                    path: path.clone(),
                    format: c.seed_format.into(),
                    allow_longer: c.allow_longer_seed,
                },
                None => SeedChoice::None,
            }
        },
        ledger: if ledgered {
            Some(sluice::pipeline::job::LedgerUse {
                dir: super::ledger::ledger_dir(lu.ledger.as_deref())?,
                repeat_reason: lu.repeat_reason.clone(),
                cross_run: lu.cross_run,
            })
        } else {
            None
        },
        output: c.files.output(&a.output),
        receipt: receipt_path.clone().map(|path| ReceiptOptions {
            path,
            output_digest: a.receipt_output_digest,
        }),
        replace: sluice::files::Replace::forced(a.force),
    };
    let mut shown = Shown {
        quiet: c.quiet,
        what: "extracting",
        bar: None,
    };
    let done = job::execute(&job, &mut shown)?;
    let (name, n, m, d) = (done.spec.name(), done.spec.n, done.spec.m, done.seed_bits);
    let engine = done.engine.map_or(c.engine.to_string(), |e| e.to_string());
    if let Some(u) = &done.seed_use {
        let s = &u.state;
        let receipt = done
            .receipt
            .as_deref()
            .expect("a ledgered run writes a receipt");
        if c.json {
            common::print_json(&LedgeredJson {
                extractor: name,
                output: &a.output,
                receipt,
                seed: &u.seed,
                new_seed: u.new_seed,
                use_id: &u.use_id,
                charged: u.charged,
                eps_total: done.eps_total.unwrap_or_default(),
                seed_uses: s.uses,
                seed_spent: s.spent,
                seed_left: s.left(),
                report: &done.report,
            })?;
        } else {
            eprintln!("{}", describe(&done.report, &engine, name, m, d));
            eprintln!("wrote {} (owner-only permissions)", a.output.display());
            eprintln!(
                "wrote {} (private: it holds a digest of the raw input)",
                receipt.display()
            );
            eprintln!(
                "seed {}: this use charged {:e}; {} use(s), spent {:e} of {:e}, left {:e}",
                u.seed,
                u.charged,
                s.uses,
                s.spent,
                s.budget,
                s.left()
            );
            if let Some(r) = &lu.repeat_reason {
                eprintln!(
                    "override: extracting again from raw data already used, reason recorded: {r:?}"
                );
            }
            if lu.cross_run {
                eprintln!("asserted: the certificate conditions on the earlier runs' raw outputs (README, \"Seeds and the ledger\")");
            }
        }
        return Ok(ExitCode::SUCCESS);
    }
    if c.json {
        let j = ExtractJson {
            extractor: name,
            engine: engine.clone(),
            input_bits_per_block: n,
            output_bits_per_block: m,
            seed_bits: d,
            output: &a.output,
            receipt: receipt_path.as_deref(),
            report: &done.report,
        };
        if a.output.as_os_str() == "-" {
            eprintln!("{}", serde_json::to_string_pretty(&j)?);
        } else {
            common::print_json(&j)?;
        }
    } else {
        let mut err = std::io::stderr();
        writeln!(err, "{}", describe(&done.report, &engine, name, m, d))?;
        if a.output.as_os_str() != "-" {
            writeln!(err, "wrote {} (owner-only permissions)", a.output.display())?;
        }
        if let Some(p) = &receipt_path {
            writeln!(
                err,
                "wrote {} (private: it holds a digest of the raw input)",
                p.display()
            )?;
        }
    }
    Ok(ExitCode::SUCCESS)
}

/// Runs `sluice verify`: exit 0 on match, 1 on mismatch, 2 on bad usage.
pub fn run_verify(a: VerifyArgs) -> anyhow::Result<ExitCode> {
    if super::two_source::wanted(&a.common) {
        if a.seed.is_some() {
            bail!("--seed: the two-source extractor has no seed");
        }
        return super::two_source::run_verify(&a);
    }
    no_second_source(&a.common)?;
    if let Some(b) = a.common.memory_limit {
        sluice::pipeline::set_memory_limit(b);
    }
    let c = &a.common;
    let (layout, input_digest, labels) = match &a.receipt {
        Some(path) => {
            let r = job::read_receipt(path)?;
            (r.layout, Some(r.input_digest), r.labels)
        }
        None => (explicit_layout(c)?, None, Vec::new()),
    };
    let vj = VerifyJob {
        input: c.files.input(&c.input),
        layout,
        input_digest,
        engine: c.engine,
        seed_file: c
            .seed_file
            .clone()
            .map(|p| (p, c.seed_format.into(), c.allow_longer_seed)),
        stored_seed: match &a.seed {
            Some(id) => Some((super::ledger::ledger_dir(a.ledger.as_deref())?, id.clone())),
            None => None,
        },
        claimed: c.files.output(&a.claimed),
    };
    let mut shown = Shown {
        quiet: c.quiet,
        what: "verifying",
        bar: None,
    };
    let v = match job::verify(&vj, &mut shown)? {
        Checked::WrongInput => {
            println!(
                "MISMATCH: {} is not the input {} was made from (its data digest differs)",
                c.input.display(),
                a.receipt
                    .as_deref()
                    .expect("only a receipt names an input")
                    .display()
            );
            return Ok(ExitCode::from(1));
        }
        Checked::Verdict(v) => v,
    };
    if c.json && a.receipt.is_some() {
        // The receipt's labels travel with the verdict.
        let mut j = serde_json::to_value(&v)?;
        j["labels"] = serde_json::json!(labels);
        common::print_json(&j)?;
        return Ok(if v.matches {
            ExitCode::SUCCESS
        } else {
            ExitCode::from(1)
        });
    }
    let code = print_verdict(&v, c, &a.claimed)?;
    // The receipt's labels travel with the verdict.
    for label in &labels {
        println!("label: {label}");
    }
    Ok(code)
}

/// Refuses --second-source without --extractor two-source.
fn no_second_source(c: &Common) -> anyhow::Result<()> {
    if c.second_source.is_some() {
        bail!("--second-source applies to --extractor two-source only");
    }
    Ok(())
}
