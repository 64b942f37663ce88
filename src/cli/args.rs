//! Options shared by several commands (`extract`, `verify`, `plan` and the
//! two-source paths): parsed here, turned into library types by the
//! command modules. Every command module may import this one; this one
//! imports no command module but `seed` (the budget parser), so `cli/` has
//! no import cycle.

use super::common::{self, FileFormatArgs, FormatArg};
use sluice::extract::Engine;
use sluice::pipeline::job::SeedChoice;
use sluice::pipeline::security::{Resolved, Security};
use sluice::plan::select::Objective;
use std::path::{Path, PathBuf};

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
    /// README, "Seeds and the ledger")
    #[arg(long = "repeat-reason", value_name = "TEXT")]
    pub repeat_reason: Option<String>,
    /// Assert that the certificate conditions on the raw outputs of the
    /// earlier runs with this seed (README, "Seeds and the ledger"; recorded)
    #[arg(long = "assert-cross-run-condition")]
    pub cross_run: bool,
}

impl LedgerUse {
    pub fn active(&self) -> bool {
        self.seed.is_some() || self.new_seed
    }

    /// The seed choice of a ledgered run.
    pub fn seed_choice(&self) -> SeedChoice {
        match &self.seed {
            Some(id) => SeedChoice::Stored(id.clone()),
            None => SeedChoice::New {
                budget: self.seed_budget.unwrap_or(sluice::seed::DEFAULT_BUDGET),
            },
        }
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
    /// Recompute with this registered seed, read from the seed store on
    /// this machine; nothing is written and no disclosure is recorded, so
    /// the seed stays usable
    #[arg(long, value_name = "ID", conflicts_with = "seed_file")]
    pub seed: Option<String>,
    /// Ledger folder of --seed (default: $SLUICE_LEDGER, else the user's
    /// data folder)
    #[arg(long, value_name = "DIR", requires = "seed")]
    pub ledger: Option<PathBuf>,
}

fn parse_engine(s: &str) -> Result<Engine, String> {
    Engine::from_name(s).ok_or_else(|| {
        format!("unknown engine {s:?}: use auto, portable, pclmul, vpclmul256, vpclmul, fft, additive-fft or additive-fft-portable (-pclmul, -vpclmul256, -vpclmul)")
    })
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

impl SecurityArgs {
    /// Whether any figure that the selector needs was given.
    pub fn any_given(&self) -> bool {
        self.security().any_given()
    }

    /// The library's form of these options.
    pub fn security(&self) -> Security {
        Security {
            min_entropy: self.min_entropy,
            min_entropy_rate: self.min_entropy_rate,
            certificate: self.certificate.clone(),
            smoothing: self.smoothing,
            cert_error: self.cert_error,
            trust_counts: self.trust_counts,
            own_seed_record: self.own_seed_record,
            target_error: self.target_error,
            blocks: self.blocks,
            seed_deficiency: self.seed_deficiency,
            objective: self.objective.into(),
        }
    }

    /// Builds the selector input for blocks of `n` bits (`None`: from the
    /// certificate) and `blocks` blocks (when --blocks is not given).
    pub fn resolve(&self, n: Option<u64>, blocks: u64) -> anyhow::Result<Resolved> {
        Ok(self.security().resolve(n, blocks)?)
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
