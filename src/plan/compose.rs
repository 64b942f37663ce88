//! Seeds and composition: the one total error of a run
//! (`spec/hashing-and-composition.md` sections 4 and 5).
//!
//! ```text
//! eps_total = eps_cert + sum over seeds of eps_seed
//!                      + sum over uses of ( 2 eps_s + 2^s eps_ext )
//! ```
//!
//! The formula is derived on the spec page (section 5) from the smoothing
//! argument of 2.4, the hybrid argument of 4.1 (one seed for many blocks),
//! the recycling argument of 4.2, the weak-seed bound of 4.4, the
//! near-uniform-seed bound of 4.7 and the triangle inequality; that the
//! trace-distance criterion composes is \[RK05\] (abstract read). It is the
//! same for every construction (Trevisan included: `spec/trevisan.md` 6).

use super::{check_half_open_unit, check_open_unit, Error, ErrorKind};

/// What the printed `eps_total` means, for a certification that never
/// aborts (`spec/hashing-and-composition.md` 5).
pub const MEANING: &str = "the output is within eps_total (trace distance) of uniform bits \
independent of the seeds and of the adversary's information, under the conditions \
listed for each use";

/// What the printed `eps_total` means when the certification can abort
/// (`spec/hashing-and-composition.md` 5, "Protocols that can abort").
pub const MEANING_IF_ABORT: &str = "eps_total bounds Pr[accept] times the distance between the output (given acceptance) and ideal uniform bits; \
equivalently, the distance between the real run and an ideal one that aborts exactly when \
the real one does and otherwise outputs uniform bits independent of the seeds and of the \
adversary's information. It does NOT bound the distance given acceptance alone, unless \
Pr[accept] is known to be bounded from below";

/// The meaning of `eps_total` to print (`spec/hashing-and-composition.md`
/// 5): [`MEANING_IF_ABORT`] when the certification can abort, else
/// [`MEANING`].
pub fn meaning(can_abort: bool) -> &'static str {
    if can_abort {
        MEANING_IF_ABORT
    } else {
        MEANING
    }
}

/// The security inputs of a run that fix the extractor's error budget
/// (`spec/hashing-and-composition.md` 2.5 and 5; `spec/trevisan.md` 6).
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Budget {
    /// Total error target `eps_total`, in (0, 1).
    pub eps_total: f64,
    /// The certificate's failure term `eps_cert` (not the smoothing), once
    /// per certificate; in [0, 1).
    pub eps_cert: f64,
    /// `eps_seed` of 4.7 for a seed only close to uniform (0 for a uniform
    /// seed); in [0, 1).
    pub eps_seed: f64,
    /// Number of blocks `L` hashed with the one seed, at least 1.
    pub blocks: u64,
    /// Smoothing parameter `eps_s` of each block's min-entropy; in [0, 1).
    pub eps_s: f64,
    /// Seed deficiency `s` (4.4): the seed's min-entropy is at least `d - s`.
    pub seed_deficiency: f64,
}

impl Budget {
    /// A budget for one block with a uniform seed.
    pub fn single(eps_total: f64, eps_s: f64) -> Budget {
        Budget {
            eps_total,
            eps_cert: 0.0,
            eps_seed: 0.0,
            blocks: 1,
            eps_s,
            seed_deficiency: 0.0,
        }
    }

    /// Checks every field's range; the error names the field.
    pub fn validate(&self) -> Result<(), Error> {
        check_open_unit("eps_total", self.eps_total)?;
        check_half_open_unit("eps_cert", self.eps_cert)?;
        check_half_open_unit("eps_seed", self.eps_seed)?;
        check_half_open_unit("eps_s", self.eps_s)?;
        if self.blocks == 0 {
            return Err(Error::new("blocks", ErrorKind::Zero));
        }
        let s = self.seed_deficiency;
        if !s.is_finite() || s < 0.0 {
            return Err(Error::new(
                "seed_deficiency",
                ErrorKind::OutOfRange {
                    value: s,
                    expected: "a finite number of bits, at least 0",
                },
            ));
        }
        if self.eps_seed > 0.0 && s > 0.0 {
            // 4.7: the two descriptions are not combined for one seed.
            return Err(Error::new(
                "eps_seed",
                ErrorKind::OutOfRange {
                    value: self.eps_seed,
                    expected: "0 when a seed deficiency is given (a seed is described either \
                               by its min-entropy or by its distance from uniform, not both)",
                },
            ));
        }
        Ok(())
    }

    /// The terms that do not depend on the extractor, for the whole run:
    /// `eps_cert + eps_seed + L * 2 eps_s`.
    pub fn fixed_terms(&self) -> f64 {
        self.eps_cert + self.eps_seed + self.blocks as f64 * 2.0 * self.eps_s
    }

    /// The extractor error allowed per block, **before** the weak-seed
    /// factor: `(eps_total - eps_cert - eps_seed)/L - 2 eps_s`.
    pub fn per_block_term(&self) -> Result<f64, Error> {
        self.validate()?;
        let b = (self.eps_total - self.eps_cert - self.eps_seed) / self.blocks as f64
            - 2.0 * self.eps_s;
        if b.is_nan() || b <= 0.0 {
            return Err(Error::new(
                "eps_total",
                ErrorKind::BudgetExhausted {
                    target: self.eps_total,
                    fixed: self.fixed_terms(),
                },
            ));
        }
        Ok(b)
    }

    /// The extractor budget per block,
    /// `((eps_total - eps_cert - eps_seed)/L - 2 eps_s) / 2^s`
    /// (`spec/hashing-and-composition.md` 2.5 and 9 item 7;
    /// `spec/trevisan.md` 6 and rule D6 of 8: `eps' = eps_ext 2^-s_def`),
    /// rounded down by a relative `1e-12` so that the recomposed total never
    /// exceeds the target through floating-point noise of the logarithms and
    /// powers that turn it into a length and back (a budget is an upper
    /// limit, 4.5).
    ///
    /// Refuses ([`ErrorKind::BudgetExhausted`]) when nothing is left.
    pub fn eps_ext(&self) -> Result<f64, Error> {
        let b = self.per_block_term()? * (-self.seed_deficiency).exp2();
        let b = b * (1.0 - 1e-12);
        if b <= 0.0 {
            return Err(Error::new(
                "seed_deficiency",
                ErrorKind::BudgetExhausted {
                    target: self.eps_total,
                    fixed: self.fixed_terms(),
                },
            ));
        }
        Ok(b)
    }

    /// The run's total for a per-block extractor error `eps_ext` (uniform-
    /// seed value): `eps_cert + eps_seed + L (2 eps_s + 2^s eps_ext)`
    /// (`spec/hashing-and-composition.md` 5; `spec/trevisan.md` 6, final
    /// check). Round up for printing.
    pub fn total(&self, eps_ext: f64) -> f64 {
        self.eps_cert
            + self.eps_seed
            + blocks_with_one_seed(self.blocks, self.eps_s, eps_ext, self.seed_deficiency)
    }
}

/// L blocks hashed with one seed of deficiency s:
/// `sum_j (2 eps_s + 2^s eps_ext) = L (2 eps_s + 2^s eps_ext)`
/// (`spec/hashing-and-composition.md` 4.1 and 4.4, derived there: the
/// hybrid argument, and the weak-seed factor on the extractor term only).
pub fn blocks_with_one_seed(blocks: u64, eps_s: f64, eps_ext: f64, s: f64) -> f64 {
    blocks as f64 * (2.0 * eps_s + s.exp2() * eps_ext)
}

/// Weak-seed factor `2^(d - hmin_seed)` (`spec/hashing-and-composition.md`
/// 4.4 and 9 item 8, derived there; `spec/trevisan.md` D6): multiplies the
/// extractor term only.
///
/// Refuses unless the seed is declared independent of the raw data and of
/// the adversary (`independent`), and `hmin_seed` outside `[0, d]`.
pub fn weak_seed_factor(d: u64, hmin_seed: f64, independent: bool) -> Result<f64, Error> {
    if !independent {
        return Err(Error::new(
            "seed",
            ErrorKind::NotAsserted {
                condition: "the seed is independent of the raw data and of the adversary \
                            (the weak-seed bound needs a product state)",
            },
        ));
    }
    if !hmin_seed.is_finite() || hmin_seed < 0.0 || hmin_seed > d as f64 {
        return Err(Error::new(
            "seed_min_entropy",
            ErrorKind::OutOfRange {
                value: hmin_seed,
                expected: "between 0 and the seed length d",
            },
        ));
    }
    Ok((d as f64 - hmin_seed).exp2())
}

/// One extractor application whose output is delivered or used as a seed
/// (`spec/hashing-and-composition.md` 5).
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Use {
    /// Smoothing parameter of the block (for a two-source use, the sum of
    /// both sources' parameters).
    pub eps_s: f64,
    /// The extractor error at the chosen m, for a uniform seed.
    pub eps_ext: f64,
    /// Seed deficiency (0 for a uniform or recycled seed, or no seed).
    pub s: f64,
    /// The seed's identifier; `None` for a seedless (two-source) use.
    pub seed_id: Option<String>,
}

/// A seed of the run (`spec/hashing-and-composition.md` 4.7).
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Seed {
    /// The seed's random identifier.
    pub seed_id: String,
    /// Its distance from uniform, 0 for a uniform seed.
    pub eps_seed: f64,
}

/// The one number of a run, `eps_total`
/// (`spec/hashing-and-composition.md` 5 and 9 item 9, derived there):
/// `eps_cert + sum over seeds of eps_seed + sum over uses of
/// (2 eps_s + 2^s eps_ext)`. `eps_cert` is the sum over the certificates
/// involved, each counted once. Round up for printing.
///
/// Refuses a use naming an unknown seed, a seed listed twice, a seed with
/// both `eps_seed > 0` and a deficiency (4.7), and values out of range.
pub fn total_error(uses: &[Use], seeds: &[Seed], eps_cert: f64) -> Result<f64, Error> {
    check_half_open_unit("eps_cert", eps_cert)?;
    let mut total = eps_cert;
    for (i, seed) in seeds.iter().enumerate() {
        check_half_open_unit("eps_seed", seed.eps_seed)?;
        if seeds[..i].iter().any(|o| o.seed_id == seed.seed_id) {
            return Err(Error::new(
                "seeds",
                ErrorKind::NotAsserted {
                    condition: "each seed is listed once (its eps_seed counts once)",
                },
            ));
        }
        total += seed.eps_seed;
    }
    for u in uses {
        check_half_open_unit("eps_s", u.eps_s)?;
        if !u.eps_ext.is_finite() || u.eps_ext < 0.0 {
            return Err(Error::new(
                "eps_ext",
                ErrorKind::OutOfRange {
                    value: u.eps_ext,
                    expected: "a finite error, at least 0",
                },
            ));
        }
        if !u.s.is_finite() || u.s < 0.0 {
            return Err(Error::new(
                "seed_deficiency",
                ErrorKind::OutOfRange {
                    value: u.s,
                    expected: "a finite number of bits, at least 0",
                },
            ));
        }
        if let Some(id) = &u.seed_id {
            let seed = seeds.iter().find(|s| &s.seed_id == id).ok_or(Error::new(
                "seed_id",
                ErrorKind::NotAsserted {
                    condition: "every seed a use names is listed among the run's seeds",
                },
            ))?;
            if seed.eps_seed > 0.0 && u.s > 0.0 {
                return Err(Error::new(
                    "seed_deficiency",
                    ErrorKind::OutOfRange {
                        value: u.s,
                        expected: "0 for a seed described by its distance from uniform (4.7)",
                    },
                ));
            }
        }
        total += 2.0 * u.eps_s + u.s.exp2() * u.eps_ext;
    }
    Ok(total)
}

/// A seed cut from an earlier output (`spec/hashing-and-composition.md`
/// 4.2).
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
pub struct Recycled {
    /// Bits of the earlier output used as the seed: public from then on,
    /// never delivered.
    pub seed_bits: u64,
    /// Bits of the earlier output still delivered.
    pub delivered_bits: u64,
}

/// The condition a user must assert before a seed is cut from an earlier
/// output (`spec/hashing-and-composition.md` 4.2).
pub const RECYCLING_CONDITION: &str = "the earlier block keeps its min-entropy given the later \
raw data (H_min(X_A | X_B E) >= k_A), and the later raw data were generated before the seed, \
the earlier output or anything computed from them was disclosed";

/// Seed recycling (`spec/hashing-and-composition.md` 4.2, derived there):
/// `seed_bits` bits of an output of `producer_bits` bits seed a later block.
/// Allowed only when the user asserts [`RECYCLING_CONDITION`]
/// (`asserted`); the seed must fit (`d_B <= |Z_A|`), and the seed bits are
/// never delivered. The producer's error is already in the sum, so the
/// recycled seed counts as uniform (`s = 0`, no `eps_seed`).
pub fn recycle(producer_bits: u64, seed_bits: u64, asserted: bool) -> Result<Recycled, Error> {
    if !asserted {
        return Err(Error::new(
            "recycled_seed",
            ErrorKind::NotAsserted {
                condition: RECYCLING_CONDITION,
            },
        ));
    }
    if seed_bits == 0 {
        return Err(Error::new("recycled_seed", ErrorKind::Zero));
    }
    if seed_bits > producer_bits {
        return Err(Error::new(
            "recycled_seed",
            ErrorKind::SeedDoesNotFit {
                needed: seed_bits,
                available: producer_bits,
            },
        ));
    }
    Ok(Recycled {
        seed_bits,
        delivered_bits: producer_bits - seed_bits,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plan::lhl::{self, eps_ext, Family};
    use crate::plan::round::{down4, up4};

    const N20: u64 = 1 << 20;
    const M: u64 = 838781;

    fn k() -> f64 {
        0.8 * N20 as f64
    }

    // spec/hashing-and-composition.md 4.5, Table 5 (seed reuse and weak
    // seeds), [computed, params.py].
    #[test]
    fn table_5_seed_reuse_and_weak_seeds() {
        let e = eps_ext(k(), M);
        assert_eq!(up4(e), "9.748e-13");
        #[rustfmt::skip]
        let rows: &[(u64, f64, &str)] = &[
            (1, 0.0, "2.010e-10"), (1, 1.0, "2.020e-10"), (1, 10.0, "1.199e-9"),
            (1, 40.0, "1.072e0"), (10, 0.0, "2.010e-9"), (10, 10.0, "1.199e-8"),
            (1000, 0.0, "2.010e-7"), (1000, 10.0, "1.199e-6"),
        ];
        for &(l, s, want) in rows {
            assert_eq!(
                up4(blocks_with_one_seed(l, 1e-10, e, s)),
                want,
                "L = {l}, s = {s}"
            );
        }
    }

    // spec/hashing-and-composition.md 4.5, Table 5 inverse (per-block m for
    // a total target).
    #[test]
    fn table_5_inverse() {
        let rows: &[(u64, f64, f64, &str, u64)] = &[
            (1000, 0.0, 1e-6, "8.000e-10", 838800),
            (1000, 10.0, 1e-6, "7.812e-13", 838780),
            (1000, 40.0, 1e-6, "7.275e-22", 838720),
        ];
        for &(l, s, total, budget, m) in rows {
            let b = Budget {
                blocks: l,
                seed_deficiency: s,
                ..Budget::single(total, 1e-10)
            };
            assert_eq!(down4(b.eps_ext().unwrap()), budget);
            assert_eq!(
                lhl::max_m_for_total(Family::Toeplitz, N20, k(), &b).unwrap(),
                m
            );
            assert!(b.total(eps_ext(k(), m)) <= total);
        }
        let b = Budget {
            blocks: 100,
            ..Budget::single(1e-8, 1e-10)
        };
        let e = lhl::max_m_for_total(Family::Toeplitz, N20, k(), &b).unwrap_err();
        assert!(matches!(e.kind(), ErrorKind::BudgetExhausted { .. }), "{e}");
        assert_eq!(e.field(), "eps_total");
    }

    fn block(seed: &str, s: f64) -> Use {
        Use {
            eps_s: 1e-10,
            eps_ext: eps_ext(k(), M),
            s,
            seed_id: Some(seed.to_string()),
        }
    }

    fn uniform(id: &str) -> Seed {
        Seed {
            seed_id: id.to_string(),
            eps_seed: 0.0,
        }
    }

    // spec/hashing-and-composition.md 5, Table 7 cases A-F.
    #[test]
    fn table_7_composition_cases() {
        let a = total_error(&[block("s1", 0.0)], &[uniform("s1")], 0.0).unwrap();
        assert_eq!(up4(a), "2.010e-10", "case A");
        let four = vec![block("s1", 0.0); 4];
        let b = total_error(&four, &[uniform("s1")], 1e-9).unwrap();
        assert_eq!(up4(b), "1.804e-9", "case B");
        let weak = vec![block("s1", 3.0); 4];
        let c = total_error(&weak, &[uniform("s1")], 1e-9).unwrap();
        assert_eq!(up4(c), "1.832e-9", "case C");
        let plain = Use {
            eps_s: 0.0,
            ..block("s1", 0.0)
        };
        let d = total_error(&[plain], &[uniform("s1")], 0.0).unwrap();
        assert_eq!(up4(d), "9.748e-13", "case D");
        // Case E: block B (n = 2^16, k = 0.8 n, m_B = 52349) seeded with
        // 117884 bits cut from Z_A; 720897 bits of Z_A delivered.
        let n16 = 1u64 << 16;
        let k16 = 0.8 * n16 as f64;
        let d_b = lhl::seed_len(Family::Toeplitz, n16, 52349).unwrap();
        assert_eq!(d_b, 117884);
        let r = recycle(M, d_b, true).unwrap();
        assert_eq!(r.delivered_bits, 720897);
        let use_b = Use {
            eps_s: 1e-10,
            eps_ext: eps_ext(k16, 52349),
            s: 0.0,
            seed_id: Some("recycled".into()),
        };
        assert_eq!(up4(use_b.eps_ext), "9.748e-13");
        let e = total_error(
            &[block("s1", 0.0), use_b],
            &[uniform("s1"), uniform("recycled")],
            0.0,
        )
        .unwrap();
        assert_eq!(up4(e), "4.020e-10", "case E");
        let f = total_error(
            &four,
            &[Seed {
                seed_id: "s1".into(),
                eps_seed: 1e-10,
            }],
            1e-9,
        )
        .unwrap();
        assert_eq!(up4(f), "1.904e-9", "case F");
    }

    // spec/hashing-and-composition.md 5, "Choosing m from a total target".
    #[test]
    fn table_7_m_from_total_target() {
        let rows: &[(f64, &str, u64, &str)] = &[
            (1e-6, "9.998e-7", 838820, "7.230e-7"),
            (1e-9, "8.000e-10", 838800, "9.059e-10"),
            (3e-10, "1.000e-10", 838794, "2.883e-10"),
            (2.0001e-10, "1.000e-14", 838767, "2.001e-10"),
        ];
        for &(total, budget, m, at_m) in rows {
            let b = Budget::single(total, 1e-10);
            assert_eq!(down4(b.eps_ext().unwrap()), budget, "target {total}");
            let got = lhl::max_m_for_total(Family::Toeplitz, N20, k(), &b).unwrap();
            assert_eq!(got, m, "target {total}");
            let t = b.total(eps_ext(k(), got));
            assert_eq!(up4(t), at_m);
            assert!(t <= total);
        }
        let e = Budget::single(2e-10, 1e-10).eps_ext().unwrap_err();
        assert!(matches!(e.kind(), ErrorKind::BudgetExhausted { .. }));
        assert!(e.to_string().contains("leaves no error"), "{e}");
    }

    #[test]
    fn refusals() {
        assert!(recycle(100, 50, false).is_err());
        assert!(matches!(
            recycle(100, 101, true).unwrap_err().kind(),
            ErrorKind::SeedDoesNotFit { .. }
        ));
        assert!(weak_seed_factor(10, 8.0, false).is_err());
        assert_eq!(weak_seed_factor(10, 7.0, true).unwrap(), 8.0);
        assert!(weak_seed_factor(10, 11.0, true).is_err());
        let mut b = Budget::single(1e-6, 1e-10);
        b.blocks = 0;
        assert_eq!(b.eps_ext().unwrap_err().field(), "blocks");
        let mut b = Budget::single(1.5, 0.0);
        assert_eq!(b.eps_ext().unwrap_err().field(), "eps_total");
        b = Budget::single(1e-6, 0.0);
        b.eps_seed = 1e-9;
        b.seed_deficiency = 2.0;
        assert_eq!(b.eps_ext().unwrap_err().field(), "eps_seed");
        // A seed listed twice, and a use naming an unknown seed.
        assert!(total_error(&[], &[uniform("a"), uniform("a")], 0.0).is_err());
        assert!(total_error(&[block("b", 0.0)], &[uniform("a")], 0.0).is_err());
    }

    #[test]
    fn abort_wording() {
        assert!(meaning(true).contains("Pr[accept] times the distance"));
        assert!(meaning(true).contains("NOT bound the distance given acceptance"));
        assert!(!meaning(false).contains("Pr[accept]"));
    }
}
