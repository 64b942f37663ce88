//! Fast evaluation of the construction (section 2) with the one-bit
//! extractors of section 3, following the cost model of section 7.
//!
//! - Output bits are independent: the output words are split over all cores
//!   (rayon), 64 bits per task, each task writing its own word.
//! - PH: the input is parsed once into nb field elements. A task gathers the
//!   (alpha, beta) of its 64 bits from the seed, then runs 64 Horner
//!   accumulators over cache-sized chunks of blocks, from the last chunk to
//!   the first, with four accumulators interleaved in the inner loop so that
//!   the carry-less products of independent chains overlap. Every
//!   accumulator sees the blocks in the order nb-1 .. 0, so v is exactly the
//!   Horner value of 3.1 (starting from v = 0, the first step gives
//!   v = B_{nb-1}).
//! - IP: for a group of degree 0 the seed is a matrix with row a =
//!   (y_{off+a w} .. y_{off+a w+w-1}) and the outputs of the group are the
//!   XOR of the rows a with x_a = 1 (section 7); a task reads the 64 columns
//!   it owns. Groups of higher degree gather their n seed bits per output.
//! - With a seed bound ([`PreparedPh`]), the (alpha, beta) of every output
//!   bit are gathered once.
//! - The Horner loop itself, with its carry-less kernels, is gf2's
//!   (`gf2::field::horner`): this module holds no `unsafe` code.

use super::onebit::{parity_and, parse_blocks};
use super::{OneBit, Trevisan};
use crate::bits::Bits;
use crate::extract::{NoProgress, Progress, SeededExtractor};
use crate::gf2::field::horner::horner;
use crate::gf2::field::Field;
use rayon::prelude::*;

/// Output bits per parallel task (one output word).
const TASK_BITS: usize = 64;

/// Where the one-bit seeds come from.
pub(crate) enum SeedView<'a> {
    /// Gather from the raw seed through the design.
    Raw(&'a Bits),
    /// Precomputed alphas and betas, `w` words per output bit each.
    Prepared { alphas: &'a [u64], betas: &'a [u64] },
}

/// Per-thread scratch of one task.
#[derive(Default)]
pub(crate) struct TaskScratch {
    pos: Vec<u64>,
    alpha: Vec<u64>,
    beta: Vec<u64>,
    acc: Vec<u64>,
}

impl TaskScratch {
    fn new(t: usize, w: usize) -> TaskScratch {
        TaskScratch {
            pos: vec![0; t],
            alpha: vec![0; TASK_BITS * w],
            beta: vec![0; TASK_BITS * w],
            acc: vec![0; TASK_BITS * w],
        }
    }
}

/// Bit `i` of a word vector.
#[inline(always)]
fn bit(words: &[u64], i: u64) -> u64 {
    (words[(i / 64) as usize] >> (i % 64)) & 1
}

/// 64 bits of `words` starting at bit `pos` (bits past the end read as 0).
#[inline(always)]
fn read64(words: &[u64], pos: u64) -> u64 {
    let (wi, bi) = ((pos / 64) as usize, (pos % 64) as u32);
    let lo = words.get(wi).copied().unwrap_or(0) >> bi;
    if bi == 0 {
        lo
    } else {
        lo | words.get(wi + 1).copied().unwrap_or(0) << (64 - bi)
    }
}

/// Gathers alpha and beta of output bit `i` (3.1 step 2 on y|S_i).
fn gather_ph(
    tr: &Trevisan,
    seed: &[u64],
    i: u64,
    pos: &mut [u64],
    alpha: &mut [u64],
    beta: &mut [u64],
) {
    let l = tr.t / 2;
    tr.design.positions(i, pos);
    alpha.fill(0);
    beta.fill(0);
    for j in 0..l {
        alpha[j / 64] |= bit(seed, pos[j]) << (j % 64);
        beta[j / 64] |= bit(seed, pos[l + j]) << (j % 64);
    }
}

/// Runs one block; every task reports its output bits to `progress` when
/// it is done (one call per 64 output bits).
pub(crate) fn extract(
    tr: &Trevisan,
    input: &Bits,
    seed: &SeedView<'_>,
    out: &mut Bits,
    progress: &dyn Progress,
) {
    match tr.spec.one_bit {
        OneBit::Ph => extract_ph(tr, input, seed, out, progress),
        OneBit::Ip => match seed {
            SeedView::Raw(s) => extract_ip(tr, input, s, out, progress),
            SeedView::Prepared { .. } => unreachable!("IP seeds are never prepared"),
        },
    }
    out.clear_tail();
}

fn extract_ph(
    tr: &Trevisan,
    input: &Bits,
    seed: &SeedView<'_>,
    out: &mut Bits,
    progress: &dyn Progress,
) {
    let field = tr.field.as_ref().expect("PH has a field");
    let w = field.words();
    let m = tr.spec.m;
    tr.blocks.with(
        || vec![0u64; tr.nb * w],
        |blocks| {
            parse_blocks(input, field.bits(), blocks);
            let blocks: &[u64] = blocks;
            out.words_mut()
                .par_iter_mut()
                .enumerate()
                .for_each(|(ci, ow)| {
                    let first = ci * TASK_BITS;
                    let count = TASK_BITS.min(m - first);
                    tr.tasks.with(
                        || TaskScratch::new(tr.t, w),
                        |s| *ow = ph_task(tr, field, blocks, seed, first, count, s),
                    );
                    progress.add(count as u64);
                });
        },
    );
}

/// Output bits `first .. first + count` (count <= 64) as one word.
fn ph_task(
    tr: &Trevisan,
    field: &Field,
    blocks: &[u64],
    seed: &SeedView<'_>,
    first: usize,
    count: usize,
    s: &mut TaskScratch,
) -> u64 {
    let w = field.words();
    if s.pos.len() != tr.t || s.alpha.len() != TASK_BITS * w {
        *s = TaskScratch::new(tr.t, w);
    }
    let (alphas, betas): (&[u64], &[u64]) = match seed {
        SeedView::Raw(seed) => {
            for b in 0..count {
                gather_ph(
                    tr,
                    seed.words(),
                    (first + b) as u64,
                    &mut s.pos,
                    &mut s.alpha[b * w..(b + 1) * w],
                    &mut s.beta[b * w..(b + 1) * w],
                );
            }
            (&s.alpha[..count * w], &s.beta[..count * w])
        }
        SeedView::Prepared { alphas, betas } => (
            &alphas[first * w..(first + count) * w],
            &betas[first * w..(first + count) * w],
        ),
    };
    let acc = &mut s.acc[..count * w];
    horner(field, blocks, alphas, acc);
    let mut word = 0u64;
    for b in 0..count {
        let v = &acc[b * w..(b + 1) * w];
        word |= (parity_and(v, &betas[b * w..(b + 1) * w]) as u64) << b;
    }
    word
}

fn extract_ip(tr: &Trevisan, input: &Bits, seed: &Bits, out: &mut Bits, progress: &dyn Progress) {
    let m = tr.spec.m;
    out.words_mut()
        .par_iter_mut()
        .enumerate()
        .for_each(|(ci, ow)| {
            let first = ci * TASK_BITS;
            let count = TASK_BITS.min(m - first);
            tr.tasks.with(
                || TaskScratch::new(tr.t, 0),
                |s| *ow = ip_task(tr, input, seed, first as u64, count as u64, s),
            );
            progress.add(count as u64);
        });
}

/// IP output bits `first .. first + count` (count <= 64) as one word.
fn ip_task(
    tr: &Trevisan,
    x: &Bits,
    seed: &Bits,
    first: u64,
    count: u64,
    s: &mut TaskScratch,
) -> u64 {
    if s.pos.len() != tr.t {
        s.pos = vec![0; tr.t];
    }
    let y = seed.words();
    let mut word = 0u64;
    let mut i = first;
    let end = first + count;
    while i < end {
        let g = *tr.design.group_of(i);
        if g.degree == 0 {
            // columns u0 .. u0 + len of the matrix of the group (section 7)
            let run = (end - i).min(g.start + g.size - i);
            let u0 = i - g.start;
            let mask = if run == 64 {
                u64::MAX
            } else {
                (1u64 << run) - 1
            };
            // Every input position is visited and masked by its bit, so
            // time and addresses do not depend on the (secret) input.
            let mut acc = 0u64;
            for a in 0..x.len() as u64 {
                let xa = (x.words()[(a / 64) as usize] >> (a % 64)) & 1;
                acc ^= read64(y, g.offset + a * g.width + u0) & xa.wrapping_neg();
            }
            word |= (acc & mask) << (i - first);
            i += run;
        } else {
            tr.design.positions(i, &mut s.pos);
            // As above: all positions, masked, independent of the input.
            let mut p = 0u64;
            for (a, &pos) in s.pos.iter().enumerate().take(x.len()) {
                let xa = (x.words()[a / 64] >> (a % 64)) & 1;
                p ^= bit(y, pos) & xa;
            }
            word |= p << (i - first);
            i += 1;
        }
    }
    word
}

/// A PH extractor with its seed bound: the (alpha, beta) of every output bit
/// are gathered once ([`crate::extract::Extractor::with_seed`]).
pub(crate) struct PreparedPh<'a> {
    tr: &'a Trevisan,
    alphas: Vec<u64>,
    betas: Vec<u64>,
}

impl<'a> PreparedPh<'a> {
    pub(crate) fn new(tr: &'a Trevisan, seed: &'a Bits) -> PreparedPh<'a> {
        let w = tr.field.as_ref().expect("PH has a field").words();
        let m = tr.spec.m;
        let mut alphas = vec![0u64; m * w];
        let mut betas = vec![0u64; m * w];
        alphas
            .par_chunks_mut(TASK_BITS * w)
            .zip(betas.par_chunks_mut(TASK_BITS * w))
            .enumerate()
            .for_each(|(ci, (a, b))| {
                let mut pos = vec![0u64; tr.t];
                for (j, (aj, bj)) in a.chunks_exact_mut(w).zip(b.chunks_exact_mut(w)).enumerate() {
                    gather_ph(
                        tr,
                        seed.words(),
                        (ci * TASK_BITS + j) as u64,
                        &mut pos,
                        aj,
                        bj,
                    );
                }
            });
        PreparedPh { tr, alphas, betas }
    }
}

impl SeededExtractor for PreparedPh<'_> {
    fn extract(&self, input: &Bits, out: &mut Bits) {
        self.extract_with_progress(input, out, &NoProgress);
    }

    fn extract_with_progress(&self, input: &Bits, out: &mut Bits, progress: &dyn Progress) {
        crate::extract::check_len("input", self.tr.spec.n, input.len());
        crate::extract::check_len("output", self.tr.spec.m, out.len());
        extract(
            self.tr,
            input,
            &SeedView::Prepared {
                alphas: &self.alphas,
                betas: &self.betas,
            },
            out,
            progress,
        );
    }
}
