//! Slow, obviously correct twin of the Trevisan extractor, written straight
//! from `spec/trevisan.md` sections 2 to 4 with one bit per `bool`. It shares
//! no code with the fast path except the table of field polynomials P_l
//! (which is part of the definition) and is used only by tests and by the
//! generator of `vectors/trevisan.vec`.

use super::{DesignKind, OneBit};
use crate::gf2::field::FieldPoly;

/// The parameters, as plain integers (q given explicitly).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Params {
    /// n
    pub n: usize,
    /// m
    pub m: usize,
    /// PH or IP
    pub one_bit: OneBit,
    /// l (PH only)
    pub l: usize,
    /// POLY or BLOCK
    pub design: DesignKind,
    /// q
    pub q: u64,
}

/// One group: (first set, number of sets, D, width w, seed offset).
type RefGroup = (u64, u64, u64, u64, u64);

fn pow(q: u64, e: u64) -> u128 {
    (0..e).fold(1u128, |acc, _| acc * q as u128)
}

fn binom(n: u64, k: u64) -> u128 {
    if k > n {
        return 0;
    }
    let mut r = 1u128;
    for i in 0..k {
        r = r * (n - i) as u128 / (i + 1) as u128;
    }
    r
}

/// N_D = sum over a = 0 .. min(D, t) of binom(t, a) q^(D-a) (4.2).
fn n_d(t: u64, q: u64, d: u64) -> u128 {
    (0..=d.min(t)).map(|a| binom(t, a) * pow(q, d - a)).sum()
}

/// The groups of the design, transcribed from 4.1 (one group) and the
/// pseudo-code of 4.2.
pub fn groups(p: &Params, t: u64) -> Vec<RefGroup> {
    let q = p.q;
    let m = p.m as u64;
    match p.design {
        DesignKind::Poly => {
            let mut d = 0;
            while pow(q, d + 1) < m as u128 {
                d += 1;
            }
            let w = if d >= 1 { q } else { m };
            vec![(0, m, d, w, 0)]
        }
        DesignKind::Block => {
            let (mut done, mut off) = (0u64, 0u64);
            let mut out = Vec::new();
            while done < m {
                let rem = (m - done) as u128;
                let (mut best, mut best_d) = (0u128, 0u64);
                let mut d = 0u64;
                loop {
                    let cap = rem
                        .min(pow(q, d + 1))
                        .min(1 + (rem - 1) * pow(q, d) / n_d(t, q, d));
                    if cap > best {
                        best = cap;
                        best_d = d;
                    }
                    if pow(q, d + 1) >= rem || d + 1 > t - 1 {
                        break;
                    }
                    d += 1;
                }
                let w = if best_d >= 1 { q } else { best as u64 };
                out.push((done, best as u64, best_d, w, off));
                done += best as u64;
                off += t * w;
            }
            out
        }
    }
}

/// Seed length d.
pub fn seed_bits(p: &Params) -> usize {
    let t = set_size(p);
    groups(p, t as u64)
        .iter()
        .map(|g| (t as u64 * g.3) as usize)
        .sum()
}

/// t: 2l for PH, n for IP.
pub fn set_size(p: &Params) -> usize {
    match p.one_bit {
        OneBit::Ph => 2 * p.l,
        OneBit::Ip => p.n,
    }
}

/// S_i as a list of positions, increasing: off + a w + p_u(a), with p_u's
/// coefficients the little-endian base-q digits of the local index u.
pub fn set(p: &Params, groups: &[RefGroup], t: u64, i: u64) -> Vec<u64> {
    let &(start, _, d, w, off) = groups
        .iter()
        .find(|g| g.0 <= i && i < g.0 + g.1)
        .expect("i < m");
    let mut u = i - start;
    let mut digits = Vec::new();
    for _ in 0..=d {
        digits.push(u % p.q);
        u /= p.q;
    }
    (0..t)
        .map(|a| {
            // p_u(a) = sum of c_k a^k mod q, term by term
            let mut v: u128 = 0;
            for (k, &c) in digits.iter().enumerate() {
                let mut ak: u128 = 1;
                for _ in 0..k {
                    ak = ak * a as u128 % p.q as u128;
                }
                v = (v + c as u128 * ak) % p.q as u128;
            }
            off + a * w + v as u64
        })
        .collect()
}

/// Product in GF(2^l) bit by bit: schoolbook, then long division by P_l.
fn field_mul(poly: &FieldPoly, a: &[bool], b: &[bool]) -> Vec<bool> {
    let l = poly.degree();
    let mut prod = vec![false; 2 * l];
    for i in 0..l {
        for j in 0..l {
            prod[i + j] ^= a[i] && b[j];
        }
    }
    let exps = poly.exponents();
    for i in (l..2 * l).rev() {
        if prod[i] {
            for &e in &exps {
                prod[i - l + e] ^= true;
            }
        }
    }
    prod.truncate(l);
    prod
}

/// C(x, u) by section 3: PH (3.1) or IP (3.2). `x` has n bits, `u` t bits.
pub fn one_bit(p: &Params, x: &[bool], u: &[bool]) -> bool {
    match p.one_bit {
        OneBit::Ip => x.iter().zip(u).fold(false, |acc, (&a, &b)| acc ^ (a && b)),
        OneBit::Ph => {
            let l = p.l;
            let poly = FieldPoly::for_degree(l).expect("l in the table");
            let nb = x.len().div_ceil(l);
            let block = |k: usize| -> Vec<bool> {
                (0..l)
                    .map(|j| x.get(k * l + j).copied().unwrap_or(false))
                    .collect()
            };
            let alpha: Vec<bool> = u[..l].to_vec();
            let beta: Vec<bool> = u[l..2 * l].to_vec();
            let mut v = block(nb - 1);
            for k in (0..nb - 1).rev() {
                let t = field_mul(&poly, &v, &alpha);
                v = t.iter().zip(block(k)).map(|(a, b)| a ^ b).collect();
            }
            beta.iter()
                .zip(&v)
                .fold(false, |acc, (&b, &vj)| acc ^ (b && vj))
        }
    }
}

/// The whole output z_0 .. z_{m-1}, z_i = C(x, y|S_i) (section 2).
///
/// # Panics
/// If the lengths do not match the parameters.
pub fn extract(p: &Params, x: &[bool], y: &[bool]) -> Vec<bool> {
    assert_eq!(x.len(), p.n, "input length");
    let t = set_size(p) as u64;
    let gs = groups(p, t);
    assert_eq!(y.len(), seed_bits(p), "seed length");
    (0..p.m as u64)
        .map(|i| {
            let u: Vec<bool> = set(p, &gs, t, i).iter().map(|&e| y[e as usize]).collect();
            one_bit(p, x, &u)
        })
        .collect()
}
