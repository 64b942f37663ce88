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

// Fixed-width loops index several arrays by the same constant-bounded
// counter on purpose (they unroll to fixed word positions).
#![allow(clippy::needless_range_loop)]

use super::onebit::{parity_and, parse_blocks};
use super::{OneBit, Trevisan};
use crate::bits::Bits;
use crate::extract::{NoProgress, Progress, SeededExtractor};
#[cfg(target_arch = "x86_64")]
use crate::gf2::field::fold::{self, FoldConsts};
use crate::gf2::field::{
    dispatch_width, mul_fixed, Field, FieldPath, Kernel, PortableKernel, Reducer,
};
#[cfg(target_arch = "x86_64")]
use crate::gf2::field::{pclmul_mul_body, vpclmul256_mul_body};
#[cfg(target_arch = "x86_64")]
use crate::gf2::Backend;
use rayon::prelude::*;

/// Interleaved Horner chains of the 256-bit VPCLMULQDQ loop (measured on
/// Zen 3 with 1 to 4 chains at l = 255 and 261: 2 was fastest; more chains
/// spill registers).
const WIDE_CHAINS: usize = 2;

/// Output bits per parallel task (one output word).
const TASK_BITS: usize = 64;
/// Blocks per chunk of the interleaved Horner loop (a few KiB to a few tens
/// of KiB of input: stays in L1/L2 while 64 accumulators pass over it).
const CHUNK_BLOCKS: usize = 256;

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

/// acc[g] = p_x(alphas[g]) for every g (w words each).
pub(crate) fn horner(field: &Field, blocks: &[u64], alphas: &[u64], acc: &mut [u64]) {
    let w = field.words();
    if field.path() != FieldPath::Generic {
        dispatch_width!(
            w,
            horner_fixed,
            (field, blocks, alphas, acc),
            horner_generic(field, blocks, alphas, acc)
        )
    } else {
        horner_generic(field, blocks, alphas, acc)
    }
}

/// Slice version (any l), one accumulator at a time.
fn horner_generic(field: &Field, blocks: &[u64], alphas: &[u64], acc: &mut [u64]) {
    let w = field.words();
    let nb = blocks.len() / w;
    let mut t = [0u64; crate::gf2::field::MAX_WORDS];
    for (v, a) in acc.chunks_exact_mut(w).zip(alphas.chunks_exact(w)) {
        v.fill(0);
        for k in (0..nb).rev() {
            field.mul(v, a, &mut t[..w]);
            for (x, (y, b)) in v.iter_mut().zip(t.iter().zip(&blocks[k * w..(k + 1) * w])) {
                *x = y ^ b;
            }
        }
    }
}

fn horner_fixed<const W: usize, const W2: usize>(
    field: &Field,
    blocks: &[u64],
    alphas: &[u64],
    acc: &mut [u64],
) {
    let (b, _) = blocks.as_chunks::<W>();
    let (a, _) = alphas.as_chunks::<W>();
    let (v, _) = acc.as_chunks_mut::<W>();
    let red = field.reducer();
    #[cfg(target_arch = "x86_64")]
    match field.path() {
        FieldPath::PclmulFold => {
            let k = field.fold_consts().expect("the fold path has constants");
            // SAFETY: the path is offered only when `PclmulKernel::new`
            // found pclmulqdq and sse2; `TWO` is the constants' own.
            unsafe {
                if k.two_words() {
                    horner_fold::<W, true>(k, b, a, v)
                } else {
                    horner_fold::<W, false>(k, b, a, v)
                }
            }
            return;
        }
        FieldPath::Vpclmul256Fold => {
            let k = field.fold_consts().expect("the fold path has constants");
            // SAFETY: the path is offered only when run-time detection found
            // pclmulqdq, avx2 and vpclmulqdq; `TWO` is the constants' own.
            unsafe {
                if k.two_words() {
                    horner_fold_ymm::<W, true>(k, b, a, v)
                } else {
                    horner_fold_ymm::<W, false>(k, b, a, v)
                }
            }
            return;
        }
        FieldPath::Vpclmul256 => {
            // SAFETY: the path is offered only when run-time detection
            // found pclmulqdq, avx2, vpclmulqdq and bmi2.
            unsafe { horner_vpclmul256::<W, W2, WIDE_CHAINS>(red, b, a, v) };
            return;
        }
        FieldPath::Pclmul => {
            if field.backend() == Backend::Vpclmul && std::is_x86_feature_detected!("avx512vl") {
                // SAFETY: the Vpclmul backend is in use only when
                // `Backend::is_supported` found pclmulqdq, vpclmulqdq and
                // avx512f; avx512vl is checked just above.
                unsafe { horner_pclmul_evex::<W, W2>(red, b, a, v) };
                return;
            }
            // SAFETY: the path is offered only when `PclmulKernel::new`
            // returned Some, after `Backend::is_supported` checked
            // pclmulqdq and sse2.
            unsafe { horner_pclmul::<W, W2>(red, b, a, v) };
            return;
        }
        _ => {}
    }
    horner_many::<W, W2, PortableKernel>(PortableKernel, red, b, a, v)
}

/// [`horner_many`] with PCLMULQDQ (the body is the same macro, so that
/// every product inlines into this `target_feature` function).
///
/// # Safety
/// The CPU must support pclmulqdq and sse2.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "pclmulqdq,sse2")]
unsafe fn horner_pclmul<const W: usize, const W2: usize>(
    red: &Reducer,
    blocks: &[[u64; W]],
    alphas: &[[u64; W]],
    v: &mut [[u64; W]],
) {
    // SAFETY (for the macro's calls): this function has the features.
    horner_body!(W, blocks, alphas, v, |x, a, b| {
        let mut r: [u64; W] = pclmul_mul_body!(W, W2, red, x, a);
        for j in 0..W {
            r[j] ^= b[j];
        }
        r
    })
}

/// [`horner_many`] with the register fold (`field_fold.rs`): each step
/// loads v, multiplies and reduces in vector registers, adds the block and
/// stores v.
///
/// # Safety
/// The CPU must support pclmulqdq and sse2; `TWO` must be
/// `k.two_words()`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "pclmulqdq,sse2")]
unsafe fn horner_fold<const W: usize, const TWO: bool>(
    k: &FoldConsts,
    blocks: &[[u64; W]],
    alphas: &[[u64; W]],
    v: &mut [[u64; W]],
) {
    let regs = fold::FoldRegs::new::<W>(k);
    horner_body!(W, blocks, alphas, v, |x, a, b| {
        let r = fold::mul_regs::<W, TWO>(&fold::load::<W>(x), &fold::load::<W>(a), &regs);
        let mut out = [0u64; W];
        fold::store_into::<W>(&fold::xor::<W>(&r, &fold::load::<W>(b)), &mut out);
        out
    })
}

/// [`horner_fold`] with the products of [`fold::product_ymm`].
///
/// # Safety
/// The CPU must support pclmulqdq, avx2 and vpclmulqdq; `TWO` must be
/// `k.two_words()`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "pclmulqdq,sse2,avx,avx2,vpclmulqdq")]
unsafe fn horner_fold_ymm<const W: usize, const TWO: bool>(
    k: &FoldConsts,
    blocks: &[[u64; W]],
    alphas: &[[u64; W]],
    v: &mut [[u64; W]],
) {
    let regs = fold::FoldRegs::new::<W>(k);
    horner_body!(W, blocks, alphas, v, |x, a, b| {
        let r = fold::reduce::<W, TWO>(&fold::product_ymm::<W>(x, a), &regs);
        let mut out = [0u64; W];
        fold::store_into::<W>(&fold::xor::<W>(&r, &fold::load::<W>(b)), &mut out);
        out
    })
}

/// [`horner_many`] with the 256-bit VPCLMULQDQ product (two 64 x 64
/// products per instruction; the lane pairs of alpha are loop-invariant).
///
/// # Safety
/// The CPU must support pclmulqdq, avx2, vpclmulqdq and bmi2.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "pclmulqdq,sse2,avx,avx2,vpclmulqdq,bmi2")]
unsafe fn horner_vpclmul256<const W: usize, const W2: usize, const K: usize>(
    red: &Reducer,
    blocks: &[[u64; W]],
    alphas: &[[u64; W]],
    v: &mut [[u64; W]],
) {
    horner_body_k!(W, K, blocks, alphas, v, |x, a, b| {
        let mut r: [u64; W] = vpclmul256_mul_body!(W, W2, red, x, a);
        for j in 0..W {
            r[j] ^= b[j];
        }
        r
    })
}

/// [`horner_pclmul`] compiled for AVX-512VL: the same instructions with
/// 32 vector registers and three-operand forms, which removes most spills
/// of the four interleaved accumulators.
///
/// # Safety
/// The CPU must support pclmulqdq, avx512f and avx512vl.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "pclmulqdq,sse2,avx2,avx512f,avx512vl")]
unsafe fn horner_pclmul_evex<const W: usize, const W2: usize>(
    red: &Reducer,
    blocks: &[[u64; W]],
    alphas: &[[u64; W]],
    v: &mut [[u64; W]],
) {
    horner_body!(W, blocks, alphas, v, |x, a, b| {
        let mut r: [u64; W] = pclmul_mul_body!(W, W2, red, x, a);
        for j in 0..W {
            r[j] ^= b[j];
        }
        r
    })
}

/// The interleaved Horner loop over chunks of blocks (see the module docs),
/// with `$step(v, alpha, block)` = v alpha + block.
macro_rules! horner_body {
    ($w:ident, $blocks:expr, $alphas:expr, $v:expr, |$x:ident, $a:ident, $b:ident| $step:expr) => {{
        let (blocks, alphas, v): (&[[u64; $w]], &[[u64; $w]], &mut [[u64; $w]]) =
            ($blocks, $alphas, $v);
        // The step is pasted in place (no closure), so that it inlines into
        // a `target_feature` caller.
        macro_rules! step {
            ($vv:expr, $aa:expr, $bb:expr) => {{
                let $x: &[u64; $w] = $vv;
                let $a: &[u64; $w] = $aa;
                let $b: &[u64; $w] = $bb;
                $step
            }};
        }
        for x in v.iter_mut() {
            *x = [0; $w];
        }
        let mut hi = blocks.len();
        while hi > 0 {
            let lo = hi.saturating_sub(CHUNK_BLOCKS);
            let chunk = &blocks[lo..hi];
            let mut g = 0;
            while g + 4 <= v.len() {
                let (a0, a1, a2, a3) = (alphas[g], alphas[g + 1], alphas[g + 2], alphas[g + 3]);
                let (mut v0, mut v1, mut v2, mut v3) = (v[g], v[g + 1], v[g + 2], v[g + 3]);
                for b in chunk.iter().rev() {
                    v0 = step!(&v0, &a0, b);
                    v1 = step!(&v1, &a1, b);
                    v2 = step!(&v2, &a2, b);
                    v3 = step!(&v3, &a3, b);
                }
                v[g] = v0;
                v[g + 1] = v1;
                v[g + 2] = v2;
                v[g + 3] = v3;
                g += 4;
            }
            while g < v.len() {
                let a0 = alphas[g];
                let mut v0 = v[g];
                for b in chunk.iter().rev() {
                    v0 = step!(&v0, &a0, b);
                }
                v[g] = v0;
                g += 1;
            }
            hi = lo;
        }
    }};
}
use horner_body;

/// [`horner_body`] with `$k` interleaved accumulators (an array the
/// compiler keeps in registers when it can), for kernels whose products
/// overlap well with fewer chains.
macro_rules! horner_body_k {
    ($w:ident, $k:ident, $blocks:expr, $alphas:expr, $v:expr, |$x:ident, $a:ident, $b:ident| $step:expr) => {{
        let (blocks, alphas, v): (&[[u64; $w]], &[[u64; $w]], &mut [[u64; $w]]) =
            ($blocks, $alphas, $v);
        macro_rules! step {
            ($vv:expr, $aa:expr, $bb:expr) => {{
                let $x: &[u64; $w] = $vv;
                let $a: &[u64; $w] = $aa;
                let $b: &[u64; $w] = $bb;
                $step
            }};
        }
        for x in v.iter_mut() {
            *x = [0; $w];
        }
        let mut hi = blocks.len();
        while hi > 0 {
            let lo = hi.saturating_sub(CHUNK_BLOCKS);
            let chunk = &blocks[lo..hi];
            let mut g = 0;
            while g + $k <= v.len() {
                let mut aa = [[0u64; $w]; $k];
                let mut vv = [[0u64; $w]; $k];
                aa.copy_from_slice(&alphas[g..g + $k]);
                vv.copy_from_slice(&v[g..g + $k]);
                for b in chunk.iter().rev() {
                    for c in 0..$k {
                        vv[c] = step!(&vv[c], &aa[c], b);
                    }
                }
                v[g..g + $k].copy_from_slice(&vv);
                g += $k;
            }
            while g < v.len() {
                let a0 = alphas[g];
                let mut v0 = v[g];
                for b in chunk.iter().rev() {
                    v0 = step!(&v0, &a0, b);
                }
                v[g] = v0;
                g += 1;
            }
            hi = lo;
        }
    }};
}
use horner_body_k;

/// `v * a + b` with a kernel of the [`Kernel`] trait.
#[inline(always)]
fn step<const W: usize, const W2: usize, K: Kernel>(
    k: K,
    red: &Reducer,
    v: &[u64; W],
    a: &[u64; W],
    b: &[u64; W],
) -> [u64; W] {
    let mut r = mul_fixed::<W, W2, K>(k, red, v, a);
    for j in 0..W {
        r[j] ^= b[j];
    }
    r
}

/// Interleaved Horner with a portable-style kernel.
#[inline(always)]
fn horner_many<const W: usize, const W2: usize, K: Kernel>(
    k: K,
    red: &Reducer,
    blocks: &[[u64; W]],
    alphas: &[[u64; W]],
    v: &mut [[u64; W]],
) {
    horner_body!(W, blocks, alphas, v, |x, a, b| step::<W, W2, K>(
        k, red, x, a, b
    ))
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
