//! Fixed-width products in GF(2^l) that stay in 128-bit registers from the
//! first PCLMULQDQ to the reduced result, for field polynomials whose
//! middle exponents are all below 64 and not too large for the padding of
//! the last word (443 of the 576 sizes 1 ..= 576 of the table, among them
//! l = 64, 128, 255, 256 and 261; none below 35).
//!
//! The reduction is two carry-less products by constants instead of shifts.
//! Write W = ceil(l/64), s = 64 W - l and c = P_l - z^l (degree e < 64).
//! Then z^(64 W) = z^s z^l ≡ z^s c, so the product p = L + z^(64 W) H of two
//! reduced elements (L, H: W words each) satisfies
//!
//! ```text
//! p ≡ R = L + H (z^s c)     deg H <= l - 2 - s, so deg H z^s c <= l - 2 + e
//! R ≡ (R mod z^l) + T c     T = R div z^l, deg T <= max(s - 1, e - 2) < 64
//! ```
//!
//! (L itself reaches degree 64 W - 1 = l + s - 1.) R has W + 1 words
//! (l - 2 + e < 64 W + 64), T one word, and T c has degree at most
//! max(s - 1 + e, 2e - 2), below l when s + e <= l and 2e - 2 < l
//! (`Reducer::two_folds`); then the last line is reduced. The first
//! condition fails only for small fields (l < 35, and 65, 68, 73, 74),
//! which keep the shift-and-XOR reduction.
//! z^s c has degree s + e < 128: one word or two (`TWO`), a property of the
//! field, not of the data. Every step is a fixed sequence of instructions:
//! time and addresses do not depend on the operands.
//!
//! The operands are loaded as word pairs and the qword of each operand is
//! picked by the PCLMULQDQ immediate, so no word is moved between register
//! files. Callers expand these `#[inline(always)]` helpers inside a
//! function compiled with `pclmulqdq` and `sse2` (the helpers themselves
//! carry no `target_feature`, so that they inline into such a caller).

// Fixed-width loops index several arrays by the same constant-bounded
// counter on purpose (they unroll to fixed register positions).
#![allow(clippy::needless_range_loop)]

use super::Reducer;
#[cfg(target_arch = "x86_64")]
use core::arch::x86_64::*;

/// Runs `$body` with `$i` bound to 0, 1, .., 8 in turn, written out (a
/// loop the compiler must unroll; bodies guard themselves with `$i < W`,
/// which folds away for a constant W).
macro_rules! unroll9 {
    ($i:ident, $body:block) => {
        unroll9!(@ $i, $body, 0 1 2 3 4 5 6 7 8)
    };
    (@ $i:ident, $body:block, $($n:literal)*) => {
        $( { let $i: usize = $n; $body } )*
    };
}

/// Constants of the folded reduction of one field.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) struct FoldConsts {
    /// z^s c, low word first.
    cs: [u64; 2],
    /// c = P_l - z^l.
    c: u64,
    /// s = 64 W - l.
    s: u32,
}

impl FoldConsts {
    /// The constants for P_l, or `None` if a middle exponent is 64 or more,
    /// two folds do not suffice, or s + e > l (module docs).
    pub(super) fn new(red: &Reducer) -> Option<FoldConsts> {
        let low = &red.low[..red.nlow];
        let e = low.iter().copied().max().unwrap_or(0);
        let s = 64 * red.w - red.l;
        if !red.two_folds() || e >= 64 || s + e > red.l {
            return None;
        }
        let c = low.iter().fold(0u64, |acc, &e| acc | (1u64 << e));
        let s = s as u32;
        let wide = (c as u128) << s;
        Some(FoldConsts {
            cs: [wide as u64, (wide >> 64) as u64],
            c,
            s,
        })
    }

    /// Whether z^s c needs two words.
    pub(crate) fn two_words(&self) -> bool {
        self.cs[1] != 0
    }
}

/// Registers of an element: word pair (2k, 2k + 1) in register k; up to 9
/// words (the fixed-width limit), the high half of the last register zero
/// for odd W.
#[cfg(target_arch = "x86_64")]
pub(crate) type Elem = [__m128i; 5];

/// [`FoldConsts`] loaded into registers (once per loop).
#[cfg(target_arch = "x86_64")]
#[derive(Clone, Copy)]
pub(crate) struct FoldRegs {
    cs: __m128i,
    c: __m128i,
    shl: __m128i,
    shr: __m128i,
    /// Mask of the last register of the result (bits below l of word
    /// W - 1, and nothing above).
    top: __m128i,
}

#[cfg(target_arch = "x86_64")]
impl FoldRegs {
    /// # Safety
    /// The CPU must support sse2 (every x86_64 does).
    #[inline(always)]
    pub(crate) unsafe fn new<const W: usize>(k: &FoldConsts) -> FoldRegs {
        let mask = u64::MAX >> k.s;
        let top = if W % 2 == 1 {
            _mm_set_epi64x(0, mask as i64)
        } else {
            _mm_set_epi64x(mask as i64, -1)
        };
        FoldRegs {
            cs: _mm_set_epi64x(k.cs[1] as i64, k.cs[0] as i64),
            c: _mm_set_epi64x(0, k.c as i64),
            shl: _mm_set_epi64x(0, k.s as i64),
            shr: _mm_set_epi64x(0, 64 - k.s as i64),
            top,
        }
    }
}

/// Loads an element.
///
/// # Safety
/// sse2.
#[cfg(target_arch = "x86_64")]
#[inline(always)]
pub(crate) unsafe fn load<const W: usize>(a: &[u64; W]) -> Elem {
    let mut r = [_mm_setzero_si128(); 5];
    for k in 0..W / 2 {
        // SAFETY: words 2k and 2k + 1 are below W.
        r[k] = _mm_loadu_si128(a.as_ptr().add(2 * k) as *const __m128i);
    }
    if W % 2 == 1 {
        // SAFETY: word W - 1 exists; loadl reads 8 bytes only.
        r[W / 2] = _mm_loadl_epi64(a.as_ptr().add(W - 1) as *const __m128i);
    }
    r
}

/// Stores an element into `out`.
///
/// # Safety
/// sse2.
#[cfg(target_arch = "x86_64")]
#[inline(always)]
pub(crate) unsafe fn store_into<const W: usize>(r: &Elem, out: &mut [u64; W]) {
    for k in 0..W / 2 {
        // SAFETY: words 2k and 2k + 1 are below W.
        _mm_storeu_si128(out.as_mut_ptr().add(2 * k) as *mut __m128i, r[k]);
    }
    if W % 2 == 1 {
        // SAFETY: word W - 1 exists; storel writes 8 bytes only.
        _mm_storel_epi64(out.as_mut_ptr().add(W - 1) as *mut __m128i, r[W / 2]);
    }
}

/// `a ^ b` per register.
///
/// # Safety
/// sse2.
#[cfg(target_arch = "x86_64")]
#[inline(always)]
pub(crate) unsafe fn xor<const W: usize>(a: &Elem, b: &Elem) -> Elem {
    let mut r = *a;
    for k in 0..W.div_ceil(2) {
        r[k] = _mm_xor_si128(a[k], b[k]);
    }
    r
}

/// Carry-less product of qword `qx` of `x` and qword `qy` of `y`.
#[cfg(target_arch = "x86_64")]
#[inline(always)]
unsafe fn clmul_q(x: __m128i, qx: usize, y: __m128i, qy: usize) -> __m128i {
    match (qx, qy) {
        (0, 0) => _mm_clmulepi64_si128(x, y, 0x00),
        (1, 0) => _mm_clmulepi64_si128(x, y, 0x01),
        (0, _) => _mm_clmulepi64_si128(x, y, 0x10),
        _ => _mm_clmulepi64_si128(x, y, 0x11),
    }
}

/// Sums of 128-bit terms by word offset: even offsets 2k in `even[k]`,
/// odd offsets 2k + 1 in `odd[k]` (split over two even slots by
/// [`Offsets::merge`]).
#[cfg(target_arch = "x86_64")]
struct Offsets {
    even: [__m128i; 10],
    odd: [__m128i; 10],
}

#[cfg(target_arch = "x86_64")]
impl Offsets {
    #[inline(always)]
    unsafe fn new() -> Offsets {
        Offsets {
            even: [_mm_setzero_si128(); 10],
            odd: [_mm_setzero_si128(); 10],
        }
    }

    #[inline(always)]
    unsafe fn add(&mut self, offset: usize, x: __m128i) {
        let slot = if offset.is_multiple_of(2) {
            &mut self.even[offset / 2]
        } else {
            &mut self.odd[offset / 2]
        };
        *slot = _mm_xor_si128(*slot, x);
    }

    /// Moves the odd slots below `n` into the even ones.
    #[inline(always)]
    unsafe fn merge(mut self, n: usize) -> [__m128i; 10] {
        for k in 0..n {
            self.even[k] = _mm_xor_si128(self.even[k], _mm_slli_si128(self.odd[k], 8));
            self.even[k + 1] = _mm_xor_si128(self.even[k + 1], _mm_srli_si128(self.odd[k], 8));
        }
        self.even
    }
}

/// The register and qword holding a_s + a_t (s < t) of an element, made
/// on the spot (the compiler merges the repeats, and hoists those of a
/// loop-invariant operand).
#[cfg(target_arch = "x86_64")]
#[inline(always)]
unsafe fn word_sum(a: &Elem, s: usize, t: usize) -> (__m128i, usize) {
    let swap = |x: __m128i| _mm_shuffle_epi32(x, 0b01_00_11_10);
    let (ks, kt, qs, qt) = (s / 2, t / 2, s % 2, t % 2);
    if ks == kt {
        // low qword a_2k + a_2k+1
        (_mm_xor_si128(a[ks], swap(a[ks])), 0)
    } else if qs == qt {
        // (a_2ks + a_2kt, a_2ks+1 + a_2kt+1)
        (_mm_xor_si128(a[ks], a[kt]), qs)
    } else {
        // (a_2ks + a_2kt+1, a_2ks+1 + a_2kt)
        (_mm_xor_si128(a[ks], swap(a[kt])), qs)
    }
}

/// The unreduced product by the one-level W-term Karatsuba formula
/// (Weimerskirch and Paar, "Generalizations of the Karatsuba algorithm for
/// efficient implementations", 2006; from memory): with D_s = a_s b_s and
/// D_st = (a_s + a_t)(b_s + b_t),
///
/// ```text
/// a b = sum_s D_s z^(128 s)                       (words 2s, 2s + 1)
///     + sum_{s<t} (D_st + D_s + D_t) z^(64 (s + t))
/// ```
///
/// since (a_s + a_t)(b_s + b_t) + a_s b_s + a_t b_t = a_s b_t + a_t b_s in
/// characteristic 2. W (W + 1) / 2 PCLMULQDQ instead of W^2 (10 instead of
/// 16 at W = 4), and O(W^2) cheap XORs.
///
/// # Safety
/// pclmulqdq and sse2.
#[cfg(target_arch = "x86_64")]
#[inline(always)]
pub(crate) unsafe fn product_kt<const W: usize>(a: &Elem, b: &Elem) -> [__m128i; 10] {
    let mut diag = [_mm_setzero_si128(); 9];
    let mut acc = Offsets::new();
    unroll9!(s, {
        if s < W {
            diag[s] = clmul_q(a[s / 2], s % 2, b[s / 2], s % 2);
            acc.add(2 * s, diag[s]);
        }
    });
    // Unrolled by the macro: LLVM left this triangular loop rolled for
    // W >= 4, with every register array in memory.
    unroll9!(s, {
        unroll9!(t, {
            if s < t && t < W {
                let (x, qx) = word_sum(a, s, t);
                let (y, qy) = word_sum(b, s, t);
                let d = _mm_xor_si128(clmul_q(x, qx, y, qy), _mm_xor_si128(diag[s], diag[t]));
                acc.add(s + t, d);
            }
        });
    });
    acc.merge(W - 1)
}

/// The unreduced product with 256-bit VPCLMULQDQ, schoolbook: `b` is
/// loaded as ceil(W/4) registers of four words (b_4m .. b_4m+3), each a_i
/// is broadcast, and one instruction makes a_i b_4m+q in lane 0 and
/// a_i b_4m+2+q in lane 1 (q = 0, 1 by the immediate): W ceil(W/4) 2
/// instructions for W^2 products (8 for 16 at W = 4). Lane 0 of `acc[s]`
/// sums the products at word offset s, lane 1 those at s + 2.
///
/// # Safety
/// pclmulqdq, avx2 and vpclmulqdq.
#[cfg(target_arch = "x86_64")]
#[inline(always)]
pub(crate) unsafe fn product_ymm<const W: usize>(a: &[u64; W], b: &[u64; W]) -> [__m128i; 10] {
    let mut bq = [_mm256_setzero_si256(); 3];
    for m in 0..W / 4 {
        // SAFETY: words 4m .. 4m + 3 are below W.
        bq[m] = _mm256_loadu_si256(b.as_ptr().add(4 * m) as *const __m256i);
    }
    if !W.is_multiple_of(4) {
        let m = W / 4;
        let w = |j: usize| {
            if 4 * m + j < W {
                b[4 * m + j] as i64
            } else {
                0
            }
        };
        bq[m] = _mm256_setr_epi64x(w(0), w(1), w(2), w(3));
    }
    let mut acc = [_mm256_setzero_si256(); 20];
    for i in 0..W {
        let ai = _mm256_set1_epi64x(a[i] as i64);
        for m in 0..W.div_ceil(4) {
            let lo = _mm256_clmulepi64_epi128(ai, bq[m], 0x00);
            let hi = _mm256_clmulepi64_epi128(ai, bq[m], 0x10);
            acc[i + 4 * m] = _mm256_xor_si256(acc[i + 4 * m], lo);
            acc[i + 4 * m + 1] = _mm256_xor_si256(acc[i + 4 * m + 1], hi);
        }
    }
    let mut out = Offsets::new();
    for s in 0..W + 4 * (W.div_ceil(4) - 1) + 1 {
        out.add(s, _mm256_castsi256_si128(acc[s]));
        // products of padding words (zero) can land past 2W - 2
        if s + 2 <= 2 * W - 2 {
            out.add(s + 2, _mm256_extracti128_si256::<1>(acc[s]));
        }
    }
    out.merge(W - 1)
}

/// Reduces a product of 2W words (registers 0 .. W) modulo P_l (module
/// docs): W (or 2W with `TWO`) + 1 PCLMULQDQ.
///
/// # Safety
/// pclmulqdq and sse2; `TWO` must equal [`FoldConsts::two_words`] of the
/// constants in `k`.
#[cfg(target_arch = "x86_64")]
#[inline(always)]
pub(crate) unsafe fn reduce<const W: usize, const TWO: bool>(
    p: &[__m128i; 10],
    k: &FoldRegs,
) -> Elem {
    // R = L + H (z^s c), offsets 0 ..= W
    let mut acc = Offsets::new();
    acc.even[..W / 2].copy_from_slice(&p[..W / 2]);
    if W % 2 == 1 {
        // word W - 1 only; word W is H_0
        acc.even[W / 2] = _mm_move_epi64(p[W / 2]);
    }
    for j in 0..W {
        let (reg, q) = (p[(W + j) / 2], (W + j) % 2);
        acc.add(j, clmul_q(reg, q, k.cs, 0));
        if TWO {
            acc.add(j + 1, clmul_q(reg, q, k.cs, 1));
        }
    }
    let r = acc.merge(W.div_ceil(2));
    // (R_{W-1}, R_W) in one register
    let pair = if W % 2 == 1 {
        r[W / 2]
    } else {
        _mm_castpd_si128(_mm_shuffle_pd(
            _mm_castsi128_pd(r[W / 2 - 1]),
            _mm_castsi128_pd(r[W / 2]),
            0b01,
        ))
    };
    // T = R_W z^s + R_{W-1} z^(s - 64): the bits at and above z^l (a shift
    // by 64 gives zero, so s = 0 needs no special case)
    let up = _mm_sll_epi64(pair, k.shl);
    let down = _mm_srl_epi64(pair, k.shr);
    let t = _mm_xor_si128(down, _mm_srli_si128(up, 8));
    let tc = _mm_clmulepi64_si128(t, k.c, 0x00);
    let mut out = [_mm_setzero_si128(); 5];
    out[..W.div_ceil(2)].copy_from_slice(&r[..W.div_ceil(2)]);
    let last = W.div_ceil(2) - 1;
    out[last] = _mm_and_si128(out[last], k.top);
    out[0] = _mm_xor_si128(out[0], tc);
    out
}

/// `a * b` in GF(2^l), W words, all in registers.
///
/// # Safety
/// pclmulqdq and sse2; `TWO` as for [`reduce`].
#[cfg(target_arch = "x86_64")]
#[inline(always)]
pub(crate) unsafe fn mul_regs<const W: usize, const TWO: bool>(
    a: &Elem,
    b: &Elem,
    k: &FoldRegs,
) -> Elem {
    reduce::<W, TWO>(&product_kt::<W>(a, b), k)
}

/// `out = a * b` in GF(2^l) from and to words, products by [`product_ymm`].
///
/// # Safety
/// pclmulqdq, avx2 and vpclmulqdq; `TWO` as for [`reduce`].
#[cfg(target_arch = "x86_64")]
#[inline(always)]
pub(crate) unsafe fn mul_into_ymm<const W: usize, const TWO: bool>(
    k: &FoldConsts,
    a: &[u64; W],
    b: &[u64; W],
    out: &mut [u64; W],
) {
    let regs = FoldRegs::new::<W>(k);
    let r = reduce::<W, TWO>(&product_ymm::<W>(a, b), &regs);
    store_into::<W>(&r, out);
}

/// `out = a * b` in GF(2^l) from and to words.
///
/// # Safety
/// pclmulqdq and sse2 (callers are compiled with them, so this inlines);
/// `TWO` as for [`reduce`].
#[cfg(target_arch = "x86_64")]
#[inline(always)]
pub(crate) unsafe fn mul_into<const W: usize, const TWO: bool>(
    k: &FoldConsts,
    a: &[u64; W],
    b: &[u64; W],
    out: &mut [u64; W],
) {
    let regs = FoldRegs::new::<W>(k);
    let (a, b) = (load::<W>(a), load::<W>(b));
    let r = reduce::<W, TWO>(&product_kt::<W>(&a, &b), &regs);
    store_into::<W>(&r, out);
}
