//! Horner evaluation of many polynomials at once in GF(2^l): `acc[g] =
//! p_x(alphas[g])`, the inner loop of the PH one-bit extractor
//! (`spec/trevisan.md` 3.1 and 7), on the field's product path.
//!
//! The blocks are taken in cache-sized chunks from the last to the first;
//! four accumulators are interleaved in the inner loop (two on the 256-bit
//! VPCLMULQDQ path, where more spill) so that the carry-less products of
//! independent chains overlap. Each path has its own `target_feature`
//! function with the loop body pasted in (LLVM does not always inline a
//! large `target_feature` function into its caller). Every path is tested
//! against the slow twin (`tests/trevisan_props.rs`).

// Fixed-width loops index several arrays by the same constant-bounded
// counter on purpose (they unroll to fixed word positions).
#![allow(clippy::needless_range_loop)]

#[cfg(target_arch = "x86_64")]
use super::fold::{self, FoldConsts};
use super::{dispatch_width, mul_fixed, Field, FieldPath, Kernel, PortableKernel, Reducer};
#[cfg(target_arch = "x86_64")]
use super::{pclmul_mul_body, vpclmul256_mul_body};
#[cfg(target_arch = "x86_64")]
use crate::gf2::Backend;

/// Interleaved Horner chains of the 256-bit VPCLMULQDQ loop (measured on
/// Zen 3 with 1 to 4 chains at l = 255 and 261: 2 was fastest; more chains
/// spill registers).
const WIDE_CHAINS: usize = 2;

/// Blocks per chunk of the interleaved Horner loop (a few KiB to a few tens
/// of KiB of input: stays in L1/L2 while 64 accumulators pass over it).
const CHUNK_BLOCKS: usize = 256;

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
            if field.backend() == Backend::Vpclmul && crate::gf2::Platform::get().avx512vl {
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
