//! Finite fields GF(2^l) for 1 <= l <= 2048 (`spec/conventions.md`, "Finite
//! fields GF(2^l)").
//!
//! An element a = a_0 + a_1 z + .. + a_{l-1} z^{l-1} is stored in
//! `ceil(l/64)` words with a_j at bit `j % 64` of word `j / 64`, like
//! [`crate::bits::Bits`]; bits at and above l are always zero. Arithmetic is
//! modulo the field polynomial P_l of the conventions page: the trinomial
//! z^l + z^k + 1 with the smallest k if one is irreducible, otherwise the
//! pentanomial z^l + z^a + z^b + z^c + 1 with the smallest (a, b, c); P_1 =
//! z + 1. The polynomials come from a generated table (`field_table.rs`, made
//! by `src/bin/gen_field_table.rs` with the searches of [`search`]); the tests
//! check every entry with Rabin's irreducibility test.
//!
//! Multiplication is a carry-less product of the word vectors
//! ([`clmul_words`], the one function a faster multi-word product can
//! replace) followed by a reduction by P_l that folds the part at and above
//! z^l back with the low terms of P_l. The carry-less kernel is the
//! [`Backend`] chosen once when the field is built; every backend gives the
//! same elements (tested).

// Fixed-width loops index several arrays by the same constant-bounded
// counter on purpose (they unroll to fixed word positions).
#![allow(clippy::needless_range_loop)]

#[path = "field_fold.rs"]
pub(crate) mod fold;
#[path = "field_search.rs"]
pub mod search;
#[path = "field_table.rs"]
mod table;

use crate::gf2::Backend;
use fold::FoldConsts;
use std::fmt;

/// Largest field size l supported.
pub const MAX_FIELD_BITS: usize = table::MAX_DEGREE;
/// Words in an element of the largest field.
pub const MAX_WORDS: usize = MAX_FIELD_BITS.div_ceil(64);

/// An error building a field.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum FieldError {
    /// l outside 1 ..= [`MAX_FIELD_BITS`].
    #[error("field size l = {l} bits is outside the supported range 1 ..= {max}")]
    UnsupportedSize {
        /// The size asked for.
        l: usize,
        /// The largest supported size.
        max: usize,
    },
    /// The carry-less kernel asked for does not run on this CPU.
    #[error("carry-less backend '{0}' is not supported by this CPU")]
    BackendUnsupported(&'static str),
    /// The product path asked for does not run for this field, backend or
    /// CPU ([`Field::paths`]).
    #[error("product path '{0}' does not run for this field on this CPU")]
    PathUnavailable(&'static str),
}

/// The field polynomial P_l (see the module docs).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct FieldPoly {
    degree: usize,
    middle: [usize; 3],
    count: usize,
}

impl FieldPoly {
    /// P_l from the table, or `None` outside 1 ..= [`MAX_FIELD_BITS`].
    pub fn for_degree(l: usize) -> Option<FieldPoly> {
        if l == 0 || l > MAX_FIELD_BITS {
            return None;
        }
        let row = table::MIDDLE_EXPONENTS[l];
        let middle = [row[0] as usize, row[1] as usize, row[2] as usize];
        let count = if l == 1 {
            0
        } else if middle[1] == 0 {
            1
        } else {
            3
        };
        Some(FieldPoly {
            degree: l,
            middle,
            count,
        })
    }

    /// The degree l.
    pub fn degree(&self) -> usize {
        self.degree
    }

    /// The exponents strictly between l and 0, highest first (one for a
    /// trinomial, three for a pentanomial, none for P_1 = z + 1).
    pub fn middle_exponents(&self) -> &[usize] {
        &self.middle[..self.count]
    }

    /// Every exponent with a non-zero coefficient, highest first.
    pub fn exponents(&self) -> Vec<usize> {
        let mut e = vec![self.degree];
        e.extend_from_slice(self.middle_exponents());
        e.push(0);
        e
    }
}

impl fmt::Display for FieldPoly {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for e in self.exponents() {
            match e {
                0 => write!(f, "1")?,
                1 => write!(f, "z + ")?,
                e => write!(f, "z^{e} + ")?,
            }
        }
        Ok(())
    }
}

/// Carry-less product `out = a * b` of word vectors (coefficient i at bit
/// i % 64 of word i / 64), schoolbook over 64 x 64 products of `backend`.
///
/// This is the one word-level multiply of the field code, kept behind this
/// function so that a faster multi-word product can replace it.
///
/// # Panics
/// If `out.len() != a.len() + b.len()`, or the backend is not supported.
pub fn clmul_words(backend: Backend, a: &[u64], b: &[u64], out: &mut [u64]) {
    assert_eq!(
        out.len(),
        a.len() + b.len(),
        "clmul_words: output needs {} words, got {}",
        a.len() + b.len(),
        out.len()
    );
    out.fill(0);
    // No skipping of zero words: the time must not depend on the operands.
    for (i, &x) in a.iter().enumerate() {
        for (j, &y) in b.iter().enumerate() {
            let (lo, hi) = backend.clmul64(x, y);
            out[i + j] ^= lo;
            out[i + j + 1] ^= hi;
        }
    }
}

/// Reduction constants of P_l shared by every multiplication.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) struct Reducer {
    /// l
    l: usize,
    /// Words of an element.
    w: usize,
    /// Exponents of P_l below l (including 0).
    low: [usize; 4],
    nlow: usize,
    /// Middle exponents as shift amounts, when all are below 64.
    mid: [u32; 3],
    /// Number of middle exponents if all are below 64 (1 or 3), else 0.
    small: usize,
}

impl Reducer {
    fn new(poly: &FieldPoly) -> Reducer {
        let mut low = [0usize; 4];
        let mid = poly.middle_exponents();
        low[..mid.len()].copy_from_slice(mid);
        low[mid.len()] = 0;
        let mut shifts = [0u32; 3];
        for (s, &e) in shifts.iter_mut().zip(mid) {
            *s = e as u32;
        }
        let small = if !mid.is_empty() && mid.iter().all(|&e| e < 64) {
            mid.len()
        } else {
            0
        };
        Reducer {
            l: poly.degree(),
            w: poly.degree().div_ceil(64),
            low,
            nlow: mid.len() + 1,
            mid: shifts,
            small,
        }
    }

    /// Whether two folds reduce any product (every low exponent e has
    /// 2e - 2 < l); the fixed-width fast path needs this.
    pub(crate) fn two_folds(&self) -> bool {
        let top = self.low[..self.nlow].iter().copied().max().unwrap_or(0);
        2 * top < self.l + 2
    }

    /// Reduces a product of `2w` words in place (generic, any l): the result
    /// is in `p[..w]` and `p[w..]` is zero.
    ///
    /// The number of folds depends only on l, P_l and the length (each fold
    /// lowers the largest possible degree from `deg` to `deg - l + e`, e the
    /// largest low exponent), never on the data: no early exit, no skipped
    /// zero words.
    fn reduce_slice(&self, p: &mut [u64]) {
        let l = self.l;
        let (lw, ls) = (l / 64, l % 64);
        let total = p.len();
        let e_max = self.low[..self.nlow].iter().copied().max().unwrap_or(0);
        let mut deg = 64 * total - 1;
        let mut h = [0u64; MAX_WORDS + 1];
        while deg >= l {
            deg = deg - l + e_max;
            // h = p >> l
            let hw = total - lw;
            for j in 0..hw {
                let lo = p[lw + j] >> ls;
                let hi = if ls != 0 && lw + j + 1 < total {
                    p[lw + j + 1] << (64 - ls)
                } else {
                    0
                };
                h[j] = lo | hi;
            }
            // clear bits >= l
            if ls != 0 {
                p[lw] &= (1u64 << ls) - 1;
                p[lw + 1..].fill(0);
            } else {
                p[lw..].fill(0);
            }
            for &e in &self.low[..self.nlow] {
                let (ew, es) = (e / 64, e % 64);
                for j in 0..hw {
                    if j + ew < total {
                        p[j + ew] ^= h[j] << es;
                    }
                    if es != 0 && j + ew + 1 < total {
                        p[j + ew + 1] ^= h[j] >> (64 - es);
                    }
                }
            }
        }
    }
}

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

/// GF(2^l) with its field polynomial, carry-less backend and product path.
#[derive(Clone, Debug)]
pub struct Field {
    poly: FieldPoly,
    backend: Backend,
    red: Reducer,
    /// Constants of [`FieldPath::PclmulFold`], where it applies.
    fold: Option<FoldConsts>,
    path: FieldPath,
    /// The product of `path` at this width, chosen once ([`select_mul`]);
    /// called only by [`Field::mul`] after its length checks.
    mul_fn: MulFn,
}

/// A product `out = a * b` of checked-length slices (see [`select_mul`]).
///
/// # Safety
/// Each slice must hold exactly `field.words()` words, and the CPU must
/// support the features of the field's path (checked when it was chosen).
type MulFn = unsafe fn(field: &Field, a: &[u64], b: &[u64], out: &mut [u64]);

impl Field {
    /// The field GF(2^l) with the fastest backend of this CPU.
    pub fn new(l: usize) -> Result<Field, FieldError> {
        Field::with_backend(l, Backend::detect())
    }

    /// The field GF(2^l) with a given backend (for tests and benches), on
    /// the fastest product path that backend allows.
    pub fn with_backend(l: usize, backend: Backend) -> Result<Field, FieldError> {
        let poly = FieldPoly::for_degree(l).ok_or(FieldError::UnsupportedSize {
            l,
            max: MAX_FIELD_BITS,
        })?;
        if !backend.is_supported() {
            return Err(FieldError::BackendUnsupported(backend.name()));
        }
        let red = Reducer::new(&poly);
        let f = Field {
            poly,
            backend,
            red,
            fold: FoldConsts::new(&red),
            path: FieldPath::Generic,
            mul_fn: mul_generic_fn,
        };
        // `paths` lists the slower paths first.
        let best = *f.paths().last().expect("the generic path always runs");
        f.with_path(best)
    }

    /// The product paths that run for this field and backend on this CPU,
    /// slowest first (the last is the default). The fixed-width paths need
    /// two folds to reduce (every table entry, tested) and l <= 576;
    /// PCLMULQDQ paths need a backend other than `Portable`.
    ///
    /// Order measured on Zen 3 (`gf2l-mul` bench, l = 255 .. 261): the
    /// register folds beat the shift-and-XOR reduction by 1.4-1.8x, and
    /// 256-bit products with the fold were level with or ahead of 128-bit
    /// ones.
    pub fn paths(&self) -> Vec<FieldPath> {
        let mut v = vec![FieldPath::Generic];
        if !self.red.two_folds() || self.red.w > 9 {
            return v;
        }
        v.push(FieldPath::Portable);
        if !self.pclmul_kernel() {
            return v;
        }
        v.push(FieldPath::Pclmul);
        if self.red.w >= WIDE_MIN_WORDS && wide_supported() {
            v.push(FieldPath::Vpclmul256);
        }
        if self.fold.is_some() {
            v.push(FieldPath::PclmulFold);
            if self.red.w >= WIDE_MIN_WORDS && wide_supported() {
                v.push(FieldPath::Vpclmul256Fold);
            }
        }
        v
    }

    /// Whether PCLMULQDQ products run for this backend.
    fn pclmul_kernel(&self) -> bool {
        #[cfg(target_arch = "x86_64")]
        {
            PclmulKernel::new(self.backend).is_some()
        }
        #[cfg(not(target_arch = "x86_64"))]
        {
            false
        }
    }

    /// The same field on another product path.
    pub fn with_path(mut self, path: FieldPath) -> Result<Field, FieldError> {
        if !self.paths().contains(&path) {
            return Err(FieldError::PathUnavailable(path.name()));
        }
        self.path = path;
        self.mul_fn = select_mul(&self);
        Ok(self)
    }

    /// The product path in use.
    pub fn path(&self) -> FieldPath {
        self.path
    }

    /// Name of the product path in use ([`FieldPath::name`]).
    pub fn path_name(&self) -> &'static str {
        self.path.name()
    }

    /// l, the number of bits of an element.
    pub fn bits(&self) -> usize {
        self.poly.degree()
    }

    /// Words of an element, ceil(l/64).
    pub fn words(&self) -> usize {
        self.red.w
    }

    /// The field polynomial.
    pub fn poly(&self) -> &FieldPoly {
        &self.poly
    }

    /// The carry-less backend.
    pub fn backend(&self) -> Backend {
        self.backend
    }

    pub(crate) fn reducer(&self) -> &Reducer {
        &self.red
    }

    /// Constants of the register fold, where it applies.
    pub(crate) fn fold_consts(&self) -> Option<&FoldConsts> {
        self.fold.as_ref()
    }

    /// `out = a * b` in GF(2^l). Operands must be reduced (no bits at or
    /// above l); so is the result.
    ///
    /// # Panics
    /// If a slice does not hold exactly [`Field::words`] words.
    #[inline]
    pub fn mul(&self, a: &[u64], b: &[u64], out: &mut [u64]) {
        let w = self.red.w;
        crate::bits::check_len("field element a (words)", w, a.len());
        crate::bits::check_len("field element b (words)", w, b.len());
        crate::bits::check_len("field element out (words)", w, out.len());
        // SAFETY: the lengths are checked above, and `mul_fn` was chosen by
        // `select_mul` for a path that `paths` found runs on this CPU.
        unsafe { (self.mul_fn)(self, a, b, out) }
    }

    /// `out = a * b` by the generic path ([`clmul_words`] and a word-level
    /// fold), for any l; the fast path of [`Field::mul`] is tested against it.
    pub fn mul_generic(&self, a: &[u64], b: &[u64], out: &mut [u64]) {
        let w = self.red.w;
        let mut p = [0u64; 2 * MAX_WORDS];
        let p = &mut p[..2 * w];
        clmul_words(self.backend, a, b, p);
        self.red.reduce_slice(p);
        out.copy_from_slice(&p[..w]);
    }

    /// Reduces an arbitrary polynomial of `2 * words()` words modulo P_l
    /// into `out` (for elements built from longer bit strings).
    pub fn reduce_wide(&self, wide: &mut [u64], out: &mut [u64]) {
        crate::bits::check_len("wide polynomial (words)", 2 * self.red.w, wide.len());
        self.red.reduce_slice(wide);
        out.copy_from_slice(&wide[..self.red.w]);
    }
}

// ---- fixed-width fast path ------------------------------------------------

/// A 64 x 64 carry-less kernel, chosen once.
pub(crate) trait Kernel: Copy + Send + Sync {
    fn clmul(self, a: u64, b: u64) -> (u64, u64);
}

/// Portable kernel.
#[derive(Clone, Copy)]
pub(crate) struct PortableKernel;

impl Kernel for PortableKernel {
    #[inline(always)]
    fn clmul(self, a: u64, b: u64) -> (u64, u64) {
        crate::gf2::clmul::portable::clmul64(a, b)
    }
}

/// PCLMULQDQ kernel; a value exists only after run-time detection.
#[cfg(target_arch = "x86_64")]
#[derive(Clone, Copy)]
pub(crate) struct PclmulKernel(());

#[cfg(target_arch = "x86_64")]
impl PclmulKernel {
    pub(crate) fn new(backend: Backend) -> Option<PclmulKernel> {
        (backend != Backend::Portable && Backend::Pclmul.is_supported()).then_some(PclmulKernel(()))
    }
}

/// Fixed-width product and reduction: `W` words per element, `W2 = 2W`.
/// Requires `Reducer::two_folds` (checked by the caller).
#[inline(always)]
pub(crate) fn mul_fixed<const W: usize, const W2: usize, K: Kernel>(
    k: K,
    red: &Reducer,
    a: &[u64; W],
    b: &[u64; W],
) -> [u64; W] {
    let mut p = [0u64; W2];
    for i in 0..W {
        for j in 0..W {
            let (lo, hi) = k.clmul(a[i], b[j]);
            p[i + j] ^= lo;
            p[i + j + 1] ^= hi;
        }
    }
    reduce_fixed::<W, W2>(red, p)
}

/// `acc ^= h * z^e` (bits pushed past `W2` words are dropped; callers keep
/// degrees below that).
#[inline(always)]
fn xor_shifted<const W: usize, const W2: usize>(acc: &mut [u64; W2], h: &[u64; W], e: usize) {
    let (ew, es) = (e / 64, (e % 64) as u32);
    if es == 0 {
        for j in 0..W {
            if j + ew < W2 {
                acc[j + ew] ^= h[j];
            }
        }
    } else {
        for j in 0..W {
            if j + ew < W2 {
                acc[j + ew] ^= h[j] << es;
            }
            if j + ew + 1 < W2 {
                acc[j + ew + 1] ^= h[j] >> (64 - es);
            }
        }
    }
}

/// Splits `p` at z^l: returns the part at and above z^l shifted down (W
/// words suffice for the degrees that occur) and clears it in `p`.
#[inline(always)]
fn split_high<const W: usize, const W2: usize>(p: &mut [u64; W2], l: usize) -> [u64; W] {
    let (lw, ls) = (l / 64, (l % 64) as u32);
    let mut h = [0u64; W];
    for j in 0..W {
        let idx = lw + j;
        let lo = if idx < W2 { p[idx] >> ls } else { 0 };
        let hi = if ls != 0 && idx + 1 < W2 {
            p[idx + 1] << (64 - ls)
        } else {
            0
        };
        h[j] = lo | hi;
    }
    for (i, word) in p.iter_mut().enumerate() {
        if i > lw || (i == lw && ls == 0) {
            *word = 0;
        } else if i == lw {
            *word &= (1u64 << ls) - 1;
        }
    }
    h
}

/// Reduction when every middle exponent is below 64 (`NM` of them): the
/// first fold moves W words, the second at most 62 bits, all at fixed word
/// positions.
#[inline(always)]
fn reduce_small<const W: usize, const W2: usize, const NM: usize>(
    red: &Reducer,
    p: [u64; W2],
) -> [u64; W] {
    let ls = (red.l % 64) as u32;
    let mut h = [0u64; W];
    let mut r = [0u64; W];
    r.copy_from_slice(&p[..W]);
    let mask = if ls == 0 { u64::MAX } else { (1u64 << ls) - 1 };
    if ls == 0 {
        // l = 64 W
        h.copy_from_slice(&p[W..]);
    } else {
        // l = 64 (W - 1) + ls
        for j in 0..W {
            h[j] = (p[W - 1 + j] >> ls) | (p[W + j] << (64 - ls));
        }
        r[W - 1] &= mask;
    }
    let mut over = 0u64;
    for j in 0..W {
        r[j] ^= h[j];
    }
    for &e in &red.mid[..NM] {
        for j in 0..W {
            r[j] ^= h[j] << e;
            if j + 1 < W {
                r[j + 1] ^= h[j] >> (64 - e);
            } else {
                over ^= h[j] >> (64 - e);
            }
        }
    }
    let h2 = if ls == 0 {
        over
    } else {
        let v = (r[W - 1] >> ls) | (over << (64 - ls));
        r[W - 1] &= mask;
        v
    };
    r[0] ^= h2;
    for &e in &red.mid[..NM] {
        r[0] ^= h2 << e;
        if W > 1 {
            r[1] ^= h2 >> (64 - e);
        }
    }
    r
}

/// Reduction of a `W2`-word product (degree <= 2l - 2) by P_l with two
/// folds: z^l = (low terms of P_l), applied to the part above z^l, then once
/// more to what the first fold pushed over z^l. Two folds suffice when every
/// low exponent e has 2e - 2 < l (`Reducer::two_folds`).
#[inline(always)]
pub(crate) fn reduce_fixed<const W: usize, const W2: usize>(
    red: &Reducer,
    mut p: [u64; W2],
) -> [u64; W] {
    match red.small {
        1 => return reduce_small::<W, W2, 1>(red, p),
        3 => return reduce_small::<W, W2, 3>(red, p),
        _ => {}
    }
    for _ in 0..2 {
        let h = split_high::<W, W2>(&mut p, red.l);
        for &e in &red.low[..red.nlow] {
            xor_shifted::<W, W2>(&mut p, &h, e);
        }
    }
    let mut r = [0u64; W];
    r.copy_from_slice(&p[..W]);
    r
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
const WIDE_MIN_WORDS: usize = 3;

/// Whether 256-bit VPCLMULQDQ with AVX2 runs here, with BMI2 for the shifts
/// of the reduction by run-time amounts (run-time detection; the
/// test-only feature `no_vpclmul` switches it off like the AVX-512 backend).
fn wide_supported() -> bool {
    #[cfg(target_arch = "x86_64")]
    {
        !cfg!(feature = "no_vpclmul")
            && !cfg!(miri)
            && std::is_x86_feature_detected!("pclmulqdq")
            && std::is_x86_feature_detected!("avx2")
            && std::is_x86_feature_detected!("vpclmulqdq")
            && std::is_x86_feature_detected!("bmi2")
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        false
    }
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
fn select_mul(field: &Field) -> MulFn {
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
unsafe fn mul_generic_fn(field: &Field, a: &[u64], b: &[u64], out: &mut [u64]) {
    field.mul_generic(a, b, out)
}

/// # Safety
/// See [`MulFn`]; pclmulqdq, avx2 and vpclmulqdq, and `TWO` must be the
/// field's [`FoldConsts::two_words`].
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "pclmulqdq,sse2,avx,avx2,vpclmulqdq")]
unsafe fn mul_fold_ymm_fn<const W: usize, const W2: usize, const TWO: bool>(
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
unsafe fn as_arrays<'a, const W: usize>(
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
unsafe fn mul_portable_fn<const W: usize, const W2: usize>(
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
unsafe fn mul_pclmul_fn<const W: usize, const W2: usize>(
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
unsafe fn mul_vpclmul256_fn<const W: usize, const W2: usize>(
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
unsafe fn mul_fold_fn<const W: usize, const W2: usize, const TWO: bool>(
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

#[cfg(test)]
mod tests {
    use super::*;

    /// Bit-by-bit product modulo P_l, straight from the definitions (oracle).
    pub(crate) fn mul_bitwise(poly: &FieldPoly, a: &[bool], b: &[bool]) -> Vec<bool> {
        let l = poly.degree();
        let mut p = vec![false; 2 * l];
        for i in 0..l {
            for j in 0..l {
                p[i + j] ^= a[i] & b[j];
            }
        }
        let exps = poly.exponents();
        for i in (l..2 * l).rev() {
            if p[i] {
                for &e in &exps {
                    p[i - l + e] ^= true;
                }
            }
        }
        p.truncate(l);
        p
    }

    fn to_bools(w: &[u64], l: usize) -> Vec<bool> {
        (0..l).map(|i| (w[i / 64] >> (i % 64)) & 1 == 1).collect()
    }

    fn from_bools(b: &[bool]) -> Vec<u64> {
        let mut w = vec![0u64; b.len().div_ceil(64)];
        for (i, &v) in b.iter().enumerate() {
            if v {
                w[i / 64] |= 1 << (i % 64);
            }
        }
        w
    }

    struct Rng(u64);
    impl Rng {
        fn next(&mut self) -> u64 {
            // xorshift64* (common practice), fixed seed for repeatability
            self.0 ^= self.0 >> 12;
            self.0 ^= self.0 << 25;
            self.0 ^= self.0 >> 27;
            self.0.wrapping_mul(0x2545_f491_4f6c_dd1d)
        }
        fn element(&mut self, l: usize) -> Vec<u64> {
            let mut w: Vec<u64> = (0..l.div_ceil(64)).map(|_| self.next()).collect();
            if !l.is_multiple_of(64) {
                *w.last_mut().unwrap() &= (1u64 << (l % 64)) - 1;
            }
            w
        }
    }

    #[test]
    fn fips197_aes_field_product() {
        // NIST FIPS 197 (2001), section 4.2: in GF(2^8) with
        // m(x) = x^8 + x^4 + x^3 + x + 1, {57} . {83} = {c1}.
        let f = Field::new(8).unwrap();
        assert_eq!(f.poly().exponents(), vec![8, 4, 3, 1, 0]);
        let mut out = [0u64];
        f.mul(&[0x57], &[0x83], &mut out);
        assert_eq!(out[0], 0xc1);
        // FIPS 197 section 4.2.1: {57} . {13} = {fe}.
        f.mul(&[0x57], &[0x13], &mut out);
        assert_eq!(out[0], 0xfe);
    }

    #[test]
    fn published_field_polynomials() {
        // NIST SP 800-38D (GCM), section 6.3: the field GF(2^128) is defined
        // by 1 + x + x^2 + x^7 + x^128.
        assert_eq!(
            FieldPoly::for_degree(128).unwrap().exponents(),
            vec![128, 7, 2, 1, 0]
        );
        // NIST FIPS 186 (binary curves, from memory): B-163 / K-163
        // f(z) = z^163 + z^7 + z^6 + z^3 + 1; B-233 / K-233 z^233 + z^74 + 1;
        // B-283 / K-283 z^283 + z^12 + z^7 + z^5 + 1.
        assert_eq!(
            FieldPoly::for_degree(163).unwrap().exponents(),
            vec![163, 7, 6, 3, 0]
        );
        assert_eq!(
            FieldPoly::for_degree(233).unwrap().exponents(),
            vec![233, 74, 0]
        );
        assert_eq!(
            FieldPoly::for_degree(283).unwrap().exponents(),
            vec![283, 12, 7, 5, 0]
        );
        // spec/trevisan.md 9: P_16 = z^16 + z^5 + z^3 + z + 1 and
        // P_24 = z^24 + z^4 + z^3 + z + 1.
        assert_eq!(
            FieldPoly::for_degree(16).unwrap().exponents(),
            vec![16, 5, 3, 1, 0]
        );
        assert_eq!(
            FieldPoly::for_degree(24).unwrap().exponents(),
            vec![24, 4, 3, 1, 0]
        );
        // conventions.md: P_1 = z + 1.
        assert_eq!(FieldPoly::for_degree(1).unwrap().exponents(), vec![1, 0]);
        assert!(FieldPoly::for_degree(0).is_none());
        assert!(FieldPoly::for_degree(MAX_FIELD_BITS + 1).is_none());
    }

    #[test]
    fn every_table_entry_is_irreducible_by_rabin() {
        for l in 1..=MAX_FIELD_BITS {
            let p = FieldPoly::for_degree(l).unwrap();
            assert!(
                search::is_irreducible_rabin(&p.exponents()),
                "P_{l} = {p} is not irreducible"
            );
        }
    }

    #[test]
    fn every_table_entry_takes_the_two_fold_fast_path() {
        // The smallest trinomial exponent is at most l/2 (z^l + z^k + 1 and
        // z^l + z^(l-k) + 1 are reciprocal, common practice), and the table's
        // pentanomials have small exponents; so two folds always suffice.
        for l in 1..=MAX_FIELD_BITS {
            let f = Field::new(l).unwrap();
            assert!(f.reducer().two_folds(), "l = {l}: {}", f.poly());
        }
    }

    #[test]
    fn table_follows_the_rule_for_small_degrees() {
        // Regenerates the start of the table with Rabin's test (the generator
        // uses Ben-Or's) and compares; the whole table is compared by
        // `gen_field_table --check`.
        for l in 1..=200 {
            let want = search::search_field_poly(l, search::is_irreducible_rabin).unwrap();
            let p = FieldPoly::for_degree(l).unwrap();
            assert_eq!(p.middle_exponents(), &want[..], "l = {l}");
        }
    }

    #[test]
    fn products_match_the_bitwise_oracle() {
        let mut rng = Rng(0x1234_5678_9abc_def1);
        let sizes: Vec<usize> = (1..=70)
            .chain([
                127, 128, 129, 163, 191, 192, 233, 255, 256, 261, 281, 283, 521, 1000, 2048,
            ])
            .collect();
        for l in sizes {
            let fields = Backend::all_supported().into_iter().flat_map(|be| {
                let f = Field::with_backend(l, be).unwrap();
                f.paths()
                    .into_iter()
                    .map(move |p| f.clone().with_path(p).unwrap())
            });
            for f in fields {
                let be = (f.backend(), f.path_name());
                for _ in 0..8 {
                    let a = rng.element(l);
                    let b = rng.element(l);
                    let mut out = vec![0u64; f.words()];
                    f.mul(&a, &b, &mut out);
                    let want =
                        from_bools(&mul_bitwise(f.poly(), &to_bools(&a, l), &to_bools(&b, l)));
                    assert_eq!(out, want, "l = {l}, backend {be:?}");
                    f.mul_generic(&a, &b, &mut out);
                    assert_eq!(out, want, "generic path, l = {l}, backend {be:?}");
                }
            }
        }
    }

    #[test]
    fn every_path_agrees_with_generic_for_every_fixed_width_size() {
        // Each l of the fixed-width range, every path of this CPU, on random
        // operands and on all-ones operands (the largest product degrees,
        // where the folds carry furthest); `mul_generic` is checked against
        // the bitwise oracle above.
        let mut rng = Rng(0x0f0f_1234_dead_beef);
        for l in 1usize..=576 {
            let ones = {
                let mut w = vec![u64::MAX; l.div_ceil(64)];
                if !l.is_multiple_of(64) {
                    *w.last_mut().unwrap() = (1u64 << (l % 64)) - 1;
                }
                w
            };
            let mut cases = vec![(ones.clone(), ones.clone())];
            for _ in 0..3 {
                cases.push((rng.element(l), rng.element(l)));
                cases.push((ones.clone(), rng.element(l)));
            }
            let base = Field::new(l).unwrap();
            for (a, b) in &cases {
                let mut want = vec![0u64; base.words()];
                base.mul_generic(a, b, &mut want);
                for path in base.paths() {
                    let f = base.clone().with_path(path).unwrap();
                    let mut got = vec![0u64; f.words()];
                    f.mul(a, b, &mut got);
                    assert_eq!(got, want, "l = {l}, path {}", path.name());
                }
            }
        }
    }

    #[test]
    fn field_axioms_on_random_elements() {
        // Common practice: a * b = b * a, (a * b) * c = a * (b * c),
        // a * (b + c) = a * b + a * c, a^(2^l) = a (Fermat).
        let mut rng = Rng(42);
        for l in [1usize, 2, 7, 64, 65, 130, 300] {
            let f = Field::new(l).unwrap();
            let w = f.words();
            let (a, b, c) = (rng.element(l), rng.element(l), rng.element(l));
            let mut ab = vec![0; w];
            let mut ba = vec![0; w];
            f.mul(&a, &b, &mut ab);
            f.mul(&b, &a, &mut ba);
            assert_eq!(ab, ba);
            let mut abc = vec![0; w];
            let mut bc = vec![0; w];
            let mut a_bc = vec![0; w];
            f.mul(&ab, &c, &mut abc);
            f.mul(&b, &c, &mut bc);
            f.mul(&a, &bc, &mut a_bc);
            assert_eq!(abc, a_bc);
            let bpc: Vec<u64> = b.iter().zip(&c).map(|(x, y)| x ^ y).collect();
            let mut a_bpc = vec![0; w];
            let mut ac = vec![0; w];
            f.mul(&a, &bpc, &mut a_bpc);
            f.mul(&a, &c, &mut ac);
            let sum: Vec<u64> = ab.iter().zip(&ac).map(|(x, y)| x ^ y).collect();
            assert_eq!(a_bpc, sum);
            let mut x = a.clone();
            for _ in 0..l {
                let mut y = vec![0; w];
                f.mul(&x, &x, &mut y);
                x = y;
            }
            assert_eq!(x, a, "Frobenius, l = {l}");
        }
    }
}
