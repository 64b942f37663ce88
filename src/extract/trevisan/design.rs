//! Weak designs POLY and BLOCK (`spec/trevisan.md` section 4), in exact
//! integer arithmetic.
//!
//! A weak (t, r)-design is a list of m sets S_0 .. S_{m-1} of t seed
//! positions each with W(i) = sum over j < i of 2^|S_i intersect S_j| <=
//! r (m - 1) for every i (definition of [RRV02], restated in section 1 of the
//! spec). Both designs here are lists of *groups*: a group is a POLY design on
//! its own slice of the seed, S = { off + a*w + p_u(a) : a = 0 .. t-1 }, with
//! p_u the polynomial over GF(q) whose coefficients are the little-endian
//! base-q digits of the index u inside the group. POLY (4.1) is one group;
//! BLOCK (4.2) cuts the m sets into groups by the rule of 4.2 so that r = 1.

use super::{Error, ErrorKind};

/// Which weak design.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum DesignKind {
    /// Graphs of polynomials over GF(q) (section 4.1), r = R_D.
    Poly,
    /// Groups of POLY designs on disjoint seed slices (section 4.2), r = 1.
    Block,
}

impl DesignKind {
    /// Lower-case name (`poly`, `block`), as in the vector files.
    pub fn name(self) -> &'static str {
        match self {
            DesignKind::Poly => "poly",
            DesignKind::Block => "block",
        }
    }
}

/// Whether `x` is prime (trial division; common practice).
pub fn is_prime(x: u64) -> bool {
    if x < 2 {
        return false;
    }
    if x < 4 {
        return true;
    }
    if x.is_multiple_of(2) {
        return false;
    }
    let mut p = 3u64;
    while p.saturating_mul(p) <= x {
        if x.is_multiple_of(p) {
            return false;
        }
        p += 2;
    }
    true
}

/// The smallest prime >= `x` (section 4: the default q is the smallest prime
/// >= c t). `None` if it would not fit below 2^32.
pub fn smallest_prime_at_least(x: u64) -> Option<u64> {
    let mut p = x.max(2);
    while p < (1u64 << 32) {
        if is_prime(p) {
            return Some(p);
        }
        p += 1;
    }
    None
}

/// binom(n, k), or `None` on overflow of u128.
pub fn binom(n: u64, k: u64) -> Option<u128> {
    if k > n {
        return Some(0);
    }
    let k = k.min(n - k);
    let mut r: u128 = 1;
    for i in 0..k {
        // r * (n - i) / (i + 1) is exact at every step (r = binom(n, i)).
        r = r.checked_mul((n - i) as u128)? / (i as u128 + 1);
    }
    Some(r)
}

/// A_h = sum over a = 0 .. min(h, t) of binom(t, a) q^(h-a) (section 4,
/// derived there), or `None` on overflow of u128.
pub fn a_h(t: u64, q: u64, h: u64) -> Option<u128> {
    let mut sum: u128 = 0;
    for a in 0..=h.min(t) {
        let term = binom(t, a)?.checked_mul((q as u128).checked_pow((h - a) as u32)?)?;
        sum = sum.checked_add(term)?;
    }
    Some(sum)
}

/// R_D = A_D / q^D as an exact fraction (numerator, denominator), or `None`
/// on overflow (section 4).
pub fn r_d_exact(t: u64, q: u64, d: u64) -> Option<(u128, u128)> {
    Some((a_h(t, q, d)?, (q as u128).checked_pow(d as u32)?))
}

/// R_D as a float (section 4; r of POLY, 4.1).
pub fn r_d(t: u64, q: u64, d: u64) -> f64 {
    let mut s = 0f64;
    let mut term = 1f64; // binom(t, a) q^-a
    for a in 0..=d.min(t) {
        if a > 0 {
            term *= (t - a + 1) as f64 / (a as f64 * q as f64);
        }
        s += term;
    }
    s
}

/// One group of sets: sets `start .. start + size` at seed positions
/// `offset + a * width + p_u(a)`, p_u of degree <= `degree`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct Group {
    /// Index of the group's first set.
    pub start: u64,
    /// Number of sets.
    pub size: u64,
    /// D: the polynomials have D + 1 base-q digits.
    pub degree: u64,
    /// w: q if D >= 1, else the group size.
    pub width: u64,
    /// First seed position of the group's slice.
    pub offset: u64,
}

/// A weak design of m sets of size t over seed positions 0 .. d-1.
#[derive(Clone, Debug, PartialEq, Eq, Hash)]
pub struct Design {
    kind: DesignKind,
    m: u64,
    t: u64,
    q: u64,
    groups: Vec<Group>,
    seed_bits: u64,
}

fn err(field: &'static str, kind: ErrorKind) -> Error {
    Error::new(field, kind)
}

fn overflow(what: &'static str) -> Error {
    err("design", ErrorKind::Overflow { what })
}

fn check_common(m: u64, t: u64, q: u64) -> Result<(), Error> {
    if m == 0 {
        return Err(err("output-bits", ErrorKind::TooSmall { value: 0, min: 1 }));
    }
    if t == 0 {
        return Err(err("set size t", ErrorKind::TooSmall { value: 0, min: 1 }));
    }
    if !is_prime(q) {
        return Err(err("prime", ErrorKind::NotPrime { value: q }));
    }
    if q < t {
        return Err(err("prime", ErrorKind::TooSmall { value: q, min: t }));
    }
    if q >= 1 << 32 {
        return Err(err(
            "prime",
            ErrorKind::TooLarge {
                value: q,
                why: "q must be below 2^32 (positions use 64-bit products)",
            },
        ));
    }
    Ok(())
}

impl Design {
    /// POLY (section 4.1): D = the smallest D >= 0 with q^(D+1) >= m
    /// (refused if D > t - 1), w = q if D >= 1 else m, d = t w.
    pub fn poly(m: u64, t: u64, q: u64) -> Result<Design, Error> {
        check_common(m, t, q)?;
        let mut d = 0u64;
        let mut qpow = q as u128; // q^(D+1)
        while qpow < m as u128 {
            d += 1;
            qpow *= q as u128;
        }
        if d > t - 1 {
            return Err(err(
                "output-bits",
                ErrorKind::TooManySets { m, t, q, degree: d },
            ));
        }
        let width = if d >= 1 { q } else { m };
        let seed_bits = t.checked_mul(width).ok_or(overflow("seed length t * w"))?;
        Ok(Design {
            kind: DesignKind::Poly,
            m,
            t,
            q,
            groups: vec![Group {
                start: 0,
                size: m,
                degree: d,
                width,
                offset: 0,
            }],
            seed_bits,
        })
    }

    /// BLOCK (section 4.2): the group rule of the spec, verbatim.
    pub fn block(m: u64, t: u64, q: u64) -> Result<Design, Error> {
        check_common(m, t, q)?;
        let mut groups = Vec::new();
        let (mut done, mut off) = (0u64, 0u64);
        while done < m {
            let rem = (m - done) as u128;
            let (mut best, mut best_d) = (0u128, 0u64);
            let mut d = 0u64;
            loop {
                let qd = (q as u128).checked_pow(d as u32).ok_or(overflow("q^D"))?;
                let qd1 = qd.checked_mul(q as u128).ok_or(overflow("q^(D+1)"))?;
                let n_d = a_h(t, q, d).ok_or(overflow("N_D"))?;
                let share = (rem - 1).checked_mul(qd).ok_or(overflow("(rem - 1) q^D"))? / n_d;
                let cap = rem.min(qd1).min(1 + share);
                if cap > best {
                    best = cap;
                    best_d = d;
                }
                if qd1 >= rem || d + 1 > t - 1 {
                    break;
                }
                d += 1;
            }
            let size = best as u64;
            let width = if best_d >= 1 { q } else { size };
            groups.push(Group {
                start: done,
                size,
                degree: best_d,
                width,
                offset: off,
            });
            done += size;
            let slice = t.checked_mul(width).ok_or(overflow("group seed t * w"))?;
            off = off.checked_add(slice).ok_or(overflow("seed length"))?;
        }
        Ok(Design {
            kind: DesignKind::Block,
            m,
            t,
            q,
            groups,
            seed_bits: off,
        })
    }

    /// Builds the design of `kind`.
    pub fn new(kind: DesignKind, m: u64, t: u64, q: u64) -> Result<Design, Error> {
        match kind {
            DesignKind::Poly => Design::poly(m, t, q),
            DesignKind::Block => Design::block(m, t, q),
        }
    }

    /// Which design.
    pub fn kind(&self) -> DesignKind {
        self.kind
    }
    /// Number of sets m.
    pub fn sets(&self) -> u64 {
        self.m
    }
    /// Size t of each set.
    pub fn set_size(&self) -> u64 {
        self.t
    }
    /// The prime q.
    pub fn prime(&self) -> u64 {
        self.q
    }
    /// The groups (one for POLY).
    pub fn groups(&self) -> &[Group] {
        &self.groups
    }
    /// Seed length d.
    pub fn seed_bits(&self) -> u64 {
        self.seed_bits
    }
    /// Largest group degree D.
    pub fn max_degree(&self) -> u64 {
        self.groups.iter().map(|g| g.degree).max().unwrap_or(0)
    }

    /// The group holding set `i`.
    ///
    /// # Panics
    /// If `i >= m`.
    pub fn group_of(&self, i: u64) -> &Group {
        assert!(i < self.m, "set index {i} out of range for {} sets", self.m);
        let g = self.groups.partition_point(|g| g.start <= i) - 1;
        &self.groups[g]
    }

    /// Little-endian base-q digits c_0 .. c_D of the local index u of set
    /// `i` (into `digits[..=D]`), and the group.
    fn digits(&self, i: u64, digits: &mut [u64; 64]) -> &Group {
        let g = self.group_of(i);
        let mut u = i - g.start;
        for c in digits.iter_mut().take(g.degree as usize + 1) {
            *c = u % self.q;
            u /= self.q;
        }
        g
    }

    /// The positions of S_i in increasing order (`out.len() == t`):
    /// e_a = off + a w + p_u(a), with p_u(a) evaluated mod q by Horner.
    ///
    /// # Panics
    /// If `i >= m` or `out.len() != t`.
    pub fn positions(&self, i: u64, out: &mut [u64]) {
        crate::extract::check_len("design positions", self.t as usize, out.len());
        let mut digits = [0u64; 64];
        let g = *self.digits(i, &mut digits);
        let dg = g.degree as usize;
        let q = self.q;
        if dg == 0 {
            for (a, e) in out.iter_mut().enumerate() {
                *e = g.offset + a as u64 * g.width + digits[0];
            }
            return;
        }
        for (a, e) in out.iter_mut().enumerate() {
            let x = a as u64; // a < t <= q < 2^32: products stay below 2^64
            let mut v = digits[dg];
            for k in (0..dg).rev() {
                v = (v * x + digits[k]) % q;
            }
            *e = g.offset + x * g.width + v;
        }
    }

    /// W(i) by the closed form of D4 (section 4.1): W(i) = done_g +
    /// sum over h of c_h(u) A_h, for set i at local index u of group g
    /// (done_g = 0 for POLY).
    pub fn overlap_closed_form(&self, i: u64) -> u128 {
        let mut digits = [0u64; 64];
        let g = *self.digits(i, &mut digits);
        let mut w = g.start as u128;
        for (h, &c) in digits.iter().take(g.degree as usize + 1).enumerate() {
            if c != 0 {
                w += c as u128 * a_h(self.t, self.q, h as u64).expect("A_h fits when q^(D+1) does");
            }
        }
        w
    }

    /// The r this design guarantees: R_D for POLY (exact fraction), 1 for
    /// BLOCK (section 4).
    pub fn r_exact(&self) -> (u128, u128) {
        match self.kind {
            DesignKind::Poly => {
                r_d_exact(self.t, self.q, self.groups[0].degree).expect("fits when q^(D+1) does")
            }
            DesignKind::Block => (1, 1),
        }
    }

    /// [`Design::r_exact`] as a float.
    pub fn r(&self) -> f64 {
        match self.kind {
            DesignKind::Poly => r_d(self.t, self.q, self.groups[0].degree),
            DesignKind::Block => 1.0,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// |a intersect b| for two increasing lists (merge).
    fn intersection_count(a: &[u64], b: &[u64]) -> u32 {
        let (mut x, mut y, mut c) = (0, 0, 0u32);
        while x < a.len() && y < b.len() {
            match a[x].cmp(&b[y]) {
                std::cmp::Ordering::Less => x += 1,
                std::cmp::Ordering::Greater => y += 1,
                std::cmp::Ordering::Equal => {
                    c += 1;
                    x += 1;
                    y += 1;
                }
            }
        }
        c
    }

    /// Explicit sets, then W(i) by definition: sum over j < i of
    /// 2^|S_i intersect S_j| (section 1).
    fn brute_force_overlaps(d: &Design) -> Vec<u128> {
        let t = d.set_size() as usize;
        let sets: Vec<Vec<u64>> = (0..d.sets())
            .map(|i| {
                let mut s = vec![0; t];
                d.positions(i, &mut s);
                s
            })
            .collect();
        let mut out = Vec::new();
        for i in 0..sets.len() {
            let mut w: u128 = 0;
            for j in 0..i {
                let c = intersection_count(&sets[i], &sets[j]);
                w += 1u128 << c;
            }
            out.push(w);
        }
        out
    }

    #[test]
    fn primes_and_binomials() {
        // First primes (common practice) and the primes of the spec's
        // worked table (section 6): smallest prime >= t.
        let first: Vec<u64> = (0..40).filter(|&x| is_prime(x)).collect();
        assert_eq!(first, [2, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37]);
        for (t, q) in [
            (32u64, 37u64),
            (48, 53),
            (64, 67),
            (308, 311),
            (510, 521),
            (522, 523),
            (562, 563),
        ] {
            assert_eq!(smallest_prime_at_least(t), Some(q));
        }
        // c = 8 rows: t = 520 -> q = 4177, t = 316 -> q = 2531.
        assert_eq!(smallest_prime_at_least(8 * 520), Some(4177));
        assert_eq!(smallest_prime_at_least(8 * 316), Some(2531));
        // Pascal's triangle (common practice).
        assert_eq!(binom(10, 3), Some(120));
        assert_eq!(binom(52, 5), Some(2_598_960));
        assert_eq!(binom(3, 5), Some(0));
    }

    #[test]
    fn r_d_matches_the_spec_table() {
        // spec/trevisan.md 4.1, table "R_D (stated)" and section 4's R_1, R_2.
        for (t, q, d, want) in [
            (3u64, 3u64, 2u64, 2.3333),
            (5, 5, 2, 2.4000),
            (7, 7, 3, 2.5306),
            (13, 13, 2, 2.4615),
            (4, 11, 2, 1.4132),
            (10, 13, 1, 1.7692),
        ] {
            assert!((r_d(t, q, d) - want).abs() < 5e-5, "t={t} q={q} D={d}");
            let (num, den) = r_d_exact(t, q, d).unwrap();
            assert!((num as f64 / den as f64 - want).abs() < 5e-5);
        }
        // Worked table (section 6): r = 2.4571 for t = 510, q = 521, D = 2;
        // 1.9904 for t = 308, q = 311, D = 1.
        assert!((r_d(510, 521, 2) - 2.4571).abs() < 5e-5);
        assert!((r_d(308, 311, 1) - 1.9904).abs() < 5e-5);
    }

    #[test]
    fn closed_form_matches_brute_force_and_spec_needed_r() {
        // spec/trevisan.md 4.1 check table: t, q, m, D, needed r
        // = max_i W(i) / (m - 1).
        for (t, q, m, d, needed) in [
            (3u64, 3u64, 27u64, 2u64, 2.1538),
            (5, 5, 125, 2, 2.2903),
            (7, 7, 2401, 3, 2.5050),
            (13, 13, 2197, 2, 2.4208),
            (4, 11, 1331, 2, 1.4060),
            (10, 13, 169, 1, 1.7143),
        ] {
            let des = Design::poly(m, t, q).unwrap();
            assert_eq!(des.max_degree(), d);
            let brute = brute_force_overlaps(&des);
            for (i, &w) in brute.iter().enumerate() {
                assert_eq!(
                    w,
                    des.overlap_closed_form(i as u64),
                    "t={t} q={q} m={m} i={i}"
                );
            }
            let max = *brute.iter().max().unwrap();
            let r_needed = max as f64 / (m - 1) as f64;
            assert!(
                (r_needed - needed).abs() < 5e-5,
                "t={t} q={q} m={m}: {r_needed}"
            );
            let (num, den) = des.r_exact();
            assert!(max * den <= num * (m as u128 - 1));
        }
        // Section 4.1: reversed digit order needs 3.61 at t = q = 7, m = 400,
        // little-endian 2.51.
        let des = Design::poly(400, 7, 7).unwrap();
        let max = brute_force_overlaps(&des).into_iter().max().unwrap();
        assert!(((max as f64 / 399.0) - 2.51).abs() < 0.005);
    }

    #[test]
    fn small_designs_by_brute_force() {
        // Many small parameter sets (own choice): the closed form equals brute
        // force and max W(i) <= r (m - 1) with r = R_D (POLY) or 1 (BLOCK).
        for t in 1u64..=9 {
            for q in [2u64, 3, 5, 7, 11, 13].into_iter().filter(|&q| q >= t) {
                for m in [
                    1u64,
                    2,
                    3,
                    q - 1,
                    q,
                    q + 1,
                    2 * q + 3,
                    q * q,
                    q * q + 1,
                    150,
                ] {
                    for kind in [DesignKind::Poly, DesignKind::Block] {
                        let Ok(des) = Design::new(kind, m.max(1), t, q) else {
                            // only POLY may refuse, and only when m > q^t
                            assert_eq!(kind, DesignKind::Poly);
                            assert!((m as u128) > (q as u128).pow(t as u32));
                            continue;
                        };
                        let brute = brute_force_overlaps(&des);
                        let (num, den) = des.r_exact();
                        for (i, &w) in brute.iter().enumerate() {
                            assert_eq!(w, des.overlap_closed_form(i as u64));
                            assert!(
                                w * den <= num * (des.sets() as u128 - 1),
                                "{kind:?} t={t} q={q} m={m} i={i}"
                            );
                        }
                        // sets lie inside the seed and have t distinct positions
                        let mut s = vec![0; t as usize];
                        for i in 0..des.sets() {
                            des.positions(i, &mut s);
                            assert!(s.windows(2).all(|w| w[0] < w[1]));
                            assert!(*s.last().unwrap() < des.seed_bits());
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn block_groups_match_the_spec() {
        // spec/trevisan.md 4.2: n = 2^20, k_s = 0.9n, eps = 1e-12: t = 522,
        // q = 523, m = 943344 gives 13 groups of these sizes, and section 6
        // gives d = 3297996.
        let des = Design::block(943_344, 522, 523).unwrap();
        let sizes: Vec<u64> = des.groups().iter().map(|g| g.size).collect();
        assert_eq!(
            sizes,
            [378060, 273529, 146017, 72939, 36434, 18200, 9091, 4541, 2269, 1133, 566, 523, 42]
        );
        let degrees: Vec<u64> = des.groups().iter().map(|g| g.degree).collect();
        assert_eq!(degrees, [2, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 0, 0]);
        assert_eq!(des.seed_bits(), 3_297_996);
        // Section 9, V2: groups 37 at D = 0 and 27 at D = 0, d = 2048.
        let v2 = Design::block(64, 32, 37).unwrap();
        let g: Vec<(u64, u64)> = v2.groups().iter().map(|g| (g.size, g.degree)).collect();
        assert_eq!(g, [(37, 0), (27, 0)]);
        assert_eq!(v2.seed_bits(), 2048);
    }

    #[test]
    fn worked_table_seed_lengths_and_groups() {
        // spec/trevisan.md section 6 worked table: (design, m, t, q) -> d,
        // largest D, number of groups (BLOCK).
        let rows: &[(DesignKind, u64, u64, u64, u64, u64, usize)] = &[
            (DesignKind::Poly, 16353, 308, 311, 95788, 1, 1),
            (DesignKind::Poly, 28931, 316, 2531, 799796, 1, 1),
            (DesignKind::Block, 32542, 316, 317, 760296, 1, 8),
            (DesignKind::Poly, 383932, 510, 521, 265710, 2, 1),
            (DesignKind::Poly, 838908, 520, 4177, 2172040, 1, 1),
            (DesignKind::Block, 943344, 522, 523, 3297996, 2, 13),
            (DesignKind::Block, 524038, 356, 359, 1525460, 2, 12),
            (DesignKind::Block, 8388334, 396, 397, 2691216, 2, 18),
            (DesignKind::Block, 15099096, 562, 563, 5478938, 2, 18),
            (DesignKind::Poly, 6102971, 550, 557, 306350, 2, 1),
            (DesignKind::Poly, 13329707, 402, 3217, 1293234, 2, 1),
        ];
        for &(kind, m, t, q, d, dmax, ngroups) in rows {
            let des = Design::new(kind, m, t, q).unwrap();
            assert_eq!(des.seed_bits(), d, "{kind:?} m={m}");
            assert_eq!(des.max_degree(), dmax, "{kind:?} m={m}");
            assert_eq!(des.groups().len(), ngroups, "{kind:?} m={m}");
        }
    }

    #[test]
    fn real_parameter_sets_meet_the_bound() {
        // Closed form over every i for rows of the section 6 table, and brute
        // force (explicit sets S_i and S_j, intersected by merging) for a
        // sample of i against every j < i.
        let rows: &[(DesignKind, u64, u64, u64)] = &[
            (DesignKind::Poly, 16353, 308, 311),
            (DesignKind::Block, 32542, 316, 317),
            (DesignKind::Poly, 383932, 510, 521),
            (DesignKind::Block, 943344, 522, 523),
        ];
        for &(kind, m, t, q) in rows {
            let des = Design::new(kind, m, t, q).unwrap();
            let (num, den) = des.r_exact();
            let mut max = 0u128;
            for i in 0..m {
                let w = des.overlap_closed_form(i);
                assert!(w * den <= num * (m as u128 - 1), "{kind:?} m={m} i={i}");
                max = max.max(w);
            }
            if kind == DesignKind::Block {
                // spec 4.2: max_i W(i) = m - 1 exactly on table rows.
                assert_eq!(max, m as u128 - 1);
            }
        }
        // Brute force on sampled i (n = 2^16 rows; a few hundred million
        // position comparisons in all).
        for &(kind, m, t, q) in &rows[..2] {
            let des = Design::new(kind, m, t, q).unwrap();
            let tt = t as usize;
            let mut si = vec![0u64; tt];
            let mut sj = vec![0u64; tt];
            for &i in &[1u64, q - 1, q, q + 1, m / 3, m / 2 + 7, m - 1] {
                des.positions(i, &mut si);
                let mut w = 0u128;
                for j in 0..i {
                    des.positions(j, &mut sj);
                    let c = intersection_count(&si, &sj);
                    w += 1u128 << c;
                }
                assert_eq!(w, des.overlap_closed_form(i), "{kind:?} m={m} i={i}");
            }
        }
    }
}
