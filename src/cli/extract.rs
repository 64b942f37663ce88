//! `sluice extract` and `sluice verify` with an explicit seed file.

use super::common::{self, FileFormatArgs, FormatArg};
use super::plan::SecurityArgs;
use anyhow::{bail, Context};
use sluice::bits::Bits;
use sluice::extract::{Engine, Extractor, ModifiedToeplitz, Toeplitz};
use sluice::pipeline::{self, Report, Run, Source};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// The longest Trevisan output above the input length accepted (for tests
/// of the definition).
const TREVISAN_TEST_OUTPUT_BITS: usize = 4096;

/// Extractor names on the command line.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum ExtractorArg {
    /// Toeplitz hashing (seed n + m - 1 bits)
    Toeplitz,
    /// Modified Toeplitz hashing [I | T'] (seed n - 1 bits, m < n)
    ModifiedToeplitz,
    /// Trevisan-style extractor (needs --one-bit, --design, --field-bits for ph)
    Trevisan,
    /// Seedless cyclic-shift two-source extractor (needs --second-source and
    /// --output-bits; independent sources, classical side information only)
    TwoSource,
}

/// One-bit extractor names.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum OneBitArg {
    /// Polynomial hashing: Reed-Solomon over GF(2^l), then Hadamard
    Ph,
    /// Inner product
    Ip,
}

/// Weak design names.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum DesignArg {
    /// Graphs of polynomials over GF(q)
    Poly,
    /// Groups of polynomial designs on disjoint seed slices (r = 1)
    Block,
}

/// The Trevisan parameters of a run.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct TrevisanArgs {
    pub one_bit: OneBitArg,
    pub design: DesignArg,
    pub field_bits: usize,
    pub design_factor: u64,
    pub prime: Option<u64>,
}

/// Options shared by `extract` and `verify`.
#[derive(clap::Args, Debug)]
pub struct Common {
    /// Raw input file (`-` for standard input)
    pub input: PathBuf,
    /// Working memory one whole-run block may take (e.g. 8G, 512M; default
    /// 90% of the memory available). A smaller limit cuts the product into
    /// more tiles (slower, more passes over the input)
    #[arg(long = "memory-limit", value_name = "SIZE", value_parser = parse_size)]
    pub memory_limit: Option<u64>,
    /// Which extractor to run (chosen by the planner when not given)
    #[arg(long, value_enum)]
    pub extractor: Option<ExtractorArg>,
    /// Seed file (packed bytes, MSB first, unless --seed-format says otherwise)
    #[arg(long = "seed-file", value_name = "SEED")]
    pub seed_file: Option<PathBuf>,
    /// Two-source: the second raw source Y (same format as the input; not a
    /// seed: it must be independent of the input)
    #[arg(long = "second-source", value_name = "Y")]
    pub second_source: Option<PathBuf>,
    /// Format of the seed file
    #[arg(long = "seed-format", value_enum, default_value = "packed")]
    pub seed_format: FormatArg,
    /// Trevisan: the one-bit extractor
    #[arg(long = "one-bit", value_enum)]
    pub one_bit: Option<OneBitArg>,
    /// Trevisan: the weak design
    #[arg(long, value_enum)]
    pub design: Option<DesignArg>,
    /// Trevisan: the design factor c (q = smallest prime >= c t)
    #[arg(long = "design-factor", value_name = "C")]
    pub design_factor: Option<u64>,
    /// Trevisan: the field size l of the ph one-bit extractor
    #[arg(long = "field-bits", value_name = "L")]
    pub field_bits: Option<usize>,
    /// Use the first bits of a seed file that holds more than needed
    #[arg(long = "allow-longer-seed")]
    pub allow_longer_seed: bool,
    /// Output bits per block (m); without it, the planner sizes the output
    /// from the security options
    #[arg(long = "output-bits", value_name = "M")]
    pub output_bits: Option<usize>,
    /// Use only the first N bits of the input
    #[arg(long = "input-bits", value_name = "N")]
    pub input_bits: Option<u64>,
    /// Cut the input into consecutive N-bit blocks, one seed for all
    #[arg(long = "block-bits", value_name = "N")]
    pub block_bits: Option<usize>,
    #[command(flatten)]
    pub files: FileFormatArgs,
    /// Product engine: auto (by size), portable, pclmul, vpclmul256, vpclmul, fft, additive-fft or additive-fft-BACKEND (all give the same bits)
    #[arg(long, default_value = "auto", value_parser = parse_engine)]
    pub engine: Engine,
    /// Print a JSON report on standard output (or standard error when the
    /// output goes to standard output)
    #[arg(long)]
    pub json: bool,
    /// Do not print the cautions
    #[arg(long)]
    pub quiet: bool,
}

/// `sluice extract`
#[derive(clap::Args, Debug)]
pub struct ExtractArgs {
    #[command(flatten)]
    pub common: Common,
    /// Output file (`-` for standard output); written under a temporary name
    /// and renamed when complete
    #[arg(short = 'o', long = "output", value_name = "OUT")]
    pub output: PathBuf,
    #[command(flatten)]
    pub security: SecurityArgs,
    /// Where to write the receipt of an automatic run (default OUT.receipt.json)
    #[arg(long, value_name = "FILE")]
    pub receipt: Option<PathBuf>,
    /// Put the output's digest in the receipt (the guarantee for the output
    /// is then only computational once the receipt is published)
    #[arg(long = "receipt-output-digest")]
    pub receipt_output_digest: bool,
    #[command(flatten)]
    pub ledgered: LedgerUse,
    /// Replace an existing output or receipt file even if it is not an
    /// earlier output of sluice (an input is never replaced)
    #[arg(long)]
    pub force: bool,
}

/// A size in bytes: a number with an optional K, M, G or T suffix (powers
/// of 1024).
pub fn parse_size(s: &str) -> Result<u64, String> {
    let t = s.trim();
    let (num, mult) = match t.char_indices().last() {
        Some((i, c)) if c.is_ascii_alphabetic() => {
            let m = match c.to_ascii_uppercase() {
                'K' => 1u64 << 10,
                'M' => 1 << 20,
                'G' => 1 << 30,
                'T' => 1 << 40,
                'B' => 1,
                _ => return Err(format!("{s:?}: the suffix must be K, M, G or T")),
            };
            (&t[..i], m)
        }
        _ => (t, 1),
    };
    let v: f64 = num
        .trim()
        .parse()
        .map_err(|_| format!("{s:?} is not a size such as 8G or 512M"))?;
    if !(v.is_finite() && v > 0.0) {
        return Err(format!("{s:?}: a size must be positive"));
    }
    Ok((v * mult as f64) as u64)
}

/// Before a whole-run block: one line with the layout, the memory and the
/// time it needs (the time from a small product timed now, scaled by the
/// work), on stderr unless quiet.
pub fn print_whole_run_estimate(run: &Run, quiet: bool) -> anyhow::Result<()> {
    let Some(plan) = run.whole_run_plan() else {
        return Ok(());
    };
    let plan = plan?;
    if quiet {
        return Ok(());
    }
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
    eprintln!(
        "one block of {} bits as a whole run on engine {}: {layout}; about {:.1} GiB of working memory (limit {:.1} GiB) and {}",
        plan.input_bits(),
        plan.engine(),
        e.memory_bytes as f64 / (1u64 << 30) as f64,
        pipeline::memory_limit() as f64 / (1u64 << 30) as f64,
        if e.work > 0.0 {
            format!("about {secs:.0} s of hashing")
        } else {
            "a few seconds of hashing".into()
        }
    );
    Ok(())
}

impl ExtractArgs {
    /// The receipt's path when the run writes one: --receipt, else
    /// OUT.receipt.json (None when the output is standard output and no
    /// --receipt is given).
    pub fn receipt_path(&self) -> Option<PathBuf> {
        match (&self.receipt, self.output.as_os_str() == "-") {
            (Some(r), _) => Some(r.clone()),
            (None, false) => {
                let mut s = self.output.clone().into_os_string();
                s.push(".receipt.json");
                Some(PathBuf::from(s))
            }
            (None, true) => None,
        }
    }

    /// Refuses, before any work, an output or receipt that names an input
    /// or each other, or an existing file that is not an earlier output of
    /// the same kind (without --force).
    pub fn check_outputs(&self, receipt: Option<&Path>) -> anyhow::Result<()> {
        use sluice::files::Kind;
        let c = &self.common;
        let inputs = [
            (Some(c.input.as_path()), "input"),
            (c.seed_file.as_deref(), "seed file"),
            (c.second_source.as_deref(), "second source"),
            (self.security.certificate.as_deref(), "certificate"),
        ];
        let mut others = inputs.to_vec();
        others.push((receipt, "receipt"));
        common::check_output(&self.output, Kind::ExtractOutput, &others, self.force)?;
        if let Some(r) = receipt {
            let mut others = inputs.to_vec();
            others.push((Some(self.output.as_path()), "output"));
            common::check_output(r, Kind::Receipt, &others, self.force)?;
        }
        Ok(())
    }
}

/// Options of a run whose seed is accounted in the ledger.
#[derive(clap::Args, Debug)]
pub struct LedgerUse {
    /// Use this registered seed (its first d bits); the use is reserved in
    /// the ledger before any output exists
    #[arg(long, value_name = "ID", conflicts_with_all = ["seed_file", "new_seed"])]
    pub seed: Option<String>,
    /// Create a registered seed of the right length and use it
    #[arg(long = "new-seed", conflicts_with = "seed_file")]
    pub new_seed: bool,
    /// Budget of the seed made by --new-seed, in (0, 1) (default 1e-6)
    #[arg(long = "seed-budget", value_name = "EPS", requires = "new_seed", value_parser = super::seed::parse_budget)]
    pub seed_budget: Option<f64>,
    /// Ledger folder (default: $SLUICE_LEDGER, else the user's data folder)
    #[arg(long, value_name = "DIR")]
    pub ledger: Option<PathBuf>,
    /// Extract again from raw data already used, for this reason (recorded;
    /// hashing spec 4.6)
    #[arg(long = "repeat-reason", value_name = "TEXT")]
    pub repeat_reason: Option<String>,
    /// Assert that the certificate conditions on the raw outputs of the
    /// earlier runs with this seed (hashing spec 4.1 rule 3; recorded)
    #[arg(long = "assert-cross-run-condition")]
    pub cross_run: bool,
}

impl LedgerUse {
    fn active(&self) -> bool {
        self.seed.is_some() || self.new_seed
    }
}

/// `sluice verify`
#[derive(clap::Args, Debug)]
pub struct VerifyArgs {
    #[command(flatten)]
    pub common: Common,
    /// The claimed output to check (read with --output-format / --output-bit-order)
    #[arg(long, value_name = "FILE")]
    pub claimed: PathBuf,
    /// Take the extractor, sizes and blocks from a receipt of `sluice extract`
    #[arg(long, value_name = "FILE", conflicts_with_all = ["extractor", "output_bits", "block_bits", "input_bits"])]
    pub receipt: Option<PathBuf>,
}

fn parse_engine(s: &str) -> Result<Engine, String> {
    Engine::from_name(s).ok_or_else(|| {
        format!("unknown engine {s:?}: use auto, portable, pclmul, vpclmul256, vpclmul, fft, additive-fft or additive-fft-portable (-pclmul, -vpclmul256, -vpclmul)")
    })
}

/// The planned extractor, the seed and the input source, after checking
/// every size.
pub struct Resolved {
    pub plan: Box<dyn Extractor>,
    pub seed: Bits,
    pub source: Source,
}

impl Resolved {
    /// The input bits a run will hash, for the progress bar: whole blocks
    /// of the bits asked for, or of the file when its size tells (a packed
    /// regular file, or input already read); 0 (unknown) otherwise.
    pub fn bar_total(&self, input_bits: Option<u64>) -> u64 {
        let n = self.plan.input_bits().max(1) as u64;
        let avail = match (input_bits, &self.source) {
            (Some(t), _) => t,
            (None, Source::Memory { bits, .. }) => bits.len() as u64,
            (None, Source::File(f)) if !f.is_std() && f.format == sluice::bits::Format::Packed => {
                pipeline::count_bits(f).unwrap_or(0)
            }
            (None, Source::File(_)) => 0,
        };
        avail / n * n
    }
}

/// The extractor, its output size and the block layout of a run.
pub struct Layout {
    pub extractor: ExtractorArg,
    pub trevisan: Option<TrevisanArgs>,
    pub m: usize,
    pub block_bits: Option<usize>,
    pub input_bits: Option<u64>,
}

impl Layout {
    /// The layout given explicitly on the command line.
    fn explicit(c: &Common) -> anyhow::Result<Layout> {
        match (c.extractor, c.output_bits) {
            (Some(extractor), Some(m)) => Ok(Layout {
                extractor,
                trevisan: trevisan_args(c, extractor)?,
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
}

/// The Trevisan options, required exactly when the extractor is Trevisan.
fn trevisan_args(c: &Common, e: ExtractorArg) -> anyhow::Result<Option<TrevisanArgs>> {
    let given = c.one_bit.is_some()
        || c.design.is_some()
        || c.field_bits.is_some()
        || c.design_factor.is_some();
    if e != ExtractorArg::Trevisan {
        if given {
            bail!("--one-bit, --design, --design-factor and --field-bits apply to --extractor trevisan only");
        }
        return Ok(None);
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
    Ok(Some(TrevisanArgs {
        one_bit,
        design,
        field_bits,
        design_factor: c.design_factor.unwrap_or(1),
        prime: None,
    }))
}

/// Plans a Trevisan extractor of n to m bits.
pub fn trevisan_plan(
    n: usize,
    m: usize,
    t: &TrevisanArgs,
    engine: Engine,
) -> anyhow::Result<Box<dyn Extractor>> {
    use sluice::extract::trevisan::{DesignKind, OneBit, Trevisan, TrevisanSpec};
    let spec = TrevisanSpec {
        n,
        m,
        one_bit: match t.one_bit {
            OneBitArg::Ph => OneBit::Ph,
            OneBitArg::Ip => OneBit::Ip,
        },
        field_bits: t.field_bits,
        design: match t.design {
            DesignArg::Poly => DesignKind::Poly,
            DesignArg::Block => DesignKind::Block,
        },
        design_factor: t.design_factor,
        prime: t.prime,
    };
    let be = match engine {
        Engine::Clmul(b) => b,
        Engine::Auto => sluice::gf2::Backend::detect(),
        Engine::Fft | Engine::Additive(_) => bail!("--engine {engine} applies to the Toeplitz families only; Trevisan runs on the carry-less backends"),
    };
    Ok(Box::new(Trevisan::with_backend(&spec, be)?))
}

pub fn resolve(c: &Common, l: &Layout, stored: Option<&Bits>) -> anyhow::Result<Resolved> {
    if l.input_bits == Some(0) {
        bail!("--input-bits 0: the input length must be at least 1 bit");
    }
    if l.block_bits == Some(0) {
        bail!("--block-bits 0: a block must hold at least 1 bit");
    }
    let input_file = c.files.input(&c.input);
    // A packed file's length is known up front: refuse a length it cannot
    // hold before anything else (the stream check catches the other formats).
    if input_file.format == sluice::bits::Format::Packed && !input_file.is_std() {
        if let Ok(md) = std::fs::metadata(&c.input) {
            let have = md.len() * 8;
            if let Some(want) = l.input_bits.or(l.block_bits.map(|b| b as u64)) {
                if want > have {
                    bail!(
                        "{}: {want} bits asked for, but the input ends after {have} bits",
                        c.input.display()
                    );
                }
            }
        }
    }
    // The block size n: given, or the whole (possibly truncated) input.
    let (n, source) = match (l.block_bits, l.input_bits) {
        (Some(b), Some(t)) if (b as u64) > t => {
            bail!("--block-bits {b} is larger than --input-bits {t}: no block would be hashed")
        }
        (Some(b), _) => (b, Source::File(input_file)),
        (None, Some(t)) => (
            usize::try_from(t).context("--input-bits too large for this machine")?,
            Source::File(input_file),
        ),
        (None, None) => {
            let bits =
                sluice::bits::io::read_bits(&c.input, input_file.format, input_file.order, None)?;
            if bits.is_empty() {
                bail!("{}: the input holds no bits", c.input.display());
            }
            (
                bits.len(),
                Source::Memory {
                    bits,
                    name: c.input.clone(),
                },
            )
        }
    };
    let m = l.m;
    if m == 0 {
        bail!("--output-bits 0: the output must hold at least 1 bit");
    }
    // One block in, one block out, in memory at once: checked before
    // anything is allocated.
    sluice::files::space::check_bits(
        n as u128 + m as u128,
        &format!("a block of {n} input bits and {m} output bits"),
    )?;
    let plan: Box<dyn Extractor> = match l.extractor {
        ExtractorArg::Toeplitz => {
            if m > n {
                bail!("--output-bits {m} is larger than the input block of {n} bits: Toeplitz hashing needs m <= n");
            }
            Box::new(Toeplitz::with_engine(n, m, c.engine)?)
        }
        ExtractorArg::ModifiedToeplitz => {
            if m >= n {
                bail!("--output-bits {m} must be smaller than the input block of {n} bits for modified Toeplitz hashing");
            }
            Box::new(ModifiedToeplitz::with_engine(n, m, c.engine)?)
        }
        ExtractorArg::TwoSource => {
            bail!("--extractor two-source takes --second-source Y and --output-bits M")
        }
        ExtractorArg::Trevisan => {
            // The function is defined for any m (spec/trevisan.md 2); the
            // planner keeps m below the min-entropy. An output longer than
            // the input only tests the definition (the published vectors
            // have such cases), so it is bounded (issue 15 item 9: a
            // receipt or option asking for 2^40 bits must not allocate).
            if m > n.max(TREVISAN_TEST_OUTPUT_BITS) {
                bail!(
                    "--output-bits {m}: a Trevisan output longer than its {n}-bit input cannot be near-uniform; outputs above n are allowed only up to {TREVISAN_TEST_OUTPUT_BITS} bits, to test the definition"
                );
            }
            let t = l
                .trevisan
                .as_ref()
                .expect("trevisan layouts carry their parameters");
            trevisan_plan(n, m, t, c.engine)?
        }
    };
    let seed = match (stored, &c.seed_file) {
        // A registered seed: its first d bits (hashing spec 4.1: blocks use
        // a prefix of the one seed).
        (Some(s), _) => {
            if s.len() < plan.seed_bits() {
                bail!(
                    "the registered seed holds {} bits, but this extractor needs {} seed bits; nothing was recorded or written",
                    s.len(),
                    plan.seed_bits()
                );
            }
            s.slice(0, plan.seed_bits())
        }
        (None, Some(path)) => pipeline::read_seed(
            path,
            c.seed_format.into(),
            plan.seed_bits(),
            c.allow_longer_seed,
        )?,
        (None, None) => {
            bail!("give a seed: --seed-file FILE, or (extract) --seed ID or --new-seed")
        }
    };
    Ok(Resolved { plan, seed, source })
}

pub fn describe(r: &Report, c: &Common, plan: &dyn Extractor) -> String {
    let mut s = format!(
        "{}: {} block(s) of {} bits -> {} bits each ({} bits in all), seed {} bits, engine {}",
        plan.name(),
        r.blocks,
        r.block_bits,
        plan.output_bits(),
        r.output_bits,
        plan.seed_bits(),
        plan.engine()
            .map_or(c.engine.to_string(), |e| e.to_string())
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

/// Runs `sluice extract`.
pub fn run_extract(a: ExtractArgs) -> anyhow::Result<ExitCode> {
    if super::two_source::wanted(&a.common) {
        return super::two_source::run_extract(&a);
    }
    no_second_source(&a.common)?;
    if let Some(b) = a.common.memory_limit {
        pipeline::set_memory_limit(b);
    }
    if a.ledgered.active() {
        return super::ledger::run_extract(a);
    }
    let c = &a.common;
    let auto_mode = c.output_bits.is_none() && c.extractor.is_none() || a.security.any_given();
    let receipt_path = if auto_mode { a.receipt_path() } else { None };
    if auto_mode && receipt_path.is_none() {
        bail!("the output goes to standard output: give --receipt FILE for the receipt");
    }
    a.check_outputs(receipt_path.as_deref())?;
    let (layout, mut auto) = if auto_mode {
        let (l, p) = super::auto::plan_run(c, &a.security)?;
        (l, Some(p))
    } else {
        (Layout::explicit(c)?, None)
    };
    // A certified run with an explicit seed file: nothing records the
    // seed's uses, so the operator must say they keep that record.
    if let Some(p) = &auto {
        if p.has_certificate() && c.seed_file.is_some() && !a.security.own_seed_record {
            bail!(
                "refused: --seed-file with a certificate records no use of the seed, so reuse on another run (or twice on this raw file) would go unnoticed while the error figure assumes a single use. Rule: a certified run's seed use is recorded. What to do: use a registered seed (--seed ID or --new-seed, recorded in the ledger), or give --own-seed-record to declare that you keep your own record (the receipt then holds a digest of the seed)"
            );
        }
    }
    let r = resolve(c, &layout, None)?;
    if let Some(p) = auto.as_mut() {
        p.set_seed_file(
            sluice::bits::digest::data_digest(&r.seed),
            a.security.own_seed_record,
        );
    }
    common::print_cautions(c.quiet);
    if let Some(p) = &auto {
        p.print_summary(c.quiet);
    }
    let output = c.files.output(&a.output);
    let bar_total = r.bar_total(layout.input_bits);
    let run = Run {
        input: r.source,
        input_bits: layout.input_bits,
        extractor: r.plan.as_ref(),
        seed: &r.seed,
        output,
    };
    print_whole_run_estimate(&run, c.quiet)?;
    let pb = common::progress_bits(bar_total, "extracting");
    let report = run.execute_replacing(sluice::files::Replace::forced(a.force), |done| {
        pb.set_position(done)
    })?;
    pb.finish_and_clear();
    if let (Some(p), Some(path)) = (&auto, &receipt_path) {
        let out_digest = if a.receipt_output_digest && a.output.as_os_str() != "-" {
            let f = c.files.output(&a.output);
            Some(pipeline::digest_prefix(&f, report.output_bits)?)
        } else {
            None
        };
        p.write_receipt(path, r.plan.as_ref(), &report, c, out_digest, None, a.force)?;
    }
    if c.json {
        let j = ExtractJson {
            extractor: r.plan.name(),
            engine: r
                .plan
                .engine()
                .map_or(c.engine.to_string(), |e| e.to_string()),
            input_bits_per_block: r.plan.input_bits(),
            output_bits_per_block: r.plan.output_bits(),
            seed_bits: r.plan.seed_bits(),
            output: &a.output,
            receipt: receipt_path.as_deref(),
            report: &report,
        };
        if a.output.as_os_str() == "-" {
            eprintln!("{}", serde_json::to_string_pretty(&j)?);
        } else {
            common::print_json(&j)?;
        }
    } else {
        let mut err = std::io::stderr();
        writeln!(err, "{}", describe(&report, c, r.plan.as_ref()))?;
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
        return super::two_source::run_verify(&a);
    }
    no_second_source(&a.common)?;
    if let Some(b) = a.common.memory_limit {
        pipeline::set_memory_limit(b);
    }
    let c = &a.common;
    let mut labels = Vec::new();
    let layout = match &a.receipt {
        Some(path) => {
            let (l, digest) = super::auto::layout_from_receipt(path)?;
            labels = super::auto::labels_from_receipt(path)?;
            let f = c.files.input(&c.input);
            let total = l.input_bits.expect("receipts give the input length");
            let got = pipeline::digest_prefix(&f, total)?;
            if got != digest {
                println!(
                    "MISMATCH: {} is not the input {} was made from (its data digest differs)",
                    c.input.display(),
                    path.display()
                );
                return Ok(ExitCode::from(1));
            }
            l
        }
        None => Layout::explicit(c)?,
    };
    let r = resolve(c, &layout, None)?;
    let claimed = c.files.output(&a.claimed);
    let pb = common::progress_bits(r.bar_total(layout.input_bits), "verifying");
    let run = Run {
        input: r.source,
        input_bits: layout.input_bits,
        extractor: r.plan.as_ref(),
        seed: &r.seed,
        output: claimed.clone(),
    };
    let v = run.verify(&claimed, |done| pb.set_position(done))?;
    pb.finish_and_clear();
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

/// Prints a verification verdict; exit 0 on match, 1 on mismatch.
pub fn print_verdict(
    v: &pipeline::Verdict,
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

/// Refuses --second-source without --extractor two-source.
fn no_second_source(c: &Common) -> anyhow::Result<()> {
    if c.second_source.is_some() {
        bail!("--second-source applies to --extractor two-source only");
    }
    Ok(())
}
