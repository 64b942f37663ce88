//! Irreducibility tests over GF(2) and the search for the field polynomials
//! P_l of `spec/conventions.md` ("Finite fields GF(2^l)").
//!
//! This code is deliberately separate from the fast field arithmetic of
//! [`super::Field`]: it has its own dense polynomial type, its own reduction
//! and its own gcd, so that a bug in the fast path cannot hide a wrong table
//! entry. Two textbook tests are given:
//!
//! - [`is_irreducible_rabin`]: Rabin's test. A polynomial f of degree l over
//!   GF(2) is irreducible iff z^(2^l) = z (mod f) and, for every prime p
//!   dividing l, gcd(z^(2^(l/p)) - z, f) = 1 (M. O. Rabin, "Probabilistic
//!   algorithms in finite fields", SIAM J. Comput. 9(2), 1980; from memory).
//! - [`is_irreducible_ben_or`]: Ben-Or's test. f is irreducible iff
//!   gcd(z^(2^i) - z, f) = 1 for i = 1 .. floor(l/2) (M. Ben-Or, "Probabilistic
//!   algorithms in finite fields", FOCS 1981; from memory). It stops at the
//!   degree of the smallest factor, so it rejects most reducible candidates
//!   quickly; the search uses it, and the tests check the table with Rabin's.
//!
//! Polynomials are given sparsely by their exponents (the degree first); this
//! is all the field table needs.

/// A dense polynomial over GF(2): coefficient i at bit i % 64 of word i / 64.
#[derive(Clone, Debug, PartialEq, Eq)]
struct Poly(Vec<u64>);

impl Poly {
    fn zero() -> Poly {
        Poly(Vec::new())
    }

    fn monomial(e: usize) -> Poly {
        let mut p = Poly(vec![0; e / 64 + 1]);
        p.0[e / 64] |= 1 << (e % 64);
        p
    }

    fn trim(&mut self) {
        while self.0.last() == Some(&0) {
            self.0.pop();
        }
    }

    /// Degree, or `None` for the zero polynomial.
    fn degree(&self) -> Option<usize> {
        let mut i = self.0.len();
        while i > 0 {
            i -= 1;
            if self.0[i] != 0 {
                return Some(i * 64 + 63 - self.0[i].leading_zeros() as usize);
            }
        }
        None
    }

    fn is_one(&self) -> bool {
        self.degree() == Some(0)
    }

    /// `self ^= other * z^s`.
    fn xor_shifted(&mut self, other: &Poly, s: usize) {
        let Some(deg) = other.degree() else { return };
        let need = (deg + s) / 64 + 1;
        if self.0.len() < need {
            self.0.resize(need, 0);
        }
        let (ws, bs) = (s / 64, s % 64);
        for (i, &w) in other.0.iter().enumerate() {
            if w == 0 {
                continue;
            }
            self.0[i + ws] ^= w << bs;
            if bs != 0 && i + ws + 1 < self.0.len() {
                self.0[i + ws + 1] ^= w >> (64 - bs);
            }
        }
        self.trim();
    }

    /// Bits at and above `l`, shifted down to start at 0.
    fn high_part(&self, l: usize) -> Poly {
        let mut h = Poly::zero();
        let Some(deg) = self.degree() else { return h };
        if deg < l {
            return h;
        }
        let (lw, ls) = (l / 64, l % 64);
        h.0 = (lw..self.0.len())
            .map(|i| {
                let lo = self.0[i] >> ls;
                let hi = if ls != 0 && i + 1 < self.0.len() {
                    self.0[i + 1] << (64 - ls)
                } else {
                    0
                };
                lo | hi
            })
            .collect();
        h.trim();
        h
    }

    fn truncate_bits(&mut self, l: usize) {
        let words = l.div_ceil(64);
        self.0.truncate(words);
        if !l.is_multiple_of(64) {
            if let Some(last) = self.0.get_mut(l / 64) {
                *last &= (1u64 << (l % 64)) - 1;
            }
        }
        self.trim();
    }

    /// Square (the Frobenius map: coefficient i moves to 2i).
    fn square(&self) -> Poly {
        // spread(w): bit j of a 32-bit half moves to bit 2j
        fn spread(mut x: u64) -> u64 {
            x &= 0xffff_ffff;
            x = (x | (x << 16)) & 0x0000_ffff_0000_ffff;
            x = (x | (x << 8)) & 0x00ff_00ff_00ff_00ff;
            x = (x | (x << 4)) & 0x0f0f_0f0f_0f0f_0f0f;
            x = (x | (x << 2)) & 0x3333_3333_3333_3333;
            x = (x | (x << 1)) & 0x5555_5555_5555_5555;
            x
        }
        let mut out = Poly(Vec::with_capacity(2 * self.0.len()));
        for &w in &self.0 {
            out.0.push(spread(w));
            out.0.push(spread(w >> 32));
        }
        out.trim();
        out
    }
}

/// f given by its exponents, highest first: f = z^e_0 + z^e_1 + ...
struct Sparse<'a> {
    exps: &'a [usize],
}

impl Sparse<'_> {
    fn degree(&self) -> usize {
        self.exps[0]
    }

    fn dense(&self) -> Poly {
        let mut p = Poly::zero();
        for &e in self.exps {
            p.xor_shifted(&Poly::monomial(0), e);
        }
        p
    }

    /// p mod f, using z^l = (sum of the lower terms of f).
    fn reduce(&self, p: &mut Poly) {
        let l = self.degree();
        loop {
            let h = p.high_part(l);
            if h.degree().is_none() {
                return;
            }
            p.truncate_bits(l);
            for &e in &self.exps[1..] {
                p.xor_shifted(&h, e);
            }
        }
    }
}

fn gcd(mut a: Poly, mut b: Poly) -> Poly {
    a.trim();
    b.trim();
    loop {
        let Some(db) = b.degree() else { return a };
        while let Some(da) = a.degree() {
            if da < db {
                break;
            }
            a.xor_shifted(&b, da - db);
        }
        std::mem::swap(&mut a, &mut b);
    }
}

fn check_exponents(exps: &[usize]) {
    assert!(
        !exps.is_empty() && exps.windows(2).all(|w| w[0] > w[1]),
        "exponents must be given highest first and distinct: {exps:?}"
    );
}

/// The distinct prime factors of `n` (trial division, common practice).
fn prime_factors(mut n: usize) -> Vec<usize> {
    let mut out = Vec::new();
    let mut p = 2;
    while p * p <= n {
        if n.is_multiple_of(p) {
            out.push(p);
            while n.is_multiple_of(p) {
                n /= p;
            }
        }
        p += 1;
    }
    if n > 1 {
        out.push(n);
    }
    out
}

/// Rabin's irreducibility test for f = sum of z^e over `exps` (highest first).
///
/// # Panics
/// If `exps` is empty or not strictly decreasing.
pub fn is_irreducible_rabin(exps: &[usize]) -> bool {
    check_exponents(exps);
    let f = Sparse { exps };
    let l = f.degree();
    if l == 0 {
        return false; // a non-zero constant is a unit, not irreducible
    }
    let mut z = Poly::monomial(1);
    f.reduce(&mut z);
    let primes = prime_factors(l);
    let wanted: Vec<usize> = primes.iter().map(|p| l / p).collect();
    let mut saved: Vec<(usize, Poly)> = Vec::new();
    // u = z^(2^i) mod f
    let mut u = z.clone();
    for i in 1..=l {
        u = u.square();
        f.reduce(&mut u);
        if wanted.contains(&i) {
            saved.push((i, u.clone()));
        }
    }
    if u != z {
        return false;
    }
    let fd = f.dense();
    saved.into_iter().all(|(_, mut v)| {
        v.xor_shifted(&z, 0);
        gcd(fd.clone(), v).is_one()
    })
}

/// Ben-Or's irreducibility test for f = sum of z^e over `exps` (highest
/// first).
///
/// # Panics
/// If `exps` is empty or not strictly decreasing.
pub fn is_irreducible_ben_or(exps: &[usize]) -> bool {
    check_exponents(exps);
    let f = Sparse { exps };
    let l = f.degree();
    if l == 0 {
        return false;
    }
    let mut z = Poly::monomial(1);
    f.reduce(&mut z);
    let fd = f.dense();
    let mut u = z.clone();
    for _ in 1..=l / 2 {
        u = u.square();
        f.reduce(&mut u);
        let mut v = u.clone();
        v.xor_shifted(&z, 0);
        if !gcd(fd.clone(), v).is_one() {
            return false;
        }
    }
    true
}

/// The middle exponents of P_l by the rule of `spec/conventions.md`: one
/// exponent k for the trinomial z^l + z^k + 1 with the smallest k, else three
/// exponents (a, b, c), a > b > c > 0, of the first irreducible pentanomial in
/// the order smallest a, then b, then c; none for P_1 = z + 1.
///
/// `test` decides irreducibility (pass [`is_irreducible_ben_or`] or
/// [`is_irreducible_rabin`]). Returns `None` if no trinomial or pentanomial of
/// degree l is irreducible (which does not happen for 2 <= l <= 2048).
pub fn search_field_poly(l: usize, test: fn(&[usize]) -> bool) -> Option<Vec<usize>> {
    if l == 1 {
        return Some(Vec::new());
    }
    if l == 0 {
        return None;
    }
    for k in 1..l {
        if test(&[l, k, 0]) {
            return Some(vec![k]);
        }
    }
    for a in 3..l {
        for b in 2..a {
            for c in 1..b {
                if test(&[l, a, b, c, 0]) {
                    return Some(vec![a, b, c]);
                }
            }
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn small_irreducibles_match_hand_lists() {
        // Irreducible polynomials over GF(2) of degree <= 4 (common practice,
        // any algebra textbook): z, z+1, z^2+z+1, z^3+z+1, z^3+z^2+1,
        // z^4+z+1, z^4+z^3+1, z^4+z^3+z^2+z+1.
        let irreducible: &[&[usize]] = &[
            &[1, 0],
            &[2, 1, 0],
            &[3, 1, 0],
            &[3, 2, 0],
            &[4, 1, 0],
            &[4, 3, 0],
            &[4, 3, 2, 1, 0],
        ];
        let reducible: &[&[usize]] = &[
            &[2, 0],       // (z+1)^2
            &[3, 0],       // (z+1)(z^2+z+1)
            &[4, 0],       // (z+1)^4
            &[4, 2, 0],    // (z^2+z+1)^2
            &[4, 3, 2, 0], // (z+1)(z^3+z+1)
            &[5, 4, 0],    // z^5+z^4+1 = (z^2+z+1)(z^3+z+1)
        ];
        for f in irreducible {
            assert!(is_irreducible_rabin(f), "{f:?}");
            assert!(is_irreducible_ben_or(f), "{f:?}");
        }
        for f in reducible {
            assert!(!is_irreducible_rabin(f), "{f:?}");
            assert!(!is_irreducible_ben_or(f), "{f:?}");
        }
    }

    /// Brute force: f of degree l is irreducible iff no polynomial of degree
    /// 1 .. l/2 divides it (the definition).
    fn irreducible_by_trial_division(f: u64) -> bool {
        let l = 63 - f.leading_zeros() as usize;
        for g in 2u64..(1 << (l / 2 + 1)) {
            let dg = 63 - g.leading_zeros() as usize;
            if dg == 0 || dg > l / 2 {
                continue;
            }
            let mut r = f;
            while r != 0 && 63 - r.leading_zeros() as usize >= dg {
                r ^= g << (63 - r.leading_zeros() as usize - dg);
            }
            if r == 0 {
                return false;
            }
        }
        true
    }

    #[test]
    fn both_tests_agree_with_trial_division_up_to_degree_12() {
        let mut count = [0usize; 13];
        for f in 2u64..(1 << 13) {
            let l = 63 - f.leading_zeros() as usize;
            let exps: Vec<usize> = (0..=l).rev().filter(|&i| (f >> i) & 1 == 1).collect();
            let want = irreducible_by_trial_division(f);
            assert_eq!(is_irreducible_rabin(&exps), want, "{f:#b}");
            assert_eq!(is_irreducible_ben_or(&exps), want, "{f:#b}");
            if want {
                count[l] += 1;
            }
        }
        // Number of irreducible polynomials of degree l over GF(2): OEIS
        // A001037 (1 -> 2, ..., 12 -> 335); Gauss's formula (common practice).
        assert_eq!(count[1..], [2, 1, 2, 3, 6, 9, 18, 30, 56, 99, 186, 335]);
    }
}
