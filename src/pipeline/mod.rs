//! One extraction run: read blocks, extract, write the output atomically.
//!
//! This is the only layer where files and extractors meet. It streams the
//! input (a block and a batch of blocks in memory, never the whole file when
//! blocks are given), runs blocks of one batch in parallel on all cores, and
//! writes the output under a temporary name that is renamed only when
//! everything has been written and synced. Seeds are never written, printed
//! or logged here.

#![forbid(unsafe_code)]

pub mod job;
pub mod ledgered;
pub mod receipt;
pub mod security;
pub mod seeds;
pub mod two_source;

use crate::bits::io::PackedFileSource;
use crate::bits::io::{open_input, BitWriter, BlockReader};
use crate::bits::source::WordsSource;
use crate::bits::{BitOrder, Bits, Error as BitsError, ErrorKind as BitsErrorKind, Format};
use crate::extract::whole_run::{Beside, Family, WholeRun};
use crate::extract::{Engine, Extractor, SeededExtractor};
use crate::files::{fault, AtomicFile, Kind, Replace};
use rayon::prelude::*;
use std::io::{self, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::time::Duration;

/// Where bits come from and how they are written.
#[derive(Clone, Debug)]
pub struct BitFile {
    /// Path, or `-` for standard input / output.
    pub path: PathBuf,
    /// File format.
    pub format: Format,
    /// Bit order inside packed bytes.
    pub order: BitOrder,
}

impl BitFile {
    /// Whether this is standard input / output.
    pub fn is_std(&self) -> bool {
        self.path.as_os_str() == "-"
    }
}

/// Where a run's input comes from.
#[derive(Clone, Debug)]
pub enum Source {
    /// Streamed from a file or standard input.
    File(BitFile),
    /// Already in memory (read whole to learn its length); `name` is for
    /// messages.
    Memory {
        /// The bits.
        bits: Bits,
        /// The file they came from.
        name: PathBuf,
    },
}

impl Source {
    /// The file name for messages.
    pub fn name(&self) -> &Path {
        match self {
            Source::File(f) => &f.path,
            Source::Memory { name, .. } => name,
        }
    }

    /// The blocks of the input: streamed from the file, or cut from the
    /// bits already in memory (never re-packed and parsed again).
    fn reader(&self) -> Result<Blocks<'_>, BitsError> {
        Ok(match self {
            Source::File(f) => Blocks::File(BlockReader::new(
                open_input(&f.path)?,
                &f.path,
                f.format,
                f.order,
            )),
            Source::Memory { bits, .. } => Blocks::Memory { bits, pos: 0 },
        })
    }
}

/// Consecutive blocks of a run's input.
enum Blocks<'a> {
    File(BlockReader<Box<dyn io::Read + Send + 'a>>),
    Memory { bits: &'a Bits, pos: usize },
}

impl Blocks<'_> {
    /// As [`BlockReader::next_block`].
    fn next_block(&mut self, out: &mut Bits) -> Result<bool, BitsError> {
        match self {
            Blocks::File(r) => r.next_block(out),
            Blocks::Memory { bits, pos } => {
                let n = out.len();
                if bits.len() - *pos < n {
                    return Ok(false);
                }
                out.words_mut().fill(0);
                crate::bits::copy_bits(bits.words(), *pos, out.words_mut(), 0, n);
                out.clear_tail();
                *pos += n;
                Ok(true)
            }
        }
    }

    /// Bits left after the last full block.
    fn remainder_bits(&self) -> usize {
        match self {
            Blocks::File(r) => r.remainder_bits(),
            Blocks::Memory { bits, pos } => bits.len() - pos,
        }
    }

    /// Bits decoded so far.
    fn bits_available(&self) -> u64 {
        match self {
            Blocks::File(r) => r.bits_available(),
            Blocks::Memory { bits, .. } => bits.len() as u64,
        }
    }

    /// Bytes of the file read so far (for error offsets).
    fn bytes_read(&self) -> u64 {
        match self {
            Blocks::File(r) => r.bytes_read(),
            Blocks::Memory { bits, .. } => (bits.len() as u64).div_ceil(8),
        }
    }
}

/// A run's seed: bits in memory, or a packed seed file that a whole-run
/// block reads piece by piece (never held whole; any other run loads it).
#[derive(Clone, Copy, Debug)]
pub enum RunSeed<'a> {
    /// The bits (exactly the extractor's seed length).
    Memory(&'a Bits),
    /// The first `bits` bits of a packed seed file (MSB first, as every
    /// seed file), `bits` the extractor's seed length.
    Packed {
        /// The seed file.
        path: &'a Path,
        /// Bits used.
        bits: u64,
    },
}

impl<'a> From<&'a Bits> for RunSeed<'a> {
    fn from(b: &'a Bits) -> Self {
        RunSeed::Memory(b)
    }
}

impl RunSeed<'_> {
    /// Length in bits.
    pub fn bits(&self) -> u64 {
        match self {
            RunSeed::Memory(b) => b.len() as u64,
            RunSeed::Packed { bits, .. } => *bits,
        }
    }

    /// Bytes the seed holds in memory while the run lasts.
    pub fn held_bytes(&self) -> u64 {
        match self {
            RunSeed::Memory(b) => 8 * b.len().div_ceil(64) as u64,
            RunSeed::Packed { .. } => 0,
        }
    }

    /// The bits in memory (read from the file when streamed).
    fn load(&self) -> Result<std::borrow::Cow<'_, Bits>, Error> {
        Ok(match self {
            RunSeed::Memory(b) => std::borrow::Cow::Borrowed(*b),
            RunSeed::Packed { path, bits } => {
                let n = usize::try_from(*bits).map_err(|_| {
                    BitsError::from(io::Error::other("the seed is too long for this platform"))
                        .in_file(path)
                })?;
                crate::files::space::check_bits(n as u128, "the seed")?;
                std::borrow::Cow::Owned(crate::bits::io::read_bits(
                    path,
                    Format::Packed,
                    BitOrder::Msb,
                    Some(n),
                )?)
            }
        })
    }
}

/// The seed a job resolved: read into memory, or a packed seed file left
/// on disk for a whole-run block to stream ([`RunSeed`]).
#[derive(Clone, Debug)]
pub enum SeedInput {
    /// Read whole.
    Memory(Bits),
    /// Streamed: the first `bits` bits of the packed file at `path`.
    Packed {
        /// The seed file.
        path: PathBuf,
        /// Bits used.
        bits: u64,
    },
}

impl SeedInput {
    /// As a run's seed.
    pub fn as_run(&self) -> RunSeed<'_> {
        match self {
            SeedInput::Memory(b) => RunSeed::Memory(b),
            SeedInput::Packed { path, bits } => RunSeed::Packed { path, bits: *bits },
        }
    }

    /// The seed's data digest (`spec/conventions.md`), as receipts record
    /// it: from the bits in memory, or for a streamed seed the one the run
    /// computed while reading it ([`Report::seed_digest`]); the same value
    /// either way.
    ///
    /// # Panics
    /// If a streamed seed's report has no digest (the run did not stream
    /// it).
    pub fn data_digest(&self, report: &Report) -> String {
        match self {
            SeedInput::Memory(b) => crate::bits::digest::data_digest(b),
            SeedInput::Packed { .. } => report
                .seed_digest
                .clone()
                .expect("a streamed seed is digested by its run"),
        }
    }
}

/// An extraction with the seed given explicitly (nothing is recorded).
pub struct Run<'a> {
    /// The raw input.
    pub input: Source,
    /// Use only the first this many bits of the input.
    pub input_bits: Option<u64>,
    /// The planned extractor; its input length is the block size.
    pub extractor: &'a dyn Extractor,
    /// The seed (exactly the extractor's seed length).
    pub seed: RunSeed<'a>,
    /// Where the output goes.
    pub output: BitFile,
}

/// What a run did.
#[derive(Clone, Debug, Default, serde::Serialize)]
pub struct Report {
    /// Blocks hashed.
    pub blocks: u64,
    /// Bits per block.
    pub block_bits: u64,
    /// Input bits hashed (`blocks * block_bits`).
    pub input_bits_used: u64,
    /// Input bits after the last full block, not hashed.
    pub trailing_bits_unused: u64,
    /// Output bits written.
    pub output_bits: u64,
    /// The data digest (`spec/conventions.md`) of the input bits the run
    /// was asked for (`input_bits`, or the whole input held in memory),
    /// computed from the very bits that were hashed, in the same pass.
    /// Private: never printed.
    #[serde(skip)]
    pub input_digest: Option<String>,
    /// The data digest of a seed streamed from its file (a whole-run block
    /// with [`RunSeed::Packed`]), computed from the words the run read in
    /// order and one sequential read of the rest; `None` for a seed in
    /// memory. Private: never printed.
    #[serde(skip)]
    pub seed_digest: Option<String>,
}

/// Errors of a run.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// Reading or parsing the input.
    #[error(transparent)]
    Input(#[from] BitsError),
    /// Writing the output.
    #[error("{path}: {source}")]
    Output {
        /// The output path.
        path: PathBuf,
        /// The cause.
        source: io::Error,
    },
    /// A size that cannot be held in memory.
    #[error(transparent)]
    TooLarge(Box<crate::files::space::TooLarge>),
    /// A whole-run block cannot be planned or read.
    #[error(transparent)]
    WholeRun(Box<crate::extract::whole_run::Error>),
    /// The input read while hashing is not the one expected (its data
    /// digest differs from the one given beforehand: the file changed, or
    /// is not the certified or reserved string); nothing was written.
    #[error("{}: the data digest of the bits hashed differs from the one expected ({expected_for}): the input changed or is not that string; nothing was written", path.display())]
    DigestDiffers {
        /// The input path.
        path: PathBuf,
        /// What the expected digest came from.
        expected_for: String,
    },
    /// The input holds no full block.
    #[error("{path}: the input holds {available} bits, fewer than one block of {block} bits; nothing was written")]
    NoBlock {
        /// The input path.
        path: PathBuf,
        /// Bits available.
        available: u64,
        /// Block size.
        block: u64,
    },
}

impl From<crate::extract::whole_run::Error> for Error {
    fn from(e: crate::extract::whole_run::Error) -> Self {
        Error::WholeRun(Box::new(e))
    }
}

impl From<crate::files::space::TooLarge> for Error {
    fn from(e: crate::files::space::TooLarge) -> Self {
        Error::TooLarge(Box::new(e))
    }
}

/// Blocks per parallel batch, and the memory it may take.
const BATCH_BYTES: usize = 256 << 20;

/// From this block length on, one Toeplitz or modified Toeplitz block read
/// from a packed file goes through [`crate::extract::whole_run`] (input read
/// piece by piece, output written chunk by chunk, memory bounded).
pub const WHOLE_RUN_MIN_BITS: usize = 1 << 24;

/// Bytes of the buffers between the files and a whole-run block, held
/// beside its layout: the byte buffers of the input and seed file sources
/// ([`crate::bits::io::SOURCE_PIECE_BYTES`] each), the digests' byte
/// buffers and the words read again at the end (`FEED_WORDS` words each),
/// the output file's write buffer (1 MiB) or the claimed output's reader
/// (verify), with room to spare.
pub const WHOLE_RUN_BUFFER_BYTES: u64 = 4 << 20;

/// What a whole-run block of a run holds beside its layout: `seed` bytes
/// of seed in memory, and the file buffers.
fn beside(seed: u64) -> Beside {
    Beside {
        seed_bytes: seed,
        buffer_bytes: WHOLE_RUN_BUFFER_BYTES,
    }
}

static MEMORY_LIMIT: AtomicU64 = AtomicU64::new(0);

/// Sets the working memory a whole-run block may take, in bytes, for the
/// rest of the process (0: 90% of the memory available when it starts).
pub fn set_memory_limit(bytes: u64) {
    MEMORY_LIMIT.store(bytes, Ordering::Relaxed);
}

/// The working memory a whole-run block may take now.
pub fn memory_limit() -> u64 {
    match MEMORY_LIMIT.load(Ordering::Relaxed) {
        0 => crate::files::space::available_memory()
            .map(|a| a / 10 * 9)
            .unwrap_or(u64::MAX),
        b => b,
    }
}

/// How often the progress of a running batch is read.
const PROGRESS_EVERY: Duration = Duration::from_millis(100);

/// Runs one batch of blocks on all cores. While it runs, the calling thread
/// reads the output bits done (reported by the extractor from its workers,
/// [`SeededExtractor::extract_with_progress`]) every [`PROGRESS_EVERY`] and
/// calls `progress` with the equivalent number of input bits of the batch
/// (done * n / m, below the batch total); the caller reports the exact total
/// after the batch.
fn run_batch(
    bound: &dyn SeededExtractor,
    inputs: &[Bits],
    outputs: &mut [Bits],
    (n, m): (usize, usize),
    progress: &mut dyn FnMut(u64),
) {
    let done = AtomicU64::new(0);
    let mut work = |done: &AtomicU64| {
        inputs
            .par_iter()
            .zip(outputs.par_iter_mut())
            .for_each(|(x, y)| bound.extract_with_progress(x, y, done))
    };
    if rayon::current_thread_index().is_some() {
        // Already on a pool thread: waiting here would hold a worker, so
        // run without intermediate reports.
        work(&done);
        return;
    }
    /// Marks the batch finished even if it panics (the scope re-raises the
    /// panic), so the reading loop always ends.
    struct Finish<'a>(&'a AtomicBool, std::thread::Thread);
    impl Drop for Finish<'_> {
        fn drop(&mut self) {
            self.0.store(true, Ordering::Release);
            self.1.unpark();
        }
    }
    let finished = AtomicBool::new(false);
    let total_out = (inputs.len() * m) as u128;
    let me = std::thread::current();
    rayon::in_place_scope(|s| {
        let (finished, done) = (&finished, &done);
        s.spawn(move |_| {
            let _finish = Finish(finished, me);
            work(done);
        });
        let mut last = 0u64;
        while !finished.load(Ordering::Acquire) {
            std::thread::park_timeout(PROGRESS_EVERY);
            let d = done.load(Ordering::Relaxed);
            if d != last && !finished.load(Ordering::Acquire) {
                last = d;
                let d = (d as u128).min(total_out.saturating_sub(1));
                progress((d * n as u128 / m.max(1) as u128) as u64);
            }
        }
    });
}

impl Run<'_> {
    /// Runs the extraction; `progress` is called with the input bits
    /// consumed so far: after every batch of blocks and, while a batch runs,
    /// about every 100 ms with the input-bit equivalent of the output bits
    /// the extractor reports done (so one long block moves it too).
    pub fn execute(&self, progress: impl FnMut(u64)) -> Result<Report, Error> {
        self.execute_replacing(Replace::SameKind, progress)
    }

    /// As [`Run::execute`]; an existing output file is replaced only as
    /// `replace` allows (`--force` gives [`Replace::Any`]).
    pub fn execute_replacing(
        &self,
        replace: Replace,
        progress: impl FnMut(u64),
    ) -> Result<Report, Error> {
        self.execute_checked(replace, None, progress)
    }

    /// As [`Run::execute_replacing`], and when `expected` names a data
    /// digest (with what it came from, for the message), refuses to rename
    /// the output unless the bits hashed have that digest: the input is
    /// read once, digested while it is hashed. Needs `input_bits` (or an
    /// input in memory) so the digest's length is known up front.
    pub fn execute_checked(
        &self,
        replace: Replace,
        expected: Option<(&str, &str)>,
        progress: impl FnMut(u64),
    ) -> Result<Report, Error> {
        let (report, pending) = self.execute_to_temp(replace, progress)?;
        if let Some((digest, what)) = expected {
            if report.input_digest.as_deref() != Some(digest) {
                return Err(Error::DigestDiffers {
                    path: self.input.name().to_path_buf(),
                    expected_for: what.to_string(),
                });
            }
        }
        pending.finish()?;
        Ok(report)
    }

    /// Runs the extraction into the output's temporary file and stops
    /// before the rename: the caller checks the report (the input digest)
    /// and records what it must, then calls [`Pending::finish`]. Dropping
    /// the [`Pending`] removes the temporary file. Standard output cannot
    /// be held back: it is written as the run goes.
    pub fn execute_to_temp(
        &self,
        replace: Replace,
        progress: impl FnMut(u64),
    ) -> Result<(Report, Pending), Error> {
        let out_err = |e: io::Error| Error::Output {
            path: self.output.path.clone(),
            source: e,
        };
        let mut sink = Sink::open(&self.output, replace).map_err(out_err)?;
        let report = self.execute_with(progress, |y| {
            sink.write_bits(y).map_err(|e| {
                out_err(crate::files::space::explain(
                    e,
                    &self.output.path,
                    Kind::ExtractOutput.describe(),
                ))
            })
        })?;
        Ok((
            report,
            Pending {
                sink,
                path: self.output.path.clone(),
            },
        ))
    }

    /// Recomputes the output and compares it with a claimed output file
    /// (the `output` field of the run is ignored).
    pub fn verify(&self, claimed: &BitFile, progress: impl FnMut(u64)) -> Result<Verdict, Error> {
        let r = open_input(&claimed.path)?;
        let mut cr = BlockReader::new(r, &claimed.path, claimed.format, claimed.order);
        let mut buf = Bits::new();
        let mut v = Verdict::default();
        let mut short = false;
        // Output pieces come as blocks of m bits, or as the chunks of one
        // whole-run block.
        let report = self.execute_with(progress, |y| {
            let at = v.computed_bits;
            v.computed_bits += y.len() as u64;
            if short {
                return Ok(());
            }
            buf.resize(y.len());
            if cr.next_block(&mut buf)? {
                if let Some(i) = y.first_difference(&buf) {
                    v.first_difference.get_or_insert(at + i as u64);
                    v.differing_bits += y.hamming_distance(&buf);
                }
            } else {
                // The claimed output ends inside this block.
                short = true;
                let mut rest = Bits::new();
                cr.read_to_end(&mut rest)?;
                let head = y.slice(0, rest.len());
                if let Some(i) = head.first_difference(&rest) {
                    v.first_difference.get_or_insert(at + i as u64);
                    v.differing_bits += head.hamming_distance(&rest);
                }
                v.first_difference.get_or_insert(at + rest.len() as u64);
            }
            Ok(())
        })?;
        let mut rest = Bits::new();
        if !short {
            cr.read_to_end(&mut rest)?;
        }
        v.claimed_bits = cr.bits_consumed();
        // Packed and hex files pad the last byte with zero bits; more than
        // that, or nonzero padding, is a difference.
        let pad = (8 - v.computed_bits % 8) % 8;
        let pad_ok =
            claimed.format != Format::Ascii && rest.len() as u64 == pad && rest.count_ones() == 0;
        if !rest.is_empty() && !pad_ok {
            v.extra_claimed_bits = rest.len() as u64;
            v.first_difference.get_or_insert(v.computed_bits);
        } else {
            v.claimed_bits -= rest.len() as u64;
        }
        v.matches = v.first_difference.is_none();
        v.report = report;
        Ok(v)
    }

    /// Runs the blocks and hands each output block to `consume`, in order.
    pub fn execute_with(
        &self,
        mut progress: impl FnMut(u64),
        mut consume: impl FnMut(&Bits) -> Result<(), Error>,
    ) -> Result<Report, Error> {
        let n = self.extractor.input_bits();
        let m = self.extractor.output_bits();
        if let Some((family, path, order, total)) = self.whole_run_input() {
            return self.execute_whole_run(family, path, order, total, progress, consume);
        }
        // Sizes are checked against what the input can hold and against
        // the memory available before the batch is allocated.
        if let Source::File(f) = &self.input {
            if let Some(max) = crate::bits::io::max_bits_in(&f.path, f.format) {
                let want = self.input_bits.unwrap_or(n as u64).max(n as u64);
                if want > max {
                    return Err(BitsError::new(BitsErrorKind::TooShort {
                        wanted: want,
                        available: max,
                    })
                    .in_file(&f.path)
                    .into());
                }
            }
        }
        crate::files::space::check_bits(
            n as u128 + m as u128,
            &format!("a block of {n} input bits and {m} output bits"),
        )?;
        let mut reader = self.input.reader()?;
        let input_bits = match &self.input {
            Source::Memory { bits, .. } => Some(self.input_bits.unwrap_or(bits.len() as u64)),
            Source::File(_) => self.input_bits,
        };
        let max_blocks = input_bits.map(|t| t / n as u64);
        // The input's data digest, from the bits hashed (one pass).
        let mut digest = input_bits.map(|t| {
            BitWriter::new(
                DigestSink(crate::bits::digest::DataDigest::new(t)),
                Format::Packed,
                BitOrder::Msb,
            )
        });
        let seed = self.seed.load()?;
        let bound = self.extractor.with_seed(&seed);

        let threads = rayon::current_num_threads().max(1);
        let per_block = (n + m).div_ceil(8).max(1);
        let batch = (2 * threads).min((BATCH_BYTES / per_block).max(1));
        let mut inputs: Vec<Bits> = (0..batch).map(|_| Bits::zeros(n)).collect();
        let mut outputs: Vec<Bits> = (0..batch).map(|_| Bits::zeros(m)).collect();
        let mut report = Report {
            block_bits: n as u64,
            ..Report::default()
        };
        let mut done = false;
        while !done {
            let mut filled = 0;
            while filled < batch {
                if max_blocks.is_some_and(|mb| report.blocks + filled as u64 >= mb) {
                    done = true;
                    break;
                }
                if !reader.next_block(&mut inputs[filled])? {
                    done = true;
                    break;
                }
                filled += 1;
            }
            if let Some(d) = digest.as_mut() {
                for x in &inputs[..filled] {
                    d.write_bits(x).map_err(BitsError::from)?;
                }
            }
            if filled > 0 {
                let before = report.blocks * n as u64;
                run_batch(
                    bound.as_ref(),
                    &inputs[..filled],
                    &mut outputs[..filled],
                    (n, m),
                    &mut |p| progress(before + p),
                );
                for y in &outputs[..filled] {
                    consume(y)?;
                }
                report.blocks += filled as u64;
                progress(report.blocks * n as u64);
            }
        }
        report.input_bits_used = report.blocks * n as u64;
        report.output_bits = report.blocks * m as u64;
        report.trailing_bits_unused = match input_bits {
            Some(total) => {
                // The user asked for `total` bits: the input must hold them.
                let rest = total - report.input_bits_used;
                let mut tail = Bits::zeros(rest as usize);
                if !reader.next_block(&mut tail)? {
                    return Err(BitsError::new(BitsErrorKind::TooShort {
                        wanted: total,
                        available: reader.bits_available(),
                    })
                    .at_offset(reader.bytes_read())
                    .in_file(self.input.name())
                    .into());
                }
                if let Some(d) = digest.as_mut() {
                    d.write_bits(&tail).map_err(BitsError::from)?;
                }
                rest
            }
            None => reader.remainder_bits() as u64,
        };
        if let Some(d) = digest {
            let sink = d.finish().map_err(BitsError::from)?;
            report.input_digest = Some(sink.0.finish_hex());
        }
        if report.blocks == 0 {
            return Err(Error::NoBlock {
                path: self.input.name().to_path_buf(),
                available: reader.bits_available(),
                block: n as u64,
            });
        }
        Ok(report)
    }
}

impl Run<'_> {
    /// The input of a whole-run block: a Toeplitz or modified Toeplitz
    /// extractor of at least [`WHOLE_RUN_MIN_BITS`] input bits, a packed
    /// regular file holding one block (and less than a second).
    fn whole_run_input(&self) -> Option<(Family, &Path, BitOrder, u64)> {
        whole_run_input_of(self.extractor, &self.input, self.input_bits)
    }

    /// The whole-run plan of this run, when its one block goes that way
    /// (see [`WHOLE_RUN_MIN_BITS`]); planned again by the run itself. A
    /// seed in memory counts against [`memory_limit`].
    pub fn whole_run_plan(&self) -> Option<Result<WholeRun, Error>> {
        whole_run_plan_of(
            self.extractor,
            &self.input,
            self.input_bits,
            self.seed.held_bytes(),
        )
    }

    /// One block through [`WholeRun`]: planned within [`memory_limit`], the
    /// input read from the file piece by piece, the output handed to
    /// `consume` chunk by chunk; `progress` reports input bits (a run in
    /// several passes over the input reports its share of each).
    fn execute_whole_run(
        &self,
        family: Family,
        path: &Path,
        order: BitOrder,
        total: u64,
        mut progress: impl FnMut(u64),
        mut consume: impl FnMut(&Bits) -> Result<(), Error>,
    ) -> Result<Report, Error> {
        let (n, m) = (
            self.extractor.input_bits() as u64,
            self.extractor.output_bits() as u64,
        );
        let engine = self.extractor.engine().unwrap_or(Engine::Auto);
        let plan = WholeRun::new_holding(
            family,
            n,
            m,
            engine,
            memory_limit(),
            beside(self.seed.held_bytes()),
        )?;
        let mut file = PackedFileSource::open(path, n, order).map_err(Error::Input)?;
        // The input's data digest (of all `total` bits) from the words the
        // run reads, as far as its first pass reads them in order.
        let mut input = DigestingSource::new(&mut file, total);
        if family == Family::ModifiedToeplitz {
            // The run reads the tail (bits m .. n) first and adds the head
            // (bits 0 .. m) at the end. Reading the head's whole words in
            // order now lets the digest run through them and on into the
            // tail pass, so the input is read again only for the head
            // (m bits), not in full by `finish`.
            use crate::bits::source::BitSource;
            let head_words = m / 64;
            let mut buf = vec![0u64; HEAD_READ_WORDS];
            let mut w = 0u64;
            while w < head_words {
                let k = (head_words - w).min(HEAD_READ_WORDS as u64) as usize;
                input
                    .read_words(w, &mut buf[..k])
                    .map_err(|e| Error::Input(BitsError::from(e).in_file(path)))?;
                w += k as u64;
            }
        }
        // The seed: from memory, or streamed from its file. A streamed
        // seed's data digest comes from the words the run reads in order
        // (the in-memory layout reads it whole from its start) and, for
        // what no read covered in order (tiles read the seed's segments
        // from its end backwards), one extra sequential read of the file
        // at the end ([`DigestingSource::finish`]).
        let (mut seed_mem, mut seed_file, mut seed_dig) = (None, None, None);
        let seed: &mut dyn crate::bits::source::BitSource = match self.seed {
            RunSeed::Memory(b) => seed_mem.insert(WordsSource::new(b.words(), b.len() as u64)),
            RunSeed::Packed { path, bits } => {
                let f = seed_file.insert(
                    PackedFileSource::open(path, bits, BitOrder::Msb).map_err(Error::Input)?,
                );
                seed_dig.insert(DigestingSource::new(f, bits))
            }
        };
        let work = plan.work_bits().max(1);
        let mut done = 0u64;
        let mut failed: Option<Error> = None;
        let r = plan.run(
            &mut input,
            seed,
            &mut |chunk| match consume(chunk) {
                Ok(()) => Ok(()),
                Err(e) => {
                    failed = Some(e);
                    Err(io::Error::other("the output could not be written"))
                }
            },
            &mut |d| {
                done += d;
                progress((done as u128 * n as u128 / work as u128) as u64);
            },
        );
        if let Some(e) = failed {
            return Err(e);
        }
        r.map_err(|e| match e {
            crate::extract::whole_run::Error::Io(io) => {
                Error::Input(BitsError::from(io).in_file(path))
            }
            e => Error::from(e),
        })?;
        let digest = input.finish(path, order).map_err(Error::Input)?;
        let seed_digest = match (seed_dig, self.seed) {
            (Some(d), RunSeed::Packed { path, .. }) => {
                Some(d.finish(path, BitOrder::Msb).map_err(Error::Input)?)
            }
            _ => None,
        };
        progress(n);
        Ok(Report {
            blocks: 1,
            block_bits: n,
            input_bits_used: n,
            trailing_bits_unused: total - n,
            output_bits: m,
            input_digest: Some(digest),
            seed_digest,
        })
    }
}

/// The input of a whole-run block (see [`WHOLE_RUN_MIN_BITS`]): a Toeplitz
/// or modified Toeplitz extractor of at least that many input bits, a
/// packed regular file holding one block (and less than a second); the
/// family, the file, its bit order and the input bits asked for.
pub(crate) fn whole_run_input_of<'s>(
    extractor: &dyn Extractor,
    input: &'s Source,
    input_bits: Option<u64>,
) -> Option<(Family, &'s Path, BitOrder, u64)> {
    let n = extractor.input_bits();
    let family = match extractor.name() {
        "toeplitz" => Family::Toeplitz,
        "modified-toeplitz" => Family::ModifiedToeplitz,
        _ => return None,
    };
    let Source::File(f) = input else {
        return None;
    };
    if n < WHOLE_RUN_MIN_BITS || f.is_std() || f.format != Format::Packed {
        return None;
    }
    let held = crate::bits::io::max_bits_in(&f.path, f.format)?;
    let total = input_bits.unwrap_or(held);
    (total >= n as u64 && total / (n as u64) == 1 && total <= held).then_some((
        family,
        f.path.as_path(),
        f.order,
        total,
    ))
}

/// The whole-run plan of a run, when its one block goes that way, within
/// [`memory_limit`] with `held` bytes of seed in memory beside it.
pub(crate) fn whole_run_plan_of(
    extractor: &dyn Extractor,
    input: &Source,
    input_bits: Option<u64>,
    held: u64,
) -> Option<Result<WholeRun, Error>> {
    let (family, ..) = whole_run_input_of(extractor, input, input_bits)?;
    let engine = extractor.engine().unwrap_or(Engine::Auto);
    Some(
        WholeRun::new_holding(
            family,
            extractor.input_bits() as u64,
            extractor.output_bits() as u64,
            engine,
            memory_limit(),
            beside(held),
        )
        .map_err(Error::from),
    )
}

/// Words per read while a modified Toeplitz whole run reads its head ahead
/// for the digest (256 KiB, within the read buffers the memory plan counts).
const HEAD_READ_WORDS: usize = 1 << 15;

/// A bit source that feeds the data digest (`spec/conventions.md`) of a
/// string of `total` bits from the words read through it: a read that
/// covers the next undigested word moves the digest on, so a first pass
/// that reads the source from its start digests it while hashing (the
/// Toeplitz whole run does). What no read covered in order (the tail of a
/// modified Toeplitz block, read before its head; the bits after the block)
/// is read again by [`finish`](Self::finish).
/// Words a [`DigestingSource`] turns into bytes at once.
const FEED_WORDS: usize = 1 << 15;

struct DigestingSource<'a> {
    inner: &'a mut dyn crate::bits::source::BitSource,
    digest: crate::bits::digest::DataDigest,
    total: u64,
    /// Words `0 .. next` are digested.
    next: u64,
}

impl<'a> DigestingSource<'a> {
    fn new(inner: &'a mut dyn crate::bits::source::BitSource, total: u64) -> Self {
        DigestingSource {
            inner,
            digest: crate::bits::digest::DataDigest::new(total),
            total,
            next: 0,
        }
    }

    /// Feeds words (bit `i` of word `w` is string bit `64 w + i`) as packed
    /// MSB-first bytes, at most `limit` bytes.
    fn feed(&mut self, words: &[u64], limit: u64) {
        // In pieces, so the byte buffer stays small whatever the read.
        let mut left = limit;
        let mut bytes = Vec::with_capacity(FEED_WORDS.min(words.len()) * 8);
        for piece in words.chunks(FEED_WORDS) {
            if left == 0 {
                break;
            }
            bytes.clear();
            for w in piece {
                bytes.extend_from_slice(&w.to_le_bytes().map(u8::reverse_bits));
            }
            bytes.truncate(left.min(bytes.len() as u64) as usize);
            left -= bytes.len() as u64;
            self.digest.update(&bytes);
        }
    }

    /// Digests what the reads did not cover, from the file at `path`, and
    /// returns the digest.
    fn finish(mut self, path: &Path, order: BitOrder) -> Result<String, BitsError> {
        use crate::bits::source::BitSource;
        let words = self.total.div_ceil(64);
        if self.next < words {
            let mut file = PackedFileSource::open(path, self.total, order)?;
            let mut buf = vec![0u64; FEED_WORDS];
            while self.next < words {
                let k = (words - self.next).min(buf.len() as u64) as usize;
                file.read_words(self.next, &mut buf[..k])
                    .map_err(|e| BitsError::from(e).in_file(path))?;
                let limit = self.total.div_ceil(8) - self.next * 8;
                self.feed(&buf[..k], limit);
                self.next += k as u64;
            }
        }
        Ok(self.digest.finish_hex())
    }
}

impl crate::bits::source::BitSource for DigestingSource<'_> {
    fn bits(&self) -> u64 {
        self.inner.bits()
    }

    fn read_words(&mut self, first: u64, out: &mut [u64]) -> io::Result<()> {
        self.inner.read_words(first, out)?;
        // Only whole words of the source are digested here (the source
        // reads zeros past its end, the string need not).
        let full = self.inner.bits() / 64;
        let end = (first + out.len() as u64).min(full);
        if first <= self.next && self.next < end {
            let from = (self.next - first) as usize;
            let to = (end - first) as usize;
            self.feed(&out[from..to], u64::MAX);
            self.next = end;
        }
        Ok(())
    }
}

/// The outcome of [`Run::verify`].
#[derive(Clone, Debug, Default, serde::Serialize)]
pub struct Verdict {
    /// Whether the claimed output equals the recomputed one.
    pub matches: bool,
    /// Index of the first differing bit (a length difference counts at the
    /// shorter length).
    pub first_difference: Option<u64>,
    /// Differing bits over the common length.
    pub differing_bits: u64,
    /// Bits recomputed.
    pub computed_bits: u64,
    /// Bits read from the claimed file (without zero pad bits).
    pub claimed_bits: u64,
    /// Claimed bits beyond the recomputed length.
    pub extra_claimed_bits: u64,
    /// The extraction run.
    pub report: Report,
}

/// A run's complete output under its temporary name, from
/// [`Run::execute_to_temp`]: renamed into place by [`Pending::finish`],
/// removed when dropped.
pub struct Pending {
    sink: Sink,
    path: PathBuf,
}

impl Pending {
    /// Flushes, syncs and renames the output into place.
    pub fn finish(self) -> Result<(), Error> {
        fault::point("during-write");
        let path = self.path;
        self.sink
            .finish()
            .map_err(|source| Error::Output { path, source })?;
        fault::point("after-rename");
        Ok(())
    }
}

/// The output: a temporary file renamed at the end, or standard output.
enum Sink {
    File(BitWriter<AtomicFile>),
    Stdout(BitWriter<io::Stdout>),
}

impl Sink {
    fn open(out: &BitFile, replace: Replace) -> io::Result<Sink> {
        Ok(if out.is_std() {
            Sink::Stdout(BitWriter::new(io::stdout(), out.format, out.order))
        } else {
            // Outputs are secret: owner-only from creation.
            Sink::File(BitWriter::new(
                AtomicFile::create(&out.path, Kind::ExtractOutput, replace)?,
                out.format,
                out.order,
            ))
        })
    }

    fn write_bits(&mut self, b: &Bits) -> io::Result<()> {
        match self {
            Sink::File(w) => w.write_bits(b),
            Sink::Stdout(w) => w.write_bits(b),
        }
    }

    fn finish(self) -> io::Result<()> {
        match self {
            Sink::File(w) => w.finish()?.commit(),
            Sink::Stdout(w) => w.finish()?.flush(),
        }
    }
}

/// A packed seed file to be streamed by a whole-run block: `needed` bits,
/// checked from the file's size with the very refusals of [`read_seed`] (a
/// shorter file; unless `allow_longer`, one that holds more than `needed`
/// bits rounded up to whole bytes), and left on disk. `None` when `path`
/// is not a regular file (standard input, a pipe): read it whole.
pub fn stream_seed(
    path: &Path,
    needed: usize,
    allow_longer: bool,
) -> Result<Option<SeedInput>, SeedFileError> {
    let Some(have) = crate::bits::io::max_bits_in(path, Format::Packed) else {
        return Ok(None);
    };
    let have = usize::try_from(have).unwrap_or(usize::MAX);
    if have < needed {
        return Err(SeedFileError::Short {
            path: path.to_path_buf(),
            have,
            needed,
        });
    }
    if !allow_longer && have > needed.div_ceil(8) * 8 {
        return Err(SeedFileError::Long {
            path: path.to_path_buf(),
            have,
            needed,
        });
    }
    Ok(Some(SeedInput::Packed {
        path: path.to_path_buf(),
        bits: needed as u64,
    }))
}

/// Reads a seed file: `needed` bits, refusing a shorter file and (unless
/// `allow_longer`) one that holds more than `needed` bits rounded up to
/// whole bytes.
pub fn read_seed(
    path: &Path,
    format: Format,
    needed: usize,
    allow_longer: bool,
) -> Result<Bits, SeedFileError> {
    if let Some(max) = crate::bits::io::max_bits_in(path, format) {
        if (needed as u64) > max {
            return Err(SeedFileError::Short {
                path: path.to_path_buf(),
                have: max as usize,
                needed,
            });
        }
    }
    read_seed_from(open_input(path)?, path, format, needed, allow_longer)
}

/// [`read_seed`] over any reader (`name` for messages); the fuzz target of
/// seed files calls it.
pub fn read_seed_from(
    r: impl io::Read + Send,
    name: &Path,
    format: Format,
    needed: usize,
    allow_longer: bool,
) -> Result<Bits, SeedFileError> {
    let mut reader = BlockReader::new(r, name, format, BitOrder::Msb);
    let mut all = Bits::new();
    reader.read_to_end(&mut all)?;
    let have = all.len();
    if have < needed {
        return Err(SeedFileError::Short {
            path: name.to_path_buf(),
            have,
            needed,
        });
    }
    if !allow_longer && have > needed.div_ceil(8) * 8 {
        return Err(SeedFileError::Long {
            path: name.to_path_buf(),
            have,
            needed,
        });
    }
    Ok(all.slice(0, needed))
}

/// A seed file that does not fit.
#[derive(Debug, thiserror::Error)]
pub enum SeedFileError {
    /// Reading or parsing failed.
    #[error(transparent)]
    Read(#[from] BitsError),
    /// Too few bits.
    #[error("{}: the seed file holds {have} bits but this extractor needs {needed} seed bits", path.display())]
    Short {
        /// Seed file.
        path: PathBuf,
        /// Bits in the file.
        have: usize,
        /// Bits needed.
        needed: usize,
    },
    /// Too many bits.
    #[error("{}: the seed file holds {have} bits, more than the {needed} this extractor needs; pass --allow-longer-seed to use its first {needed} bits", path.display())]
    Long {
        /// Seed file.
        path: PathBuf,
        /// Bits in the file.
        have: usize,
        /// Bits needed.
        needed: usize,
    },
}

/// Number of bits in a file: from the size for a packed regular file, else
/// by decoding it once (standard input cannot be counted this way).
pub fn count_bits(f: &BitFile) -> Result<u64, BitsError> {
    if f.is_std() {
        return Err(BitsError::from(io::Error::new(
            io::ErrorKind::InvalidInput,
            "standard input cannot be measured in advance; give --input-bits",
        ))
        .in_file(&f.path));
    }
    if f.format == Format::Packed {
        let md = std::fs::metadata(&f.path).map_err(|e| BitsError::from(e).in_file(&f.path))?;
        return Ok(md.len() * 8);
    }
    let mut r = BlockReader::new(open_input(&f.path)?, &f.path, f.format, f.order);
    let mut chunk = Bits::zeros(1 << 20);
    let mut total = 0u64;
    while r.next_block(&mut chunk)? {
        total += chunk.len() as u64;
    }
    Ok(total + r.remainder_bits() as u64)
}

/// Feeds packed bytes into a data digest.
struct DigestSink(crate::bits::digest::DataDigest);

impl Write for DigestSink {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        self.0.update(buf);
        Ok(buf.len())
    }
    fn flush(&mut self) -> io::Result<()> {
        Ok(())
    }
}

/// The data digest (`spec/conventions.md`) of the first `nbits` bits of a
/// file, streamed; fails if the file holds fewer bits.
pub fn digest_prefix(f: &BitFile, nbits: u64) -> Result<String, BitsError> {
    let mut r = BlockReader::new(open_input(&f.path)?, &f.path, f.format, f.order);
    let mut w = BitWriter::new(
        DigestSink(crate::bits::digest::DataDigest::new(nbits)),
        Format::Packed,
        BitOrder::Msb,
    );
    let chunk_bits = 1usize << 20;
    let mut left = nbits;
    let mut chunk = Bits::zeros(chunk_bits);
    while left > 0 {
        let take = left.min(chunk_bits as u64) as usize;
        if chunk.len() != take {
            chunk = Bits::zeros(take);
        }
        if !r.next_block(&mut chunk)? {
            return Err(BitsError::new(BitsErrorKind::TooShort {
                wanted: nbits,
                available: r.bits_available(),
            })
            .at_offset(r.bytes_read())
            .in_file(&f.path));
        }
        w.write_bits(&chunk)?;
        left -= take as u64;
    }
    let sink = w.finish()?;
    Ok(sink.0.finish_hex())
}
