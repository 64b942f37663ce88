//! Finite fields GF(2^l) for 1 <= l <= 2048 (`spec/conventions.md`, "Finite
//! fields GF(2^l)").
//!
//! An element a = a_0 + a_1 z + .. + a_{l-1} z^{l-1} is stored in
//! `ceil(l/64)` words with a_j at bit `j % 64` of word `j / 64`, like
//! [`crate::bits::Bits`]; bits at and above l are always zero. Arithmetic is
//! modulo the field polynomial P_l of the conventions page: the trinomial
//! z^l + z^k + 1 with the smallest k if one is irreducible, otherwise the
//! pentanomial z^l + z^a + z^b + z^c + 1 with the smallest (a, b, c); P_1 =
//! z + 1. The polynomials come from a generated table (`table.rs`, made
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

pub(crate) mod fold;
pub(crate) mod horner;
mod paths;
mod poly;
mod reduce;
pub mod search;
mod table;

pub use paths::FieldPath;
pub(crate) use paths::*;
pub use poly::{clmul_words, FieldPoly};
pub(crate) use reduce::*;

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

    /// The crate's one test generator, with field elements.
    struct Rng(u64);
    impl Rng {
        fn next(&mut self) -> u64 {
            let mut p = crate::bits::pseudo::Pseudo(self.0);
            let v = p.next();
            self.0 = p.0;
            v
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
