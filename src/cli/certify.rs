//! `sluice certify`: from the record of a CHSH Bell test to a certified
//! smooth min-entropy and a certificate file (`spec/certification.md`).
//!
//! Exit status: 0 when the run passed the test (or for `--plan`), 1 when the
//! test failed (the protocol aborts: no raw output is written), 2 on error.

use super::common::{print_json, progress};
use anyhow::{anyhow, bail, Context, Result};
use serde::Serialize;
use sluice::certify::certificate::{BoundRecord, ALICE_LAYOUT, BOUND_FIRST, BOUND_IMPROVED};
use sluice::certify::certificate::{
    Certificate, CertifiedString, Parameters, PublicValues, RecordInfo, ResultTerms, PAIR_LAYOUT,
    SCHEMA,
};
use sluice::certify::eat::{EatParams, EatResult};
use sluice::certify::iid::IID_LABEL;
use sluice::certify::improved::{Keep, TestKind};
use sluice::certify::input;
use sluice::certify::params::{self, Declared, KeyValue, COUNT_KEYS, PARAM_KEYS};
use sluice::certify::planning::{
    plan_first, plan_improved, plan_rate, protocol, Bound, PlanRow, Protocol,
};
use sluice::certify::record::Summary;
use sluice::certify::run::{certify_run, labels, public_values, resolve_run};
use sluice::certify::{cautions, Mode, PublicStat, Setup};
use std::fs::File;
use std::io::{BufReader, Read, Write};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Certify the record of a CHSH Bell test, or plan a run.
///
/// The protocol parameters must be the ones fixed before the run: give them
/// as options or in a parameters file (`--params`), lines `key = value` with
/// the keys rounds, test-probability, expected-win, tolerance, smoothing,
/// acceptance, estimation-error ('#' starts a comment).
#[derive(clap::Args, Debug)]
pub struct CertifyArgs {
    /// Round file (one round per line: T X Y A B; gzip accepted; '-' reads
    /// standard input).
    #[arg(value_name = "RECORD")]
    record: Option<PathBuf>,

    /// Use counts instead of a round file: a file with the lines
    /// `rounds = N`, `test-rounds = N_TEST`, `wins = W`.
    #[arg(long, value_name = "FILE", conflicts_with = "record")]
    counts: Option<PathBuf>,

    /// With --counts: the raw output file (2 N packed bits a1 b1 .. aN bN)
    /// that the certificate names by digest.
    #[arg(long, value_name = "FILE", requires = "counts")]
    raw_in: Option<PathBuf>,

    /// Parameters file (key = value lines), fixed before the run.
    #[arg(long, value_name = "FILE")]
    params: Option<PathBuf>,

    /// Number of rounds N_rounds (1e8 is accepted).
    #[arg(long, value_name = "N", value_parser = parse_count)]
    rounds: Option<u64>,

    /// Probability gamma that a round is a test round (0 < gamma <= 1).
    #[arg(long, value_name = "GAMMA")]
    test_probability: Option<f64>,

    /// Expected win probability w_exp of honest devices.
    #[arg(long, value_name = "W")]
    expected_win: Option<f64>,

    /// Tolerance delta: accept iff W >= gamma N (w_exp - delta).
    #[arg(long, value_name = "DELTA")]
    tolerance: Option<f64>,

    /// Choose the acceptance threshold so that honest devices abort with at
    /// most this probability (instead of --tolerance; fixed before the run).
    #[arg(long, value_name = "EPS_C", conflicts_with = "tolerance")]
    completeness: Option<f64>,

    /// The finite-size bound: improved-2019 (default; Dupuis-Fawzi alpha
    /// form) or first-2016 (the first entropy accumulation theorem, for
    /// re-checking older certificates).
    #[arg(long, value_name = "BOUND", value_parser = ["improved-2019", "first-2016"])]
    bound: Option<String>,

    /// Which raw string to certify: pairs (a1 b1 .. aN bN, default) or alice
    /// (a1 .. aN: Alice's bits only; N_test bits fewer).
    #[arg(long, value_name = "KEEP", value_parser = ["pairs", "alice"])]
    keep: Option<String>,

    /// Acceptance test: wins (count of won test rounds) or score
    /// (W - nu N_test, with --score-offset nu). --plan compares both.
    #[arg(long, value_name = "TEST", value_parser = ["wins", "score"])]
    test: Option<String>,

    /// The score offset nu in [0, 1] of --test score.
    #[arg(long, value_name = "NU")]
    score_offset: Option<f64>,

    /// How the threshold follows from --completeness: binomial or chernoff
    /// (wins), chernoff or bernstein (score).
    #[arg(long, value_name = "TAIL", value_parser = ["binomial", "chernoff", "bernstein", "hoeffding"])]
    tail: Option<String>,

    /// Smoothing parameter eps_s.
    #[arg(long, value_name = "EPS_S")]
    smoothing: Option<f64>,

    /// Acceptance parameter eps_EA.
    #[arg(long, value_name = "EPS_EA")]
    acceptance: Option<f64>,

    /// Model: entropy-accumulation (default), or iid (weaker: assumes
    /// independent, identical rounds).
    #[arg(long, value_name = "MODEL", default_value = "entropy-accumulation",
          value_parser = ["entropy-accumulation", "iid"])]
    model: String,

    /// With --model iid: the estimation failure probability eps_est.
    #[arg(long, value_name = "EPS_EST")]
    estimation_error: Option<f64>,

    /// How the devices were kept from signalling: separated, shielded or
    /// single-device (single-device is not device-independent).
    #[arg(long, value_name = "SETUP", value_parser = ["separated", "shielded", "single-device"])]
    setup: Option<String>,

    /// Statistics to publish, charged against the figure: comma list of
    /// wins, s-hat, pair-00, pair-01, pair-10, pair-11, or none.
    #[arg(long, value_name = "LIST", default_value = "wins")]
    public: String,

    /// Write the certificate JSON here (keep it private: it holds digests
    /// of the raw data).
    #[arg(short = 'o', long = "output", value_name = "CERT.json")]
    output: Option<PathBuf>,

    /// Write the raw output bits a1 b1 .. aN bN here (packed, owner-only).
    #[arg(long, value_name = "FILE", requires = "record")]
    raw_out: Option<PathBuf>,

    /// Plan a run instead: the bits a passing run would certify.
    #[arg(long, conflicts_with_all = ["record", "counts", "output", "raw_out"])]
    plan: bool,

    /// With --plan: draw certified bits per round against N (SVG).
    #[arg(long, value_name = "FILE.svg", requires = "plan")]
    plot: Option<PathBuf>,

    /// Print one JSON document for scripts.
    #[arg(long)]
    json: bool,

    /// Replace existing output files (-o, --raw-out, --plot) even if they
    /// are not earlier outputs of sluice (an input is never replaced).
    #[arg(long)]
    force: bool,
}

/// Protocol parameters with their origin.
#[derive(Debug, Default, Clone)]
struct Resolved {
    d: Declared,
    from_file: Option<(PathBuf, String)>,
}

impl std::ops::Deref for Resolved {
    type Target = Declared;
    fn deref(&self) -> &Declared {
        &self.d
    }
}

/// Reads a `key = value` file through the library parser; returns the
/// lines with the BLAKE3 hex digest of the file.
fn read_key_values(path: &Path, allowed: &[&str]) -> Result<(Vec<KeyValue>, String)> {
    // A few lines: refused above the limit before it is read.
    let bytes = sluice::files::keyvalue::read_limited(
        path,
        params::MAX_FILE_BYTES,
        "parameters or counts file",
    )
    .with_context(|| format!("cannot read {}", path.display()))?;
    let f = input::read_key_value_file(&bytes[..], allowed, &path.display().to_string())
        .map_err(flat)?;
    Ok((f.entries, f.digest))
}

/// A library error as one message (it names the file and line itself).
fn flat(e: sluice::certify::Error) -> anyhow::Error {
    anyhow!("{e}")
}

/// A count written as an integer or as an exact power form such as 1e8.
fn parse_count(s: &str) -> std::result::Result<u64, String> {
    params::parse_count(s).ok_or_else(|| format!("{s:?} is not a whole number of rounds"))
}

impl CertifyArgs {
    fn resolve(&self) -> Result<Resolved> {
        let mut r = Resolved {
            d: Declared {
                rounds: self.rounds,
                gamma: self.test_probability,
                w_exp: self.expected_win,
                delta: self.tolerance,
                eps_s: self.smoothing,
                eps_ea: self.acceptance,
                eps_est: self.estimation_error,
                eps_c: self.completeness,
                bound: self.bound.clone(),
                keep: self.keep.clone(),
                test: self.test.clone(),
                nu: self.score_offset,
                tail: self.tail.clone(),
            },
            from_file: None,
        };
        // The parameters file, or else the counts file, which may carry
        // the parameters too (one summary file for users with counts only).
        let file = self.params.as_ref().or(self.counts.as_ref());
        if let Some(path) = file {
            let mut allowed: Vec<&str> = PARAM_KEYS.to_vec();
            if self.params.is_none() {
                allowed.extend_from_slice(&COUNT_KEYS);
            }
            let (kv, digest) = read_key_values(path, &allowed)?;
            let any =
                r.d.merge(&kv, self.params.is_none())
                    .map_err(|e| anyhow!("{}: {e}", path.display()))?;
            if self.params.is_some() || any {
                r.from_file = Some((path.clone(), digest));
            }
        }
        Ok(r)
    }

    fn mode(&self) -> Mode {
        if self.model == "iid" {
            Mode::IidEstimate
        } else {
            Mode::EntropyAccumulation
        }
    }

    fn setup(&self) -> Result<Setup> {
        match self.setup.as_deref() {
            Some("separated") => Ok(Setup::Separated),
            Some("shielded") => Ok(Setup::Shielded),
            Some("single-device") => Ok(Setup::SingleDevice),
            _ => bail!(
                "--setup is required: declare how the devices were kept from signalling (separated, shielded or single-device)"
            ),
        }
    }

    fn public(&self) -> Result<Vec<PublicStat>> {
        if self.public.trim() == "none" {
            return Ok(Vec::new());
        }
        let mut v = Vec::new();
        for item in self.public.split(',') {
            let p = PublicStat::parse(item.trim()).map_err(|e| anyhow!("--{e}"))?;
            if !v.contains(&p) {
                v.push(p);
            }
        }
        Ok(v)
    }
}

#[derive(Serialize)]
struct ImprovedPlanReport {
    kind: &'static str,
    label: &'static str,
    bound: &'static str,
    keep: Keep,
    rounds: u64,
    test_probability: f64,
    expected_win: f64,
    smoothing: f64,
    acceptance: f64,
    rows: Vec<PlanRow>,
    chosen: usize,
    asymptotic_bits: f64,
    input_randomness_bits: f64,
    net_gain_bits: f64,
    record_check_level: f64,
    test_rounds_range: [u64; 2],
    parameters_file: String,
    plot: Option<String>,
    cautions: Vec<&'static str>,
}

fn run_plan_improved(
    args: &CertifyArgs,
    r: &Resolved,
    fixed: Option<Protocol>,
) -> Result<ExitCode> {
    let plan = plan_improved(r, fixed)?;
    let (n, gamma, w_exp, eps_s, eps_ea) =
        (plan.rounds, plan.gamma, plan.w_exp, plan.eps_s, plan.eps_ea);
    let (keep, level, chosen) = (plan.keep, plan.level, plan.chosen);
    let [lo, hi] = plan.test_rounds_range;
    let input_bits = plan.input_randomness_bits;
    let mut plot = None;
    if let Some(path) = &args.plot {
        let caption = format!(
            "improved-2019 bound, {} test: certified bits per round if the run passes (W published); w_exp = {w_exp}, eps_s = {eps_s:e}, eps_EA = {eps_ea:e}",
            plan.rows[chosen].test
        );
        super::common::check_output(
            path,
            sluice::files::Kind::Plot,
            &[(args.params.as_deref(), "parameters file")],
            args.force,
        )?;
        super::common::write_svg(path, args.force, |svg| {
            super::plot::certify_rates(svg, gamma, &caption, &|n, g| plan.rate(n, g))
        })?;
        plot = Some(path.display().to_string());
    }
    let report = ImprovedPlanReport {
        kind: "plan",
        label: "planning figure: assumes the run passes the test; not a certificate",
        bound: BOUND_IMPROVED,
        keep,
        rounds: n,
        test_probability: gamma,
        expected_win: w_exp,
        smoothing: eps_s,
        acceptance: eps_ea,
        chosen,
        asymptotic_bits: plan.asymptotic_bits,
        input_randomness_bits: input_bits,
        net_gain_bits: plan.net_gain_bits,
        record_check_level: level,
        test_rounds_range: [lo, hi],
        parameters_file: plan.parameters_file,
        plot,
        rows: plan.rows,
        cautions: cautions(Mode::EntropyAccumulation).to_vec(),
    };
    if args.json {
        print_json(&report)?;
        return Ok(ExitCode::SUCCESS);
    }
    let mut o = std::io::stdout().lock();
    writeln!(
        o,
        "plan (planning figure: assumes the run passes; not a certificate)"
    )?;
    writeln!(
        o,
        "  bound improved-2019 (Dupuis-Fawzi 2019, alpha form); N_rounds {n}, gamma {gamma}, w_exp {w_exp}, eps_s {eps_s:e}, eps_EA {eps_ea:e}; string {} ({} bits)",
        match keep {
            Keep::Pairs => PAIR_LAYOUT,
            Keep::Alice => ALICE_LAYOUT,
        },
        keep.string_bits(n)
    )?;
    writeln!(
        o,
        "\n    {:<6} {:<10} {:>6} {:>18} {:>10} {:>12} {:>16} {:>10}",
        "test", "tail", "nu", "threshold", "w_acc", "eps_c", "bits", "per round"
    )?;
    for (i, row) in report.rows.iter().enumerate() {
        writeln!(
            o,
            "  {} {:<6} {:<10} {:>6.4} {:>18.2} {:>10.6} {:>12.3e} {:>16} {:>10.6}",
            if i == chosen { "*" } else { " " },
            row.test,
            row.tail,
            row.score_offset,
            row.threshold,
            row.w_acc,
            row.completeness_error,
            row.bits,
            row.bits_per_round
        )?;
    }
    let row = &report.rows[chosen];
    writeln!(o)?;
    writeln!(
        o,
        "  certified smooth min-entropy (best test, marked *): {} bits, with W published and the 1-bit margin{}",
        row.bits,
        if keep == Keep::Alice {
            format!("; keeping Alice's bits costs N_test bits (at most {hi} pass the record checks)")
        } else {
            String::new()
        }
    )?;
    if let Some(t) = &row.terms {
        writeln!(
            o,
            "  B = {:.2} = N h {:.2} - second order {:.2} - eps term {:.2} - third order {:.2}; w_t = {:.9}, alpha = 1 + {:.6e}",
            t.bound_bits,
            t.first_order_bits,
            t.second_order_bits,
            t.eps_term_bits,
            t.third_order_bits,
            t.w_t,
            t.alpha - 1.0
        )?;
    } else {
        writeln!(
            o,
            "  0 bits: the acceptance threshold does not exceed the classical win probability 3/4"
        )?;
    }
    writeln!(
        o,
        "  asymptotic N r(w_exp) = {:.6e} bits; input randomness used N (h(gamma) + 2 gamma) = {:.6e} bits; net gain {:.6e} bits",
        report.asymptotic_bits, input_bits, report.net_gain_bits
    )?;
    if report.net_gain_bits <= 0.0 {
        writeln!(
            o,
            "  no net gain: the run consumes more trusted randomness than it certifies"
        )?;
    }
    writeln!(
        o,
        "  completeness: honest devices abort with probability at most {:.3e} (test) + {level:e} (record checks: N_test in {lo}..={hi}, uniform test inputs)",
        plan.best.completeness
    )?;
    writeln!(o, "\nparameters to fix before the run (a --params file):")?;
    for l in report.parameters_file.lines().skip(1) {
        writeln!(o, "  {l}")?;
    }
    if let Some(pl) = &report.plot {
        writeln!(o, "  plot written to {pl}")?;
    }
    print_cautions(&mut o, Mode::EntropyAccumulation)?;
    Ok(ExitCode::SUCCESS)
}

/// Runs the command.
pub fn run(args: CertifyArgs) -> Result<ExitCode> {
    if args.plan {
        return run_plan(&args);
    }
    if args.record.is_none() && args.counts.is_none() {
        bail!("give a round file, --counts FILE, or --plan");
    }
    run_certify(&args)
}

// ---------------------------------------------------------------- planning

#[derive(Serialize)]
struct PlanReport {
    kind: &'static str,
    label: &'static str,
    parameters: EatParams,
    result: EatResult,
    bits_per_round: f64,
    zero_reason: Option<&'static str>,
    plot: Option<String>,
    cautions: Vec<&'static str>,
}

fn run_plan(args: &CertifyArgs) -> Result<ExitCode> {
    let r = args.resolve()?;
    if args.mode() == Mode::IidEstimate {
        bail!("--plan computes the entropy-accumulation figure only (the i.i.d. estimate needs the observed wins)");
    }
    let prot = protocol(&r, true)?;
    if r.bound.as_deref() != Some(BOUND_FIRST) {
        return run_plan_improved(args, &r, prot);
    }
    let (p, res) = plan_first(&r)?;
    let n = p.n_rounds;
    let mut plot = None;
    if let Some(path) = &args.plot {
        super::common::check_output(
            path,
            sluice::files::Kind::Plot,
            &[(args.params.as_deref(), "parameters file")],
            args.force,
        )?;
        super::common::write_svg(path, args.force, |svg| draw_plot(svg, &p, r.eps_c))?;
        plot = Some(path.display().to_string());
    }
    let report = PlanReport {
        kind: "plan",
        label: "planning figure: assumes the run passes the test; not a certificate",
        parameters: p,
        bits_per_round: res.bits as f64 / n as f64,
        zero_reason: res.zero_reason.map(|z| z.text()),
        result: res,
        plot,
        cautions: cautions(Mode::EntropyAccumulation).to_vec(),
    };
    if args.json {
        print_json(&report)?;
    } else {
        let res = &report.result;
        let mut o = std::io::stdout().lock();
        writeln!(
            o,
            "plan (planning figure: assumes the run passes; not a certificate)"
        )?;
        writeln!(
            o,
            "  N_rounds {} , gamma {} , w_exp {} , delta {:.6e} , eps_s {:e} , eps_EA {:e}",
            p.n_rounds, p.gamma, p.w_exp, p.delta, p.eps_s, p.eps_ea
        )?;
        writeln!(
            o,
            "  a passing run needs W >= {:.0} won test rounds (w_exp - delta = {:.6})",
            res.threshold_wins.ceil(),
            p.w_exp - p.delta
        )?;
        writeln!(
            o,
            "  certified smooth min-entropy: {} bits ({:.6} per round) of the {}-bit string a1 b1 .. aN bN, with W published ({} bits charged)",
            res.bits, report.bits_per_round, res.extractor_input_bits, res.d_pub
        )?;
        if let Some(z) = report.zero_reason {
            writeln!(o, "  0 bits: {z}")?;
        }
        if res.w_t > 0.0 {
            writeln!(
                o,
                "  first-order term {:.1} bits, second-order term {:.1} bits, B = {:.2} bits; tangent point w_t = {:.9} (ceiling k = {})",
                res.first_order_bits, res.second_order_bits, res.bound_bits, res.w_t, res.k
            )?;
        }
        writeln!(
            o,
            "  completeness error: honest devices abort with probability at most {:.3e}",
            res.eps_c
        )?;
        if let Some(pl) = &report.plot {
            writeln!(o, "  plot written to {pl}")?;
        }
        print_cautions(&mut o, Mode::EntropyAccumulation)?;
    }
    Ok(ExitCode::SUCCESS)
}

fn print_cautions(o: &mut impl Write, mode: Mode) -> Result<()> {
    writeln!(o, "cautions:")?;
    for (i, c) in cautions(mode).iter().enumerate() {
        let mut first = true;
        for line in wrap(c, 72) {
            if first {
                writeln!(o, "  {}. {line}", i + 1)?;
                first = false;
            } else {
                writeln!(o, "     {line}")?;
            }
        }
    }
    Ok(())
}

/// Splits `text` into lines of at most `width` characters at spaces.
fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut lines = Vec::new();
    let mut cur = String::new();
    for word in text.split_whitespace() {
        if !cur.is_empty() && cur.len() + 1 + word.len() > width {
            lines.push(std::mem::take(&mut cur));
        }
        if !cur.is_empty() {
            cur.push(' ');
        }
        cur.push_str(word);
    }
    if !cur.is_empty() {
        lines.push(cur);
    }
    lines
}

fn draw_plot(svg: &mut String, p: &EatParams, eps_c: Option<f64>) -> Result<()> {
    let delta_text = match eps_c {
        Some(e) => format!("delta for completeness error {e:e}"),
        None => format!("delta = {}", p.delta),
    };
    let caption = format!(
        "first-2016 bound: certified bits per round if the run passes (W published); w_exp = {}, {delta_text}, eps_s = {:e}, eps_EA = {:e}",
        p.w_exp, p.eps_s, p.eps_ea
    );
    super::plot::certify_rates(svg, p.gamma, &caption, &|n, g| plan_rate(p, n, g, eps_c))
}

// ----------------------------------------------------------- certification

/// What was read from the record.
struct RecordRead {
    summary: Summary,
    info: RecordInfo,
    raw_digest: Option<String>,
    /// The raw output, written but not yet renamed into place (dropped,
    /// it leaves nothing behind).
    raw_file: Option<sluice::files::AtomicFile>,
}

fn read_record(
    path: &Path,
    n_expected: u64,
    gamma: f64,
    raw_out: Option<(&Path, sluice::files::Replace)>,
    keep: Keep,
) -> Result<RecordRead> {
    let (source, size): (Box<dyn Read>, Option<u64>) = if path.as_os_str() == "-" {
        (Box::new(std::io::stdin()), None)
    } else {
        let f = File::open(path)
            .with_context(|| format!("cannot open the record {}", path.display()))?;
        let size = f.metadata().ok().map(|m| m.len());
        (Box::new(f), size)
    };
    let sink = match raw_out {
        Some((dest, replace)) => Some(
            sluice::files::AtomicFile::create(dest, sluice::files::Kind::RawOutput, replace)
                .with_context(|| format!("cannot create {}", dest.display()))?,
        ),
        None => None,
    };
    let pb = progress(size.unwrap_or(0), "reading rounds");
    // One pass: the library detects gzip, parses, tallies, writes and
    // digests; this layer only supplies the streams.
    let result = input::read_round_file(
        source,
        &path.display().to_string(),
        n_expected,
        gamma,
        keep,
        sink,
        |bytes| pb.set_position(bytes),
    );
    pb.finish_and_clear();
    // On an error the writer is dropped: its temporary file goes with it.
    let read = result.map_err(flat)?;
    Ok(RecordRead {
        summary: read.summary,
        info: read.info,
        raw_digest: Some(read.raw_digest),
        raw_file: read.sink,
    })
}

fn read_counts(path: &Path, gamma: f64) -> Result<input::CountsFile> {
    let bytes = sluice::files::keyvalue::read_limited(path, params::MAX_FILE_BYTES, "counts file")
        .with_context(|| format!("cannot read {}", path.display()))?;
    input::read_counts_file(&bytes[..], gamma, &path.display().to_string()).map_err(flat)
}

fn digest_raw_file(path: &Path, nbits: u64) -> Result<String> {
    let f = File::open(path)
        .with_context(|| format!("cannot open the raw output file {}", path.display()))?;
    let len = f.metadata()?.len();
    let r = BufReader::with_capacity(1 << 20, f);
    input::digest_raw_string(r, len, nbits, &path.display().to_string()).map_err(flat)
}

#[derive(Serialize)]
struct CertifyReport<'a> {
    kind: &'static str,
    accepted: bool,
    bound: Option<&'a BoundRecord>,
    string_bits: u64,
    layout: &'static str,
    mode: Mode,
    setup: Setup,
    labels: &'a [String],
    min_entropy_bits: u64,
    bits_per_round: f64,
    zero_reason: Option<String>,
    rounds: u64,
    test_rounds: u64,
    public_statistics: Vec<String>,
    public_values: &'a PublicValues,
    disclosure_charge_bits: u64,
    result: &'a ResultTerms,
    warnings: &'a [String],
    parameters_file: Option<String>,
    certificate_file: Option<String>,
    raw_file: Option<String>,
    cautions: Vec<&'static str>,
}

fn run_certify(args: &CertifyArgs) -> Result<ExitCode> {
    Ok(certify_record(args, true)?.0)
}

/// Parses `certify` options as the command line would (`argv` without the
/// program and command names), for callers that build the command they
/// print (`sluice demo`).
pub fn parse_args(argv: &[String]) -> Result<CertifyArgs> {
    #[derive(clap::Parser)]
    #[command(name = "sluice certify", no_binary_name = true)]
    struct Wrapped {
        #[command(flatten)]
        args: CertifyArgs,
    }
    use clap::Parser;
    Ok(Wrapped::try_parse_from(argv)
        .map_err(|e| anyhow!("sluice certify {}: {e}", argv.join(" ")))?
        .args)
}

/// Certifies a record (or counts): writes the requested files, prints the
/// report unless `show` is false, and returns the exit status with the
/// report as the `--json` document.
pub fn certify_record(args: &CertifyArgs, show: bool) -> Result<(ExitCode, serde_json::Value)> {
    let setup = args.setup()?;
    let mode = args.mode();
    let public = args.public()?;
    let r = args.resolve()?;
    // Validate the parameters before reading a large record.
    let run = resolve_run(&r, mode)?;
    let (n, gamma, keep) = (run.n_rounds, run.gamma, run.keep);
    let prot = run.protocol().copied();

    // Outputs are checked before the record is read: never an input, never
    // each other, never a file that is not an earlier output of the same
    // kind unless --force.
    let inputs = [
        (args.record.as_deref(), "record"),
        (args.counts.as_deref(), "counts file"),
        (args.raw_in.as_deref(), "raw input"),
        (args.params.as_deref(), "parameters file"),
    ];
    if let Some(o) = &args.output {
        let mut others = inputs.to_vec();
        others.push((args.raw_out.as_deref(), "raw output"));
        super::common::check_output(o, sluice::files::Kind::Certificate, &others, args.force)?;
    }
    if let Some(o) = &args.raw_out {
        let mut others = inputs.to_vec();
        others.push((args.output.as_deref(), "certificate"));
        super::common::check_output(o, sluice::files::Kind::RawOutput, &others, args.force)?;
    }
    let replace = sluice::files::Replace::forced(args.force);
    let (summary, mut info, raw_digest, raw_file) = match (&args.record, &args.counts) {
        (Some(path), _) => {
            let rr = read_record(
                path,
                n,
                gamma,
                args.raw_out.as_deref().map(|p| (p, replace)),
                keep,
            )?;
            (rr.summary, rr.info, rr.raw_digest, rr.raw_file)
        }
        (None, Some(path)) => {
            let counts = read_counts(path, gamma)?;
            let s = counts.summary;
            if s.n_rounds != n {
                bail!(
                    "{}: rounds = {}, but N_rounds = {n} was fixed before the run",
                    path.display(),
                    s.n_rounds
                );
            }
            if public.iter().any(|p| *p != PublicStat::Wins) {
                bail!("--public: with --counts only the win count is known, so only \"wins\" (or none) can be published");
            }
            let d = match &args.raw_in {
                Some(raw) => Some(digest_raw_file(raw, keep.string_bits(n))?),
                None => None,
            };
            let info = RecordInfo {
                form: "counts".into(),
                file_digest: Some(counts.digest),
                file_bytes: Some(counts.bytes),
                compressed: false,
                rounds: s.n_rounds,
                test_rounds: s.n_test,
                wins: None,
                pair_counts: None,
            };
            (s, info, d, None)
        }
        (None, None) => unreachable!(),
    };
    info.test_rounds = summary.n_test;
    info.wins = Some(summary.wins);
    info.pair_counts = summary.has_pair_counts.then_some(summary.pair_counts);
    // On any error below the raw output's writer is dropped with nothing
    // renamed into place. The record must be one the protocol could have
    // produced (issue 14, items 1 and 2): refused, and nothing written,
    // otherwise.
    let c = certify_run(&run, &summary, &public)?;
    let (accepted, k, eps_s, eps_cert, eps_cert_source, d_pub) = (
        c.accepted,
        c.min_entropy_bits,
        c.eps_s,
        c.eps_cert,
        c.eps_cert_source,
        c.disclosure_charge_bits,
    );
    let terms = &c.terms;
    let labels = labels(setup, mode, args.record.is_none(), &summary.input_warnings);
    let public_values = public_values(&public, &summary);

    // Files: the raw output only on acceptance; the certificate always
    // (an aborted run's certificate says 0 bits and "accepted": false).
    let mut raw_file_name = None;
    if let (Some(f), Some(dest)) = (raw_file, &args.raw_out) {
        if accepted {
            f.commit().with_context(|| {
                format!(
                    "cannot move the raw output into place at {}",
                    dest.display()
                )
            })?;
            raw_file_name = Some(dest.display().to_string());
        }
        // Not accepted: dropped, nothing is written.
    }
    let mut certificate_file = None;
    if let Some(dest) = &args.output {
        let Some(digest) = raw_digest.clone() else {
            bail!("-o needs the digest of the raw output string: with --counts, give the raw output file with --raw-in");
        };
        let cert = Certificate {
            schema: SCHEMA.into(),
            mode,
            setup,
            device_independent: setup.device_independent(),
            labels: labels.clone(),
            accepted,
            string: CertifiedString {
                length_bits: keep.string_bits(n),
                digest,
                layout: match keep {
                    Keep::Pairs => PAIR_LAYOUT.into(),
                    Keep::Alice => ALICE_LAYOUT.into(),
                },
            },
            min_entropy_bits: k,
            eps_s,
            eps_cert,
            eps_cert_source: eps_cert_source.into(),
            blocks: 1,
            per_block_bounds: false,
            public_statistics: public.clone(),
            public_values: public_values.clone(),
            disclosure_charge_bits: d_pub,
            parameters: Parameters {
                rounds: n,
                test_probability: gamma,
                expected_win: prot.map(|p| p.w_exp),
                tolerance: prot.and_then(|p| match p.bound {
                    Bound::First(e) => Some(e.delta),
                    Bound::Improved(_) => r.delta,
                }),
                smoothing: prot.map(|p| p.eps_s()),
                acceptance: prot.map(|p| p.eps_ea()),
                estimation_error: r.eps_est.filter(|_| mode == Mode::IidEstimate),
                source: if r.from_file.is_some() {
                    "file".into()
                } else {
                    "options".into()
                },
                file_digest: r.from_file.as_ref().map(|(_, d)| d.clone()),
            },
            record: info.clone(),
            result: terms.clone(),
            tool: format!("sluice {}", env!("CARGO_PKG_VERSION")),
            bound: c.bound.clone(),
            checks: Some(c.checks.clone()),
        };
        cert.validate()
            .map_err(|e| anyhow!("internal error, certificate does not validate: {e}"))?;
        cert.check_figure()
            .map_err(|e| anyhow!("internal error, certificate does not recompute: {e}"))?;
        // Owner-only, through the one atomic writer (it holds digests of
        // the raw data).
        let mut text = cert.to_json_string().into_bytes();
        text.push(b'\n');
        sluice::files::atomic::write_all(dest, sluice::files::Kind::Certificate, replace, &text)
            .with_context(|| {
                format!(
                    "cannot move the certificate into place at {}",
                    dest.display()
                )
            })?;
        certificate_file = Some(dest.display().to_string());
    }

    let report = CertifyReport {
        kind: "certify",
        accepted,
        bound: c.bound.as_ref(),
        string_bits: keep.string_bits(n),
        layout: match keep {
            Keep::Pairs => PAIR_LAYOUT,
            Keep::Alice => ALICE_LAYOUT,
        },
        mode,
        setup,
        labels: &labels,
        min_entropy_bits: k,
        bits_per_round: k as f64 / n as f64,
        zero_reason: terms.zero_reason.clone(),
        rounds: n,
        test_rounds: summary.n_test,
        public_statistics: public.iter().map(|p| p.name()).collect(),
        public_values: &public_values,
        disclosure_charge_bits: d_pub,
        result: terms,
        warnings: &summary.input_warnings,
        parameters_file: r.from_file.as_ref().map(|(p, _)| p.display().to_string()),
        certificate_file,
        raw_file: raw_file_name,
        cautions: cautions(mode).to_vec(),
    };
    let value = serde_json::to_value(&report)?;
    if show && args.json {
        print_json(&report)?;
    } else if show {
        print_text(
            &report,
            prot.as_ref(),
            &summary,
            eps_s,
            eps_cert,
            eps_cert_source,
        )?;
    }
    let code = if accepted {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    };
    Ok((code, value))
}

fn print_text(
    rep: &CertifyReport<'_>,
    p: Option<&Protocol>,
    s: &Summary,
    eps_s: f64,
    eps_cert: f64,
    eps_cert_source: &str,
) -> Result<()> {
    let mut o = std::io::stdout().lock();
    for l in rep.labels {
        writeln!(o, "label: {l}")?;
    }
    match rep.mode {
        Mode::EntropyAccumulation => writeln!(
            o,
            "model: entropy accumulation (devices may have memory; adversary with quantum side information)"
        )?,
        Mode::IidEstimate => writeln!(o, "model: {IID_LABEL}")?,
    }
    writeln!(
        o,
        "record: {} rounds, {} test rounds",
        rep.rounds, rep.test_rounds
    )?;
    match rep.public_values.wins {
        Some(w) => write!(o, "test: {w} won test rounds")?,
        None => write!(o, "test: win count kept secret")?,
    }
    if let Some(p) = p {
        let a = p.acceptance();
        let verdict = if rep.accepted {
            "ACCEPT"
        } else {
            "ABORT: the protocol outputs nothing"
        };
        match a.kind {
            TestKind::Wins => writeln!(o, "; pass needs W >= {:.2} -> {verdict}", a.threshold)?,
            TestKind::Score => writeln!(
                o,
                "; pass needs the score W - {} N_test >= {:.2} -> {verdict}",
                a.nu, a.threshold
            )?,
        }
        writeln!(
            o,
            "bound: {} ({}); string kept: {}",
            p.name(),
            match p.bound {
                Bound::First(_) => "first entropy accumulation theorem, Dupuis-Fawzi-Renner 2016",
                Bound::Improved(_) =>
                    "entropy accumulation with improved second-order term, Dupuis-Fawzi 2019",
            },
            p.keep.name()
        )?;
    } else {
        writeln!(o)?;
    }
    writeln!(
        o,
        "certified smooth min-entropy: {} bits ({:.6} per round) of the {}-bit string {}, as one block",
        rep.min_entropy_bits,
        rep.bits_per_round,
        rep.string_bits,
        rep.layout
    )?;
    if let Some(z) = &rep.zero_reason {
        writeln!(o, "  0 bits: {z}")?;
    }
    let t = rep.result;
    if let (Some(f), Some(sec)) = (t.first_order_bits, t.second_order_bits) {
        if t.tangent_point.is_some() {
            writeln!(
                o,
                "  first-order term {f:.1} bits, second-order term {sec:.1} bits, B = {:.2} bits",
                t.bound_bits
            )?;
        }
    }
    if let (Some(w), Some(k)) = (t.tangent_point, t.ceiling_k) {
        writeln!(
            o,
            "  tangent point w_t = {w:.9} (ceiling k = {k}); rounding margin {} bit",
            t.margin_bits
        )?;
    }
    if let Some(w_l) = t.win_lower_bound {
        writeln!(
            o,
            "  lower confidence bound on the win probability w_L = {w_l:.6}; bound {:.2} bits",
            t.bound_bits
        )?;
    }
    let names = if rep.public_statistics.is_empty() {
        "none".to_string()
    } else {
        rep.public_statistics.join(", ")
    };
    writeln!(
        o,
        "  published statistics: {names} ({} bits charged)",
        rep.disclosure_charge_bits
    )?;
    if let Some(sh) = rep.public_values.s_hat {
        writeln!(o, "  S_hat (published) = {sh:.6}")?;
    }
    for pc in &rep.public_values.pair_counts {
        writeln!(
            o,
            "  inputs ({}, {}) (published): {} test rounds, {} with a = b",
            pc[0], pc[1], pc[2], pc[3]
        )?;
    }
    if let Some(c) = t.completeness_error {
        writeln!(
            o,
            "  completeness error: honest devices abort with probability at most {c:.3e}"
        )?;
    }
    writeln!(
        o,
        "  for the extractor: n = {}, k = {}, eps_s = {eps_s:e}, eps_cert = {eps_cert:e} ({eps_cert_source}), one block",
        rep.string_bits,
        rep.min_entropy_bits
    )?;
    writeln!(
        o,
        "  meaning: eps_total bounds Pr[accept] times the distance from ideal output, not the distance given acceptance"
    )?;
    match &rep.parameters_file {
        Some(f) => writeln!(o, "parameters: read from {f} (its digest is recorded in the certificate)")?,
        None => writeln!(
            o,
            "parameters: given as options; they make a certificate only if they were fixed before the run (caution 6)"
        )?,
    }
    if !s.has_pair_counts {
        writeln!(
            o,
            "note: computed from counts; the rounds themselves were not checked"
        )?;
    }
    for w in rep.warnings {
        writeln!(o, "warning: {w}")?;
    }
    if let Some(c) = &rep.certificate_file {
        writeln!(
            o,
            "certificate written to {c} (keep it private: it holds digests of the raw data)"
        )?;
    }
    if let Some(r) = &rep.raw_file {
        writeln!(
            o,
            "raw output written to {r} ({} bits, owner-only; secret)",
            rep.string_bits
        )?;
    }
    print_cautions(&mut o, rep.mode)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wrapping_keeps_every_word() {
        let t = "one two three four five six seven eight nine ten eleven twelve";
        let w = wrap(t, 15);
        assert!(w.iter().all(|l| l.len() <= 15), "{w:?}");
        assert_eq!(w.join(" "), t);
    }
}
