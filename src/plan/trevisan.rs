//! Parameters of Trevisan-type extractors (`spec/trevisan.md` sections 3, 4,
//! 6 and rule D6 of section 8).
//!
//! The construction (Trevisan \[Tre01\] with weak designs \[RRV02\], analysed
//! against quantum side information in \[DPVR12\]; theorem constants recalled
//! from memory, listed in `spec/trevisan.md` 10) is fixed by the integers of
//! [`TrevisanFunction`]: `(n, m, one-bit, l, design, q)`. This module finds
//! them by the deterministic search of section 6 and derives the seed length
//! `d`; the extractor itself lives in `crate::extract`.

use super::compose::Budget;
use super::{check_entropy, Error, ErrorKind};

/// The one-bit extractor (`spec/trevisan.md` 3) and the weak design (4):
/// the extractor's own vocabulary, so a plan names the function it runs.
pub use crate::extract::trevisan::{DesignKind as Design, OneBit};

/// The integers that define a Trevisan-type extractor (`spec/trevisan.md`
/// 6, "What defines the function"); everything else (D, widths, groups, d)
/// follows from them. Reproducing an output uses these, not the search.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize)]
pub struct TrevisanFunction {
    /// Input length n.
    pub n: u64,
    /// Output length m.
    pub m: u64,
    /// The one-bit extractor.
    pub one_bit: OneBit,
    /// Field size l of PH (`None` for IP).
    pub l: Option<u64>,
    /// The weak design.
    pub design: Design,
    /// The prime q of the design.
    pub q: u64,
}

/// One group of a BLOCK design (`spec/trevisan.md` 4.2).
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
pub struct Group {
    /// Number of sets in the group.
    pub size: u64,
    /// Polynomial degree D of the group.
    pub degree: u32,
    /// Width w of the group (q if D >= 1, else the size).
    pub width: u64,
    /// First seed position of the group.
    pub offset: u64,
}

/// The design's derived quantities (`spec/trevisan.md` 4.1 and 4.2).
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct DesignShape {
    /// Set size t.
    pub t: u64,
    /// The prime q.
    pub q: u64,
    /// Largest polynomial degree D (over all groups for BLOCK).
    pub degree: u32,
    /// Overlap parameter r of the weak (t, r)-design.
    pub r: f64,
    /// `r * m`, computed as `N_D m / q^D` for POLY (exactly m for BLOCK).
    pub rm: f64,
    /// Seed length d.
    pub d: u64,
    /// The groups (BLOCK only; empty for POLY).
    pub groups: Vec<Group>,
}

/// A planned Trevisan-type extractor: the defining integers, the derived
/// design and the error figures (`spec/trevisan.md` 6).
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct TrevisanPlan {
    /// The integers that define the function.
    pub function: TrevisanFunction,
    /// Design factor c (q = smallest prime >= c t).
    pub c: u64,
    /// The design's derived quantities, including the seed length d.
    pub shape: DesignShape,
    /// `log2(1/eps_1)` of the one-bit extractor.
    pub log2_inv_eps1: f64,
    /// The extractor error per block with a uniform seed (PH: `3 m
    /// sqrt(eps_1)`, IP: `m eps_1`).
    pub eps_ext: f64,
    /// The total of the run by the hashing page's section-5 formula.
    pub eps_total: f64,
}

impl TrevisanPlan {
    /// Seed length d in bits.
    pub fn seed_bits(&self) -> u64 {
        self.shape.d
    }
}

// The design maths exists once, in the extractor (`extract::trevisan::design`):
// the planner computes its seed lengths and overlaps with the very code that
// builds the sets.
use crate::extract::trevisan::design::{self as ext, Design as ExtDesign};
use crate::extract::trevisan::ErrorKind as ExtKind;

/// Primality by trial division (the extractor's own test; `spec/trevisan.md`
/// 4: "primes below 2^32 can be found by trial division", common practice).
pub fn is_prime(x: u64) -> bool {
    ext::is_prime(x)
}

/// The smallest prime `>= x` (`spec/trevisan.md` 4).
pub fn next_prime(x: u64) -> u64 {
    let mut p = x.max(2);
    while !is_prime(p) {
        p += 1;
    }
    p
}

/// `A_h = sum over a = 0 .. min(h, t) of binom(t, a) q^(h - a)`
/// (`spec/trevisan.md` 4, derived there; `N_D = A_D` in 4.2). `None` on
/// overflow of 128 bits.
pub fn a_h(t: u64, q: u64, h: u32) -> Option<u128> {
    ext::a_h(t, q, u64::from(h))
}

/// `R_D = A_D / q^D = sum over a = 0 .. min(D, t) of binom(t, a) q^-a`
/// (`spec/trevisan.md` 4): the overlap r of the POLY design (D4, derived
/// there).
pub fn r_d(t: u64, q: u64, degree: u32) -> f64 {
    ext::r_d(t, q, u64::from(degree))
}

/// The planner's error for a design the extractor refuses.
fn design_error(e: crate::extract::trevisan::Error, m: u64, t: u64, q: u64) -> Error {
    match e.kind() {
        ExtKind::TooSmall { value: 0, .. } if e.field() == "output-bits" => {
            Error::new("m", ErrorKind::Zero)
        }
        ExtKind::TooSmall { value: 0, .. } => Error::new("t", ErrorKind::Zero),
        ExtKind::TooManySets { .. } => Error::new(
            "m",
            ErrorKind::LengthOutsideFamily {
                m,
                max: (q as u128)
                    .checked_pow(t as u32)
                    .map_or(u64::MAX, |p| p.min(u64::MAX as u128) as u64),
                family: "POLY design (m <= q^t)",
            },
        ),
        ExtKind::Overflow { .. } => Error::new("m", ErrorKind::TooLarge { what: "design" }),
        _ => Error::new(
            "q",
            ErrorKind::InvalidLength {
                n: q,
                why: "the design needs a prime q >= t below 2^32",
            },
        ),
    }
}

/// The derived quantities of the extractor's design.
fn shape_of(d: &ExtDesign, m: u64, t: u64, q: u64) -> Result<DesignShape, Error> {
    let degree = d.max_degree() as u32;
    let (r, rm, groups) = match d.kind() {
        Design::Poly => {
            let n_d =
                a_h(t, q, degree).ok_or(Error::new("m", ErrorKind::TooLarge { what: "N_D" }))?;
            let q_d = (q as u128)
                .checked_pow(degree)
                .ok_or(Error::new("m", ErrorKind::TooLarge { what: "q^D" }))?;
            (
                r_d(t, q, degree),
                n_d as f64 * m as f64 / q_d as f64,
                Vec::new(),
            )
        }
        Design::Block => (
            1.0,
            m as f64,
            d.groups()
                .iter()
                .map(|g| Group {
                    size: g.size,
                    degree: g.degree as u32,
                    width: g.width,
                    offset: g.offset,
                })
                .collect(),
        ),
    };
    Ok(DesignShape {
        t,
        q,
        degree,
        r,
        rm,
        d: d.seed_bits(),
        groups,
    })
}

/// The POLY design for m sets of size t over GF(q) (`spec/trevisan.md`
/// 4.1), built by the extractor's own code: D = the smallest D >= 0 with
/// `q^(D+1) >= m`, refused when `D > t - 1`; width `w = q` (D >= 1) or `m`
/// (D = 0); `d = t w`; `r = R_D`.
pub fn poly_design(m: u64, t: u64, q: u64) -> Result<DesignShape, Error> {
    let d = ExtDesign::poly(m, t, q).map_err(|e| design_error(e, m, t, q))?;
    shape_of(&d, m, t, q)
}

/// The BLOCK design (`spec/trevisan.md` 4.2, the group rule exactly as
/// written there, built by the extractor's own code; r = 1 by D5, derived
/// there).
pub fn block_design(m: u64, t: u64, q: u64) -> Result<DesignShape, Error> {
    let d = ExtDesign::block(m, t, q).map_err(|e| design_error(e, m, t, q))?;
    shape_of(&d, m, t, q)
}

/// The field size l of PH for `n` input bits and a per-bit error
/// `eps_1 = 2^-log2_inv_eps1` (`spec/trevisan.md` 3.1, this page's rule):
/// the smallest `l >= 1` with `ceil(n/l) = 1` or
/// `ceil(n/l) - 1 <= 2^(l+1) eps_1^2` (compared in logarithms).
pub fn ph_field_size(n: u64, log2_inv_eps1: f64) -> u64 {
    let mut l = 1u64;
    loop {
        let nb = n.div_ceil(l);
        if nb <= 1 || ((nb - 1) as f64).log2() <= (l + 1) as f64 - 2.0 * log2_inv_eps1 {
            return l;
        }
        l += 1;
    }
}

/// The security inputs of the Trevisan search (`spec/trevisan.md` 6).
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct TrevisanInputs {
    /// Input length n.
    pub n: u64,
    /// Smooth min-entropy k_s of each block, in bits.
    pub k_s: f64,
    /// Error target and its fixed terms (eps_total, eps_cert, eps_seed, L,
    /// eps_s, s_def).
    pub budget: Budget,
    /// The one-bit extractor.
    pub one_bit: OneBit,
    /// The weak design.
    pub design: Design,
    /// Design factor c >= 1 (q = smallest prime >= c t).
    pub c: u64,
}

/// The result of `cond(m)` when it holds.
struct Candidate {
    l: Option<u64>,
    shape: DesignShape,
    log2_inv_eps1: f64,
}

fn design_for(design: Design, m: u64, t: u64, c: u64) -> Option<DesignShape> {
    let q = next_prime(c.checked_mul(t)?);
    match design {
        Design::Poly => poly_design(m, t, q).ok(),
        Design::Block => block_design(m, t, q).ok(),
    }
}

/// `cond(m)` of `spec/trevisan.md` 6.
fn cond(inp: &TrevisanInputs, eps1: f64, k_a: f64, m: u64) -> Option<Candidate> {
    let mf = m as f64;
    match inp.one_bit {
        OneBit::Ph => {
            let lambda = 2.0 * (3.0 * mf / eps1).log2();
            let l = ph_field_size(inp.n, lambda);
            let shape = design_for(inp.design, m, 2 * l, inp.c)?;
            (3.0 * lambda + shape.rm <= k_a).then_some(Candidate {
                l: Some(l),
                shape,
                log2_inv_eps1: lambda,
            })
        }
        OneBit::Ip => {
            let lambda = (mf / eps1).log2();
            let shape = design_for(inp.design, m, inp.n, inp.c)?;
            (2.0 * lambda + 1.0 + shape.rm <= k_a).then_some(Candidate {
                l: None,
                shape,
                log2_inv_eps1: lambda,
            })
        }
    }
}

/// The deterministic parameter search of `spec/trevisan.md` 6 (normative):
/// `eps_ext` from the budget exactly as in `hashing-and-composition.md`
/// 2.5, `eps' = eps_ext 2^-s_def` (rule D6 of 8), `k_a = k_s -
/// log2(1/(1 - eps_s))` (S1), then the binary search `lo = 0`,
/// `hi = floor(k_s) + 1` on `cond(m)`, and the final check
/// `eps_cert + eps_seed + L (2 eps_s + 2^s_def eps_actual) <= eps_total`.
/// Security rests on T1 (PH) and T2 (IP) of section 5 (\[DPVR12\], with
/// \[KT08\] for T1; constants from memory).
///
/// `cond` is not monotone in m (l, q and D move in steps), so the result need
/// not be the largest valid m; it always satisfies `cond`.
///
/// Refuses: `k_s > n`, a budget `<= 0`, `c = 0`, and `m = 0`
/// ([`ErrorKind::NoOutput`]).
pub fn search(inp: &TrevisanInputs) -> Result<TrevisanPlan, Error> {
    check_entropy(inp.n, inp.k_s)?;
    if inp.c == 0 {
        return Err(Error::new("c", ErrorKind::Zero));
    }
    if inp.one_bit == OneBit::Ip && inp.n.checked_mul(inp.k_s.floor() as u64).is_none() {
        // d = n m must fit in 64 bits for every candidate m <= k_s; a search
        // that skipped the lengths that overflow would return a small m.
        return Err(Error::new(
            "n",
            ErrorKind::TooLarge {
                what: "the inner-product seed length n m",
            },
        ));
    }
    let budget = &inp.budget;
    let eps1 = budget.eps_ext()?; // already includes 2^-s_def
    let k_a = inp.k_s + (-budget.eps_s).ln_1p() / std::f64::consts::LN_2;
    let mut lo: u64 = 0;
    let mut hi: u64 = inp.k_s.floor() as u64 + 1;
    let mut found: Option<Candidate> = None;
    while hi - lo > 1 {
        let mid = lo + (hi - lo) / 2;
        match cond(inp, eps1, k_a, mid) {
            Some(c) => {
                lo = mid;
                found = Some(c);
            }
            None => hi = mid,
        }
    }
    let m = lo;
    let cand = match found {
        Some(c) if m >= 1 => c,
        _ => {
            return Err(Error::new(
                "k",
                ErrorKind::NoOutput {
                    k: inp.k_s,
                    eps_ext: eps1,
                },
            ))
        }
    };
    let mf = m as f64;
    let eps_actual = match inp.one_bit {
        OneBit::Ph => 3.0 * mf * (-cand.log2_inv_eps1 / 2.0).exp2(),
        OneBit::Ip => mf * (-cand.log2_inv_eps1).exp2(),
    };
    let total = budget.total(eps_actual);
    if total > budget.eps_total {
        return Err(Error::new(
            "eps_total",
            ErrorKind::BudgetExhausted {
                target: budget.eps_total,
                fixed: budget.fixed_terms(),
            },
        ));
    }
    Ok(TrevisanPlan {
        function: TrevisanFunction {
            n: inp.n,
            m,
            one_bit: inp.one_bit,
            l: cand.l,
            design: inp.design,
            q: cand.shape.q,
        },
        c: inp.c,
        shape: cand.shape,
        log2_inv_eps1: cand.log2_inv_eps1,
        eps_ext: eps_actual,
        eps_total: total,
    })
}

impl TrevisanFunction {
    /// The design of a recorded function, derived from its integers alone
    /// (`spec/trevisan.md` 6: reproducing an output does not re-run the
    /// search): t = 2l (PH) or n (IP), then 4.1 or 4.2 with the recorded q.
    pub fn shape(&self) -> Result<DesignShape, Error> {
        let t = match (self.one_bit, self.l) {
            (OneBit::Ph, Some(l)) if l >= 1 => 2 * l,
            (OneBit::Ph, _) => return Err(Error::new("l", ErrorKind::Zero)),
            (OneBit::Ip, _) => self.n,
        };
        if !is_prime(self.q) || self.q < t {
            return Err(Error::new(
                "q",
                ErrorKind::InvalidLength {
                    n: self.q,
                    why: "the design needs a prime q >= t",
                },
            ));
        }
        match self.design {
            Design::Poly => poly_design(self.m, t, self.q),
            Design::Block => block_design(self.m, t, self.q),
        }
    }

    /// Seed length d of the recorded function.
    pub fn seed_bits(&self) -> Result<u64, Error> {
        Ok(self.shape()?.d)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `spec/trevisan.md` 6, worked table (`params.py md`): eps_s =
    /// eps_total/4, eps_cert = 0, eps_seed = 0, L = 1, s_def = 0. Columns:
    /// n, k_s, eps_total, variant, m, l, t, q, D (groups), r, d.
    const WORKED: &str = include_str!("trevisan_worked_table.txt");

    fn inputs(
        n: u64,
        rate: f64,
        eps: f64,
        one_bit: OneBit,
        design: Design,
        c: u64,
    ) -> TrevisanInputs {
        TrevisanInputs {
            n,
            k_s: rate * n as f64,
            budget: Budget::single(eps, eps / 4.0),
            one_bit,
            design,
            c,
        }
    }

    #[test]
    fn worked_table_all_variants() {
        let mut rows = 0;
        for line in WORKED
            .lines()
            .filter(|l| !l.trim().is_empty() && !l.starts_with('#'))
        {
            let f: Vec<&str> = line.split('|').map(str::trim).collect();
            let n = 1u64 << f[0].trim_start_matches("2^").parse::<u32>().unwrap();
            let rate: f64 = f[1].trim_end_matches('n').parse().unwrap();
            let eps: f64 = f[2].parse().unwrap();
            let (one_bit, design, c) = match f[3] {
                "PH+POLY c=1" => (OneBit::Ph, Design::Poly, 1),
                "PH+POLY c=8" => (OneBit::Ph, Design::Poly, 8),
                "PH+BLOCK" => (OneBit::Ph, Design::Block, 1),
                "IP (D=0)" => (OneBit::Ip, Design::Poly, 1),
                v => panic!("unknown variant {v}"),
            };
            let want = |i: usize| f[i].parse::<u64>().unwrap();
            let p = search(&inputs(n, rate, eps, one_bit, design, c)).unwrap();
            let ctx = format!("{line}\n got {:?}", p.function);
            assert_eq!(p.function.m, want(4), "m: {ctx}");
            if f[5] != "-" {
                assert_eq!(p.function.l, Some(want(5)), "l: {ctx}");
            } else {
                assert_eq!(p.function.l, None);
            }
            assert_eq!(p.shape.t, want(6), "t: {ctx}");
            assert_eq!(p.function.q, want(7), "q: {ctx}");
            let (deg, groups) = match f[8].split_once(" (") {
                Some((d, g)) => (d, Some(g.trim_end_matches(')').parse::<usize>().unwrap())),
                None => (f[8], None),
            };
            assert_eq!(p.shape.degree, deg.parse::<u32>().unwrap(), "D: {ctx}");
            if let Some(g) = groups {
                assert_eq!(p.shape.groups.len(), g, "groups: {ctx}");
            }
            let r: f64 = f[9].parse().unwrap();
            assert!(
                (p.shape.r - r).abs() < 6e-5,
                "r {} vs {r}: {ctx}",
                p.shape.r
            );
            assert_eq!(p.shape.d, want(10), "d: {ctx}");
            assert!(p.eps_total <= eps);
            // The recorded integers alone give the same seed length.
            assert_eq!(p.function.seed_bits().unwrap(), p.shape.d);
            rows += 1;
        }
        assert_eq!(rows, 48);
    }

    // spec/trevisan.md 4.2: the 13 groups of n = 2^20, k_s = 0.9n, eps =
    // 1e-12 (t = 522, q = 523).
    #[test]
    fn block_groups_of_the_spec_example() {
        let g = block_design(943344, 522, 523).unwrap();
        let sizes: Vec<u64> = g.groups.iter().map(|g| g.size).collect();
        assert_eq!(
            sizes,
            [378060, 273529, 146017, 72939, 36434, 18200, 9091, 4541, 2269, 1133, 566, 523, 42]
        );
        let degs: Vec<u32> = g.groups.iter().map(|g| g.degree).collect();
        assert_eq!(degs, [2, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 0, 0]);
        assert_eq!(g.d, 3297996);
    }

    // spec/trevisan.md 4.1, table of designs.py cases: R_D (stated), and the
    // needed r = max_i W(i)/(m - 1) from the closed form of D4 checked
    // against the sets built explicitly.
    #[test]
    fn poly_design_small_cases() {
        let rows: &[(u64, u64, u64, u32, f64, f64)] = &[
            (3, 3, 27, 2, 2.1538, 2.3333),
            (5, 5, 125, 2, 2.2903, 2.4000),
            (7, 7, 2401, 3, 2.5050, 2.5306),
            (13, 13, 2197, 2, 2.4208, 2.4615),
            (4, 11, 1331, 2, 1.4060, 1.4132),
            (10, 13, 169, 1, 1.7143, 1.7692),
        ];
        for &(t, q, m, deg, needed, stated) in rows {
            let s = poly_design(m, t, q).unwrap();
            assert_eq!(s.degree, deg);
            assert!((s.r - stated).abs() < 5e-5, "R_D {} vs {stated}", s.r);
            let w = brute_force_w(m, t, q, deg);
            let closed = closed_form_w(m, t, q, deg);
            assert_eq!(w, closed, "t = {t}, q = {q}, m = {m}");
            let max = *w.iter().max().unwrap() as f64 / (m - 1) as f64;
            assert!((max - needed).abs() < 5e-5, "needed r {max} vs {needed}");
            assert!(max <= s.r);
        }
    }

    /// W(i) = sum over h of c_h(i) A_h (D4).
    fn closed_form_w(m: u64, t: u64, q: u64, deg: u32) -> Vec<u128> {
        (0..m)
            .map(|i| {
                let mut x = i;
                (0..=deg)
                    .map(|h| {
                        let c = (x % q) as u128;
                        x /= q;
                        c * a_h(t, q, h).unwrap()
                    })
                    .sum()
            })
            .collect()
    }

    /// W(i) from the sets S_i = {a w + p_i(a)} built explicitly (4.1).
    fn brute_force_w(m: u64, t: u64, q: u64, deg: u32) -> Vec<u128> {
        let w = if deg >= 1 { q } else { m };
        let sets: Vec<Vec<u64>> = (0..m)
            .map(|i| {
                let digits: Vec<u64> = (0..=deg).map(|h| (i / q.pow(h)) % q).collect();
                (0..t)
                    .map(|a| {
                        let p = digits.iter().rev().fold(0, |acc, &c| (acc * a + c) % q);
                        a * w + p
                    })
                    .collect()
            })
            .collect();
        (0..m as usize)
            .map(|i| {
                (0..i)
                    .map(|j| {
                        let common = sets[i].iter().filter(|x| sets[j].contains(x)).count();
                        1u128 << common
                    })
                    .sum()
            })
            .collect()
    }

    /// The sets of a BLOCK design, built explicitly from its groups (4.2):
    /// set done_g + u is { off_g + a w_g + p_u(a) }.
    fn block_sets(shape: &DesignShape) -> Vec<Vec<u64>> {
        let (t, q) = (shape.t, shape.q);
        let mut sets = Vec::new();
        for g in &shape.groups {
            for u in 0..g.size {
                let digits: Vec<u64> = (0..=g.degree).map(|h| (u / q.pow(h)) % q).collect();
                sets.push(
                    (0..t)
                        .map(|a| {
                            let p = digits.iter().rev().fold(0, |acc, &c| (acc * a + c) % q);
                            g.offset + a * g.width + p
                        })
                        .collect(),
                );
            }
        }
        sets
    }

    fn overlaps(sets: &[Vec<u64>]) -> Vec<u128> {
        (0..sets.len())
            .map(|i| {
                (0..i)
                    .map(|j| 1u128 << sets[i].iter().filter(|x| sets[j].contains(x)).count())
                    .sum()
            })
            .collect()
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(64))]

        /// D4 (4.1): the closed form of W(i) equals the brute-force count on
        /// the sets built explicitly, and max W(i) <= R_D (m - 1); R_D from
        /// the float sum equals A_D / q^D.
        #[test]
        fn poly_closed_form_matches_brute_force(t in 2u64..7, extra in 0u64..8, m in 2u64..300) {
            let q = next_prime(t + extra);
            let Ok(s) = poly_design(m, t, q) else { return Ok(()) };
            let w = brute_force_w(m, t, q, s.degree);
            proptest::prop_assert_eq!(&w, &closed_form_w(m, t, q, s.degree));
            let max = *w.iter().max().unwrap() as f64;
            proptest::prop_assert!(max <= s.r * (m - 1) as f64 + 1e-9);
            let exact = a_h(t, q, s.degree).unwrap() as f64 / (q as f64).powi(s.degree as i32);
            proptest::prop_assert!((s.r - exact).abs() < 1e-12 * exact);
        }

        /// D5 (4.2): every set of a BLOCK design has W(i) <= m - 1 (r = 1),
        /// counted by brute force on the sets built from the groups; the
        /// sets have size t, lie inside the seed, and are distinct.
        #[test]
        fn block_design_has_r_1(t in 2u64..6, extra in 0u64..6, m in 2u64..400) {
            let q = next_prime(t + extra);
            let shape = block_design(m, t, q).unwrap();
            let sets = block_sets(&shape);
            proptest::prop_assert_eq!(sets.len() as u64, m);
            for (i, set) in sets.iter().enumerate() {
                proptest::prop_assert_eq!(set.len() as u64, t);
                proptest::prop_assert!(set.iter().all(|&x| x < shape.d));
                proptest::prop_assert!(set.windows(2).all(|p| p[0] < p[1]), "increasing order");
                proptest::prop_assert!(!sets[..i].contains(set));
            }
            let w = overlaps(&sets);
            proptest::prop_assert!(w.iter().all(|&x| x <= (m - 1) as u128), "{:?}", w);
        }
    }

    // spec/trevisan.md 8, D6 example: n = 2^20, k_s = 0.9n, eps_total =
    // 1e-12, BLOCK, s_def = 0, 16, 64; and the POLY c = 1 side effect.
    #[test]
    fn d6_weak_seed_examples() {
        let run = |design, s: f64| {
            let mut i = inputs(1 << 20, 0.9, 1e-12, OneBit::Ph, design, 1);
            i.budget.seed_deficiency = s;
            search(&i).unwrap()
        };
        let p = run(Design::Block, 16.0);
        assert_eq!(p.function.m, 943248);
        assert_eq!(p.function.l, Some(324));
        assert_eq!((p.shape.d as f64 / 1e4).round(), 486.0, "d = {}", p.shape.d);
        let p = run(Design::Block, 64.0);
        assert_eq!(p.function.m, 942960);
        assert_eq!(p.function.l, Some(516));
        assert_eq!((p.shape.d as f64 / 1e5).round(), 115.0, "d = {}", p.shape.d);
        assert_eq!(run(Design::Poly, 0.0).function.m, 383932);
        assert_eq!(run(Design::Poly, 16.0).function.m, 410881);
    }

    // spec/trevisan.md 3.1, the l rule; and primes (4).
    #[test]
    fn field_size_and_primes() {
        assert_eq!(ph_field_size(1, 10.0), 1);
        // 2^16, lambda_1 = 73.02: l = 154 (worked table, first row).
        let lambda = 2.0 * (3.0 * 16353.0 / 5e-7f64).log2();
        assert_eq!(ph_field_size(1 << 16, lambda), 154);
        assert_eq!(next_prime(308), 311);
        assert_eq!(next_prime(1 << 24), 16777259);
        assert!(is_prime(2) && is_prime(3) && !is_prime(1) && !is_prime(91));
    }

    #[test]
    fn refusals() {
        let mut i = inputs(1024, 0.1, 1e-12, OneBit::Ph, Design::Block, 1);
        assert!(matches!(
            search(&i).unwrap_err().kind(),
            ErrorKind::NoOutput { .. }
        ));
        i.k_s = 2000.0;
        assert!(matches!(
            search(&i).unwrap_err().kind(),
            ErrorKind::EntropyAboveLength { .. }
        ));
        i.k_s = 900.0;
        i.budget.eps_s = 0.6e-12;
        assert!(matches!(
            search(&i).unwrap_err().kind(),
            ErrorKind::BudgetExhausted { .. }
        ));
        i.budget.eps_s = 0.0;
        let mut huge = i.clone();
        huge.one_bit = OneBit::Ip;
        huge.n = 1 << 40;
        huge.k_s = 2f64.powi(39);
        assert!(matches!(
            search(&huge).unwrap_err().kind(),
            ErrorKind::TooLarge { .. }
        ));
        i.c = 0;
        assert_eq!(search(&i).unwrap_err().field(), "c");
        assert!(poly_design(28, 3, 3).is_err(), "D > t - 1");
    }
}
