//! The seedless cyclic-shift two-source extractor's bounds
//! (`spec/hashing-and-composition.md` section 6; construction of \[DEOR04\],
//! abstract read).
//!
//! Two modes:
//! - **classical** (6.3, derived on the spec page; consistent with the
//!   \[DEOR04\] abstract): independent sources, side information classical
//!   only. Always labelled "classical side information only".
//! - **Markov, unverified** (6.4): the formulas come from a recollection of
//!   \[APS16\] that the spec page could not check; they are refused unless the
//!   caller passes an explicit flag accepting unverified constants.

use super::{check_half_open_unit, check_open_unit, log_inv, Error, ErrorKind};

/// Label every classical-mode figure must carry (spec 6.4 policy item 1).
pub const CLASSICAL_LABEL: &str = "classical side information only";

/// Label of the Markov-mode figures (spec 6.4 policy item 2).
pub const MARKOV_LABEL: &str =
    "quantum side information in the Markov model, UNVERIFIED constants (recalled, not checked)";

/// The valid lengths of the extractor (6.1): the rule lives with the
/// extractor.
pub use crate::extract::two_source::{largest_n, valid_n};

/// Min-entropy left after dropping bits: `max(0, k - dropped)`
/// (`spec/hashing-and-composition.md` 1.5 and 9 item 15; chain rule, \[R05\]
/// from memory).
pub fn truncate_entropy(k: f64, dropped_bits: u64) -> f64 {
    (k - dropped_bits as f64).max(0.0)
}

fn check_inputs(n: u64, k1: f64, k2: f64) -> Result<(), Error> {
    if !valid_n(n) {
        return Err(Error::new(
            "n",
            ErrorKind::InvalidLength {
                n,
                why: "the two-source extractor needs a prime n with 2 as a primitive root \
                      modulo n (for example 1019, 65371, 1048573)",
            },
        ));
    }
    for (field, k) in [("k1", k1), ("k2", k2)] {
        if !k.is_finite() || k < 0.0 {
            return Err(Error::new(
                field,
                ErrorKind::OutOfRange {
                    value: k,
                    expected: "a finite number of bits, at least 0",
                },
            ));
        }
        if k > n as f64 {
            return Err(Error::new(field, ErrorKind::EntropyAboveLength { k, n }));
        }
    }
    Ok(())
}

/// Classical bound `eps_2src(n, k1, k2, m) = 2^(-(k1 + k2 - n - m + 1)/2)`
/// (`spec/hashing-and-composition.md` 6.3, derived there; 9 item 13).
/// Classical side information only.
pub fn eps_classical(n: u64, k1: f64, k2: f64, m: u64) -> f64 {
    (-(k1 + k2 - n as f64 - m as f64 + 1.0) / 2.0).exp2()
}

/// Largest m in the classical mode:
/// `min(n - 1, floor(k1 + k2 - n + 1 - 2 log(1/eps)))`, re-checked as in
/// 2.5; [`ErrorKind::NoOutput`] when below 1
/// (`spec/hashing-and-composition.md` 6.3 and 9 item 13).
pub fn max_m_classical(n: u64, k1: f64, k2: f64, eps: f64) -> Result<u64, Error> {
    check_inputs(n, k1, k2)?;
    check_open_unit("eps", eps)?;
    let x = (k1 + k2 - n as f64 + 1.0 - 2.0 * log_inv(eps)).floor();
    let mut m = if x >= 1.0 { (x as u64).min(n - 1) } else { 0 };
    while m >= 1 && eps_classical(n, k1, k2, m) > eps {
        m -= 1;
    }
    if m == 0 {
        return Err(Error::new(
            "k1",
            ErrorKind::NoOutput {
                k: k1,
                eps_ext: eps,
            },
        ));
    }
    Ok(m)
}

fn unverified(accept: bool) -> Result<(), Error> {
    if accept {
        Ok(())
    } else {
        Err(Error::new(
            "markov",
            ErrorKind::Unverified {
                what: "the quantum-proof (Markov model) mode of the two-source extractor \
                       (recalled from Arnon-Friedman, Portmann, Scholz 2016; unverified)",
            },
        ))
    }
}

/// Markov-model bound, **unverified**:
/// `eps_q = sqrt(3 * 2^(m-2) * 2^(-(K1 + K2 - n - m + 1)/4))`
/// (`spec/hashing-and-composition.md` 6.4, derived there from an unverified
/// recollection of \[APS16\]; 9 item 14). Refused unless
/// `accept_unverified` is true.
pub fn eps_markov_unverified(
    n: u64,
    k1: f64,
    k2: f64,
    m: u64,
    accept_unverified: bool,
) -> Result<f64, Error> {
    unverified(accept_unverified)?;
    Ok(eps_q(n, k1, k2, m))
}

fn eps_q(n: u64, k1: f64, k2: f64, m: u64) -> f64 {
    let mf = m as f64;
    let log = 3f64.log2() + (mf - 2.0) - (k1 + k2 - n as f64 - mf + 1.0) / 4.0;
    (log / 2.0).exp2()
}

/// Largest m in the Markov mode, **unverified**:
/// `min(n - 1, floor((K1 + K2 - n + 9 - 4 log 3 - 8 log(1/eps)) / 5))`,
/// re-checked (`spec/hashing-and-composition.md` 6.4 and 9 item 14).
/// Refused unless `accept_unverified` is true.
pub fn max_m_markov_unverified(
    n: u64,
    k1: f64,
    k2: f64,
    eps: f64,
    accept_unverified: bool,
) -> Result<u64, Error> {
    unverified(accept_unverified)?;
    check_inputs(n, k1, k2)?;
    check_open_unit("eps", eps)?;
    let x = ((k1 + k2 - n as f64 + 9.0 - 4.0 * 3f64.log2() - 8.0 * log_inv(eps)) / 5.0).floor();
    let mut m = if x >= 1.0 { (x as u64).min(n - 1) } else { 0 };
    while m >= 1 && eps_q(n, k1, k2, m) > eps {
        m -= 1;
    }
    if m == 0 {
        return Err(Error::new(
            "k1",
            ErrorKind::NoOutput {
                k: k1,
                eps_ext: eps,
            },
        ));
    }
    Ok(m)
}

/// The smoothing charge of a two-source use, `2 (eps_s,X + eps_s,Y)`
/// (`spec/hashing-and-composition.md` 6.3, derived there for the classical
/// mode; 5). In the Markov mode a positive charge is only an assumption
/// (6.4 item 3): refused unless `accept_markov_smoothing` is true.
pub fn smoothing_charge(
    eps_s_x: f64,
    eps_s_y: f64,
    markov: bool,
    accept_markov_smoothing: bool,
) -> Result<f64, Error> {
    check_half_open_unit("eps_s_x", eps_s_x)?;
    check_half_open_unit("eps_s_y", eps_s_y)?;
    if markov && (eps_s_x > 0.0 || eps_s_y > 0.0) && !accept_markov_smoothing {
        return Err(Error::new(
            "eps_s",
            ErrorKind::NotAsserted {
                condition: "the charge 2 (eps_s,X + eps_s,Y) holds in the Markov model \
                            (a smoothed state need not keep I(X:Y|E) = 0; see README, \"Without a seed: two independent raw sources\")",
            },
        ));
    }
    Ok(2.0 * (eps_s_x + eps_s_y))
}

/// What a caller gives to plan one two-source use ([`plan`]): the raw
/// length, both min-entropy figures (in bits, or as rates per raw bit; a
/// figure in bits wins over a rate), every error term and the target.
/// `None` means "not given": [`plan`] refuses rather than assume a value.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct PlanInput {
    /// The length of each raw string in bits.
    pub raw_bits: Option<u64>,
    /// Min-entropy of the first source X's raw string, in bits.
    pub k1: Option<f64>,
    /// Min-entropy of X per raw bit (0 to 1), used when `k1` is `None`.
    pub k1_rate: Option<f64>,
    /// Min-entropy of the second source Y's raw string, in bits.
    pub k2: Option<f64>,
    /// Min-entropy of Y per raw bit (0 to 1), used when `k2` is `None`.
    pub k2_rate: Option<f64>,
    /// Smoothing parameter of X's figure.
    pub smoothing_x: Option<f64>,
    /// Smoothing parameter of Y's figure.
    pub smoothing_y: Option<f64>,
    /// The certification's failure term.
    pub cert_error: Option<f64>,
    /// The total error allowed.
    pub target_error: Option<f64>,
    /// Also plan the Markov mode, whose constants are unverified (6.4).
    pub markov_unverified: bool,
    /// Markov mode: accept the smoothing charge as an assumption (6.4
    /// item 3).
    pub accept_markov_smoothing: bool,
}

/// The figures of one mode of a [`Plan`]: an output length and its errors,
/// or the refusal.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ModePlan {
    /// [`CLASSICAL_LABEL`] or [`MARKOV_LABEL`].
    pub label: &'static str,
    /// The largest output length m.
    pub output_bits: Option<u64>,
    /// The extractor's error at m.
    pub eps_extractor: Option<f64>,
    /// `eps_cert + smoothing charge + eps_extractor`.
    pub eps_total: Option<f64>,
    /// The total, rounded up to 4 significant digits.
    pub eps_total_rounded_up: Option<String>,
    /// Why there is no output (then every figure above is `None`).
    pub refused: Option<Error>,
}

/// A two-source plan ([`plan`]).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Plan {
    /// The raw length given.
    pub raw_bits: u64,
    /// The largest valid n not above it (6.1).
    pub n: u64,
    /// `raw_bits - n`.
    pub dropped_bits: u64,
    /// X's min-entropy after dropping the bits (1.5).
    pub k1: f64,
    /// Y's min-entropy after dropping the bits.
    pub k2: f64,
    /// Smoothing parameter of X's figure.
    pub smoothing_x: f64,
    /// Smoothing parameter of Y's figure.
    pub smoothing_y: f64,
    /// `2 (eps_s,X + eps_s,Y)` ([`smoothing_charge`]).
    pub smoothing_charge: f64,
    /// The certification's failure term.
    pub cert_error: f64,
    /// The total error allowed.
    pub target_error: f64,
    /// What is left for the extractor: target - cert_error - charge.
    pub eps_extractor_budget: f64,
    /// The classical mode (6.3).
    pub classical: ModePlan,
    /// The Markov mode (6.4), when asked for.
    pub markov_unverified: Option<ModePlan>,
    /// The conditions the figures assume, in words.
    pub assumed_conditions: Vec<&'static str>,
}

fn figure_from_rate(field: &'static str, rate: f64, raw: u64) -> Result<f64, Error> {
    if !(0.0..=1.0).contains(&rate) {
        return Err(Error::new(
            field,
            ErrorKind::OutOfRange {
                value: rate,
                expected: "a rate between 0 and 1 (bits of min-entropy per raw bit)",
            },
        ));
    }
    Ok(rate * raw as f64)
}

fn figure(
    field: &'static str,
    rate_field: &'static str,
    k: Option<f64>,
    rate: Option<f64>,
    raw: u64,
) -> Result<f64, Error> {
    match (k, rate) {
        (Some(k), _) => Ok(k),
        (None, Some(r)) => figure_from_rate(rate_field, r, raw),
        (None, None) => Err(Error::new(
            field,
            ErrorKind::Missing {
                inputs: vec![field, rate_field],
            },
        )),
    }
}

fn mode_plan(
    label: &'static str,
    m: Result<u64, Error>,
    fixed: f64,
    eps: impl Fn(u64) -> f64,
) -> ModePlan {
    match m {
        Ok(m) => {
            let e = eps(m);
            let total = fixed + e;
            ModePlan {
                label,
                output_bits: Some(m),
                eps_extractor: Some(e),
                eps_total: Some(total),
                eps_total_rounded_up: Some(super::round::up4(total)),
                refused: None,
            }
        }
        Err(e) => ModePlan {
            label,
            output_bits: None,
            eps_extractor: None,
            eps_total: None,
            eps_total_rounded_up: None,
            refused: Some(e),
        },
    }
}

/// Plans one two-source use (`spec/hashing-and-composition.md` 6):
///
/// 1. n is the largest valid length not above the raw length (6.1), and
///    each min-entropy figure is lowered by the `raw - n` bits dropped
///    ([`truncate_entropy`]; a rate r gives the figure `r * raw`);
/// 2. the total error is
///    `eps_cert + 2 (eps_s,X + eps_s,Y) + eps_2src`: the extractor gets
///    `target - eps_cert - 2 (eps_s,X + eps_s,Y)`, and each mode the
///    largest m whose error fits in it ([`max_m_classical`], and
///    [`max_m_markov_unverified`] when asked for);
/// 3. a mode that gives no output carries its refusal; the classical mode
///    is always planned.
///
/// Errors (the field names the input): a missing input
/// ([`ErrorKind::Missing`]; every error term must be given, 0 only as an
/// explicit claim), a rate outside `[0, 1]` (`k1_rate`, `k2_rate`), a
/// figure outside `[0, raw]` ([`ErrorKind::EntropyOutOfRange`]), a raw
/// length below 3 (`raw_bits`, [`ErrorKind::InvalidLength`]), an error
/// term outside `[0, 1)`, a target that leaves nothing for the extractor
/// ([`ErrorKind::NoExtractorBudget`]), and in the Markov mode a positive
/// smoothing charge not accepted as an assumption (`eps_s`,
/// [`ErrorKind::NotAsserted`]). They are checked in this order.
pub fn plan(input: &PlanInput) -> Result<Plan, Error> {
    let raw = input.raw_bits.ok_or_else(|| {
        Error::new(
            "raw_bits",
            ErrorKind::Missing {
                inputs: vec!["raw_bits"],
            },
        )
    })?;
    let target = input.target_error.ok_or_else(|| {
        Error::new(
            "eps",
            ErrorKind::Missing {
                inputs: vec!["eps"],
            },
        )
    })?;
    let k1_raw = figure("k1", "k1_rate", input.k1, input.k1_rate, raw)?;
    let k2_raw = figure("k2", "k2_rate", input.k2, input.k2_rate, raw)?;
    for (field, k) in [("k1", k1_raw), ("k2", k2_raw)] {
        if !k.is_finite() || k < 0.0 || k > raw as f64 {
            return Err(Error::new(
                field,
                ErrorKind::EntropyOutOfRange { k, n: raw },
            ));
        }
    }
    // 6.1: keep bits 0 .. n-1, lower each bound by raw - n.
    let n = largest_n(raw).ok_or_else(|| {
        Error::new(
            "raw_bits",
            ErrorKind::InvalidLength {
                n: raw,
                why: "no valid two-source length is at most this (the smallest is 3)",
            },
        )
    })?;
    let dropped = raw - n;
    let k1 = truncate_entropy(k1_raw, dropped);
    let k2 = truncate_entropy(k2_raw, dropped);
    // Every error term enters the total; none is taken as 0 silently.
    let (Some(eps_sx), Some(eps_sy), Some(eps_cert)) =
        (input.smoothing_x, input.smoothing_y, input.cert_error)
    else {
        let inputs = [
            ("eps_s_x", input.smoothing_x.is_none()),
            ("eps_s_y", input.smoothing_y.is_none()),
            ("eps_cert", input.cert_error.is_none()),
        ]
        .iter()
        .filter(|(_, m)| *m)
        .map(|(f, _)| *f)
        .collect();
        return Err(Error::new("error_terms", ErrorKind::Missing { inputs }));
    };
    let charge = smoothing_charge(eps_sx, eps_sy, false, false)?;
    let budget = target - eps_cert - charge;
    if budget.is_nan() || budget <= 0.0 {
        return Err(Error::new(
            "eps",
            ErrorKind::NoExtractorBudget {
                target,
                cert_error: eps_cert,
                smoothing_charge: charge,
            },
        ));
    }
    let fixed = eps_cert + charge;
    let classical = mode_plan(
        CLASSICAL_LABEL,
        max_m_classical(n, k1, k2, budget),
        fixed,
        |m| eps_classical(n, k1, k2, m),
    );
    let smoothed = eps_sx > 0.0 || eps_sy > 0.0;
    let markov = if input.markov_unverified {
        if smoothed && !input.accept_markov_smoothing {
            smoothing_charge(eps_sx, eps_sy, true, false)?;
        }
        Some(mode_plan(
            MARKOV_LABEL,
            max_m_markov_unverified(n, k1, k2, budget, true),
            fixed,
            |m| eps_markov_unverified(n, k1, k2, m, true).unwrap_or(f64::INFINITY),
        ))
    } else {
        None
    };
    let mut assumed = vec![
        "the two sources are independent, also given any classical side information (Dodis, Elbaz, Oliveira, Raz 2004)",
        "each min-entropy figure holds for its source's raw string, given the side information",
    ];
    if input.markov_unverified {
        assumed.push("Markov mode only: the sources are independent given the adversary's quantum side information (asserted by you; sluice cannot check it)");
        if input.accept_markov_smoothing && smoothed {
            assumed.push("Markov mode only: the smoothing charge 2 (eps_s,X + eps_s,Y) holds in the Markov model (accepted by you; not established for the Markov model of Arnon-Friedman, Portmann, Scholz 2016)");
        }
    }
    Ok(Plan {
        raw_bits: raw,
        n,
        dropped_bits: dropped,
        k1,
        k2,
        smoothing_x: eps_sx,
        smoothing_y: eps_sy,
        smoothing_charge: charge,
        cert_error: eps_cert,
        target_error: target,
        eps_extractor_budget: budget,
        classical,
        markov_unverified: markov,
        assumed_conditions: assumed,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plan::round::up4;

    // spec/hashing-and-composition.md 6.1 [computed]: valid n and largest
    // valid n below powers of two.
    #[test]
    fn valid_lengths() {
        let first: Vec<u64> = (0..132).filter(|&n| valid_n(n)).collect();
        assert_eq!(
            first,
            [3, 5, 11, 13, 19, 29, 37, 53, 59, 61, 67, 83, 101, 107, 131]
        );
        assert!(!valid_n(7), "2 has order 3 mod 7");
        assert_eq!(largest_n(1 << 10), Some(1019));
        assert_eq!(largest_n(1 << 12), Some(4093));
        assert_eq!(largest_n(1 << 16), Some(65371));
        assert_eq!(largest_n(1 << 20), Some(1048573));
    }

    // spec/hashing-and-composition.md 6.5, Table 6 [computed, params.py].
    #[test]
    fn table_6() {
        let big = 1048573u64;
        let nf = big as f64;
        type Row = (
            u64,
            f64,
            f64,
            f64,
            Option<(u64, &'static str)>,
            Option<(u64, &'static str)>,
        );
        #[rustfmt::skip]
        let rows: &[Row] = &[
            (big, 0.8 * nf, 0.8 * nf, 1e-6, Some((629104, "7.228e-7")), Some((125797, "8.404e-7"))),
            (big, 0.8 * nf, 0.8 * nf, 1e-12, Some((629065, "9.748e-13")), Some((125765, "8.015e-13"))),
            (big, 0.95 * nf, 0.6 * nf, 1e-12, Some((576636, "8.635e-13")), Some((115279, "7.130e-13"))),
            (big, 0.5 * nf, 0.5 * nf, 1e-6, None, None),
            (65371, 0.9 * 65371.0, 0.9 * 65371.0, 1e-12, Some((52218, "9.748e-13")), Some((10396, "9.531e-13"))),
            (1019, 0.9 * 1019.0, 0.9 * 1019.0, 1e-6, Some((776, "8.899e-7")), Some((131, "7.444e-7"))),
            (1019, 0.9 * 1019.0, 0.9 * 1019.0, 1e-12, Some((736, "8.486e-13")), Some((99, "7.099e-13"))),
        ];
        for &(n, k1, k2, eps, classical, markov) in rows {
            let c = max_m_classical(n, k1, k2, eps).ok();
            assert_eq!(c, classical.map(|x| x.0), "classical n = {n}, eps = {eps}");
            if let Some((m, e)) = classical {
                assert_eq!(up4(eps_classical(n, k1, k2, m)), e);
            }
            let q = max_m_markov_unverified(n, k1, k2, eps, true).ok();
            assert_eq!(q, markov.map(|x| x.0), "markov n = {n}, eps = {eps}");
            if let Some((m, e)) = markov {
                assert_eq!(up4(eps_markov_unverified(n, k1, k2, m, true).unwrap()), e);
            }
        }
        // 0.8 n of the truncated length, as in the table's first row.
        assert!((0.8 * nf - 838858.4).abs() < 1e-6);
    }

    #[test]
    fn markov_mode_refused_without_flag() {
        let e = max_m_markov_unverified(1019, 900.0, 900.0, 1e-6, false).unwrap_err();
        assert!(matches!(e.kind(), ErrorKind::Unverified { .. }));
        assert!(e.to_string().contains("not verified"), "{e}");
        assert!(eps_markov_unverified(1019, 900.0, 900.0, 10, false).is_err());
        assert!(smoothing_charge(1e-10, 0.0, true, false).is_err());
        assert_eq!(smoothing_charge(1e-10, 2e-10, true, true).unwrap(), 6e-10);
        assert_eq!(smoothing_charge(1e-10, 2e-10, false, false).unwrap(), 6e-10);
    }

    #[test]
    fn refusals() {
        assert!(matches!(
            max_m_classical(1024, 900.0, 900.0, 1e-6)
                .unwrap_err()
                .kind(),
            ErrorKind::InvalidLength { .. }
        ));
        assert_eq!(
            max_m_classical(1019, 1100.0, 900.0, 1e-6)
                .unwrap_err()
                .field(),
            "k1"
        );
        assert_eq!(truncate_entropy(838860.8, 3), 838857.8);
        assert_eq!(truncate_entropy(2.0, 3), 0.0);
    }

    fn exact_input(raw: u64, r1: f64, r2: f64, eps: f64) -> PlanInput {
        PlanInput {
            raw_bits: Some(raw),
            k1_rate: Some(r1),
            k2_rate: Some(r2),
            smoothing_x: Some(0.0),
            smoothing_y: Some(0.0),
            cert_error: Some(0.0),
            target_error: Some(eps),
            ..PlanInput::default()
        }
    }

    // spec/hashing-and-composition.md 6.5, Table 6 [computed there,
    // params.py]: n = 1019, k1 = k2 = 0.9 n, eps = 1e-6, no other term.
    #[test]
    fn plan_reproduces_table_6() {
        let mut i = exact_input(1019, 0.9, 0.9, 1e-6);
        let p = plan(&i).unwrap();
        assert_eq!((p.n, p.dropped_bits), (1019, 0));
        assert_eq!(p.k1, 0.9 * 1019.0);
        assert_eq!(p.classical.label, CLASSICAL_LABEL);
        assert_eq!(p.classical.output_bits, Some(776));
        assert_eq!(up4(p.classical.eps_extractor.unwrap()), "8.899e-7");
        assert_eq!(
            p.classical.eps_total_rounded_up.as_deref(),
            Some("8.899e-7")
        );
        assert!(p.markov_unverified.is_none());
        assert_eq!(p.assumed_conditions.len(), 2);
        i.markov_unverified = true;
        let q = plan(&i).unwrap().markov_unverified.unwrap();
        assert_eq!(q.label, MARKOV_LABEL);
        assert_eq!(q.output_bits, Some(131));
        assert_eq!(q.eps_total_rounded_up.as_deref(), Some("7.444e-7"));
    }

    // Raw strings longer than n (6.1, 1.5): 1024 bits keep n = 1019 and
    // each figure loses 5 bits; the error terms add up (6.3). Expected
    // values by hand from the doc comment of `plan`.
    #[test]
    fn plan_truncates_and_adds_the_terms() {
        let i = PlanInput {
            raw_bits: Some(1024),
            k1: Some(922.0),
            k2: Some(900.0),
            k2_rate: Some(0.1), // a figure in bits wins over a rate
            smoothing_x: Some(1e-8),
            smoothing_y: Some(2e-8),
            cert_error: Some(1e-7),
            target_error: Some(1e-6),
            ..PlanInput::default()
        };
        let p = plan(&i).unwrap();
        assert_eq!((p.raw_bits, p.n, p.dropped_bits), (1024, 1019, 5));
        assert_eq!((p.k1, p.k2), (917.0, 895.0));
        assert!((p.smoothing_charge - 6e-8).abs() < 1e-22);
        assert!((p.eps_extractor_budget - 8.4e-7).abs() < 1e-20);
        let m = p.classical.output_bits.unwrap();
        // floor(917 + 895 - 1019 + 1 - 2 log2(1/8.4e-7)) = 753, and its
        // error 2^(-(917 + 895 - 1019 - 753 + 1)/2) = 2^-20.5 fits.
        assert_eq!(m, 753);
        let e = p.classical.eps_extractor.unwrap();
        assert_eq!(e, (-20.5f64).exp2());
        assert_eq!(p.classical.eps_total, Some(1e-7 + 6e-8 + e));
    }

    #[test]
    fn plan_refusals_name_the_input() {
        let ok = exact_input(1019, 0.9, 0.9, 1e-6);
        let field = |i: PlanInput| plan(&i).unwrap_err();
        let e = field(PlanInput {
            raw_bits: None,
            target_error: None,
            ..ok
        });
        assert_eq!(e.field(), "raw_bits", "the raw length is checked first");
        assert!(matches!(e.kind(), ErrorKind::Missing { .. }));
        assert_eq!(
            field(PlanInput {
                target_error: None,
                ..ok
            })
            .field(),
            "eps"
        );
        let e = field(PlanInput {
            k2_rate: None,
            ..ok
        });
        assert_eq!(e.to_string(), "k2: not given: k2, k2_rate");
        let e = field(PlanInput {
            k1_rate: Some(1.5),
            ..ok
        });
        assert_eq!(e.field(), "k1_rate");
        let e = field(PlanInput {
            k2: Some(1020.0),
            ..ok
        });
        assert_eq!(
            e.kind(),
            &ErrorKind::EntropyOutOfRange { k: 1020.0, n: 1019 }
        );
        assert_eq!(
            field(PlanInput {
                k1: Some(f64::NAN),
                ..ok
            })
            .field(),
            "k1"
        );
        let e = field(PlanInput {
            raw_bits: Some(2),
            k1: Some(1.0),
            k2: Some(1.0),
            ..ok
        });
        assert!(
            matches!(e.kind(), ErrorKind::InvalidLength { n: 2, .. }),
            "{e}"
        );
        let e = field(PlanInput {
            smoothing_y: None,
            cert_error: None,
            ..ok
        });
        assert_eq!(
            e.kind(),
            &ErrorKind::Missing {
                inputs: vec!["eps_s_y", "eps_cert"]
            }
        );
        assert_eq!(
            field(PlanInput {
                smoothing_x: Some(1.0),
                ..ok
            })
            .field(),
            "eps_s_x"
        );
        let e = field(PlanInput {
            cert_error: Some(1e-6),
            ..ok
        });
        assert!(
            matches!(e.kind(), ErrorKind::NoExtractorBudget { .. }),
            "{e}"
        );
    }

    #[test]
    fn plan_markov_smoothing_needs_the_assumption() {
        let i = PlanInput {
            smoothing_x: Some(1e-9),
            markov_unverified: true,
            ..exact_input(1019, 0.9, 0.9, 1e-6)
        };
        let e = plan(&i).unwrap_err();
        assert_eq!(e.field(), "eps_s");
        assert!(matches!(e.kind(), ErrorKind::NotAsserted { .. }));
        let p = plan(&PlanInput {
            accept_markov_smoothing: true,
            ..i
        })
        .unwrap();
        assert!(p.markov_unverified.unwrap().output_bits.is_some());
        assert_eq!(p.assumed_conditions.len(), 4);
        // Without Markov mode the same smoothing is simply charged.
        let p = plan(&PlanInput {
            markov_unverified: false,
            ..i
        })
        .unwrap();
        assert_eq!(p.smoothing_charge, 2e-9);
    }

    #[test]
    fn plan_without_output_carries_the_refusal() {
        // Table 6 row 4: k1 = k2 = 0.5 n gives nothing in either mode.
        let mut i = exact_input(1019, 0.5, 0.5, 1e-6);
        i.markov_unverified = true;
        let p = plan(&i).unwrap();
        let r = p.classical.refused.as_ref().unwrap();
        assert_eq!(r.field(), "k1");
        assert!(matches!(r.kind(), ErrorKind::NoOutput { .. }));
        assert_eq!(p.classical.output_bits, None);
        assert!(p.markov_unverified.unwrap().refused.is_some());
        // The refusal serializes as its message.
        let j = serde_json::to_value(&p.classical).unwrap();
        assert_eq!(j["refused"], serde_json::Value::String(r.to_string()));
    }
}
