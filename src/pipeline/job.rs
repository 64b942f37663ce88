//! A whole run as one library call: [`Job`] describes it, [`execute`] does
//! it and returns what happened, and [`verify`] does the same for a claimed
//! output.
//!
//! `execute` plans (the planner returns an [`ExtractorSpec`]; or the job
//! names one), reads the seed (a file, a registered seed, or a new one with
//! its budget), reserves the use in the ledger when there is one, streams
//! the input once (digesting it while it hashes; with a ledger the use is
//! abandoned, still charged, when that digest differs from the one
//! reserved), writes the output atomically, writes the receipt, commits the
//! use and returns a [`Done`]. The command line only parses, calls and
//! prints.
//!
//! Input passes: a run without a ledger reads its input once (the digest
//! for the receipt and the certificate check come from the pass that
//! hashes; a refused check removes the unrenamed output). A run with a
//! ledger, or whose output goes to standard output, digests its input once
//! before hashing, so a refusal (wrong certificate string, raw data already
//! used) charges nothing and writes nothing; the hashing pass digests again
//! and must agree. A text (ASCII or hex) input whose length is not given is
//! counted first.

use super::ledgered::{self, UseSpec};
use super::receipt::{self, Receipt};
use super::security::{plan_error, speed_model, Security};
use super::{
    count_bits, digest_prefix, read_seed, stream_seed, BitFile, Report, Run, SeedFileError,
    SeedInput, Source,
};
use crate::bits::{Bits, Format};
use crate::certify::certificate::Certificate;
use crate::extract::spec::SpecError;
use crate::extract::{Engine, Extractor, ExtractorSpec};
use crate::files::{AtomicFile, Kind, Replace};
use crate::ledger::{self, Ledger};
use crate::plan::compose;
use crate::plan::round::up4;
use crate::plan::select::{self, Construction, NoSpeeds, Objective, Planned, SelectorInput};
use crate::seed::{self, Origin, Store};
use std::io::Write;
use std::path::{Path, PathBuf};

/// The longest Trevisan output above the input length accepted (for tests
/// of the definition).
pub const TREVISAN_TEST_OUTPUT_BITS: usize = 4096;

/// Errors of a job. Messages say what and where; the command line prints
/// them with exit status 2.
#[derive(Debug, thiserror::Error)]
pub enum JobError {
    /// A refusal or a bad request, in words.
    #[error("{0}")]
    Refused(String),
    /// A message with its cause.
    #[error("{context}")]
    Context {
        /// What failed.
        context: String,
        /// Why.
        #[source]
        source: Box<dyn std::error::Error + Send + Sync>,
    },
    /// The run (input, output).
    #[error(transparent)]
    Run(#[from] super::Error),
    /// A ledgered run.
    #[error(transparent)]
    Ledgered(Box<ledgered::Error>),
    /// Reading bits.
    #[error(transparent)]
    Bits(#[from] crate::bits::Error),
    /// The seed file.
    #[error(transparent)]
    SeedFile(#[from] SeedFileError),
    /// The seed store.
    #[error(transparent)]
    Seed(#[from] seed::Error),
    /// The ledger.
    #[error(transparent)]
    Ledger(#[from] ledger::Error),
    /// A planning rule.
    #[error(transparent)]
    Plan(#[from] crate::plan::Error),
    /// A ledger rule.
    #[error(transparent)]
    Rule(#[from] ledger::Rule),
    /// The extractor.
    #[error(transparent)]
    Spec(#[from] SpecError),
    /// A size that cannot be held in memory.
    #[error(transparent)]
    TooLarge(Box<crate::files::space::TooLarge>),
    /// Writing a file.
    #[error(transparent)]
    Io(#[from] std::io::Error),
}

impl From<ledgered::Error> for JobError {
    fn from(e: ledgered::Error) -> Self {
        JobError::Ledgered(Box::new(e))
    }
}

impl From<crate::files::space::TooLarge> for JobError {
    fn from(e: crate::files::space::TooLarge) -> Self {
        JobError::TooLarge(Box::new(e))
    }
}

fn refuse<T>(s: impl Into<String>) -> Result<T, JobError> {
    Err(JobError::Refused(s.into()))
}

fn size(v: u64, what: &str) -> Result<usize, JobError> {
    usize::try_from(v).map_err(|_| JobError::Refused(format!("{what} too large for this machine")))
}

/// Which extractor: named to the bit, or chosen by the planner.
#[derive(Clone, Debug)]
pub enum Choice {
    /// The family and output length given; n is the block size of the
    /// layout (`block_bits`, else `input_bits`, else the whole input).
    Explicit {
        /// The family.
        family: crate::extract::spec::Family,
        /// Output bits per block.
        m: usize,
    },
    /// The planner sizes the output from the security inputs, among the
    /// constructions the pipeline runs, or for the one named.
    Planned {
        /// The security inputs.
        security: Security,
        /// The construction asked for, if any.
        construction: Option<Construction>,
    },
}

/// Where the seed comes from.
#[derive(Clone, Debug)]
pub enum SeedChoice {
    /// An explicit seed file (no use is recorded).
    File {
        /// The file.
        path: PathBuf,
        /// Its format (MSB-first when packed).
        format: Format,
        /// Use the first bits of a longer file.
        allow_longer: bool,
    },
    /// A registered seed (its first d bits); the use is recorded.
    Stored(String),
    /// A new registered seed of the right length from the operating
    /// system, with this budget.
    New {
        /// The budget.
        budget: f64,
    },
    /// None given (the job is refused with a message saying how to give
    /// one).
    None,
}

/// A ledger that records the run's seed use.
#[derive(Clone, Debug)]
pub struct LedgerUse {
    /// The ledger folder.
    pub dir: PathBuf,
    /// Extract again from raw data already used, for this reason.
    pub repeat_reason: Option<String>,
    /// The operator asserts the cross-run condition (hashing spec 4.1
    /// rule 3).
    pub cross_run: bool,
}

/// The receipt of a planned run.
#[derive(Clone, Debug)]
pub struct ReceiptOptions {
    /// Where it is written.
    pub path: PathBuf,
    /// Put the output's digest in it.
    pub output_digest: bool,
}

/// One extraction, described with library types only.
#[derive(Clone, Debug)]
pub struct Job {
    /// The raw input.
    pub input: BitFile,
    /// Use only the first this many bits.
    pub input_bits: Option<u64>,
    /// Cut the input into blocks of this many bits.
    pub block_bits: Option<usize>,
    /// Which extractor.
    pub choice: Choice,
    /// The product engine.
    pub engine: Engine,
    /// The seed.
    pub seed: SeedChoice,
    /// The ledger (required for stored and new seeds).
    pub ledger: Option<LedgerUse>,
    /// The output.
    pub output: BitFile,
    /// The receipt (planned runs).
    pub receipt: Option<ReceiptOptions>,
    /// What an existing output or receipt may be replaced by.
    pub replace: Replace,
}

/// What the planner decided for a run.
pub struct AutoPlan {
    construction: Construction,
    reason: String,
    planned: Planned,
    input: SelectorInput,
    certificate: Option<(PathBuf, Certificate, String)>,
    total_bits: u64,
    n: u64,
    labels: Vec<String>,
}

impl AutoPlan {
    /// The extractor chosen.
    pub fn spec(&self) -> ExtractorSpec {
        self.planned.spec(&self.construction, self.n)
    }

    /// Whether a certificate fixed the figures.
    pub fn has_certificate(&self) -> bool {
        self.certificate.is_some()
    }

    /// Whether the raw data carry a device-independent certificate.
    pub fn device_independent(&self) -> bool {
        self.certificate
            .as_ref()
            .is_some_and(|(_, c, _)| c.device_independent)
    }

    /// The error charged to the seed's account for this run's L blocks:
    /// `L (2 eps_s + 2^s eps_ext)` (hashing spec 4.1, 4.3, 4.4).
    pub fn seed_charge(&self) -> f64 {
        let b = &self.input.budget;
        compose::blocks_with_one_seed(b.blocks, b.eps_s, self.planned.eps_ext, b.seed_deficiency)
    }

    /// Seed bits d the chosen extractor needs.
    pub fn seed_bits(&self) -> u64 {
        self.planned.d
    }

    /// The run's eps_total.
    pub fn eps_total(&self) -> f64 {
        self.planned.eps_total
    }

    /// The lines that describe the choice and the error terms (`meaning`
    /// too unless `quiet`).
    pub fn summary(&self, quiet: bool) -> Vec<String> {
        let b = &self.input.budget;
        let p = &self.planned;
        let mut e: Vec<String> = self.labels.iter().map(|l| format!("label: {l}")).collect();
        e.push(format!(
            "chosen: {}: {}",
            self.construction.name(),
            self.reason
        ));
        e.push(format!(
            "  {} block(s) of {} bits -> {} bits each; seed {} bits",
            b.blocks, self.input.n, p.m, p.d
        ));
        e.push(format!(
            "  eps_total = eps_cert + eps_seed + L (2 eps_s + 2^s eps_ext) = {:e} + {:e} + {} x (2 x {:e} + 2^{} x {}) = {} (target {:e})",
            b.eps_cert,
            b.eps_seed,
            b.blocks,
            b.eps_s,
            b.seed_deficiency,
            up4(p.eps_ext),
            up4(p.eps_total),
            b.eps_total
        ));
        if let Some((path, cert, _)) = &self.certificate {
            e.push(format!(
                "  certificate {}: setup: {}",
                path.display(),
                cert.setup.label()
            ));
            if !cert.device_independent {
                e.push("  NOT device-independent".to_string());
            }
        }
        if !quiet {
            e.push(format!(
                "  meaning: {}",
                compose::meaning(self.input.can_abort.unwrap_or(false))
            ));
        }
        e
    }
}

/// The constructions the pipeline runs.
fn runnable(c: &Construction) -> bool {
    matches!(c, Construction::Hash { .. } | Construction::Trevisan { .. })
}

/// Sizes a run: the block layout, then the planner's choice among the
/// constructions the pipeline runs (or the one asked for). `deficiency` and
/// `eps_seed` are a registered seed's (hashing spec 4.4, 4.7).
fn plan_run(
    job: &Job,
    sec: &Security,
    wanted: Option<Construction>,
    deficiency: Option<f64>,
    eps_seed: f64,
) -> Result<AutoPlan, JobError> {
    let mut sec = sec.clone();
    if let Some(s) = deficiency {
        sec.seed_deficiency = s;
    }
    let sec = &sec;
    let file = &job.input;
    let name = file.path.display();
    if file.is_std() {
        return refuse("automatic extraction digests the input before hashing it, so it needs a file, not standard input");
    }
    // The certificate fixes the string: its length, one block.
    let cert_n = match &sec.certificate {
        Some(p) => Some(super::security::read_certificate(p)?.1.string.length_bits),
        None => None,
    };
    // The input is read once, by the run. Its length is measured here only
    // when nothing gives it and it costs no read (a packed regular file):
    // otherwise a text file would be read twice and a pipe consumed. A
    // shorter input than given is refused when the run reaches its end,
    // before anything is reserved or renamed.
    let regular = std::fs::metadata(&file.path).is_ok_and(|m| m.is_file());
    let given = cert_n.or(job.input_bits);
    let available = if given.is_some() && !(regular && file.format == Format::Packed) {
        u64::MAX
    } else {
        count_bits(file)?
    };
    let total = match (cert_n, job.input_bits) {
        (Some(n), Some(t)) if t != n => {
            return refuse(format!(
                "--input-bits {t}: the certificate covers exactly {n} bits"
            ))
        }
        (Some(n), _) => n,
        (None, Some(t)) => t,
        (None, None) => available,
    };
    if total > available {
        return refuse(format!(
            "{name}: {total} bits asked for, but the input ends after {available} bits"
        ));
    }
    let n = match (cert_n, job.block_bits) {
        (Some(n), Some(b)) if b as u64 != n => return refuse(format!(
            "--block-bits {b}: a certificate covers its string as one block of {n} bits; it gives no per-block bounds, so the string cannot be split"
        )),
        (_, Some(b)) => b as u64,
        (_, None) => total,
    };
    if n == 0 || total == 0 {
        return refuse(format!("{name}: the input holds no bits"));
    }
    let blocks = total / n;
    if blocks == 0 {
        return refuse(format!(
            "--block-bits {n} is larger than the {total} input bits: no block would be hashed"
        ));
    }
    let resolved = sec.resolve(Some(n), blocks)?;
    let mut input = resolved.input;
    input.budget.eps_seed = eps_seed;
    let speeds;
    let model: &dyn select::ThroughputModel = if input.objective == Objective::Fastest {
        speeds = speed_model();
        &speeds
    } else {
        &NoSpeeds
    };
    let (construction, planned, reason) = match wanted {
        Some(cons) => {
            let p = select::plan_one(&cons, &input, model)
                .map_err(|e| plan_error(e, resolved.rate_given))?;
            if let Some(why) = &p.impractical {
                return refuse(format!(
                    "--extractor {}: {why}; choose another extractor or smaller blocks",
                    cons.name()
                ));
            }
            (cons, p, "named with --extractor".to_string())
        }
        None => {
            let sel =
                select::select(&input, model).map_err(|e| plan_error(e, resolved.rate_given))?;
            pick(&sel, input.objective)?
        }
    };
    Ok(AutoPlan {
        construction,
        reason,
        planned,
        input,
        certificate: resolved.certificate,
        total_bits: total,
        n,
        labels: resolved.labels,
    })
}

/// The selector's choice if the pipeline runs it, else the best runnable
/// row for the same objective.
fn pick(
    sel: &select::Selection,
    objective: Objective,
) -> Result<(Construction, Planned, String), JobError> {
    if let Some(i) = sel.chosen {
        let row = &sel.rows[i];
        if runnable(&row.construction) {
            let p = row.outcome.clone().expect("the chosen row is planned");
            return Ok((row.construction, p, sel.reason.clone()));
        }
    }
    let candidates = sel
        .rows
        .iter()
        .filter(|r| runnable(&r.construction))
        .filter_map(|r| r.outcome.as_ref().ok().map(|p| (r.construction, p.clone())))
        .filter(|(_, p)| p.impractical.is_none());
    let best = match objective {
        Objective::MostOutput => {
            candidates.max_by(|a, b| a.1.m.cmp(&b.1.m).then(b.1.d.cmp(&a.1.d)))
        }
        Objective::ShortestSeed => {
            candidates.min_by(|a, b| a.1.d.cmp(&b.1.d).then(b.1.m.cmp(&a.1.m)))
        }
        Objective::Fastest => candidates.min_by(|a, b| {
            a.1.seconds_per_block
                .unwrap_or(f64::INFINITY)
                .total_cmp(&b.1.seconds_per_block.unwrap_or(f64::INFINITY))
        }),
    };
    match best {
        Some((c, p)) => {
            let why = match sel.chosen {
                Some(i) => format!(
                    "the planner preferred {}, which this command does not run yet; this is the best of the hashing extractors for the same objective",
                    sel.rows[i].construction.name()
                ),
                None => sel.reason.clone(),
            };
            Ok((c, p, why))
        }
        None => refuse(format!(
            "no extractor meets the error target: {}",
            sel.reason
        )),
    }
}

/// The extractor of a run, its seed and its input, after checking every
/// size.
pub struct Resolved {
    /// The spec.
    pub spec: ExtractorSpec,
    /// The planned extractor.
    pub plan: Box<dyn Extractor>,
    /// The seed: in memory, or (an explicit packed seed file of a
    /// whole-run block) left on disk to be streamed.
    pub seed: SeedInput,
    /// The input.
    pub source: Source,
    /// Use only the first this many input bits.
    pub input_bits: Option<u64>,
}

impl Resolved {
    /// The input bits the run will hash, for a progress bar: whole blocks
    /// of the bits asked for, or of the file when its size tells (a packed
    /// regular file, or input already read); 0 (unknown) otherwise.
    pub fn bar_total(&self) -> u64 {
        let n = self.plan.input_bits().max(1) as u64;
        let avail = match (self.input_bits, &self.source) {
            (Some(t), _) => t,
            (None, Source::Memory { bits, .. }) => bits.len() as u64,
            (None, Source::File(f)) if !f.is_std() && f.format == Format::Packed => {
                count_bits(f).unwrap_or(0)
            }
            (None, Source::File(_)) => 0,
        };
        avail / n * n
    }
}

/// The block layout of a run: the family and m, the block and input sizes.
#[derive(Clone, Debug)]
pub struct Layout {
    /// The family.
    pub family: crate::extract::spec::Family,
    /// Output bits per block.
    pub m: usize,
    /// Block size.
    pub block_bits: Option<usize>,
    /// Input bits used.
    pub input_bits: Option<u64>,
}

/// Plans the extractor of `layout` on `input` and reads its seed: the
/// first d bits of `stored`, else the seed file.
pub fn resolve(
    input: &BitFile,
    layout: &Layout,
    engine: Engine,
    stored: Option<&Bits>,
    seed_file: Option<(&Path, Format, bool)>,
) -> Result<Resolved, JobError> {
    let l = layout;
    if l.input_bits == Some(0) {
        return refuse("--input-bits 0: the input length must be at least 1 bit");
    }
    if l.block_bits == Some(0) {
        return refuse("--block-bits 0: a block must hold at least 1 bit");
    }
    // A packed file's length is known up front: refuse a length it cannot
    // hold before anything else (the stream check catches the other formats).
    if input.format == Format::Packed && !input.is_std() {
        if let Ok(md) = std::fs::metadata(&input.path).and_then(|m| {
            if m.is_file() {
                Ok(m)
            } else {
                Err(std::io::Error::other("not a regular file"))
            }
        }) {
            let have = md.len() * 8;
            if let Some(want) = l.input_bits.or(l.block_bits.map(|b| b as u64)) {
                if want > have {
                    return refuse(format!(
                        "{}: {want} bits asked for, but the input ends after {have} bits",
                        input.path.display()
                    ));
                }
            }
        }
    }
    // The block size n: given, or the whole (possibly truncated) input.
    let (n, source) = match (l.block_bits, l.input_bits) {
        (Some(b), Some(t)) if (b as u64) > t => {
            return refuse(format!(
                "--block-bits {b} is larger than --input-bits {t}: no block would be hashed"
            ))
        }
        (Some(b), _) => (b, Source::File(input.clone())),
        (None, Some(t)) => (size(t, "--input-bits")?, Source::File(input.clone())),
        (None, None) => {
            let bits = crate::bits::io::read_bits(&input.path, input.format, input.order, None)?;
            if bits.is_empty() {
                return refuse(format!("{}: the input holds no bits", input.path.display()));
            }
            (
                bits.len(),
                Source::Memory {
                    bits,
                    name: input.path.clone(),
                },
            )
        }
    };
    let m = l.m;
    if m == 0 {
        return refuse("--output-bits 0: the output must hold at least 1 bit");
    }
    use crate::extract::spec::Family;
    match l.family {
        Family::Toeplitz if m > n => return refuse(format!(
            "--output-bits {m} is larger than the input block of {n} bits: Toeplitz hashing needs m <= n"
        )),
        Family::ModifiedToeplitz if m >= n => return refuse(format!(
            "--output-bits {m} must be smaller than the input block of {n} bits for modified Toeplitz hashing"
        )),
        Family::TwoSource => {
            return refuse("--extractor two-source takes --second-source Y and --output-bits M")
        }
        // The function is defined for any m (spec/trevisan.md 2); the
        // planner keeps m below the min-entropy. An output longer than the
        // input only tests the definition (the published vectors have such
        // cases), so it is bounded: a receipt or option asking for 2^40
        // bits must not allocate.
        Family::Trevisan { .. } if m > n.max(TREVISAN_TEST_OUTPUT_BITS) => return refuse(format!(
            "--output-bits {m}: a Trevisan output longer than its {n}-bit input cannot be near-uniform; outputs above n are allowed only up to {TREVISAN_TEST_OUTPUT_BITS} bits, to test the definition"
        )),
        _ => {}
    }
    let spec = ExtractorSpec {
        family: l.family,
        n,
        m,
    };
    let plan = spec.build(engine).map_err(|e| match e {
        SpecError::NoFftEngine(engine) => JobError::Refused(format!(
            "--engine {engine} applies to the Toeplitz families only; Trevisan runs on the carry-less backends"
        )),
        e => e.into(),
    })?;
    // One block in, one block out, in memory at once: checked before
    // anything is allocated. A whole-run block holds neither (its plan is
    // checked against the memory limit instead).
    let whole = super::whole_run_input_of(plan.as_ref(), &source, l.input_bits).is_some();
    if !whole {
        crate::files::space::check_bits(
            n as u128 + m as u128,
            &format!("a block of {n} input bits and {m} output bits"),
        )?;
    }
    let seed = match (stored, seed_file) {
        // A registered seed: its first d bits (hashing spec 4.1: blocks use
        // a prefix of the one seed).
        (Some(s), _) => {
            if s.len() < plan.seed_bits() {
                return refuse(format!(
                    "the registered seed holds {} bits, but this extractor needs {} seed bits; nothing was recorded or written",
                    s.len(),
                    plan.seed_bits()
                ));
            }
            SeedInput::Memory(s.slice(0, plan.seed_bits()))
        }
        (None, Some((path, format, allow_longer))) => {
            // A whole-run block streams a packed seed file, as it streams
            // its input: the seed is never held whole.
            let streamed = if whole && format == Format::Packed {
                stream_seed(path, plan.seed_bits(), allow_longer)?
            } else {
                None
            };
            match streamed {
                Some(s) => s,
                None => {
                    if whole {
                        // Any other seed file is read whole and held beside
                        // the run's working memory: a run that cannot fit
                        // with it is refused before it is read.
                        let held = 8 * plan.seed_bits().div_ceil(64) as u64;
                        if let Some(Err(e)) =
                            super::whole_run_plan_of(plan.as_ref(), &source, l.input_bits, held)
                        {
                            return Err(e.into());
                        }
                    }
                    SeedInput::Memory(read_seed(path, format, plan.seed_bits(), allow_longer)?)
                }
            }
        }
        (None, None) => {
            return refuse("give a seed: --seed-file FILE or --seed ID (extract: also --new-seed)")
        }
    };
    Ok(Resolved {
        spec,
        plan,
        seed,
        source,
        input_bits: l.input_bits,
    })
}

/// What the caller sees while a job runs.
pub trait Observer {
    /// Planning and the seed are settled; hashing starts. `auto` is the
    /// planner's decision (planned runs); `bar_total` the input bits to be
    /// hashed (0 when unknown).
    fn ready(&mut self, auto: Option<&AutoPlan>, bar_total: u64) {
        let _ = (auto, bar_total);
    }
    /// The run hashes one block as a whole run laid out as `plan` (called
    /// before [`ready`](Self::ready); the plan says how much memory and
    /// time it takes).
    fn whole_run(&mut self, plan: &crate::extract::whole_run::WholeRun) {
        let _ = plan;
    }
    /// Input bits hashed so far.
    fn progress(&mut self, done: u64) {
        let _ = done;
    }
    /// Hashing ended (successfully or not).
    fn finished(&mut self) {}
}

/// An observer that shows nothing.
pub struct Quiet;

impl Observer for Quiet {}

/// A ledgered run's account.
#[derive(Clone, Debug)]
pub struct SeedUse {
    /// The seed's identifier.
    pub seed: String,
    /// Whether the seed was created by this run.
    pub new_seed: bool,
    /// The use's identifier.
    pub use_id: String,
    /// The error this use charged.
    pub charged: f64,
    /// The seed's account after the commit.
    pub state: ledger::SeedState,
}

/// What a job did.
pub struct Done {
    /// The run's report.
    pub report: Report,
    /// The extractor that ran.
    pub spec: ExtractorSpec,
    /// Its seed length.
    pub seed_bits: usize,
    /// The product engine it ran on, resolved (Toeplitz families; `auto`
    /// names the engine it chose).
    pub engine: Option<crate::extract::Engine>,
    /// The receipt written, if any.
    pub receipt: Option<PathBuf>,
    /// The run's eps_total (planned runs).
    pub eps_total: Option<f64>,
    /// The ledger's account (ledgered runs).
    pub seed_use: Option<SeedUse>,
}

/// Plans a job without running it: the extractor, output length and seed
/// length [`execute`] would choose for it with a fresh seed from the
/// operating system (deficiency 0, no inherited error). Only a job whose
/// choice is [`Choice::Planned`] has anything to plan.
pub fn plan(job: &Job) -> Result<AutoPlan, JobError> {
    match &job.choice {
        Choice::Planned {
            security,
            construction,
        } => plan_run(job, security, *construction, Some(0.0), 0.0),
        Choice::Explicit { .. } => {
            refuse("the job names its extractor and output length: there is nothing to plan")
        }
    }
}

/// Runs a job: plan, seed, (reserve,) hash once, write, receipt, (commit).
pub fn execute(job: &Job, obs: &mut dyn Observer) -> Result<Done, JobError> {
    if let Some(lu) = &job.ledger {
        return execute_ledgered(job, lu, obs);
    }
    let seed_file = match &job.seed {
        SeedChoice::File {
            path,
            format,
            allow_longer,
        } => Some((path.as_path(), *format, *allow_longer)),
        SeedChoice::None => None,
        _ => return refuse("a registered or new seed is recorded in a ledger: give the ledger"),
    };
    let (layout, auto) = match &job.choice {
        Choice::Explicit { family, m } => (
            Layout {
                family: *family,
                m: *m,
                block_bits: job.block_bits,
                input_bits: job.input_bits,
            },
            None,
        ),
        Choice::Planned {
            security,
            construction,
        } => {
            let p = plan_run(job, security, *construction, None, 0.0)?;
            (auto_layout(&p)?, Some((p, security)))
        }
    };
    // A certified run with an explicit seed file: nothing records the
    // seed's uses, so the operator must say they keep that record.
    if let Some((p, sec)) = &auto {
        if p.has_certificate() && seed_file.is_some() && !sec.own_seed_record {
            // A wrong string is named first (as the planner checks it).
            check_certified(job, p, &digest_prefix(&job.input, p.total_bits)?)?;
            return refuse(
                "refused: --seed-file with a certificate records no use of the seed, so reuse on another run (or twice on this raw file) would go unnoticed while the error figure assumes a single use. Rule: a certified run's seed use is recorded. What to do: use a registered seed (--seed ID or --new-seed, recorded in the ledger), or give --own-seed-record to declare that you keep your own record (the receipt then holds a digest of the seed)",
            );
        }
    }
    let receipt = match (&auto, &job.receipt) {
        (Some(_), None) => {
            return refuse(
                "the output goes to standard output: give --receipt FILE for the receipt",
            )
        }
        (Some(_), Some(r)) => Some(r),
        (None, _) => None,
    };
    // Standard output cannot be taken back: its input is checked first.
    let mut known_digest = None;
    if let Some((p, _)) = &auto {
        if job.output.is_std() {
            let d = digest_prefix(&job.input, p.total_bits)?;
            check_certified(job, p, &d)?;
            known_digest = Some(d);
        }
    }
    let r = resolve(&job.input, &layout, job.engine, None, seed_file)?;
    let bar_total = r.bar_total();
    let run = Run {
        input: r.source,
        input_bits: r.input_bits,
        extractor: r.plan.as_ref(),
        seed: r.seed.as_run(),
        output: job.output.clone(),
    };
    announce_whole_run(&run, obs)?;
    obs.ready(auto.as_ref().map(|(p, _)| p), bar_total);
    let cert_digest = auto
        .as_ref()
        .and_then(|(p, _)| p.certificate.as_ref())
        .filter(|_| known_digest.is_none())
        .map(|(path, cert, _)| {
            (
                cert.string.digest.clone(),
                format!("the string {} certifies", path.display()),
            )
        });
    let res = run.execute_checked(
        job.replace,
        cert_digest.as_ref().map(|(d, w)| (d.as_str(), w.as_str())),
        |d| obs.progress(d),
    );
    obs.finished();
    let report = match res {
        Ok(r) => r,
        Err(super::Error::DigestDiffers { .. }) => {
            let (p, _) = auto.as_ref().expect("a certified run is planned");
            let (path, _, _) = p.certificate.as_ref().expect("a certificate");
            return refuse(format!(
                "{}: this is not the string {} certifies (the data digest of its first {} bits differs); nothing was extracted",
                job.input.path.display(),
                path.display(),
                p.total_bits
            ));
        }
        Err(e) => return Err(e.into()),
    };
    let mut receipt_path = None;
    if let (Some((p, sec)), Some(ro)) = (&auto, receipt) {
        let input_digest = known_digest
            .or_else(|| report.input_digest.clone())
            .expect("a planned run digests its input");
        let out_digest = if ro.output_digest && !job.output.is_std() {
            Some(digest_prefix(&job.output, report.output_bits)?)
        } else {
            None
        };
        let seed = SeedRecordInput::File {
            digest: r.seed.data_digest(&report),
            own_record: sec.own_seed_record,
        };
        write_receipt(
            p,
            &ro.path,
            r.plan.as_ref(),
            &report,
            job,
            &input_digest,
            out_digest,
            &seed,
        )?;
        receipt_path = Some(ro.path.clone());
    }
    Ok(Done {
        report,
        spec: r.spec,
        seed_bits: r.plan.seed_bits(),
        engine: r.plan.engine(),
        receipt: receipt_path,
        eps_total: auto.as_ref().map(|(p, _)| p.eps_total()),
        seed_use: None,
    })
}

/// Plans a whole-run block (when the run's one block goes that way) and
/// shows the plan; a block that does not fit the memory limit is refused
/// here, before anything is reserved or written.
fn announce_whole_run(run: &Run, obs: &mut dyn Observer) -> Result<(), JobError> {
    if let Some(p) = run.whole_run_plan() {
        obs.whole_run(&p?);
    }
    Ok(())
}

/// The layout the planner chose.
fn auto_layout(p: &AutoPlan) -> Result<Layout, JobError> {
    Ok(Layout {
        family: p.spec().family,
        m: size(p.planned.m, "the output length")?,
        block_bits: Some(size(p.n, "the block size")?),
        input_bits: Some(p.total_bits),
    })
}

/// Refuses an input that is not the certified string.
fn check_certified(job: &Job, p: &AutoPlan, digest: &str) -> Result<(), JobError> {
    if let Some((path, cert, _)) = &p.certificate {
        if cert.string.digest != digest {
            return refuse(format!(
                "{}: this is not the string {} certifies (the data digest of its first {} bits differs); nothing was extracted",
                job.input.path.display(),
                path.display(),
                p.total_bits
            ));
        }
    }
    Ok(())
}

/// A run whose use is reserved in the ledger before any output exists and
/// committed after the output is durably renamed (the order is kept by
/// [`ledgered::execute`]).
fn execute_ledgered(job: &Job, lu: &LedgerUse, obs: &mut dyn Observer) -> Result<Done, JobError> {
    let Choice::Planned {
        security,
        construction,
    } = &job.choice
    else {
        return refuse(
            "--seed and --new-seed charge the use's error to the seed: give the security inputs \
             (--min-entropy, --min-entropy-rate or --certificate, and --target-error) so the planner computes it",
        );
    };
    if job.output.is_std() {
        return refuse(
            "a run recorded in the ledger writes a file (its digest is recorded): give -o FILE",
        );
    }
    let Some(ro) = &job.receipt else {
        return refuse("a run recorded in the ledger writes a receipt: give its path");
    };
    let ledger = Ledger::new(lu.dir.clone());
    let store = Store::new(ledger.clone());
    // A journal that does not verify stops everything before any work.
    let replay = ledger.read()?;
    if let Some(p) = replay.problem {
        return refuse(p.to_string());
    }
    let (deficiency, eps_seed, stored, source, budget) = match &job.seed {
        SeedChoice::Stored(id) => {
            let s = replay.state.seed(id)?;
            if let Some(l) = s.retired_line {
                return refuse(format!(
                    "seed {id} was retired (line {l}) and may not be used"
                ));
            }
            (
                s.deficiency,
                s.eps_seed,
                Some(store.load(id)?.bits),
                s.source.clone(),
                None,
            )
        }
        SeedChoice::New { budget } => (0.0, 0.0, None, "os".to_string(), Some(*budget)),
        SeedChoice::File { .. } | SeedChoice::None => {
            return refuse(
                "a seed file is not recorded in the ledger: give a registered or new seed",
            )
        }
    };
    let plan = plan_run(job, security, *construction, Some(deficiency), eps_seed)?;
    let layout = auto_layout(&plan)?;
    let seed_bits = match stored {
        Some(b) => b,
        None => Store::os_bits(size(plan.seed_bits(), "the seed length")?)?,
    };
    // The input is read once, digested while it is hashed; a certified
    // string's digest is known now and checked before anything is reserved
    // (a different file charges nothing).
    let certified_digest = plan
        .certificate
        .as_ref()
        .map(|(_, cert, _)| cert.string.digest.clone());
    let r = resolve(&job.input, &layout, job.engine, Some(&seed_bits), None)?;
    let bar_total = r.bar_total();
    let run = Run {
        input: r.source,
        input_bits: r.input_bits,
        extractor: r.plan.as_ref(),
        seed: r.seed.as_run(),
        output: job.output.clone(),
    };
    // A whole run that does not fit is refused before a seed is prepared.
    announce_whole_run(&run, obs)?;
    let (seed_id, pending) = match budget {
        None => (
            match &job.seed {
                SeedChoice::Stored(id) => id.clone(),
                _ => unreachable!("a stored seed"),
            },
            None,
        ),
        Some(budget) => {
            let p = store.prepare(&seed_bits, Origin::Os, budget)?;
            (p.id.clone(), Some(p))
        }
    };
    let n = r.plan.input_bits() as u64;
    let spec = UseSpec {
        seed: seed_id.clone(),
        construction: r.plan.name().to_string(),
        params: [
            ("n".to_string(), n),
            ("m".to_string(), r.plan.output_bits() as u64),
            ("d".to_string(), r.plan.seed_bits() as u64),
        ]
        .into_iter()
        .collect(),
        input_digest: certified_digest,
        blocks: plan.total_bits / n,
        seed_bits: r.plan.seed_bits() as u64,
        error: plan.seed_charge(),
        device_independent: plan.device_independent(),
        cross_run_asserted: lu.cross_run,
        repeat_reason: lu.repeat_reason.clone(),
        output: job.output.path.clone(),
        receipt: Some(ro.path.clone()),
    };
    obs.ready(Some(&plan), bar_total);
    let after = |report: &Report| -> Result<(String, Option<String>), String> {
        let input_digest = report
            .input_digest
            .clone()
            .ok_or("the run did not digest its input")?;
        let out_digest =
            digest_prefix(&job.output, report.output_bits).map_err(|e| e.to_string())?;
        let in_receipt = ro.output_digest.then(|| out_digest.clone());
        write_receipt(
            &plan,
            &ro.path,
            r.plan.as_ref(),
            report,
            job,
            &input_digest,
            in_receipt,
            &SeedRecordInput::Registered {
                id: &seed_id,
                source: &source,
            },
        )
        .map_err(|e| e.to_string())?;
        let bytes = std::fs::read(&ro.path).map_err(|e| format!("{}: {e}", ro.path.display()))?;
        Ok((out_digest, Some(blake3::hash(&bytes).to_hex().to_string())))
    };
    let res = ledgered::execute(
        &ledger,
        &store,
        &spec,
        pending,
        &run,
        job.replace,
        |d| obs.progress(d),
        after,
    );
    obs.finished();
    let out = match res {
        Ok(o) => o,
        Err(ledgered::Error::Unreserved(super::Error::DigestDiffers { .. })) => {
            let (path, _, _) = plan
                .certificate
                .as_ref()
                .expect("only a certificate gives a digest");
            return refuse(format!(
                "{}: this is not the string {} certifies (the data digest of its first {} bits differs); nothing was extracted, reserved or charged",
                job.input.path.display(),
                path.display(),
                plan.total_bits
            ));
        }
        Err(e) => return Err(e.into()),
    };
    Ok(Done {
        report: out.report,
        spec: r.spec,
        seed_bits: r.plan.seed_bits(),
        engine: r.plan.engine(),
        receipt: Some(ro.path.clone()),
        eps_total: Some(plan.eps_total()),
        seed_use: Some(SeedUse {
            seed: seed_id,
            new_seed: budget.is_some(),
            use_id: out.use_id,
            charged: spec.error,
            state: out.seed_state,
        }),
    })
}

/// The seed as the receipt records it.
enum SeedRecordInput<'a> {
    /// A registered seed and its source.
    Registered { id: &'a str, source: &'a str },
    /// An explicit seed file: its data digest, and whether the operator
    /// keeps their own record of its uses.
    File { digest: String, own_record: bool },
}

/// Writes the receipt (owner-only, atomically).
#[allow(clippy::too_many_arguments)]
fn write_receipt(
    p: &AutoPlan,
    path: &Path,
    plan: &dyn Extractor,
    report: &Report,
    job: &Job,
    input_digest: &str,
    output_digest: Option<String>,
    seed: &SeedRecordInput<'_>,
) -> Result<(), JobError> {
    let b = &p.input.budget;
    let mut notes = vec![
        "Private: this receipt holds a digest of the raw input; keep it with the ledger, not in public.".to_string(),
    ];
    if output_digest.is_some() {
        notes.push(
            "The output digest is included on request: once it is published, only a computational guarantee is left for the output."
                .to_string(),
        );
    }
    let (own_record, seed_digest) = match seed {
        SeedRecordInput::File { digest, own_record } => (*own_record, Some(digest.clone())),
        SeedRecordInput::Registered { .. } => (false, None),
    };
    let r = Receipt {
        schema: receipt::SCHEMA.to_string(),
        tool: format!("sluice {}", env!("CARGO_PKG_VERSION")),
        construction: receipt::Construction {
            extractor: plan.name().to_string(),
            input_bits: plan.input_bits() as u64,
            output_bits: plan.output_bits() as u64,
            seed_bits: plan.seed_bits() as u64,
            params: p.spec().params(),
            reason: p.reason.clone(),
        },
        blocks: receipt::Blocks {
            count: report.blocks,
            input_bits_total: p.total_bits,
            trailing_bits_unused: report.trailing_bits_unused,
            order: "file order".to_string(),
        },
        input: receipt::InputRecord {
            digest: input_digest.to_string(),
            format: format!("{:?}", job.input.format).to_lowercase(),
            bit_order: format!("{:?}", job.input.order).to_lowercase(),
        },
        seed: receipt::SeedRecord {
            id: match seed {
                SeedRecordInput::Registered { id, .. } => Some(id.to_string()),
                SeedRecordInput::File { .. } => None,
            },
            bits: plan.seed_bits() as u64,
            source: match seed {
                SeedRecordInput::Registered { source, .. } => {
                    format!("registered seed ({source}), use recorded in the ledger")
                }
                SeedRecordInput::File { own_record: true, .. } => "explicit seed file (not registered in a ledger; the operator declared they keep their own record of its uses)".to_string(),
                SeedRecordInput::File { .. } => "explicit seed file (not registered in a ledger)".to_string(),
            },
            deficiency: b.seed_deficiency,
            digest: seed_digest,
            own_record,
        },
        certificate: p.certificate.as_ref().map(|(_, cert, digest)| {
            receipt::CertificateRecord {
                file_digest: digest.clone(),
                setup: cert.setup.label().to_string(),
                device_independent: cert.device_independent,
                mode: Some(
                    match cert.mode {
                        crate::certify::Mode::EntropyAccumulation => "entropy-accumulation",
                        crate::certify::Mode::IidEstimate => "iid-estimate",
                    }
                    .to_string(),
                ),
                bound: Some(cert.bound_name().to_string()),
                record_form: Some(cert.record.form.clone()),
                labels: cert.labels.clone(),
            }
        }),
        labels: p.labels.clone(),
        errors: receipt::Errors {
            formula: "eps_cert + eps_seed + L (2 eps_s + 2^s eps_ext)".to_string(),
            eps_cert: b.eps_cert,
            eps_seed: b.eps_seed,
            eps_s: b.eps_s,
            eps_ext: p.planned.eps_ext,
            seed_deficiency: b.seed_deficiency,
            blocks: b.blocks,
            eps_total: p.planned.eps_total,
            eps_total_rounded_up: up4(p.planned.eps_total),
            target: b.eps_total,
            form: "conservative".to_string(),
        },
        meaning: compose::meaning(p.input.can_abort.unwrap_or(false)).to_string(),
        assumed: select::assumed_conditions(&p.input)
            .into_iter()
            .map(String::from)
            .collect(),
        output_digest,
        notes,
    };
    let mut f = AtomicFile::create(path, Kind::Receipt, job.replace)?;
    serde_json::to_writer_pretty(&mut f, &r).map_err(std::io::Error::from)?;
    f.write_all(b"\n")?;
    f.commit().map_err(|e| JobError::Context {
        context: format!("{}: cannot write the receipt", path.display()),
        source: Box::new(e),
    })?;
    Ok(())
}

/// A receipt as `verify` uses it: the layout, the input digest it names,
/// and the labels that travel with the verdict (its own and its
/// certificate's).
pub struct ReceiptLayout {
    /// The layout.
    pub layout: Layout,
    /// The raw input's data digest.
    pub input_digest: String,
    /// The labels.
    pub labels: Vec<String>,
}

/// Reads a receipt of `sluice extract` for verification.
pub fn read_receipt(path: &Path) -> Result<ReceiptLayout, JobError> {
    let text = std::fs::read_to_string(path).map_err(|e| JobError::Context {
        context: format!("{}: cannot read the receipt", path.display()),
        source: Box::new(e),
    })?;
    let r = Receipt::from_json_str(&text)
        .map_err(|e| JobError::Refused(format!("{}: {e}", path.display())))?;
    let mut labels = r.labels.clone();
    if let Some(c) = &r.certificate {
        for x in &c.labels {
            if !labels.contains(x) {
                labels.push(x.clone());
            }
        }
        if !c.device_independent && !labels.iter().any(|x| x.contains("not device-independent")) {
            labels.push("not device-independent".into());
        }
    }
    let name = r.construction.extractor.as_str();
    if !matches!(name, "toeplitz" | "modified-toeplitz" | "trevisan") {
        return refuse(format!(
            "{}: extractor {name:?} is not one this version runs",
            path.display()
        ));
    }
    let n = size(r.construction.input_bits, "the receipt's block size")?;
    let m = size(r.construction.output_bits, "the receipt's output length")?;
    let spec =
        ExtractorSpec::from_params(name, n, m, &r.construction.params).map_err(|e| match e {
            SpecError::Param(p) => JobError::Refused(format!("{}: params.{p}", path.display())),
            e => e.into(),
        })?;
    Ok(ReceiptLayout {
        layout: Layout {
            family: spec.family,
            m,
            block_bits: Some(n),
            input_bits: Some(r.blocks.input_bits_total),
        },
        input_digest: r.input.digest,
        labels,
    })
}

/// A verification: the run to recompute and the claimed output.
#[derive(Clone, Debug)]
pub struct VerifyJob {
    /// The raw input.
    pub input: BitFile,
    /// The layout (from a receipt, [`read_receipt`], or given).
    pub layout: Layout,
    /// The input digest the layout was made from (a receipt's), checked
    /// before anything is recomputed.
    pub input_digest: Option<String>,
    /// The product engine.
    pub engine: Engine,
    /// The seed file, its format, and whether a longer one is allowed.
    pub seed_file: Option<(PathBuf, Format, bool)>,
    /// A registered seed instead: the ledger folder and the seed's id. It
    /// is read from the seed store on this machine and nothing is written:
    /// recomputing where the seed already lives discloses nothing, so no
    /// disclosure is recorded and the seed stays usable.
    pub stored_seed: Option<(PathBuf, String)>,
    /// The claimed output.
    pub claimed: BitFile,
}

/// The outcome of [`verify`].
pub enum Checked {
    /// The input is not the one the receipt was made from.
    WrongInput,
    /// The verdict of the recomputation.
    Verdict(super::Verdict),
}

/// Recomputes a run and compares the claimed output with it.
pub fn verify(job: &VerifyJob, obs: &mut dyn Observer) -> Result<Checked, JobError> {
    let seed_file = job
        .seed_file
        .as_ref()
        .map(|(p, f, a)| (p.as_path(), *f, *a));
    let stored = match &job.stored_seed {
        Some((dir, id)) => {
            let store = Store::new(Ledger::new(dir.clone()));
            Some(store.load(id)?.bits)
        }
        None => None,
    };
    let r = resolve(
        &job.input,
        &job.layout,
        job.engine,
        stored.as_ref(),
        seed_file,
    )?;
    let bar_total = r.bar_total();
    let run = Run {
        input: r.source,
        input_bits: r.input_bits,
        extractor: r.plan.as_ref(),
        seed: r.seed.as_run(),
        output: job.claimed.clone(),
    };
    announce_whole_run(&run, obs)?;
    obs.ready(None, bar_total);
    // The input is read once: its digest comes from the bits recomputed.
    let v = run.verify(&job.claimed, |d| obs.progress(d));
    obs.finished();
    let v = v?;
    if let Some(want) = &job.input_digest {
        if v.report.input_digest.as_ref() != Some(want) {
            return Ok(Checked::WrongInput);
        }
    }
    Ok(Checked::Verdict(v))
}

/// Records a raw file's data digest in the ledger as soon as it is
/// produced, before any seed is chosen for it (hashing spec 4.6). Returns
/// the journal line and the number of bits committed.
pub fn commit_raw(ledger: &Ledger, file: &BitFile, origin: &str) -> Result<(u64, u64), JobError> {
    if file.is_std() {
        return refuse("commit-raw needs a file, not standard input");
    }
    let bits = count_bits(file)?;
    if bits == 0 {
        return refuse(format!(
            "{}: the file holds no bits; nothing was recorded",
            file.path.display()
        ));
    }
    let digest = digest_prefix(file, bits)?;
    let (line, _) = ledger.append(|st| {
        Ok::<_, ledger::Error>((
            vec![ledger::Body::RawCommitted {
                digest,
                bits,
                origin: origin.to_string(),
            }],
            st.lines + 1 + u64::from(st.lines == 0),
        ))
    })?;
    Ok((line, bits))
}
