//! The product paths of [`Field::mul`](super::Field::mul): which ones
//! exist, the width dispatch, the fixed-width PCLMULQDQ and 256-bit
//! VPCLMULQDQ product bodies and the function pointer chosen once per
//! field. The field code's `target_feature` functions live here, in
//! `fold` and in `horner`.

// Fixed-width loops index several arrays by the same constant-bounded
// counter on purpose (they unroll to fixed word positions).
#![allow(clippy::needless_range_loop)]

use super::*;

/// How [`Field::mul`] computes a product. Every path gives the same
/// elements (tested); [`Field::paths`] lists those that run for a field on
/// this CPU and [`Field::with_path`] picks one (for tests and benches).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum FieldPath {
    /// Any l: [`clmul_words`] with the field's backend and a word-level fold
    /// loop ([`Field::mul_generic`]).
    Generic,
    /// l <= 576: fixed-width schoolbook with portable 64 x 64 products and a
    /// shift-and-XOR reduction.
    Portable,
    /// As `Portable` with PCLMULQDQ products.
    Pclmul,
    /// PCLMULQDQ products and a reduction by two carry-less products with
    /// constants, all in vector registers (`field_fold.rs`; middle
    /// exponents below 64).
    PclmulFold,
    /// 256-bit VPCLMULQDQ products (two per instruction, AVX2) and the
    /// shift-and-XOR reduction.
    Vpclmul256,
    /// 256-bit VPCLMULQDQ products and the register fold of `PclmulFold`.
    Vpclmul256Fold,
}

impl FieldPath {
    /// Short name (bench and report labels).
    pub fn name(self) -> &'static str {
        match self {
            FieldPath::Generic => "generic",
            FieldPath::Portable => "portable",
            FieldPath::Pclmul => "pclmul",
            FieldPath::PclmulFold => "pclmul-fold",
            FieldPath::Vpclmul256 => "vpclmul256",
            FieldPath::Vpclmul256Fold => "vpclmul256-fold",
        }
    }
}

/// Calls `$f::<W, 2W>($args)` for the element width `$w` in 1 ..= 9 and
/// evaluates `$fallback` otherwise.
macro_rules! dispatch_width {
    ($w:expr, $f:ident, ($($args:expr),*), $fallback:expr) => {
        match $w {
            1 => $f::<1, 2>($($args),*),
            2 => $f::<2, 4>($($args),*),
            3 => $f::<3, 6>($($args),*),
            4 => $f::<4, 8>($($args),*),
            5 => $f::<5, 10>($($args),*),
            6 => $f::<6, 12>($($args),*),
            7 => $f::<7, 14>($($args),*),
            8 => $f::<8, 16>($($args),*),
            9 => $f::<9, 18>($($args),*),
            _ => $fallback,
        }
    };
}
pub(crate) use dispatch_width;

/// Body of the fixed-width PCLMULQDQ product and reduction, pasted into each
/// `target_feature` function that needs it (LLVM does not always inline a
/// large `target_feature` function into its caller). Every 64 x 64 product stays in a 128-bit register
/// and is XORed into the accumulator of its word offset; the words are taken
/// out once at the end. Must be expanded inside `unsafe` code running with
/// pclmulqdq and sse2 enabled.
#[cfg(target_arch = "x86_64")]
macro_rules! pclmul_mul_body {
    ($w:ident, $w2:ident, $red:expr, $a:expr, $b:expr) => {{
        use core::arch::x86_64::*;
        let (a, b): (&[u64; $w], &[u64; $w]) = ($a, $b);
        let mut va = [_mm_setzero_si128(); $w];
        let mut vb = [_mm_setzero_si128(); $w];
        for i in 0..$w {
            va[i] = _mm_cvtsi64_si128(a[i] as i64);
            vb[i] = _mm_cvtsi64_si128(b[i] as i64);
        }
        // Products with i + j = 2k go to lane k (words 2k, 2k + 1), those
        // with i + j = 2k + 1 to `odd[k]` (words 2k + 1, 2k + 2), which is
        // split across lanes k and k + 1 at the end.
        let mut even = [_mm_setzero_si128(); $w];
        let mut odd = [_mm_setzero_si128(); $w];
        for i in 0..$w {
            for j in 0..$w {
                let pr = _mm_clmulepi64_si128(va[i], vb[j], 0x00);
                if (i + j) % 2 == 0 {
                    even[(i + j) / 2] = _mm_xor_si128(even[(i + j) / 2], pr);
                } else {
                    odd[(i + j) / 2] = _mm_xor_si128(odd[(i + j) / 2], pr);
                }
            }
        }
        for k in 0..$w - 1 {
            even[k] = _mm_xor_si128(even[k], _mm_slli_si128(odd[k], 8));
            even[k + 1] = _mm_xor_si128(even[k + 1], _mm_srli_si128(odd[k], 8));
        }
        let mut p = [0u64; $w2];
        for k in 0..$w {
            // SAFETY: p has 2W words, so words 2k and 2k + 1 are in bounds.
            _mm_storeu_si128(p.as_mut_ptr().add(2 * k) as *mut __m128i, even[k]);
        }
        $crate::gf2::field::reduce_fixed::<$w, $w2>($red, p)
    }};
}
#[cfg(target_arch = "x86_64")]
pub(crate) use pclmul_mul_body;

/// Smallest element width (words) for the 256-bit path; narrower fields
/// keep the 128-bit one.
pub(super) const WIDE_MIN_WORDS: usize = 3;

/// Whether 256-bit VPCLMULQDQ with AVX2 runs here, with BMI2 for the shifts
/// of the reduction by run-time amounts (run-time detection; the
/// test-only feature `no_vpclmul` switches it off like the AVX-512 backend).
pub(super) fn wide_supported() -> bool {
    crate::gf2::Platform::get().wide_field()
}

/// Body of the fixed-width product with 256-bit VPCLMULQDQ, then the same
/// reduction as [`pclmul_mul_body`]. Each instruction makes two 64 x 64
/// products: `a_i` broadcast to both 128-bit lanes times the pair
/// (`b_2k` in lane 0, `b_2k+1` in lane 1), which land at word offsets
/// i + 2k and i + 2k + 1; `acc[s]` collects the pairs of offset s. W
/// ceil(W/2) instructions in all (8 for W = 4, 15 for W = 5) instead of W^2.
/// The pairs of `b` depend only on `b`, so in Horner (b = alpha) they are
/// hoisted out of the loop. Must be expanded inside `unsafe` code running
/// with pclmulqdq, avx2 and vpclmulqdq enabled (and bmi2, for shifts by
/// run-time amounts without moves to cl).
#[cfg(target_arch = "x86_64")]
macro_rules! vpclmul256_mul_body {
    ($w:ident, $w2:ident, $red:expr, $a:expr, $b:expr) => {{
        use core::arch::x86_64::*;
        let (a, b): (&[u64; $w], &[u64; $w]) = ($a, $b);
        let mut bp = [_mm256_setzero_si256(); $w];
        for k in 0..$w.div_ceil(2) {
            let lo = b[2 * k];
            let hi = if 2 * k + 1 < $w { b[2 * k + 1] } else { 0 };
            bp[k] = _mm256_set_epi64x(0, hi as i64, 0, lo as i64);
        }
        // acc[s]: lane 0 holds products at offset s, lane 1 at offset s + 1
        let mut acc = [_mm256_setzero_si256(); $w2];
        for i in 0..$w {
            let ai = _mm256_set1_epi64x(a[i] as i64);
            for k in 0..$w.div_ceil(2) {
                let pr = _mm256_clmulepi64_epi128(ai, bp[k], 0x00);
                acc[i + 2 * k] = _mm256_xor_si256(acc[i + 2 * k], pr);
            }
        }
        // 128-bit slots at even word offsets go to `even`, odd ones to `odd`
        // (split across two even slots at the end, as in pclmul_mul_body).
        let mut even = [_mm_setzero_si128(); $w];
        let mut odd = [_mm_setzero_si128(); $w];
        for s in 0..$w + 2 * ($w.div_ceil(2) - 1) {
            let lo = _mm256_castsi256_si128(acc[s]);
            let hi = _mm256_extracti128_si256::<1>(acc[s]);
            if s % 2 == 0 {
                even[s / 2] = _mm_xor_si128(even[s / 2], lo);
                odd[s / 2] = _mm_xor_si128(odd[s / 2], hi);
            } else {
                odd[s / 2] = _mm_xor_si128(odd[s / 2], lo);
                // offset s + 1 is even; beyond 2W - 2 only zero products
                // (the padding word of odd W) land there
                let e = s / 2 + 1;
                if e < $w {
                    even[e] = _mm_xor_si128(even[e], hi);
                }
            }
        }
        for k in 0..$w - 1 {
            even[k] = _mm_xor_si128(even[k], _mm_slli_si128(odd[k], 8));
            even[k + 1] = _mm_xor_si128(even[k + 1], _mm_srli_si128(odd[k], 8));
        }
        // Words are moved out by register extracts, not a store and
        // narrower reloads (which would defeat store-to-load forwarding).
        let mut p = [0u64; $w2];
        for k in 0..$w {
            p[2 * k] = _mm_cvtsi128_si64(even[k]) as u64;
            p[2 * k + 1] = _mm_extract_epi64::<1>(even[k]) as u64;
        }
        $crate::gf2::field::reduce_fixed::<$w, $w2>($red, p)
    }};
}
#[cfg(target_arch = "x86_64")]
pub(crate) use vpclmul256_mul_body;

/// The [`MulFn`] of a field's path and width.
pub(super) fn select_mul(field: &Field) -> MulFn {
    macro_rules! pick {
        ($w:expr, $f:ident $(, $extra:tt)?) => {
            match $w {
                1 => $f::<1, 2 $(, $extra)?> as MulFn,
                2 => $f::<2, 4 $(, $extra)?>,
                3 => $f::<3, 6 $(, $extra)?>,
                4 => $f::<4, 8 $(, $extra)?>,
                5 => $f::<5, 10 $(, $extra)?>,
                6 => $f::<6, 12 $(, $extra)?>,
                7 => $f::<7, 14 $(, $extra)?>,
                8 => $f::<8, 16 $(, $extra)?>,
                9 => $f::<9, 18 $(, $extra)?>,
                _ => mul_generic_fn,
            }
        };
    }
    let w = field.red.w;
    match field.path {
        FieldPath::Generic => mul_generic_fn,
        FieldPath::Portable => pick!(w, mul_portable_fn),
        #[cfg(target_arch = "x86_64")]
        FieldPath::Pclmul => pick!(w, mul_pclmul_fn),
        #[cfg(target_arch = "x86_64")]
        FieldPath::Vpclmul256 => pick!(w, mul_vpclmul256_fn),
        #[cfg(target_arch = "x86_64")]
        FieldPath::PclmulFold => {
            if field.fold.expect("the fold path has constants").two_words() {
                pick!(w, mul_fold_fn, true)
            } else {
                pick!(w, mul_fold_fn, false)
            }
        }
        #[cfg(target_arch = "x86_64")]
        FieldPath::Vpclmul256Fold => {
            if field.fold.expect("the fold path has constants").two_words() {
                pick!(w, mul_fold_ymm_fn, true)
            } else {
                pick!(w, mul_fold_ymm_fn, false)
            }
        }
        #[cfg(not(target_arch = "x86_64"))]
        _ => unreachable!("x86 paths are not offered on this target"),
    }
}

/// # Safety
/// See [`MulFn`].
pub(super) unsafe fn mul_generic_fn(field: &Field, a: &[u64], b: &[u64], out: &mut [u64]) {
    field.mul_generic(a, b, out)
}

/// # Safety
/// See [`MulFn`]; pclmulqdq, avx2 and vpclmulqdq, and `TWO` must be the
/// field's [`FoldConsts::two_words`].
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "pclmulqdq,sse2,avx,avx2,vpclmulqdq")]
pub(super) unsafe fn mul_fold_ymm_fn<const W: usize, const W2: usize, const TWO: bool>(
    field: &Field,
    a: &[u64],
    b: &[u64],
    out: &mut [u64],
) {
    // SAFETY: W words each (caller); the features are this function's.
    unsafe {
        let (a, b, out) = as_arrays::<W>(a, b, out);
        let k = field.fold.as_ref().expect("the fold path has constants");
        fold::mul_into_ymm::<W, TWO>(k, a, b, out);
    }
}

/// The slices as arrays of `W` words.
///
/// # Safety
/// Each slice holds exactly W words.
#[inline(always)]
pub(super) unsafe fn as_arrays<'a, const W: usize>(
    a: &'a [u64],
    b: &'a [u64],
    out: &'a mut [u64],
) -> (&'a [u64; W], &'a [u64; W], &'a mut [u64; W]) {
    debug_assert!(a.len() == W && b.len() == W && out.len() == W);
    // SAFETY: the caller guarantees W words behind each pointer.
    unsafe {
        (
            &*(a.as_ptr() as *const [u64; W]),
            &*(b.as_ptr() as *const [u64; W]),
            &mut *(out.as_mut_ptr() as *mut [u64; W]),
        )
    }
}

/// # Safety
/// See [`MulFn`].
pub(super) unsafe fn mul_portable_fn<const W: usize, const W2: usize>(
    field: &Field,
    a: &[u64],
    b: &[u64],
    out: &mut [u64],
) {
    // SAFETY: W words each (caller).
    let (a, b, out) = unsafe { as_arrays::<W>(a, b, out) };
    *out = mul_fixed::<W, W2, PortableKernel>(PortableKernel, &field.red, a, b);
}

/// # Safety
/// See [`MulFn`]; pclmulqdq and sse2.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "pclmulqdq,sse2")]
pub(super) unsafe fn mul_pclmul_fn<const W: usize, const W2: usize>(
    field: &Field,
    a: &[u64],
    b: &[u64],
    out: &mut [u64],
) {
    // SAFETY: W words each (caller).
    let (a, b, out) = unsafe { as_arrays::<W>(a, b, out) };
    *out = pclmul_mul_body!(W, W2, &field.red, a, b);
}

/// # Safety
/// See [`MulFn`]; pclmulqdq, avx2, vpclmulqdq and bmi2.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "pclmulqdq,sse2,avx,avx2,vpclmulqdq,bmi2")]
pub(super) unsafe fn mul_vpclmul256_fn<const W: usize, const W2: usize>(
    field: &Field,
    a: &[u64],
    b: &[u64],
    out: &mut [u64],
) {
    // SAFETY: W words each (caller).
    let (a, b, out) = unsafe { as_arrays::<W>(a, b, out) };
    *out = vpclmul256_mul_body!(W, W2, &field.red, a, b);
}

/// # Safety
/// See [`MulFn`]; pclmulqdq and sse2, and `TWO` must be the field's
/// [`FoldConsts::two_words`].
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "pclmulqdq,sse2")]
pub(super) unsafe fn mul_fold_fn<const W: usize, const W2: usize, const TWO: bool>(
    field: &Field,
    a: &[u64],
    b: &[u64],
    out: &mut [u64],
) {
    // SAFETY: W words each (caller); the features are this function's.
    unsafe {
        let (a, b, out) = as_arrays::<W>(a, b, out);
        let k = field.fold.as_ref().expect("the fold path has constants");
        fold::mul_into::<W, TWO>(k, a, b, out);
    }
}
