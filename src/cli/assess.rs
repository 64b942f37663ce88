//! `sluice assess`: statistical checks of raw input (SP 800-90B health
//! tests and min-entropy estimates) and of extracted output (the SP 800-22
//! battery over one or many sequences). All numbers come from
//! `sluice::assess`; this module reads files, prints and plots.

use super::assess_report::{KindSummary, NotRun, OutputReport, RawReport};
use crate::cli::common;
use anyhow::{bail, Context};
use clap::{Args, Subcommand, ValueEnum};
use rayon::prelude::*;
use sluice::assess::many;
use sluice::assess::sp800_22::{self, Outcome, TestId, TestReport};
use sluice::assess::sp800_90b::{estimators, health};
use sluice::bits::{io, BitOrder, Bits, Format};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

const CAUTION_TESTS: &str =
    "caution: statistical tests cannot certify randomness; only the entropy \
certification and the extractor's proof do.";
const CAUTION_RAW: &str =
    "caution: an estimate at or above the claimed figure proves nothing about \
an adversary (who may know more than any statistic sees); a figure far below it is a red flag. \
Output is only as good as the entropy claim and the assumptions of its certification; defer to the \
applicable standards and evaluators.";

/// Statistical checks of raw input or of extracted output.
#[derive(Args)]
pub struct AssessArgs {
    #[command(subcommand)]
    what: What,
}

#[derive(Subcommand)]
enum What {
    /// Health tests and min-entropy estimates of raw bits (SP 800-90B).
    ///
    /// Exit status: 0 when the health tests pass and no estimate is below
    /// the claim, 1 when a health test fails or an estimate is below the
    /// claim, 2 on an error.
    Raw(RawArgs),
    /// The SP 800-22 battery on extracted output, over one or many sequences.
    ///
    /// Exit status: 0 when no P-value kind is flagged, 1 when one is (some
    /// are expected by chance; the report says how many), 2 on an error.
    Output(OutputArgs),
}

/// File format of the input.
#[derive(Clone, Copy, ValueEnum)]
enum FormatArg {
    /// Packed bytes, eight bits per byte.
    Packed,
    /// '0'/'1' characters; white space ignored.
    Ascii,
    /// Hexadecimal digits of packed bytes; white space ignored.
    Hex,
}

/// Order of the bits inside a byte.
#[derive(Clone, Copy, ValueEnum)]
enum OrderArg {
    /// First bit = most significant bit of the byte.
    Msb,
    /// First bit = least significant bit of the byte.
    Lsb,
}

#[derive(Args)]
struct InputOpts {
    /// Input file (`-` for standard input).
    file: PathBuf,
    /// Input file format.
    #[arg(
        long,
        value_enum,
        default_value = "packed",
        value_name = "packed|ascii|hex"
    )]
    format: FormatArg,
    /// Bit order inside packed bytes.
    #[arg(long, value_enum, default_value = "msb", value_name = "msb|lsb")]
    bit_order: OrderArg,
    /// Use only the first N bits of the input.
    #[arg(long, value_name = "N")]
    input_bits: Option<usize>,
    /// Print one JSON document instead of text.
    #[arg(long)]
    json: bool,
    /// Also draw a picture of the results into this SVG file.
    #[arg(long, value_name = "FILE.svg")]
    plot: Option<PathBuf>,
    /// Replace an existing file at --plot even if sluice did not draw it
    #[arg(long)]
    force: bool,
}

impl InputOpts {
    /// Refuses a plot path that is the input or a file sluice did not
    /// draw (without --force), before any work.
    fn check_plot(&self) -> anyhow::Result<()> {
        if let Some(p) = &self.plot {
            common::check_output(
                p,
                sluice::files::Kind::Plot,
                &[(Some(self.file.as_path()), "input")],
                self.force,
            )?;
        }
        Ok(())
    }
}

#[derive(Args)]
struct RawArgs {
    #[command(flatten)]
    input: InputOpts,
    /// Claimed (or certified) min-entropy per raw bit, in (0, 1]; sets the
    /// health-test cutoffs and is compared with the estimates.
    #[arg(long, value_name = "H")]
    claimed_entropy: Option<f64>,
    /// Samples given to the estimators (the first ones of the input).
    #[arg(long, value_name = "N", default_value_t = 1_000_000)]
    estimate_samples: usize,
}

#[derive(Args)]
struct OutputArgs {
    #[command(flatten)]
    input: InputOpts,
    /// Number of sequences to test (default: as many as fit).
    #[arg(long, value_name = "N")]
    sequences: Option<usize>,
    /// Bits per sequence (default: 1,000,000, or the whole input if shorter).
    #[arg(long, value_name = "B")]
    sequence_bits: Option<usize>,
}

/// Runs `sluice assess`.
pub fn run(args: AssessArgs) -> anyhow::Result<ExitCode> {
    match args.what {
        What::Raw(a) => run_raw(a),
        What::Output(a) => run_output(a),
    }
}

fn read_input(o: &InputOpts) -> anyhow::Result<Bits> {
    let format = match o.format {
        FormatArg::Packed => Format::Packed,
        FormatArg::Ascii => Format::Ascii,
        FormatArg::Hex => Format::Hex,
    };
    let order = match o.bit_order {
        OrderArg::Msb => BitOrder::Msb,
        OrderArg::Lsb => BitOrder::Lsb,
    };
    let bits = io::read_bits(&o.file, format, order, o.input_bits)
        .with_context(|| format!("reading the input {}", o.file.display()))?;
    if bits.is_empty() {
        bail!("{}: the input holds no bits", o.file.display());
    }
    Ok(bits)
}

// ---------------------------------------------------------------- raw

fn run_raw(a: RawArgs) -> anyhow::Result<ExitCode> {
    a.input.check_plot()?;
    if let Some(h) = a.claimed_entropy {
        if !(h > 0.0 && h <= 1.0) {
            bail!("--claimed-entropy {h}: must be in (0, 1] bits per raw bit");
        }
    }
    if a.estimate_samples < 2 {
        bail!(
            "--estimate-samples {}: at least 2 samples are needed",
            a.estimate_samples
        );
    }
    let bits = read_input(&a.input)?;
    let n = bits.len();
    let mut notes = Vec::new();

    let k = n.min(a.estimate_samples);
    if k < 1_000_000 {
        notes.push(format!(
            "the estimators saw {k} samples; SP 800-90B asks for at least 1,000,000"
        ));
    }
    let pb = common::progress(7, "estimating min-entropy");
    let x = sp800_22::bit_values(&bits.slice(0, k));
    pb.inc(1);
    let assessment = estimators::assess_binary(&x);
    pb.inc(6);
    pb.finish_and_clear();

    let (health_h, source) = match (a.claimed_entropy, assessment.min_entropy) {
        (Some(h), _) => (h, "claimed"),
        (None, Some(h)) if h > 0.0 => (h, "estimated (no claim given)"),
        _ => (1.0, "1 bit (no claim, no usable estimate)"),
    };
    let rct_c = health::rct_cutoff(health_h, 1)?;
    let apt_c = health::apt_cutoff(health_h, 1, health::apt_window(true))?;
    let rct = health::rct_bits(&bits, rct_c);
    let apt = health::apt_bits(&bits, apt_c);
    let health_passed = rct.failures == 0 && apt.failures == 0;

    let est = assessment.min_entropy;
    let (comparison, red_flag) = match (a.claimed_entropy, est) {
        (Some(c), Some(e)) if e < c => (
            format!(
                "RED FLAG: the estimate {e:.6} bits per bit is below the claimed {c:.6}; \
                 the claim (or the source) needs review"
            ),
            true,
        ),
        (Some(c), Some(e)) => (
            format!(
                "the estimate {e:.6} bits per bit is at or above the claimed {c:.6}; this is \
                 consistent with the claim but proves nothing about an adversary"
            ),
            false,
        ),
        (None, Some(e)) => (
            format!("no claim given; the estimate is {e:.6} bits per bit (a statistic, not a certificate)"),
            false,
        ),
        (_, None) => ("no estimator applied to this input".to_string(), false),
    };
    let report = RawReport {
        file: a.input.file.display().to_string(),
        bits: n,
        claimed_entropy: a.claimed_entropy,
        health_entropy: health_h,
        health_entropy_source: source,
        repetition_count: rct,
        adaptive_proportion: apt,
        adaptive_proportion_window: health::apt_window(true),
        health_passed,
        estimator_samples: k,
        assessment,
        comparison,
        red_flag,
        notes,
        caution: CAUTION_RAW,
    };
    if let Some(p) = &a.input.plot {
        common::write_svg(p, a.input.force, |svg| {
            super::plot::assess_raw(svg, &report)
        })
        .with_context(|| format!("drawing {}", p.display()))?;
    }
    if a.input.json {
        common::print_json(&report)?;
    } else {
        print_raw(&report);
    }
    Ok(if health_passed && !red_flag {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    })
}

fn health_line(name: &str, o: &health::HealthOutcome) -> String {
    match o.first_failure {
        None => format!("  {name:<28} cutoff {:>5}  pass", o.cutoff),
        Some(at) => format!(
            "  {name:<28} cutoff {:>5}  FAIL: {} failure(s), the first at bit {at}",
            o.cutoff, o.failures
        ),
    }
}

fn print_raw(r: &RawReport) {
    println!("sluice assess raw: {} ({} bits)", r.file, r.bits);
    println!(
        "health tests (SP 800-90B 4.4, alpha = 2^-20), cutoffs from H = {} ({}):",
        r.health_entropy, r.health_entropy_source
    );
    println!("{}", health_line("repetition count", &r.repetition_count));
    println!(
        "{}",
        health_line(
            &format!("adaptive proportion (W={})", r.adaptive_proportion_window),
            &r.adaptive_proportion
        )
    );
    println!(
        "min-entropy estimates (SP 800-90B 6.3, non-IID track, binary samples; first {} bits):",
        r.estimator_samples
    );
    for e in &r.assessment.estimates {
        match e.min_entropy {
            Some(h) => println!("  {:<36} {h:.6}   {}", e.name, e.detail),
            None => println!(
                "  {:<36} n/a      {}",
                e.name,
                e.note.as_deref().unwrap_or("")
            ),
        }
    }
    match r.assessment.min_entropy {
        Some(h) => println!("  {:<36} {h:.6} bits per bit", "minimum (the estimate)"),
        None => println!("  minimum: none (no estimator applied)"),
    }
    println!("left out (not pinned down from a checked copy of the standard):");
    for (name, _) in &r.assessment.left_out {
        println!("  {name}");
    }
    println!("comparison: {}", r.comparison);
    for n in &r.notes {
        println!("note: {n}");
    }
    println!(
        "overall: health tests {}; {}",
        if r.health_passed { "passed" } else { "FAILED" },
        if r.red_flag {
            "estimate below the claim"
        } else {
            "no red flag"
        }
    );
    println!("{}", r.caution);
}

// ------------------------------------------------------------- output

fn run_output(a: OutputArgs) -> anyhow::Result<ExitCode> {
    a.input.check_plot()?;
    let bits = read_input(&a.input)?;
    let n = bits.len();
    let (count, len) = match (a.sequences, a.sequence_bits) {
        (Some(0), _) => bail!("--sequences 0: at least one sequence is needed"),
        (_, Some(0)) => bail!("--sequence-bits 0: a sequence needs bits"),
        (Some(s), Some(b)) => (s, b),
        // The documented default length: 1,000,000 bits, or the whole
        // input if shorter (issue 15 item 9: it was input / N).
        (Some(s), None) => (s, n.min(1_000_000)),
        (None, Some(b)) => (n / b, b),
        (None, None) => {
            let b = n.min(1_000_000);
            (n / b, b)
        }
    };
    if count == 0 || len == 0 || count.checked_mul(len).is_none_or(|t| t > n) {
        bail!(
            "{}: {count} sequences of {len} bits need {} bits, but the input holds {n}",
            a.input.file.display(),
            count as u128 * len as u128
        );
    }
    // The battery holds a few words per bit of a sequence (the spectral
    // test's transform: 16 bytes per bit, bounded above), one sequence per
    // worker: checked before anything is allocated.
    let workers = rayon::current_num_threads().clamp(1, count) as u128;
    sluice::files::space::check_memory(
        workers * len as u128 * 16,
        &format!("the SP 800-22 battery on {workers} sequence(s) of {len} bits at once"),
    )?;
    let cfg = sp800_22::Config::default();
    let pb = common::progress(count as u64, "running the SP 800-22 battery");
    let reports: Vec<Vec<TestReport>> = (0..count)
        .into_par_iter()
        .map(|i| {
            let r = sp800_22::run_battery(&bits.slice(i * len, len), &cfg);
            pb.inc(1);
            r
        })
        .collect();
    pb.finish_and_clear();
    let report = summarise_output(&a.input.file, n, count, len, reports);
    if let Some(p) = &a.input.plot {
        common::write_svg(p, a.input.force, |svg| {
            super::plot::assess_output(svg, &report)
        })
        .with_context(|| format!("drawing {}", p.display()))?;
    }
    if a.input.json {
        common::print_json(&report)?;
    } else {
        print_output(&report);
    }
    Ok(if report.flagged == 0 {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    })
}

fn summarise_output(
    file: &Path,
    n: usize,
    count: usize,
    len: usize,
    reports: Vec<Vec<TestReport>>,
) -> OutputReport {
    let alpha = sp800_22::ALPHA;
    let mut kinds = Vec::new();
    let mut not_applicable = Vec::new();
    let mut parameters = Vec::new();
    for (ti, test) in TestId::ALL.iter().enumerate() {
        // collect P-values per label, in first-seen order
        let mut labels: Vec<String> = Vec::new();
        let mut values: Vec<Vec<f64>> = Vec::new();
        let mut na: Option<(usize, String)> = None;
        for r in &reports {
            let t = &r[ti];
            debug_assert_eq!(t.test, *test);
            match &t.outcome {
                Outcome::Done { p_values } => {
                    for pv in p_values {
                        let k = match labels.iter().position(|l| *l == pv.label) {
                            Some(k) => k,
                            None => {
                                labels.push(pv.label.clone());
                                values.push(Vec::new());
                                labels.len() - 1
                            }
                        };
                        values[k].push(pv.p_value);
                    }
                }
                Outcome::NotApplicable { reason } => {
                    let e = na.get_or_insert((0, reason.clone()));
                    e.0 += 1;
                }
            }
        }
        if let Some(first) = reports.first() {
            parameters.push((*test, first[ti].parameters.clone()));
        }
        for (label, v) in labels.into_iter().zip(values) {
            let summary = many::summarise(&v, alpha);
            let flagged = !summary.proportion_ok || summary.uniform_ok == Some(false);
            kinds.push(KindSummary {
                test: *test,
                section: test.section(),
                label,
                summary,
                p_value: (count == 1).then_some(v[0]),
                flagged: count > 1 && flagged || count == 1 && v[0] < alpha,
            });
        }
        if let Some((k, reason)) = na {
            not_applicable.push(NotRun {
                test: *test,
                section: test.section(),
                sequences: k,
                reason,
            });
        }
    }
    let flagged = kinds.iter().filter(|k| k.flagged).count();
    let overall = if kinds.is_empty() {
        "no test applied to sequences of this length".to_string()
    } else if flagged == 0 {
        format!("no test flagged ({} P-value kinds checked)", kinds.len())
    } else {
        format!(
            "{flagged} of {} P-value kinds flagged; at this level about {:.1} are expected to be flagged \
             by chance alone, so look at which ones and rerun on fresh data",
            kinds.len(),
            expected_flags(kinds.len(), count)
        )
    };
    OutputReport {
        file: file.display().to_string(),
        bits: n,
        sequences: count,
        sequence_bits: len,
        alpha,
        parameters,
        kinds,
        not_applicable,
        single: if count == 1 {
            reports.into_iter().next()
        } else {
            None
        },
        flagged,
        overall,
        caution: CAUTION_TESTS,
    }
}

/// Expected number of kinds flagged by chance: α per kind for one
/// sequence; for many, the band's binomial tail plus the uniformity
/// threshold (the two are close to independent).
fn expected_flags(kinds: usize, sequences: usize) -> f64 {
    let per = if sequences == 1 {
        sp800_22::ALPHA
    } else {
        many::chance_outside_interval(sp800_22::ALPHA, sequences) + many::UNIFORMITY_THRESHOLD
    };
    kinds as f64 * per
}

fn print_output(r: &OutputReport) {
    println!(
        "sluice assess output: {} ({} bits), {} sequence(s) of {} bits, alpha = {}",
        r.file, r.bits, r.sequences, r.sequence_bits, r.alpha
    );
    if r.sequences == 1 {
        println!(
            "{:<34} {:>10}  result",
            "test (SP 800-22 section)", "P-value"
        );
    } else {
        println!(
            "{:<34} {:>9} {:>21} {:>11}  result",
            "test (SP 800-22 section)", "passed", "acceptable proportion", "uniformity"
        );
    }
    for test in TestId::ALL {
        let ks: Vec<&KindSummary> = r.kinds.iter().filter(|k| k.test == test).collect();
        let title = format!("{} ({})", test.name(), test.section());
        if let Some(na) = r.not_applicable.iter().find(|x| x.test == test) {
            if ks.is_empty() {
                println!("{title:<34} not applicable: {}", na.reason);
                continue;
            }
            println!(
                "{title:<34} not applicable in {} sequence(s): {}",
                na.sequences, na.reason
            );
        }
        if ks.len() > 4 {
            let bad: Vec<&&KindSummary> = ks.iter().filter(|k| k.flagged).collect();
            println!(
                "{title:<34} {} P-value kinds, {} flagged",
                ks.len(),
                bad.len()
            );
            for k in bad {
                print_kind(&format!("  {}", k.label), k, r.sequences);
            }
        } else {
            for k in ks {
                let name = if k.label.is_empty() {
                    title.clone()
                } else {
                    format!("{title} {}", k.label)
                };
                print_kind(&name, k, r.sequences);
            }
        }
    }
    println!("overall: {}", r.overall);
    println!("{}", r.caution);
}

fn print_kind(name: &str, k: &KindSummary, sequences: usize) {
    let s = &k.summary;
    let verdict = if k.flagged { "FLAGGED" } else { "ok" };
    if sequences == 1 {
        println!(
            "{name:<34} {:>10.6}  {verdict}",
            k.p_value.unwrap_or(f64::NAN)
        );
    } else {
        let uni = match s.uniformity {
            Some((_, p)) => format!("{p:.6}"),
            None => "n/a".to_string(),
        };
        println!(
            "{name:<34} {:>4}/{:<4} {:>10.4} .. {:<8.4} {uni:>11}  {verdict}",
            s.passed,
            s.sequences,
            s.interval.0,
            s.interval.1.min(1.0),
        );
    }
}
