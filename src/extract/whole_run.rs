//! Whole-run hashing: one Toeplitz or modified Toeplitz block as long as a
//! whole run (2^22 .. 2^38 bits), with input and seed read piece by piece
//! from a [`BitSource`] and the output handed out in order, in bounded
//! memory.
//!
//! A device-independent run is certified as a whole, so its raw string is
//! hashed as one block. Two layouts compute the same bits:
//!
//! - **In memory**: the Toeplitz part in one window product
//!   ([`crate::gf2::window`]: Karatsuba below the size thresholds, the
//!   additive FFT above).
//! - **Tiles** (additive FFT only): the matrix is cut into tiles of `c`
//!   output rows by `b` input columns. Tile `(I, J)` is itself a Toeplitz
//!   matrix of a seed segment, so its product is a window of one
//!   [`AfftWindow`] of size `(b, c)`. By linearity the products of one row
//!   of tiles add up in the transform domain: for each output chunk `I`,
//!   `acc = sum_J FFT(x_J) . IFFT^T(s_IJ)`, then one `FFT^T(acc)` gives the
//!   chunk. Each input block and each seed segment is transformed once per
//!   output chunk; with one output chunk (the usual case, `m` well below
//!   `n`) everything is transformed exactly once and the input is read once,
//!   in order.
//!
//! Index bookkeeping (Toeplitz part of `n` input bits, `m` outputs, seed
//! `s` of `n + m - 1` bits, `y_i = XOR_j s[i - j + n - 1] x_j`): with `nb =
//! ceil(n / b)` blocks, pad x with zeros to `n' = nb b` bits at its end and
//! the seed with `p = n' - n` zero bits at its start; then `y_i = XOR_j
//! s'[i - j + n' - 1] x'_j` with `s'[k] = s[k - p]` (the padded positions
//! only ever meet padded zeros of x). Tile `(I, J)` is the window of the
//! seed segment `s'[o .. o + b + c - 1)`, `o = n' - b + I c - J b`, applied
//! to `x'[J b .. J b + b)`: `y_(Ic+i) = XOR_t s'[o + i - t + b - 1]
//! x'_(Jb+t)`. Modified Toeplitz (`y = x_head XOR T' x_tail`) runs the same
//! on the tail and adds the head to each chunk.
//!
//! The slow twin is the in-memory extractor ([`super::Toeplitz`],
//! [`super::ModifiedToeplitz`]); the tests compare every layout with it.

use super::Engine;
use crate::bits::source::{read_virtual, BitSource};
use crate::bits::{words_for, Bits};
use crate::gf2::afft::{memory, AfftSeed, AfftWindow};
use crate::gf2::window::{Window, WindowScratch};
use crate::gf2::Backend;

/// Which family.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Family {
    /// Toeplitz hashing, seed `n + m - 1` bits.
    Toeplitz,
    /// Modified Toeplitz hashing, seed `n - 1` bits.
    ModifiedToeplitz,
}

impl Family {
    /// Name as on the command line.
    pub fn name(self) -> &'static str {
        match self {
            Family::Toeplitz => "toeplitz",
            Family::ModifiedToeplitz => "modified-toeplitz",
        }
    }
}

/// Why a whole-run hash cannot be planned or run.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// Sizes outside the family's range.
    #[error("{family}: n = {n}, m = {m}: {why}")]
    Sizes {
        /// The family's name.
        family: &'static str,
        /// Input bits.
        n: u64,
        /// Output bits.
        m: u64,
        /// What is wrong.
        why: &'static str,
    },
    /// No layout fits in the memory allowed.
    #[error("{family} of n = {n} bits to m = {m} bits needs at least {} of working memory ({layout}); {} is allowed. {hint}", mib(*needed), mib(*limit))]
    Memory {
        /// The family's name.
        family: &'static str,
        /// Input bits.
        n: u64,
        /// Output bits.
        m: u64,
        /// Bytes the smallest layout needs.
        needed: u64,
        /// Bytes allowed.
        limit: u64,
        /// The smallest layout.
        layout: String,
        /// What lowers it.
        hint: &'static str,
    },
    /// The engine cannot run here or does not cover the size.
    #[error(transparent)]
    Plan(#[from] super::Error),
    /// A source or the sink failed.
    #[error(transparent)]
    Io(#[from] std::io::Error),
}

fn mib(b: u64) -> String {
    if b >= 10 << 30 {
        format!("{:.1} GiB", b as f64 / (1u64 << 30) as f64)
    } else {
        format!("{:.0} MiB", (b as f64 / (1u64 << 20) as f64).ceil())
    }
}

/// How the product is laid out.
#[derive(Debug)]
enum Layout {
    /// One window product with everything in memory.
    InMemory(Window),
    /// Tiles of `c` output bits by `b` input bits on one additive-FFT window.
    Tiles { b: u64, c: u64, window: AfftWindow },
}

/// What a planned run needs.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Estimate {
    /// Peak working memory in bytes: the buffers of the layout (the parts
    /// of input, seed and output it holds, the transforms, the buffer of
    /// unaligned reads), and what is held [`beside`](Self::beside).
    pub memory_bytes: u64,
    /// Held in memory beside the layout for the run's whole length (a seed
    /// given in memory rather than read from a file, file buffers).
    pub beside: Beside,
    /// Whether input and seed are held whole in memory.
    pub in_memory: bool,
    /// Input bits per tile (the whole Toeplitz part in memory).
    pub block_bits: u64,
    /// Output bits per chunk.
    pub chunk_bits: u64,
    /// Tiles (input blocks times output chunks).
    pub tiles: u64,
    /// Passes over the input (output chunks).
    pub input_passes: u64,
    /// Transform length of one product (points; 0 for Karatsuba).
    pub transform_points: u64,
    /// Work in transform point-levels (`points x log2 points` summed over
    /// all transforms); 0 for Karatsuba.
    pub work: f64,
}

/// A planned whole-run hash.
#[derive(Debug)]
pub struct WholeRun {
    family: Family,
    n: u64,
    m: u64,
    layout: Layout,
    estimate: Estimate,
}

/// The unaligned-read buffer of [`read_virtual`], counted in every layout.
const READ_TMP_BYTES: u64 = 8 * (crate::bits::source::READ_PIECE_WORDS as u64 + 1);

/// Memory held beside a whole run's layout for its whole length (by the
/// caller, or by its sources and sink), counted in its estimate.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize)]
pub struct Beside {
    /// A seed held in memory (0 when it is read piece by piece).
    pub seed_bytes: u64,
    /// Buffers of the sources and the sink (files).
    pub buffer_bytes: u64,
}

/// Smallest transform tried for tiles (`2^12` points, 128 Kibit tiles).
const MIN_LOG_POINTS: u32 = 12;
/// The additive FFT's limit (`2^32` points).
const MAX_LOG_POINTS: u32 = 32;

impl WholeRun {
    /// Plans `family` for `n` input and `m` output bits within
    /// `memory_limit` bytes of working memory. `engine` is
    /// [`Engine::Auto`], an additive-FFT engine (tiles allowed), or any
    /// other engine (in memory only).
    pub fn new(
        family: Family,
        n: u64,
        m: u64,
        engine: Engine,
        memory_limit: u64,
    ) -> Result<WholeRun, Error> {
        Self::new_holding(family, n, m, engine, memory_limit, Beside::default())
    }

    /// As [`new`](Self::new), with `beside` held in memory beside the run
    /// for its whole length (a seed in memory, file buffers): counted in
    /// every layout's memory, so the layouts get what is left of
    /// `memory_limit`.
    pub fn new_holding(
        family: Family,
        n: u64,
        m: u64,
        engine: Engine,
        memory_limit: u64,
        beside: Beside,
    ) -> Result<WholeRun, Error> {
        let held = beside.seed_bytes.saturating_add(beside.buffer_bytes);
        let sizes = |why| Error::Sizes {
            family: family.name(),
            n,
            m,
            why,
        };
        if n == 0 {
            return Err(sizes("the input must hold at least 1 bit"));
        }
        if m == 0 || m > n {
            return Err(sizes("the output length must lie in 1 ..= n"));
        }
        if family == Family::ModifiedToeplitz && m == n {
            return Err(sizes("modified Toeplitz needs m < n"));
        }
        if usize::try_from(n).is_err() {
            return Err(sizes("too long for this platform"));
        }
        let tn = match family {
            Family::Toeplitz => n,
            Family::ModifiedToeplitz => n - m,
        };
        let resolved = engine.resolve(tn as usize, m as usize);
        let mut options: Vec<(Layout, Estimate)> = Vec::new();
        let mut smallest: Option<(u64, String)> = None;
        let mut consider = |layout: Layout, mut est: Estimate| {
            est.beside = beside;
            est.memory_bytes = est.memory_bytes.saturating_add(held);
            let text = describe(&est);
            if smallest.as_ref().is_none_or(|(b, _)| est.memory_bytes < *b) {
                smallest = Some((est.memory_bytes, text));
            }
            if est.memory_bytes <= memory_limit {
                options.push((layout, est));
            }
        };
        match resolved {
            Engine::Additive(be) => {
                if AfftWindow::fits(tn as usize, m as usize) {
                    let w = Window::new(tn as usize, m as usize, resolved)
                        .map_err(super::Error::from)?;
                    let est = in_memory_estimate(family, n, m, tn, &w);
                    consider(Layout::InMemory(w), est);
                }
                for (b, c, window) in tile_shapes(tn, m, be) {
                    let est = tiles_estimate(tn, m, b, c, &window);
                    consider(Layout::Tiles { b, c, window }, est);
                }
            }
            e => {
                let w = Window::new(tn as usize, m as usize, e).map_err(super::Error::from)?;
                let est = in_memory_estimate(family, n, m, tn, &w);
                consider(Layout::InMemory(w), est);
            }
        }
        // The least work among the layouts that fit; ties go to fewer
        // passes over the input, then to less memory.
        options.sort_by(|a, b| {
            (a.1.work, a.1.input_passes, a.1.memory_bytes)
                .partial_cmp(&(b.1.work, b.1.input_passes, b.1.memory_bytes))
                .expect("finite work")
        });
        let Some((layout, estimate)) = options.into_iter().next() else {
            let (needed, layout) = smallest.expect("at least one layout");
            return Err(Error::Memory {
                family: family.name(),
                n,
                m,
                needed,
                limit: memory_limit,
                layout,
                hint: match (
                    matches!(resolved, Engine::Additive(_)),
                    beside.seed_bytes > 0,
                ) {
                    (true, false) => "Allow more memory (--memory-limit), or shorten the output (--output-bits; fewer bits per tile row).",
                    (true, true) => "Give the seed as a packed file (read piece by piece, never held whole), allow more memory (--memory-limit), or shorten the output (--output-bits).",
                    (false, false) => "Use the additive-FFT engine (--engine auto or additive; it works in tiles), or allow more memory (--memory-limit).",
                    (false, true) => "Use the additive-FFT engine (--engine auto or additive; it works in tiles), give the seed as a packed file (read piece by piece), or allow more memory (--memory-limit).",
                },
            });
        };
        Ok(WholeRun {
            family,
            n,
            m,
            layout,
            estimate,
        })
    }

    /// What the run needs.
    pub fn estimate(&self) -> Estimate {
        self.estimate
    }

    /// The engine of the products.
    pub fn engine(&self) -> Engine {
        match &self.layout {
            Layout::InMemory(w) => w.engine(),
            Layout::Tiles { window, .. } => Engine::Additive(window.backend()),
        }
    }

    /// Input bits n.
    pub fn input_bits(&self) -> u64 {
        self.n
    }

    /// Output bits m.
    pub fn output_bits(&self) -> u64 {
        self.m
    }

    /// Seed bits.
    pub fn seed_bits(&self) -> u64 {
        match self.family {
            Family::Toeplitz => self.n + self.m - 1,
            Family::ModifiedToeplitz => self.n - 1,
        }
    }

    /// Input bits the run goes through (`n` times the passes), the unit of
    /// `progress` in [`run`](Self::run).
    pub fn work_bits(&self) -> u64 {
        self.tail_bits() * self.estimate.input_passes
    }

    fn tail_bits(&self) -> u64 {
        match self.family {
            Family::Toeplitz => self.n,
            Family::ModifiedToeplitz => self.n - self.m,
        }
    }

    /// Hashes: reads `input` (n bits) and `seed`, hands the output to `sink`
    /// in consecutive chunks (in order; their lengths add up to m), and
    /// reports input bits done to `progress` (up to
    /// [`work_bits`](Self::work_bits)).
    ///
    /// # Panics
    /// If the sources' lengths are not n and the seed length.
    pub fn run(
        &self,
        input: &mut dyn BitSource,
        seed: &mut dyn BitSource,
        sink: &mut dyn FnMut(&Bits) -> std::io::Result<()>,
        progress: &mut dyn FnMut(u64),
    ) -> Result<(), Error> {
        assert_eq!(input.bits(), self.n, "input length");
        assert_eq!(seed.bits(), self.seed_bits(), "seed length");
        // The Toeplitz part reads the input at virtual position j - m for
        // modified Toeplitz (its tail), at j otherwise.
        let in_shift = match self.family {
            Family::Toeplitz => 0,
            Family::ModifiedToeplitz => -(self.m as i64),
        };
        let tn = self.tail_bits();
        let m = self.m;
        let mut tmp = Vec::new();
        match &self.layout {
            Layout::InMemory(w) => {
                let mut out = Bits::zeros(m as usize);
                {
                    // Seed first: prepared, then its raw words dropped.
                    let sb = w.seed_bits_needed();
                    let mut sw = memory::zeroed(words_for(sb));
                    read_virtual(seed, 0, 0, sb, &mut sw, &mut tmp)?;
                    let prepared = w.prepare(&sw);
                    drop(sw);
                    let mut xw = memory::zeroed(words_for(tn as usize));
                    read_virtual(input, in_shift, 0, tn as usize, &mut xw, &mut tmp)?;
                    let mut scratch: WindowScratch = w.make_scratch();
                    w.compute(&prepared, &xw, out.words_mut(), &mut scratch);
                }
                progress(tn);
                self.add_head(input, 0, &mut out, &mut tmp)?;
                sink(&out)?;
            }
            Layout::Tiles { b, c, window } => {
                let (b, c) = (*b, *c);
                let nb = tn.div_ceil(b);
                let n1 = nb * b;
                let p = (n1 - tn) as i64;
                let len = window.transform_len();
                let mut acc = memory::zeroed(len);
                let mut fx = memory::zeroed(len);
                let mut sp = AfftSeed::default();
                let mut xw = memory::zeroed(words_for(b as usize));
                let sbits = (b + c - 1) as usize;
                let mut sw = memory::zeroed(words_for(sbits));
                let mut out = Bits::zeros(c as usize);
                let mut start = 0u64;
                while start < m {
                    let ci = c.min(m - start);
                    acc.fill(0);
                    for j in 0..nb {
                        read_virtual(
                            input,
                            in_shift,
                            (j * b) as i64,
                            b as usize,
                            &mut xw,
                            &mut tmp,
                        )?;
                        window.transform_input(&xw, &mut fx);
                        // Half of the tile's share after each transform.
                        let share = b.min(tn - j * b);
                        progress(share / 2);
                        let o = (n1 - b + start) as i64 - (j * b) as i64;
                        read_virtual(seed, p, o, sbits, &mut sw, &mut tmp)?;
                        window.prepare_into(&sw, &mut sp);
                        window.accumulate(&mut acc, &fx, &sp);
                        progress(share - share / 2);
                    }
                    window.finish(&mut acc, out.words_mut());
                    if ci < c {
                        // The last chunk (nothing is read after it).
                        out.truncate(ci as usize);
                    }
                    self.add_head(input, start, &mut out, &mut tmp)?;
                    sink(&out)?;
                    start += ci;
                }
            }
        }
        Ok(())
    }

    /// Modified Toeplitz: `chunk ^= x[start .. start + len)`.
    fn add_head(
        &self,
        input: &mut dyn BitSource,
        start: u64,
        chunk: &mut Bits,
        tmp: &mut Vec<u64>,
    ) -> std::io::Result<()> {
        if self.family == Family::ModifiedToeplitz {
            let len = chunk.len();
            let mut head = vec![0u64; words_for(len)];
            read_virtual(input, 0, start as i64, len, &mut head, tmp)?;
            for (o, h) in chunk.words_mut().iter_mut().zip(&head) {
                *o ^= h;
            }
        }
        Ok(())
    }
}

/// Seconds per unit of [`Estimate::work`] on this machine for `engine`,
/// from one product of `2^22` bits (`2^18` points) timed now, best of two
/// (0 for engines other than the additive FFT). Good for "about" only:
/// larger transforms run from memory rather than cache.
pub fn seconds_per_work(engine: Engine) -> f64 {
    let Engine::Additive(be) = engine else {
        return 0.0;
    };
    let (n, m) = (1usize << 22, 1usize << 21);
    let w = AfftWindow::new(n, m, be);
    let seed = vec![0x5555_5555_5555_5555u64; words_for(w.seed_bits())];
    let x = vec![0x0f0f_0f0f_0f0f_0f0fu64; words_for(n)];
    let prepared = w.prepare(&seed);
    let mut out = vec![0u64; words_for(m)];
    let mut scratch = memory::zeroed(w.scratch_len());
    let mut best = f64::INFINITY;
    for _ in 0..2 {
        let t = std::time::Instant::now();
        w.compute(&prepared, &x, &mut out, &mut scratch);
        best = best.min(t.elapsed().as_secs_f64());
    }
    let points = w.transform_len() as f64;
    best / (2.0 * points * points.log2())
}

fn describe(e: &Estimate) -> String {
    let mut t = if e.in_memory {
        "input and seed in memory".to_string()
    } else {
        format!(
            "tiles of {} input by {} output bits, {} pass(es) over the input",
            e.block_bits, e.chunk_bits, e.input_passes
        )
    };
    if e.beside.seed_bytes > 0 {
        t.push_str(&format!(
            ", beside {} of seed held in memory",
            mib(e.beside.seed_bytes)
        ));
    }
    if e.beside.buffer_bytes > 0 {
        t.push_str(&format!(
            ", with {} of file buffers",
            mib(e.beside.buffer_bytes)
        ));
    }
    t
}

fn in_memory_estimate(family: Family, n: u64, m: u64, tn: u64, w: &Window) -> Estimate {
    let seed = match family {
        Family::Toeplitz => n + m - 1,
        Family::ModifiedToeplitz => n - 1,
    };
    let points = w.transform_points() as u64;
    let work_b = w.working_bytes() as u64;
    // Peak: the prepared seed beside the raw seed words, or the prepared
    // seed, the scratch, the input and the output together; then the
    // output beside its packed copy for the writer (or the claimed output
    // verify compares it with) and the head of a modified Toeplitz block.
    // The buffer of unaligned reads throughout.
    let bytes = |bits: u64| 8 * bits.div_ceil(64);
    let at_prepare = work_b / 2 + bytes(seed);
    let at_compute = work_b + bytes(tn) + bytes(m);
    let at_write = 3 * bytes(m);
    let lg = points.max(2).ilog2() as f64;
    Estimate {
        memory_bytes: at_prepare.max(at_compute).max(at_write) + READ_TMP_BYTES,
        beside: Beside::default(),
        in_memory: true,
        block_bits: tn,
        chunk_bits: m,
        tiles: 1,
        input_passes: 1,
        transform_points: points,
        work: 3.0 * points as f64 * lg,
    }
}

fn tiles_estimate(tn: u64, m: u64, b: u64, c: u64, w: &AfftWindow) -> Estimate {
    let points = w.transform_len() as u64;
    let chunks = m.div_ceil(c);
    let blocks = tn.div_ceil(b);
    let bytes = |bits: u64| 8 * bits.div_ceil(64);
    // acc, the input's transform, the prepared seed; the input block, the
    // seed segment; the chunk, the head of a modified Toeplitz chunk and
    // the chunk's packed copy for the writer (or the claimed chunk verify
    // compares it with); the buffer of unaligned reads.
    let memory = 24 * points + bytes(b) + bytes(b + c - 1) + 3 * bytes(c) + READ_TMP_BYTES;
    let lg = points.ilog2() as f64;
    Estimate {
        memory_bytes: memory,
        beside: Beside::default(),
        in_memory: false,
        block_bits: b,
        chunk_bits: c,
        tiles: chunks * blocks,
        input_passes: chunks,
        transform_points: points,
        work: (2 * chunks * blocks + chunks) as f64 * points as f64 * lg,
    }
}

/// Candidate tile shapes `(b, c)` for each transform length: as many input
/// bits per tile as the transform holds beside c outputs, with c the whole
/// output or a fraction of the transform.
fn tile_shapes(tn: u64, m: u64, be: Backend) -> Vec<(u64, u64, AfftWindow)> {
    let mut v = Vec::new();
    for lg in MIN_LOG_POINTS..=MAX_LOG_POINTS {
        // The window of (b, c) uses ceil(b/32) + ceil(c/32) points.
        let cap = 32u64 << lg;
        let mut cs = vec![cap / 2, cap / 4, cap / 8, 3 * cap / 4];
        if m < cap {
            cs.push(m);
        }
        for c in cs {
            let c = c.min(m);
            if c == 0 || c + 64 >= cap {
                continue;
            }
            // b: the rest of the transform, a multiple of 64 (aligned
            // reads) unless it covers the whole input.
            let room = cap - 32 * c.div_ceil(32);
            let b = if room >= tn { tn } else { room / 64 * 64 };
            if b == 0 || (b == tn && c == m) {
                // One tile: that is the in-memory layout.
                continue;
            }
            let w = AfftWindow::new(b as usize, c as usize, be);
            if w.transform_len() as u64 != 1 << lg {
                continue;
            }
            v.push((b, c, w));
        }
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::bits::source::WordsSource;
    use crate::extract::{Extractor, ModifiedToeplitz, Toeplitz};

    fn rand_bits(seed: u64, n: usize) -> Bits {
        let mut s = seed.wrapping_mul(0x9e37_79b9_7f4a_7c15) | 1;
        let mut b = Bits::zeros(n);
        for w in b.words_mut() {
            s ^= s << 13;
            s ^= s >> 7;
            s ^= s << 17;
            *w = s;
        }
        b.clear_tail();
        b
    }

    fn run_all(r: &WholeRun, x: &Bits, s: &Bits) -> (Bits, u64) {
        let mut out = Bits::new();
        let mut done = 0u64;
        r.run(
            &mut WordsSource::new(x.words(), x.len() as u64),
            &mut WordsSource::new(s.words(), s.len() as u64),
            &mut |c: &Bits| {
                out.extend_from(c);
                Ok(())
            },
            &mut |d| done += d,
        )
        .unwrap();
        (out, done)
    }

    /// Every layout (in memory, tiles with one and several output chunks,
    /// forced by the memory limit) against the in-memory extractors, for
    /// both families, n and m not powers of two, m = 1 and m = n.
    #[test]
    fn every_layout_matches_the_in_memory_extractor() {
        let be = Backend::detect();
        let cases: [(u64, u64); 8] = [
            (300_001, 150_000),
            // Transforms longer than one row (the pass-based code paths).
            ((1 << 22) + 12_345, (1 << 21) + 77),
            (300_001, 1),
            (200_000, 200_000),
            (1 << 19, 1 << 18),
            (700_003, 35_017),
            (123_457, 99_991),
            (1 << 18, 64),
        ];
        for (i, &(n, m)) in cases.iter().enumerate() {
            for family in [Family::Toeplitz, Family::ModifiedToeplitz] {
                if family == Family::ModifiedToeplitz && m == n {
                    continue;
                }
                let x = rand_bits(2 * i as u64 + 1, n as usize);
                let d = match family {
                    Family::Toeplitz => n + m - 1,
                    Family::ModifiedToeplitz => n - 1,
                };
                let s = rand_bits(2 * i as u64 + 2, d as usize);
                // The reference: the Karatsuba engine, in memory.
                let mut want = Bits::zeros(m as usize);
                let kara = Engine::Clmul(be);
                match family {
                    Family::Toeplitz => Toeplitz::with_engine(n as usize, m as usize, kara)
                        .unwrap()
                        .extract(&x, &s, &mut want),
                    Family::ModifiedToeplitz => {
                        ModifiedToeplitz::with_engine(n as usize, m as usize, kara)
                            .unwrap()
                            .extract(&x, &s, &mut want)
                    }
                }
                // Limits from generous down to small, so that the layouts
                // go from in memory to many tiles and several chunks.
                let mut seen = Vec::new();
                let full = WholeRun::new(family, n, m, Engine::Additive(be), 1 << 40)
                    .unwrap()
                    .estimate()
                    .memory_bytes;
                // Every layout holds the buffer of unaligned reads: the
                // rest is what shrinks.
                let part = |k: u64| READ_TMP_BYTES + (full - READ_TMP_BYTES) / k;
                for limit in [1 << 40, full - 1, part(2), part(4), part(8)] {
                    let r = match WholeRun::new(family, n, m, Engine::Additive(be), limit) {
                        Ok(r) => r,
                        Err(Error::Memory { .. }) => continue,
                        Err(e) => panic!("{e}"),
                    };
                    let est = r.estimate();
                    let (got, done) = run_all(&r, &x, &s);
                    assert_eq!(
                        got.first_difference(&want),
                        None,
                        "{family:?} n={n} m={m} limit={limit} {est:?}"
                    );
                    assert_eq!(done, r.work_bits());
                    assert!(est.memory_bytes <= limit);
                    seen.push((est.in_memory, est.input_passes > 1));
                }
                if i == 0 && family == Family::Toeplitz {
                    assert!(seen.contains(&(true, false)), "{seen:?}");
                    assert!(seen.contains(&(false, false)), "{seen:?}");
                    assert!(seen.contains(&(false, true)), "{seen:?}");
                }
            }
        }
    }

    /// Below the additive threshold the in-memory Karatsuba engine runs.
    #[test]
    fn small_runs_use_the_window_engines() {
        let be = Backend::detect();
        let (n, m) = (10_000u64, 4_001u64);
        let x = rand_bits(7, n as usize);
        let s = rand_bits(8, (n + m - 1) as usize);
        let mut want = Bits::zeros(m as usize);
        Toeplitz::new(n as usize, m as usize)
            .unwrap()
            .extract(&x, &s, &mut want);
        for e in [Engine::Clmul(be), Engine::Auto] {
            let r = WholeRun::new(Family::Toeplitz, n, m, e, 1 << 30).unwrap();
            assert!(r.estimate().in_memory);
            assert_eq!(run_all(&r, &x, &s).0, want);
        }
    }

    #[test]
    fn refusals_say_what_is_needed() {
        let e =
            WholeRun::new(Family::Toeplitz, 1 << 30, 1 << 29, Engine::Auto, 1 << 16).unwrap_err();
        let t = e.to_string();
        assert!(
            t.contains("needs at least") && t.contains("is allowed"),
            "{t}"
        );
        let e = WholeRun::new(
            Family::Toeplitz,
            1 << 24,
            1 << 23,
            Engine::Clmul(Backend::Portable),
            1 << 20,
        )
        .unwrap_err();
        assert!(e.to_string().contains("additive-FFT engine"), "{e}");
        assert!(matches!(
            WholeRun::new(Family::Toeplitz, 10, 11, Engine::Auto, 1 << 30),
            Err(Error::Sizes { .. })
        ));
    }
}
