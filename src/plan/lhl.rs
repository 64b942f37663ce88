//! Two-universal hashing under the leftover hash lemma with quantum side
//! information (`spec/hashing-and-composition.md` sections 2 and 3).
//!
//! The tool uses the conservative form of the lemma everywhere (2.3):
//! `eps_ext(k, m) = 2^(-(k - m)/2)`, from Renner's thesis \[R05\], Corollary
//! 5.6.1 (recalled, not re-read: spec 2.2 (b)); the form of Tomamichel,
//! Schaffner, Smith and Renner \[TSSR11\] with an extra factor 1/2 is kept here
//! only for comparison ([`eps_ext_tssr`], [`max_m_tssr`]). One extraction is
//! charged `2 eps_s + eps_ext` (2.4, derived on the spec page).

use super::compose::Budget;
use super::{check_entropy, check_open_unit, log_inv, Error, ErrorKind};

/// A two-universal family the tool accepts (`spec/hashing-and-composition.md`
/// section 3; the GF(2^n) family of 3.3 is not offered yet).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Family {
    /// Toeplitz matrix, seed `n + m - 1` bits, `1 <= m <= n` (3.1; \[K94\],
    /// \[MNT93\]).
    Toeplitz,
    /// `[I_m | T']`, seed `n - 1` bits, `1 <= m <= n - 1` (3.2; \[HT16\]).
    ModifiedToeplitz,
}

impl Family {
    /// The name used on the command line and in `crate::extract`.
    pub fn name(self) -> &'static str {
        match self {
            Family::Toeplitz => "toeplitz",
            Family::ModifiedToeplitz => "modified-toeplitz",
        }
    }

    /// Largest output length of the family for inputs of `n` bits
    /// (`spec/hashing-and-composition.md` 2.5: Toeplitz `m <= n`, modified
    /// Toeplitz `m <= n - 1`).
    pub fn max_output(self, n: u64) -> u64 {
        match self {
            Family::Toeplitz => n,
            Family::ModifiedToeplitz => n.saturating_sub(1),
        }
    }
}

/// Seed length of `family` for `n` input and `m` output bits
/// (`spec/hashing-and-composition.md` 9 item 4, 3.1 and 3.2): Toeplitz
/// `n + m - 1`, modified Toeplitz `n - 1`.
///
/// Refuses `n = 0`, `m = 0` and `m` above the family's range.
pub fn seed_len(family: Family, n: u64, m: u64) -> Result<u64, Error> {
    check_lengths(family, n, m)?;
    Ok(match family {
        Family::Toeplitz => n
            .checked_add(m - 1)
            .ok_or(Error::new("m", ErrorKind::TooLarge { what: "n + m - 1" }))?,
        Family::ModifiedToeplitz => n - 1,
    })
}

fn check_lengths(family: Family, n: u64, m: u64) -> Result<(), Error> {
    if n == 0 {
        return Err(Error::new("n", ErrorKind::Zero));
    }
    if m == 0 {
        return Err(Error::new("m", ErrorKind::Zero));
    }
    let max = family.max_output(n);
    if m > max {
        return Err(Error::new(
            "m",
            ErrorKind::LengthOutsideFamily {
                m,
                max,
                family: family.name(),
            },
        ));
    }
    Ok(())
}

/// Extractor error of two-universal hashing from `k` bits of (smooth)
/// min-entropy to `m` bits: `2^(-(k - m)/2)`, the conservative form
/// (`spec/hashing-and-composition.md` 2.3 and 9 item 5; \[R05\] Cor. 5.6.1,
/// from memory). Round it up for printing with [`super::round::up`].
///
/// Values above 1 are possible when `m > k` (the bound is then void).
pub fn eps_ext(k: f64, m: u64) -> f64 {
    (-(k - m as f64) / 2.0).exp2()
}

/// The \[TSSR11\] form `(1/2) 2^(-(k - m)/2)` (spec 2.2 (a), from memory),
/// for comparison only; the tool never certifies with it.
pub fn eps_ext_tssr(k: f64, m: u64) -> f64 {
    0.5 * eps_ext(k, m)
}

/// Largest m by the \[TSSR11\] form, `floor(k - 2 log(1/eps) + 2)` (spec
/// 2.2), for comparison only; `None` when below 1. Not clamped to a family.
pub fn max_m_tssr(k: f64, eps: f64) -> Option<u64> {
    let x = (k - 2.0 * log_inv(eps) + 2.0).floor();
    let mut m = if x >= 1.0 { x as u64 } else { return None };
    while m >= 1 && eps_ext_tssr(k, m) > eps {
        m -= 1;
    }
    (m >= 1).then_some(m)
}

/// Largest output length with extractor error at most `eps_ext`:
/// `floor(k - 2 log(1/eps_ext))`, clamped to the family's range, then
/// re-checked and decremented while `eps_ext(k, m)` exceeds the target
/// (`spec/hashing-and-composition.md` 2.3, 2.5, 9 item 6; \[R05\] form).
///
/// Refuses `k > n`, `n = 0`, `eps_ext` outside (0, 1), and returns
/// [`ErrorKind::NoOutput`] when not even one bit can be extracted.
pub fn max_m(family: Family, n: u64, k: f64, eps: f64) -> Result<u64, Error> {
    check_entropy(n, k)?;
    check_open_unit("eps_ext", eps)?;
    let x = (k - 2.0 * log_inv(eps)).floor();
    let mut m = if x >= 1.0 { x as u64 } else { 0 };
    m = m.min(family.max_output(n));
    while m >= 1 && eps_ext(k, m) > eps {
        m -= 1;
    }
    if m == 0 {
        return Err(Error::new("k", ErrorKind::NoOutput { k, eps_ext: eps }));
    }
    Ok(m)
}

/// Largest per-block output length for a total target: the budget of
/// [`Budget::eps_ext`] (`((eps_total - eps_cert - eps_seed)/L - 2 eps_s) /
/// 2^s`), then [`max_m`] (`spec/hashing-and-composition.md` 2.5 and 9
/// item 7; the composition of section 5, derived there).
pub fn max_m_for_total(family: Family, n: u64, k: f64, budget: &Budget) -> Result<u64, Error> {
    check_entropy(n, k)?;
    let eps = budget.eps_ext()?;
    max_m(family, n, k, eps)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plan::round::up4;

    const N20: u64 = 1 << 20;

    // spec/hashing-and-composition.md 2.6, Table 1 (headline), [computed,
    // params.py].
    #[test]
    fn table_1_headline() {
        let k = 0.8 * N20 as f64;
        let m = max_m(Family::Toeplitz, N20, k, 1e-12).unwrap();
        assert_eq!(m, 838781);
        assert_eq!(up4(eps_ext(k, m)), "9.748e-13");
        assert_eq!(up4(2.0 * 1e-10 + eps_ext(k, m)), "2.010e-10");
        assert_eq!(seed_len(Family::Toeplitz, N20, m).unwrap(), 1887356);
        assert_eq!(seed_len(Family::ModifiedToeplitz, N20, m).unwrap(), 1048575);
        // TSSR row and the conservative m judged by the TSSR formula.
        let mt = max_m_tssr(k, 1e-12).unwrap();
        assert_eq!(mt, 838783);
        assert_eq!(up4(eps_ext_tssr(k, mt)), "9.748e-13");
        assert_eq!(seed_len(Family::Toeplitz, N20, mt).unwrap(), 1887358);
        assert_eq!(up4(eps_ext_tssr(k, m)), "4.874e-13");
    }

    // spec/hashing-and-composition.md 2.6, Table 2 (grid, eps_s = 1e-10).
    #[test]
    fn table_2_grid() {
        #[rustfmt::skip]
        let rows: &[(u32, f64, f64, u64, u64, &str, &str)] = &[
            (10, 0.5, 1e-6, 472, 474, "9.537e-7", "9.539e-7"),
            (10, 0.5, 1e-12, 432, 434, "9.095e-13", "2.010e-10"),
            (10, 0.8, 1e-12, 739, 741, "8.486e-13", "2.009e-10"),
            (10, 0.95, 1e-20, 839, 841, "7.263e-21", "2.001e-10"),
            (16, 0.5, 1e-12, 32688, 32690, "9.095e-13", "2.010e-10"),
            (16, 0.8, 1e-6, 52388, 52390, "7.228e-7", "7.230e-7"),
            (16, 0.95, 1e-20, 62126, 62128, "8.942e-21", "2.001e-10"),
            (20, 0.5, 1e-12, 524208, 524210, "9.095e-13", "2.010e-10"),
            (20, 0.8, 1e-6, 838820, 838822, "7.228e-7", "7.230e-7"),
            (20, 0.8, 1e-20, 838727, 838729, "7.263e-21", "2.001e-10"),
            (20, 0.95, 1e-12, 996067, 996069, "8.486e-13", "2.009e-10"),
            (24, 0.5, 1e-12, 8388528, 8388530, "9.095e-13", "2.010e-10"),
            (24, 0.8, 1e-12, 13421693, 13421695, "9.748e-13", "2.010e-10"),
            (24, 0.95, 1e-6, 15938315, 15938317, "8.899e-7", "8.901e-7"),
        ];
        for &(log_n, rate, eps, m_tool, m_tssr, e_at_m, total) in rows {
            let n = 1u64 << log_n;
            let k = rate * n as f64;
            let m = max_m(Family::Toeplitz, n, k, eps).unwrap();
            assert_eq!(m, m_tool, "n = 2^{log_n}, k/n = {rate}, eps = {eps}");
            assert_eq!(max_m_tssr(k, eps), Some(m_tssr));
            assert_eq!(up4(eps_ext(k, m)), e_at_m);
            assert_eq!(up4(2e-10 + eps_ext(k, m)), total);
        }
    }

    // spec/hashing-and-composition.md 2.6, Table 3 (edge cases). Boundary
    // rows (within 1e-6 of an integer) accept m or m - 1, as 2.5 allows.
    #[test]
    #[allow(clippy::excessive_precision)] // the spec's k values, as printed
    fn table_3_edge_cases() {
        let two40 = 2f64.powi(-40);
        type Row = (u64, f64, f64, Option<u64>, Option<u64>, bool);
        #[rustfmt::skip]
        let rows: &[Row] = &[
            (1024, 100.0, 1e-12, Some(20), Some(22), false),
            (1024, 80.0, 1e-12, None, Some(2), false),
            (1024, 79.72627427729669, 1e-12, None, Some(1), true),
            (1024, 79.72627427729671, 1e-12, None, Some(2), true),
            (1024, 81.72627427729671, 1e-12, Some(2), Some(4), true),
            (1024, 1024.0, 1e-12, Some(944), Some(946), false),
            (256, 200.5, two40, Some(120), Some(122), false),
            (8, 6.0, 0.25, Some(2), Some(4), true),
        ];
        for &(n, k, eps, tool, tssr, boundary) in rows {
            let got = max_m(Family::Toeplitz, n, k, eps).ok();
            let got_tssr = max_m_tssr(k, eps);
            if boundary {
                let ok = |g: Option<u64>, want: Option<u64>| {
                    let w = want.unwrap_or(0);
                    let g = g.unwrap_or(0);
                    g == w || g + 1 == w
                };
                assert!(ok(got, tool), "k = {k}: {got:?} vs {tool:?}");
                assert!(ok(got_tssr, tssr), "k = {k}: {got_tssr:?} vs {tssr:?}");
            } else {
                assert_eq!(got, tool, "k = {k}");
                assert_eq!(got_tssr, tssr, "k = {k}");
            }
            if let Some(m) = got {
                assert!(eps_ext(k, m) <= eps);
            }
        }
        // The row with error exactly 0.25 (n = 8, k = 6, m = 2).
        assert_eq!(eps_ext(6.0, 2), 0.25);
    }

    // spec/trevisan.md 6, two-universal comparison table: eps_s =
    // eps_total/4, so eps_ext = eps_total/2; Toeplitz seed n + m - 1.
    #[test]
    fn trevisan_page_two_universal_comparison() {
        let rows: &[(u32, f64, f64, u64, u64)] = &[
            (16, 0.9, 1e-12, 58900, 124435),
            (20, 0.5, 1e-6, 524246, 1572821),
            (20, 0.9, 1e-12, 943636, 1992211),
            (24, 0.5, 1e-6, 8388566, 25165781),
            (24, 0.9, 1e-12, 15099412, 31876627),
        ];
        for &(log_n, rate, total, m, d) in rows {
            let n = 1u64 << log_n;
            let k = rate * n as f64;
            let b = Budget::single(total, total / 4.0);
            let got = max_m_for_total(Family::Toeplitz, n, k, &b).unwrap();
            assert_eq!(got, m, "n = 2^{log_n}, k = {rate} n, eps = {total}");
            assert_eq!(seed_len(Family::Toeplitz, n, got).unwrap(), d);
        }
    }

    // spec/hashing-and-composition.md 2.5: refusals.
    #[test]
    fn refusals_name_the_bad_number() {
        let e = max_m(Family::Toeplitz, 1024, 1100.0, 1e-12).unwrap_err();
        assert_eq!(e.field(), "k");
        assert!(matches!(e.kind(), ErrorKind::EntropyAboveLength { .. }));
        assert!(e.to_string().contains("1100"), "{e}");
        for bad in [0.0, 1.0, -1e-3, f64::NAN] {
            let e = max_m(Family::Toeplitz, 1024, 500.0, bad).unwrap_err();
            assert_eq!(e.field(), "eps_ext");
        }
        assert_eq!(
            seed_len(Family::ModifiedToeplitz, 16, 16)
                .unwrap_err()
                .field(),
            "m"
        );
        assert_eq!(
            seed_len(Family::Toeplitz, 16, 0).unwrap_err().kind(),
            &ErrorKind::Zero
        );
        assert_eq!(seed_len(Family::Toeplitz, 0, 1).unwrap_err().field(), "n");
    }

    // 2.5: the clamp to the family's range; with eps < 1 and k <= n the
    // formula itself never exceeds n - 1 (k = n, 2 log(1/eps) < 1).
    #[test]
    fn clamped_to_family() {
        assert_eq!(max_m(Family::Toeplitz, 4, 4.0, 0.75).unwrap(), 3);
        assert_eq!(max_m(Family::ModifiedToeplitz, 4, 4.0, 0.75).unwrap(), 3);
        assert_eq!(max_m(Family::ModifiedToeplitz, 2, 2.0, 0.75).unwrap(), 1);
    }
}
