//! The selector: evaluates every applicable construction for one set of
//! security inputs and picks one for an objective.
//!
//! Pure: the speed of each construction comes from a [`ThroughputModel`]
//! passed in (calibrated by [`super::measure`], outside this module). The
//! work counts it multiplies are those of `spec/trevisan.md` 7 (Trevisan)
//! and, for the Toeplitz families, the `N log2 N` of an FFT convolution of
//! length `N` (common practice).
//!
//! The input is shaped so that an entropy certificate can fill it: a
//! certificate covers one string as ONE block ([`EntropyScope::WholeString`]),
//! and the selector refuses to split such a figure into blocks
//! (`spec/hashing-and-composition.md` 4.1: a global bound gives no per-block
//! bounds).

use super::compose::Budget;
use super::lhl::{self, Family};
use super::trevisan::{self, Design, OneBit, TrevisanInputs, TrevisanPlan};
use super::{check_entropy, Error, ErrorKind};
use crate::extract::spec::{ExtractorSpec, Family as SpecFamily};

/// What the choice optimises.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Objective {
    /// The most output bits (default); ties go to the shorter seed.
    #[default]
    MostOutput,
    /// The shortest seed; ties go to the longer output.
    ShortestSeed,
    /// The least expected time per block on this machine; ties go to the
    /// longer output.
    Fastest,
}

/// What the min-entropy figure covers.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum EntropyScope {
    /// A bound for each block given all earlier blocks and the adversary's
    /// information (`spec/hashing-and-composition.md` 4.1).
    #[default]
    PerBlock,
    /// One bound for the whole string (as a certificate gives it): only one
    /// block is allowed.
    WholeString,
}

/// The security inputs of the selector.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct SelectorInput {
    /// Input length n of each block, in bits.
    pub n: u64,
    /// Certified smooth min-entropy k of each block, in bits.
    pub k: f64,
    /// What `k` covers.
    pub scope: EntropyScope,
    /// Whether the certification can abort (changes the meaning of
    /// eps_total: `spec/hashing-and-composition.md` 5); `None` when not
    /// known (then both meanings are reported).
    pub can_abort: Option<bool>,
    /// Error target and fixed terms (eps_total, eps_cert, eps_seed, L, eps_s,
    /// s).
    pub budget: Budget,
    /// What to optimise.
    pub objective: Objective,
}

impl SelectorInput {
    /// Checks the inputs; the error names the bad one.
    pub fn validate(&self) -> Result<(), Error> {
        check_entropy(self.n, self.k)?;
        self.budget.validate()?;
        if self.scope == EntropyScope::WholeString && self.budget.blocks > 1 {
            return Err(Error::new(
                "blocks",
                ErrorKind::CannotSplit {
                    blocks: self.budget.blocks,
                },
            ));
        }
        Ok(())
    }
}

/// A construction the selector evaluates.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize)]
#[serde(rename_all = "kebab-case", tag = "kind")]
pub enum Construction {
    /// Two-universal hashing (`spec/hashing-and-composition.md` 2-3).
    Hash {
        /// The family.
        family: Family,
    },
    /// Trevisan-type (`spec/trevisan.md`).
    Trevisan {
        /// One-bit extractor.
        one_bit: OneBit,
        /// Weak design.
        design: Design,
        /// Design factor c.
        c: u64,
    },
}

/// Every construction the selector evaluates, in table order: the two
/// Toeplitz families, then the Trevisan variants of the worked table of
/// `spec/trevisan.md` 6.
pub const CONSTRUCTIONS: [Construction; 6] = [
    Construction::Hash {
        family: Family::Toeplitz,
    },
    Construction::Hash {
        family: Family::ModifiedToeplitz,
    },
    Construction::Trevisan {
        one_bit: OneBit::Ph,
        design: Design::Poly,
        c: 1,
    },
    Construction::Trevisan {
        one_bit: OneBit::Ph,
        design: Design::Poly,
        c: 8,
    },
    Construction::Trevisan {
        one_bit: OneBit::Ph,
        design: Design::Block,
        c: 1,
    },
    Construction::Trevisan {
        one_bit: OneBit::Ip,
        design: Design::Poly,
        c: 1,
    },
];

impl Construction {
    /// Short name for tables and JSON (`toeplitz`, `trevisan-ph-poly-c8`...).
    pub fn name(&self) -> String {
        match self {
            Construction::Hash { family } => family.name().to_string(),
            Construction::Trevisan {
                one_bit: OneBit::Ip,
                ..
            } => "trevisan-ip".to_string(),
            Construction::Trevisan {
                design: Design::Block,
                c: 1,
                ..
            } => "trevisan-ph-block".to_string(),
            Construction::Trevisan { design, c, .. } => {
                let d = match design {
                    Design::Poly => "poly",
                    Design::Block => "block",
                };
                format!("trevisan-ph-{d}-c{c}")
            }
        }
    }

    /// The unit of work the speed model prices for this construction.
    pub fn work_unit(&self) -> WorkUnit {
        match self {
            Construction::Hash {
                family: Family::Toeplitz,
            } => WorkUnit::ToeplitzProduct,
            Construction::Hash {
                family: Family::ModifiedToeplitz,
            } => WorkUnit::ModifiedToeplitzProduct,
            Construction::Trevisan {
                one_bit: OneBit::Ph,
                ..
            } => WorkUnit::ClmulProduct,
            Construction::Trevisan {
                one_bit: OneBit::Ip,
                ..
            } => WorkUnit::AndParityWord,
        }
    }
}

/// A unit of work whose cost a [`ThroughputModel`] knows.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum WorkUnit {
    /// One `N log2 N` unit of the Toeplitz FFT product (N = n + m).
    ToeplitzProduct,
    /// One `N log2 N` unit of the modified Toeplitz product (N = n).
    ModifiedToeplitzProduct,
    /// One 64 x 64 carry-less product with its share of reduction (PH,
    /// `spec/trevisan.md` 7).
    ClmulProduct,
    /// One 64-bit AND-and-parity word (IP, `spec/trevisan.md` 7).
    AndParityWord,
}

/// Work per block, in [`WorkUnit`]s: Toeplitz hashing of `a` input bits to
/// `b` output bits is a set of `max(a, b) / min(a, b)` square Karatsuba
/// middle products of size `min(a, b)`, so `max(a, b) min(a, b)^(log2 3 - 1)`
/// (Karatsuba's exponent; common practice) with `(a, b) = (n, m)` for
/// Toeplitz and `(n - m, m)` for modified Toeplitz; PH
/// `m (nb - 1) W^2` carry-less products with `nb = ceil(n/l)`,
/// `W = ceil(l/64)`; IP `n m / 64` words (`spec/trevisan.md` 7).
pub fn work_per_block(c: &Construction, n: u64, m: u64, trevisan: Option<&TrevisanPlan>) -> f64 {
    match c {
        Construction::Hash {
            family: Family::Toeplitz,
        } => hash_work(n, m),
        Construction::Hash {
            family: Family::ModifiedToeplitz,
        } => hash_work(n.saturating_sub(m), m),
        Construction::Trevisan {
            one_bit: OneBit::Ph,
            ..
        } => {
            let l = trevisan.and_then(|p| p.function.l).unwrap_or(1).max(1);
            let nb = n.div_ceil(l);
            let w = l.div_ceil(64) as f64;
            m as f64 * nb.saturating_sub(1).max(1) as f64 * w * w
        }
        Construction::Trevisan {
            one_bit: OneBit::Ip,
            ..
        } => n as f64 * m as f64 / 64.0,
    }
}

/// Work of a Toeplitz product of `a` input to `b` output bits (see
/// [`work_per_block`]).
pub fn hash_work(a: u64, b: u64) -> f64 {
    let (hi, lo) = (a.max(b).max(1) as f64, a.min(b).max(1) as f64);
    hi * lo.powf(3f64.log2() - 1.0)
}

/// The cost of a unit of work on this machine.
pub trait ThroughputModel {
    /// Seconds per [`WorkUnit`], or `None` if not calibrated.
    fn seconds_per_unit(&self, unit: WorkUnit) -> Option<f64>;
}

/// A model that knows no speeds (for objectives that do not need one).
pub struct NoSpeeds;

impl ThroughputModel for NoSpeeds {
    fn seconds_per_unit(&self, _unit: WorkUnit) -> Option<f64> {
        None
    }
}

/// One construction's plan for the inputs.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Planned {
    /// Output bits per block.
    pub m: u64,
    /// Seed bits.
    pub d: u64,
    /// Extractor error per block with a uniform seed (before the 2^s
    /// factor).
    pub eps_ext: f64,
    /// The run's total by the section-5 formula.
    pub eps_total: f64,
    /// `m / k`, the fraction of the min-entropy kept.
    pub kept: f64,
    /// `d / m`, seed bits per output bit.
    pub seed_per_output: f64,
    /// Expected seconds per block on this machine, if the model knows it.
    pub seconds_per_block: Option<f64>,
    /// The Trevisan parameters (Trevisan constructions only).
    pub trevisan: Option<TrevisanPlan>,
    /// Why the row cannot be run in practice, if so (never chosen).
    pub impractical: Option<String>,
}

impl Planned {
    /// The extractor this plan runs on blocks of `n` bits: the one
    /// vocabulary of `crate::extract::spec` (the Trevisan integers with the
    /// prime the search fixed).
    pub fn spec(&self, construction: &Construction, n: u64) -> ExtractorSpec {
        let family = match construction {
            Construction::Hash {
                family: Family::Toeplitz,
            } => SpecFamily::Toeplitz,
            Construction::Hash {
                family: Family::ModifiedToeplitz,
            } => SpecFamily::ModifiedToeplitz,
            Construction::Trevisan { .. } => {
                let p = self
                    .trevisan
                    .as_ref()
                    .expect("a planned Trevisan row carries its parameters");
                let f = &p.function;
                SpecFamily::Trevisan {
                    one_bit: f.one_bit,
                    design: f.design,
                    field_bits: f.l.unwrap_or(0) as usize,
                    design_factor: p.c,
                    prime: Some(f.q),
                }
            }
        };
        ExtractorSpec {
            family,
            n: n as usize,
            m: self.m as usize,
        }
    }
}

/// Seed length above which a row is impractical: 2^36 bits (8 GiB; common
/// practice for this tool: a seed must be stored and read once per run).
pub const IMPRACTICAL_SEED_BITS: u64 = 1 << 36;

/// Time per block above which a row is impractical on this machine: one day.
pub const IMPRACTICAL_SECONDS_PER_BLOCK: f64 = 86_400.0;

/// Why a plan cannot be run in practice, if so.
pub fn impractical(d: u64, seconds_per_block: Option<f64>) -> Option<String> {
    if d > IMPRACTICAL_SEED_BITS {
        return Some(format!(
            "impractical: a seed of {} (more than 8 GiB)",
            human_bits(d)
        ));
    }
    match seconds_per_block {
        Some(s) if s > IMPRACTICAL_SECONDS_PER_BLOCK => Some(format!(
            "impractical: {} per block on this machine (more than a day)",
            human_seconds(s)
        )),
        _ => None,
    }
}

/// One row of the selector's table.
#[derive(Clone, Debug, PartialEq)]
pub struct Row {
    /// The construction.
    pub construction: Construction,
    /// Its plan, or why it is refused.
    pub outcome: Result<Planned, Error>,
}

/// The selector's result.
#[derive(Clone, Debug, PartialEq)]
pub struct Selection {
    /// One row per construction, in [`CONSTRUCTIONS`] order.
    pub rows: Vec<Row>,
    /// Index of the chosen row, if any construction gives output.
    pub chosen: Option<usize>,
    /// One sentence saying why (or why nothing was chosen).
    pub reason: String,
}

/// Plans one construction for the inputs (`spec/hashing-and-composition.md`
/// 2.5 and 5 for hashing; `spec/trevisan.md` 6 for Trevisan).
pub fn plan_one(
    c: &Construction,
    input: &SelectorInput,
    model: &dyn ThroughputModel,
) -> Result<Planned, Error> {
    input.validate()?;
    let (m, d, eps_ext, eps_total, trev) = match *c {
        Construction::Hash { family } => {
            let m = lhl::max_m_for_total(family, input.n, input.k, &input.budget)?;
            let d = lhl::seed_len(family, input.n, m)?;
            let e = lhl::eps_ext(input.k, m);
            (m, d, e, input.budget.total(e), None)
        }
        Construction::Trevisan { one_bit, design, c } => {
            let p = trevisan::search(&TrevisanInputs {
                n: input.n,
                k_s: input.k,
                budget: input.budget.clone(),
                one_bit,
                design,
                c,
            })?;
            (p.function.m, p.shape.d, p.eps_ext, p.eps_total, Some(p))
        }
    };
    let seconds = model
        .seconds_per_unit(c.work_unit())
        .map(|s| s * work_per_block(c, input.n, m, trev.as_ref()));
    Ok(Planned {
        m,
        d,
        eps_ext,
        eps_total,
        kept: if input.k > 0.0 {
            m as f64 / input.k
        } else {
            0.0
        },
        seed_per_output: d as f64 / m as f64,
        seconds_per_block: seconds,
        impractical: impractical(d, seconds),
        trevisan: trev,
    })
}

/// Evaluates every construction of [`CONSTRUCTIONS`] and picks one for the
/// objective, with a one-sentence reason. Invalid inputs are refused before
/// anything is evaluated; a construction that cannot meet the target is a
/// refused row. With [`Objective::Fastest`], nothing is chosen unless the
/// model prices every planned row.
pub fn select(input: &SelectorInput, model: &dyn ThroughputModel) -> Result<Selection, Error> {
    input.validate()?;
    let rows: Vec<Row> = CONSTRUCTIONS
        .iter()
        .map(|c| Row {
            construction: *c,
            outcome: plan_one(c, input, model),
        })
        .collect();
    let ok: Vec<(usize, &Planned)> = rows
        .iter()
        .enumerate()
        .filter_map(|(i, r)| r.outcome.as_ref().ok().map(|p| (i, p)))
        .filter(|(_, p)| p.impractical.is_none())
        .collect();
    let unpriced: Vec<String> = ok
        .iter()
        .filter(|(_, p)| p.seconds_per_block.is_none())
        .map(|(i, _)| rows[*i].construction.name())
        .collect();
    let pick = match input.objective {
        Objective::MostOutput => ok
            .iter()
            .min_by(|a, b| b.1.m.cmp(&a.1.m).then(a.1.d.cmp(&b.1.d)))
            .map(|x| x.0),
        Objective::ShortestSeed => ok
            .iter()
            .min_by(|a, b| a.1.d.cmp(&b.1.d).then(b.1.m.cmp(&a.1.m)))
            .map(|x| x.0),
        // Only when every planned row is priced: a choice among some rows
        // would not be "the fastest".
        Objective::Fastest if unpriced.is_empty() => ok
            .iter()
            .filter_map(|(i, p)| p.seconds_per_block.map(|s| (*i, s, p.m)))
            .min_by(|a, b| a.1.total_cmp(&b.1).then(b.2.cmp(&a.2)))
            .map(|x| x.0),
        Objective::Fastest => None,
    };
    let reason = match pick {
        Some(i) => {
            let p = rows[i].outcome.as_ref().expect("picked rows are planned");
            match input.objective {
                Objective::MostOutput => format!(
                    "largest output within the error target; seed {}",
                    human_bits(p.d)
                ),
                Objective::ShortestSeed => format!(
                    "shortest seed within the error target ({}); output {}",
                    human_bits(p.d),
                    human_bits(p.m)
                ),
                Objective::Fastest => format!(
                    "fastest on this machine within the error target ({} per block); output {}",
                    human_seconds(p.seconds_per_block.unwrap_or(0.0)),
                    human_bits(p.m)
                ),
            }
        }
        None if ok.is_empty() => {
            let why = rows
                .iter()
                .find_map(|r| r.outcome.as_ref().err())
                .map(|e| e.to_string());
            match why {
                Some(why) => format!("no construction meets the error target: {why}"),
                None => "every construction that meets the error target is impractical here (see the rows)".to_string(),
            }
        }
        None => format!(
            "the speed of {} is not measured on this machine, so none can be chosen as fastest",
            unpriced.join(", ")
        ),
    };
    Ok(Selection {
        rows,
        chosen: pick,
        reason,
    })
}

/// The conditions a plan for `input` rests on, which the user asserts by
/// running it (`spec/hashing-and-composition.md` 9 item 16: the report lists
/// every asserted condition; the conditions are those of 2.2, 4.1 and 4.4).
pub fn assumed_conditions(input: &SelectorInput) -> Vec<&'static str> {
    let mut c = vec![
        "the smooth min-entropy figure holds for the raw data given everything the adversary \
         holds, quantum side information included",
        "the seed is independent of the raw data and of the adversary, and no raw block it is \
         used on is generated after the seed (or anything computed from it) is disclosed",
    ];
    if input.budget.blocks > 1 {
        c.push(
            "the min-entropy bound holds for each block given all earlier blocks, in an order \
             fixed before the data were seen",
        );
    }
    if input.budget.seed_deficiency > 0.0 {
        c.push(
            "the seed's own min-entropy, with no side information, is at least its length minus \
             the seed deficiency",
        );
    }
    c
}

/// A bit count in plain words: `838781 bits` below 10^4, else `1.9 Mbit`
/// style with one decimal (rounded to nearest; for display only).
pub fn human_bits(b: u64) -> String {
    let x = b as f64;
    let units = [(1e12, "Tbit"), (1e9, "Gbit"), (1e6, "Mbit"), (1e3, "kbit")];
    if b < 10_000 {
        return format!("{b} bits");
    }
    for (scale, unit) in units {
        if x >= scale {
            return format!("{:.1} {unit}", x / scale);
        }
    }
    format!("{b} bits")
}

/// A duration in plain words (`12 ms`, `3.4 s`, `2.1 h`), for display only.
pub fn human_seconds(s: f64) -> String {
    if s < 1e-3 {
        format!("{:.0} us", s * 1e6)
    } else if s < 1.0 {
        format!("{:.0} ms", s * 1e3)
    } else if s < 600.0 {
        format!("{s:.1} s")
    } else if s < 36_000.0 {
        format!("{:.0} min", s / 60.0)
    } else if s < 86_400.0 * 10.0 {
        format!("{:.1} h", s / 3600.0)
    } else {
        format!("{:.0} days", s / 86_400.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn input(objective: Objective) -> SelectorInput {
        SelectorInput {
            n: 1 << 20,
            k: 0.8 * (1u64 << 20) as f64,
            scope: EntropyScope::PerBlock,
            can_abort: None,
            budget: Budget::single(1e-9, 1e-10),
            objective,
        }
    }

    struct Fixed;
    impl ThroughputModel for Fixed {
        fn seconds_per_unit(&self, unit: WorkUnit) -> Option<f64> {
            match unit {
                WorkUnit::ToeplitzProduct => Some(2e-9),
                WorkUnit::ModifiedToeplitzProduct => Some(1e-9),
                WorkUnit::ClmulProduct => Some(1e-9),
                WorkUnit::AndParityWord => None,
            }
        }
    }

    struct AllPriced;
    impl ThroughputModel for AllPriced {
        fn seconds_per_unit(&self, unit: WorkUnit) -> Option<f64> {
            Fixed.seconds_per_unit(unit).or(Some(1e-9))
        }
    }

    // Hashing rows agree with spec/hashing-and-composition.md 5, Table 7
    // (eps_total = 1e-9: m = 838800); modified Toeplitz has the same m and a
    // seed of n - 1 bits (3.2), so it wins most-output on the tie.
    #[test]
    fn most_output_picks_the_largest_m() {
        let s = select(&input(Objective::MostOutput), &NoSpeeds).unwrap();
        let t = s.rows[0].outcome.as_ref().unwrap();
        assert_eq!(t.m, 838800);
        assert_eq!(t.d, (1 << 20) + 838800 - 1);
        let mt = s.rows[1].outcome.as_ref().unwrap();
        assert_eq!(mt.m, 838800);
        assert_eq!(mt.d, (1 << 20) - 1);
        assert_eq!(s.chosen, Some(1));
        assert_eq!(
            s.reason,
            "largest output within the error target; seed 1.0 Mbit"
        );
        for r in &s.rows {
            let p = r.outcome.as_ref().unwrap();
            assert!(p.eps_total <= 1e-9, "{}", r.construction.name());
            assert!(p.m <= t.m);
        }
    }

    #[test]
    fn shortest_seed_and_fastest() {
        let s = select(&input(Objective::ShortestSeed), &NoSpeeds).unwrap();
        let chosen = &s.rows[s.chosen.unwrap()];
        let d = chosen.outcome.as_ref().unwrap().d;
        for r in &s.rows {
            assert!(r.outcome.as_ref().unwrap().d >= d);
        }
        assert_eq!(chosen.construction.name(), "trevisan-ph-poly-c1");
        let s = select(&input(Objective::Fastest), &NoSpeeds).unwrap();
        assert_eq!(s.chosen, None);
        assert!(
            s.reason.contains("is not measured on this machine"),
            "{}",
            s.reason
        );
        // IP is not priced by this model, but its rows are impractical here
        // (seeds of terabits for n = 2^20) and never chosen, so they do not
        // block the choice among the practical, priced rows.
        let s = select(&input(Objective::Fastest), &Fixed).unwrap();
        for r in &s.rows {
            if r.construction.name().starts_with("trevisan-ip") {
                if let Ok(p) = &r.outcome {
                    assert!(
                        p.impractical.is_some(),
                        "{}: d = {}",
                        r.construction.name(),
                        p.d
                    );
                }
            }
        }
        let chosen = s.chosen.expect("a practical priced row");
        assert!(!s.rows[chosen]
            .construction
            .name()
            .starts_with("trevisan-ip"));
        let s = select(&input(Objective::Fastest), &AllPriced).unwrap();
        assert_eq!(
            s.rows[s.chosen.unwrap()].construction.name(),
            "modified-toeplitz"
        );
        assert!(
            s.reason.starts_with("fastest on this machine"),
            "{}",
            s.reason
        );
    }

    #[test]
    fn refusals() {
        let mut i = input(Objective::MostOutput);
        i.scope = EntropyScope::WholeString;
        i.budget.blocks = 4;
        let e = select(&i, &NoSpeeds).unwrap_err();
        assert!(matches!(e.kind(), ErrorKind::CannotSplit { blocks: 4 }));
        assert_eq!(e.field(), "blocks");
        let mut i = input(Objective::MostOutput);
        i.budget.eps_total = 2e-10;
        let s = select(&i, &NoSpeeds).unwrap();
        assert_eq!(s.chosen, None);
        assert!(s.reason.contains("no construction meets"), "{}", s.reason);
        let mut i = input(Objective::MostOutput);
        i.k = 2e6;
        assert_eq!(select(&i, &NoSpeeds).unwrap_err().field(), "k");
    }

    #[test]
    fn conditions_follow_the_inputs() {
        let mut i = input(Objective::MostOutput);
        assert_eq!(assumed_conditions(&i).len(), 2);
        i.budget.blocks = 3;
        i.budget.seed_deficiency = 2.0;
        let c = assumed_conditions(&i);
        assert!(c.iter().any(|x| x.contains("given all earlier blocks")));
        assert!(c.iter().any(|x| x.contains("seed deficiency")));
    }

    // spec/trevisan.md 7, cost table (params.py extra; k_s = 0.9n,
    // eps_total = 1e-12 with the worked table's eps_s = eps_total/4): l, nb
    // and the total carry-less products m (nb - 1) W^2; and the IP figure
    // n m / 64 = 4.0e12 at n = 2^24.
    #[test]
    fn trevisan_cost_table() {
        let rows: &[(u32, Design, u64, u64, f64)] = &[
            (16, Design::Poly, 237, 277, 1.3e8),
            (16, Design::Block, 241, 272, 2.5e8),
            (20, Design::Poly, 255, 4113, 2.5e10),
            (20, Design::Block, 261, 4018, 9.5e10),
            (24, Design::Poly, 275, 61009, 9.3e12),
            (24, Design::Block, 281, 59706, 2.25e13),
        ];
        let plan = |log_n: u32, one_bit, design| {
            let n = 1u64 << log_n;
            let c = Construction::Trevisan {
                one_bit,
                design,
                c: 1,
            };
            let i = SelectorInput {
                n,
                k: 0.9 * n as f64,
                budget: Budget::single(1e-12, 2.5e-13),
                ..input(Objective::MostOutput)
            };
            let p = plan_one(&c, &i, &NoSpeeds).unwrap();
            let work = work_per_block(&c, n, p.m, p.trevisan.as_ref());
            (p, work)
        };
        for &(log_n, design, l, nb, products) in rows {
            let (p, work) = plan(log_n, OneBit::Ph, design);
            assert_eq!(p.trevisan.as_ref().unwrap().function.l, Some(l));
            assert_eq!((1u64 << log_n).div_ceil(l), nb);
            let digits = if products == 2.25e13 { 3 } else { 2 };
            assert_eq!(
                format!("{:.*e}", digits - 1, work),
                format!("{:.*e}", digits - 1, products),
                "n = 2^{log_n}, {design:?}"
            );
        }
        let (_, work) = plan(24, OneBit::Ip, Design::Poly);
        assert_eq!(format!("{work:.1e}"), "4.0e12");
    }

    #[test]
    fn impractical_rows_are_marked_and_never_picked() {
        // Issue "no way to overstate security", item 9: a 2.8-Tbit seed and
        // a block at 122558 days are marked, and never chosen.
        assert!(impractical(2_800_000_000_000, None)
            .unwrap()
            .contains("seed"));
        assert!(impractical(1000, Some(122_558.0 * 86_400.0))
            .unwrap()
            .contains("per block"));
        assert!(impractical(1 << 20, Some(1.0)).is_none());
    }

    #[test]
    fn human_units() {
        assert_eq!(human_bits(1887356), "1.9 Mbit");
        assert_eq!(human_bits(9999), "9999 bits");
        assert_eq!(human_seconds(0.012), "12 ms");
    }
}
