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
                       (spec 6.4: recollection of APS16)",
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
                            (a smoothed state need not keep I(X:Y|E) = 0; spec 6.4 item 3)",
            },
        ));
    }
    Ok(2.0 * (eps_s_x + eps_s_y))
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
}
