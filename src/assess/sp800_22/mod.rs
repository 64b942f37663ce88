//! The 15 tests of NIST SP 800-22 Rev. 1a, and the battery that runs them
//! with the standard's parameter rules (statistics.md sections 2, 3 and 8).
//!
//! Each test is a pure function over bit values (`&[u8]`, one 0 or 1 per
//! entry, ε_1 first) that computes whatever it is given; the input-size
//! rules of the standard live in [`run_battery`], which marks a test "not
//! applicable" with the reason when its minimum is not met.

pub mod excursions;
pub mod frequency;
pub mod linear_complexity;
pub mod longest_run;
pub mod rank;
pub mod serial;
pub mod spectral;
pub mod template;
#[cfg(test)]
pub(crate) mod testdata;
pub mod universal;

use crate::bits::Bits;
use serde::Serialize;

/// Significance level α of each test (SP 800-22 section 1.1.5;
/// statistics.md 1).
pub const ALPHA: f64 = 0.01;

/// The 15 tests, in the order of SP 800-22 sections 2.1 to 2.15.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum TestId {
    /// Section 2.1.
    Frequency,
    /// Section 2.2.
    BlockFrequency,
    /// Section 2.3.
    Runs,
    /// Section 2.4.
    LongestRun,
    /// Section 2.5.
    Rank,
    /// Section 2.6.
    Spectral,
    /// Section 2.7.
    NonOverlappingTemplate,
    /// Section 2.8.
    OverlappingTemplate,
    /// Section 2.9.
    Universal,
    /// Section 2.10.
    LinearComplexity,
    /// Section 2.11.
    Serial,
    /// Section 2.12.
    ApproximateEntropy,
    /// Section 2.13.
    CumulativeSums,
    /// Section 2.14.
    RandomExcursions,
    /// Section 2.15.
    RandomExcursionsVariant,
}

impl TestId {
    /// All tests in section order.
    pub const ALL: [TestId; 15] = [
        TestId::Frequency,
        TestId::BlockFrequency,
        TestId::Runs,
        TestId::LongestRun,
        TestId::Rank,
        TestId::Spectral,
        TestId::NonOverlappingTemplate,
        TestId::OverlappingTemplate,
        TestId::Universal,
        TestId::LinearComplexity,
        TestId::Serial,
        TestId::ApproximateEntropy,
        TestId::CumulativeSums,
        TestId::RandomExcursions,
        TestId::RandomExcursionsVariant,
    ];

    /// Short name as printed.
    pub fn name(self) -> &'static str {
        match self {
            TestId::Frequency => "frequency",
            TestId::BlockFrequency => "block frequency",
            TestId::Runs => "runs",
            TestId::LongestRun => "longest run of ones",
            TestId::Rank => "binary matrix rank",
            TestId::Spectral => "spectral (DFT)",
            TestId::NonOverlappingTemplate => "non-overlapping template",
            TestId::OverlappingTemplate => "overlapping template",
            TestId::Universal => "Maurer's universal",
            TestId::LinearComplexity => "linear complexity",
            TestId::Serial => "serial",
            TestId::ApproximateEntropy => "approximate entropy",
            TestId::CumulativeSums => "cumulative sums",
            TestId::RandomExcursions => "random excursions",
            TestId::RandomExcursionsVariant => "random excursions variant",
        }
    }

    /// Section of SP 800-22.
    pub fn section(self) -> &'static str {
        match self {
            TestId::Frequency => "2.1",
            TestId::BlockFrequency => "2.2",
            TestId::Runs => "2.3",
            TestId::LongestRun => "2.4",
            TestId::Rank => "2.5",
            TestId::Spectral => "2.6",
            TestId::NonOverlappingTemplate => "2.7",
            TestId::OverlappingTemplate => "2.8",
            TestId::Universal => "2.9",
            TestId::LinearComplexity => "2.10",
            TestId::Serial => "2.11",
            TestId::ApproximateEntropy => "2.12",
            TestId::CumulativeSums => "2.13",
            TestId::RandomExcursions => "2.14",
            TestId::RandomExcursionsVariant => "2.15",
        }
    }
}

/// One P-value of a test, with what it refers to (`""` when the test has
/// one, else e.g. `forward`, `x=-1`, `000000001`, `P1`).
#[derive(Clone, Debug, Serialize)]
pub struct PValue {
    /// What the P-value refers to.
    pub label: String,
    /// The P-value.
    pub p_value: f64,
}

/// What a test produced.
#[derive(Clone, Debug, Serialize)]
#[serde(tag = "status", rename_all = "kebab-case")]
pub enum Outcome {
    /// The test ran.
    Done {
        /// Its P-values.
        p_values: Vec<PValue>,
    },
    /// The test's conditions were not met.
    NotApplicable {
        /// Why, in words.
        reason: String,
    },
}

/// A test's outcome on one sequence.
#[derive(Clone, Debug, Serialize)]
pub struct TestReport {
    /// Which test.
    pub test: TestId,
    /// Parameters used, in words (e.g. `M = 128`).
    pub parameters: String,
    /// What it produced.
    pub outcome: Outcome,
}

/// Parameters of the battery; `None` means "chosen by the standard's rule
/// for the sequence length".
#[derive(Clone, Debug, PartialEq)]
pub struct Config {
    /// Block frequency block length M. Default: the least M ≥ 20 with
    /// M > 0.01 n, so that N < 100 (SP 800-22 section 2.2.7).
    pub block_frequency_m: Option<usize>,
    /// Non-overlapping template length m (9 or 10; default 9), run with all
    /// aperiodic templates of that length.
    pub template_m: usize,
    /// Linear complexity block length M (500 … 5000; default 500).
    pub linear_complexity_m: usize,
    /// Serial m. Default: min(16, ⌊log2 n⌋ − 3), the largest allowed
    /// by m < ⌊log2 n⌋ − 2 up to the usual 16.
    pub serial_m: Option<usize>,
    /// Approximate entropy m. Default: min(10, ⌊log2 n⌋ − 6).
    pub approximate_entropy_m: Option<usize>,
}

impl Default for Config {
    fn default() -> Self {
        Config {
            block_frequency_m: None,
            template_m: 9,
            linear_complexity_m: 500,
            serial_m: None,
            approximate_entropy_m: None,
        }
    }
}

/// Bit values of a bit string (bit i of the string at index i).
pub fn bit_values(bits: &Bits) -> Vec<u8> {
    let n = bits.len();
    let mut out = Vec::with_capacity(n);
    for (wi, &w) in bits.words().iter().enumerate() {
        let take = (n - wi * 64).min(64);
        out.extend((0..take).map(|j| ((w >> j) & 1) as u8));
    }
    out
}

fn floor_log2(n: usize) -> usize {
    (usize::BITS - 1 - n.leading_zeros()) as usize
}

fn na(test: TestId, parameters: String, reason: String) -> TestReport {
    TestReport {
        test,
        parameters,
        outcome: Outcome::NotApplicable { reason },
    }
}

fn done(test: TestId, parameters: String, p_values: Vec<PValue>) -> TestReport {
    TestReport {
        test,
        parameters,
        outcome: Outcome::Done { p_values },
    }
}

fn one(p: f64) -> Vec<PValue> {
    vec![PValue {
        label: String::new(),
        p_value: p,
    }]
}

/// Runs the 15 tests on one sequence with the parameter rules and input-size
/// minimums of SP 800-22 (statistics.md section 8; sections 2.x.7 of the
/// standard).
pub fn run_battery(bits: &Bits, cfg: &Config) -> Vec<TestReport> {
    let x = bit_values(bits);
    run_battery_values(&x, cfg)
}

/// [`run_battery`] on bit values.
pub fn run_battery_values(x: &[u8], cfg: &Config) -> Vec<TestReport> {
    let n = x.len();
    let lg = if n > 0 { floor_log2(n) } else { 0 };
    let mut out = Vec::with_capacity(15);
    let short = |need: u64| format!("needs at least {need} bits, the sequence has {n}");

    // 2.1 frequency: n >= 100
    out.push(if n < 100 {
        na(TestId::Frequency, String::new(), short(100))
    } else {
        done(
            TestId::Frequency,
            String::new(),
            one(frequency::frequency(x).p_value),
        )
    });

    // 2.2 block frequency: n >= 100, M >= 20, M > 0.01 n, N < 100
    let m = cfg.block_frequency_m.unwrap_or((n / 100 + 1).max(20));
    let params = format!("M = {m}");
    out.push(if n < 100 {
        na(TestId::BlockFrequency, params, short(100))
    } else if m < 20 || m * 100 <= n || n / m >= 100 || m > n {
        na(
            TestId::BlockFrequency,
            params,
            format!("M = {m} breaks the rule M >= 20, M > 0.01 n, N = n/M < 100 (n = {n})"),
        )
    } else {
        done(
            TestId::BlockFrequency,
            params,
            one(frequency::block_frequency(x, m).p_value),
        )
    });

    // 2.3 runs: n >= 100
    out.push(if n < 100 {
        na(TestId::Runs, String::new(), short(100))
    } else {
        done(TestId::Runs, String::new(), one(frequency::runs(x).p_value))
    });

    // 2.4 longest run: M by n
    out.push(match longest_run::config_for(n) {
        None => na(TestId::LongestRun, String::new(), short(128)),
        Some(c) => done(
            TestId::LongestRun,
            format!("M = {}, printed class table", c.m),
            one(longest_run::longest_run(x, &c, longest_run::ClassTable::Printed).p_value),
        ),
    });

    // 2.5 rank: n >= 38 M Q = 38,912
    let params = "32x32 matrices".to_string();
    out.push(if n < 38 * 32 * 32 {
        na(TestId::Rank, params, short(38 * 32 * 32))
    } else {
        done(
            TestId::Rank,
            params,
            one(rank::rank(x, 32, 32, rank::RankTable::Exact).p_value),
        )
    });

    // 2.6 spectral: n >= 1000
    out.push(if n < 1000 {
        na(TestId::Spectral, String::new(), short(1000))
    } else {
        done(
            TestId::Spectral,
            String::new(),
            one(spectral::spectral(x).p_value),
        )
    });

    // 2.7 non-overlapping: N = 8 blocks (N <= 100 and M = n/8 > 0.01 n
    // hold), m = 9 or 10 (SP 800-22 section 2.7.7). The standard sets no
    // length minimum; as a project rule (common practice for chi-square
    // statistics: expected counts of at least 5) we ask for μ >= 5 per
    // block, i.e. M >= 5·2^m + m − 1.
    let tm = cfg.template_m;
    let params = format!("m = {tm}, N = 8, all aperiodic templates");
    let min_block = 5 * (1usize << tm.min(20)) + tm.saturating_sub(1);
    out.push(if tm != 9 && tm != 10 {
        na(TestId::NonOverlappingTemplate, params, format!("m = {tm}: the standard asks for m = 9 or 10"))
    } else if n / 8 < min_block {
        na(
            TestId::NonOverlappingTemplate,
            params,
            format!(
                "needs at least {} bits (8 blocks with an expected count of at least 5 matches; a project rule), the sequence has {n}",
                8 * min_block
            ),
        )
    } else {
        let ts = template::aperiodic_templates(tm);
        let rs = template::non_overlapping_many(x, &ts, 8);
        done(
            TestId::NonOverlappingTemplate,
            params,
            rs.into_iter()
                .map(|r| PValue {
                    label: r.template,
                    p_value: r.p_value,
                })
                .collect(),
        )
    });

    // 2.8 overlapping: n >= 10^6, m = 9, M = 1032
    let params = "m = 9, M = 1032, eta formulas".to_string();
    out.push(if n < 1_000_000 {
        na(TestId::OverlappingTemplate, params, short(1_000_000))
    } else {
        let t = template::Template(vec![1; 9]);
        done(
            TestId::OverlappingTemplate,
            params,
            one(template::overlapping(x, &t, 1032, template::OverlapTable::EtaFormula).p_value),
        )
    });

    // 2.9 universal: L by n
    out.push(match universal::recommended(n) {
        None => na(TestId::Universal, String::new(), short(387_840)),
        Some((l, q)) => done(
            TestId::Universal,
            format!("L = {l}, Q = {q}"),
            one(universal::universal(x, l, q).p_value),
        ),
    });

    // 2.10 linear complexity: n >= 10^6, 500 <= M <= 5000, N >= 200
    let lm = cfg.linear_complexity_m;
    let params = format!("M = {lm}");
    out.push(if !(500..=5000).contains(&lm) {
        na(
            TestId::LinearComplexity,
            params,
            format!("M = {lm}: the standard asks for 500 <= M <= 5000"),
        )
    } else if n < 1_000_000 || n / lm < 200 {
        na(
            TestId::LinearComplexity,
            params,
            format!("needs n >= 10^6 and N = n/M >= 200, the sequence has {n} bits"),
        )
    } else {
        done(
            TestId::LinearComplexity,
            params,
            one(
                linear_complexity::linear_complexity(x, lm, linear_complexity::LcTable::Published)
                    .p_value,
            ),
        )
    });

    // 2.11 serial: m < floor(log2 n) - 2, m >= 2
    let sm = cfg.serial_m.unwrap_or(16.min(lg.saturating_sub(3)));
    let params = format!("m = {sm}");
    out.push(if n < 100 {
        na(TestId::Serial, params, short(100))
    } else if sm < 2 || sm + 2 >= lg {
        na(
            TestId::Serial,
            params,
            format!(
                "m = {sm} breaks 2 <= m < floor(log2 n) - 2 = {}",
                lg as i64 - 2
            ),
        )
    } else {
        let r = serial::serial(x, sm);
        done(
            TestId::Serial,
            params,
            vec![
                PValue {
                    label: "P1".into(),
                    p_value: r.p_value1,
                },
                PValue {
                    label: "P2".into(),
                    p_value: r.p_value2,
                },
            ],
        )
    });

    // 2.12 approximate entropy: m < floor(log2 n) - 5
    let am = cfg
        .approximate_entropy_m
        .unwrap_or(10.min(lg.saturating_sub(6)));
    let params = format!("m = {am}");
    out.push(if n < 100 {
        na(TestId::ApproximateEntropy, params, short(100))
    } else if am < 1 || am + 5 >= lg {
        na(
            TestId::ApproximateEntropy,
            params,
            format!(
                "m = {am} breaks 1 <= m < floor(log2 n) - 5 = {}",
                lg as i64 - 5
            ),
        )
    } else {
        done(
            TestId::ApproximateEntropy,
            params,
            one(serial::approximate_entropy(x, am).p_value),
        )
    });

    // 2.13 cumulative sums: n >= 100
    out.push(if n < 100 {
        na(TestId::CumulativeSums, String::new(), short(100))
    } else {
        let f = frequency::cumulative_sums(x, frequency::Direction::Forward);
        let b = frequency::cumulative_sums(x, frequency::Direction::Backward);
        done(
            TestId::CumulativeSums,
            String::new(),
            vec![
                PValue {
                    label: "forward".into(),
                    p_value: f.p_value,
                },
                PValue {
                    label: "backward".into(),
                    p_value: b.p_value,
                },
            ],
        )
    });

    // 2.14 / 2.15 random excursions: n >= 10^6 and J >= 500
    if n < 1_000_000 {
        out.push(na(
            TestId::RandomExcursions,
            String::new(),
            short(1_000_000),
        ));
        out.push(na(
            TestId::RandomExcursionsVariant,
            String::new(),
            short(1_000_000),
        ));
    } else {
        let w = excursions::walk(x);
        if w.cycles < 500 {
            let why = format!("the walk has J = {} cycles, fewer than 500", w.cycles);
            out.push(na(TestId::RandomExcursions, String::new(), why.clone()));
            out.push(na(TestId::RandomExcursionsVariant, String::new(), why));
        } else {
            let j = format!("J = {}", w.cycles);
            let re = excursions::random_excursions(&w, excursions::ExcursionTable::Exact);
            out.push(done(
                TestId::RandomExcursions,
                j.clone(),
                re.into_iter()
                    .map(|e| PValue {
                        label: format!("x={:+}", e.state),
                        p_value: e.p_value,
                    })
                    .collect(),
            ));
            let rv = excursions::random_excursions_variant(&w);
            out.push(done(
                TestId::RandomExcursionsVariant,
                j,
                rv.into_iter()
                    .map(|e| PValue {
                        label: format!("x={:+}", e.state),
                        p_value: e.p_value,
                    })
                    .collect(),
            ));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bit_values_follow_bit_order() {
        let b =
            Bits::from_ascii("1100100100001111110110101010001000100001011010001100001000110100110")
                .unwrap();
        let v = bit_values(&b);
        assert_eq!(v.len(), b.len());
        for (i, &x) in v.iter().enumerate() {
            assert_eq!(x == 1, b.get(i));
        }
    }

    #[test]
    fn short_sequences_are_not_applicable_with_reasons() {
        let b = Bits::from_ascii(testdata::PI100).unwrap();
        let r = run_battery(&b, &Config::default());
        assert_eq!(r.len(), 15);
        for t in &r {
            match (&t.test, &t.outcome) {
                (TestId::Frequency | TestId::Runs | TestId::CumulativeSums, o) => {
                    assert!(matches!(o, Outcome::Done { .. }), "{:?}", t.test)
                }
                (TestId::Rank, Outcome::NotApplicable { reason }) => {
                    assert!(reason.contains("38912"), "{reason}")
                }
                (TestId::RandomExcursions, Outcome::NotApplicable { reason }) => {
                    assert!(reason.contains("1000000"), "{reason}")
                }
                _ => {}
            }
        }
        // 99 bits: nothing applies.
        let r = run_battery(&b.slice(0, 99), &Config::default());
        assert!(r
            .iter()
            .all(|t| matches!(t.outcome, Outcome::NotApplicable { .. })));
    }
}
