//! Tail bounds for the acceptance tests: how many won test rounds (or how
//! large a score) honest devices reach except with a given small
//! probability, the completeness error eps_c.
//!
//! Only completeness depends on these: soundness (the certified figure)
//! depends on the threshold alone, however it was chosen (the bound holds
//! for any event fixed before the run; `spec/certification.md` 3.2 and 3.5).
//!
//! Honest devices are modelled as in spec 3.5: rounds independent, a round
//! is a test round with probability gamma, and a test round is won with
//! probability w_exp. Per round, the win indicator is Bernoulli(gamma
//! w_exp), so the number W of won test rounds is Binomial(N, gamma w_exp);
//! the score `X_i = (1 - nu)` on a won test round, `-nu` on a lost one and 0
//! on a generation round sums to `S = W - nu N_test`.
//!
//! Methods (all give an upper bound on the abort probability of honest
//! devices, so the printed eps_c is never smaller than the true one):
//!
//! - Hoeffding (JASA 58, 13 (1963)), the spec's first form (3.5);
//! - exact binomial lower tail for W, computed term by term with Loader's
//!   saddle-point form of the probability mass function (C. Loader, "Fast
//!   and accurate computation of binomial probabilities", 2000; from memory)
//!   and checked against statrs' regularised incomplete beta function;
//! - Chernoff with the exact moment generating function of one round (for W
//!   this is the Kullback-Leibler form `exp(-N D(a || p))`, common practice);
//! - Bernstein's inequality for the score (S. Bernstein 1924; the form
//!   `exp(-t^2 / (2 (N sigma^2 + b t / 3)))` with `b` a bound on
//!   `E X - X`, common practice).

use serde::{Deserialize, Serialize};

/// How the threshold of an acceptance test is derived from the completeness
/// target.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum TailMethod {
    /// Hoeffding: `delta = sqrt(ln(1/eps_c) / (2 N)) / gamma` (spec 3.5).
    Hoeffding,
    /// The exact binomial lower tail of W (win count only).
    Binomial,
    /// Chernoff with the exact moment generating function of one round.
    Chernoff,
    /// Bernstein's inequality (score only).
    Bernstein,
}

impl TailMethod {
    /// The name on the command line and in files.
    pub fn name(self) -> &'static str {
        match self {
            TailMethod::Hoeffding => "hoeffding",
            TailMethod::Binomial => "binomial",
            TailMethod::Chernoff => "chernoff",
            TailMethod::Bernstein => "bernstein",
        }
    }

    /// Parses [`TailMethod::name`].
    pub fn parse(s: &str) -> Option<TailMethod> {
        Some(match s {
            "hoeffding" => TailMethod::Hoeffding,
            "binomial" => TailMethod::Binomial,
            "chernoff" => TailMethod::Chernoff,
            "bernstein" => TailMethod::Bernstein,
            _ => return None,
        })
    }
}

/// Kullback-Leibler divergence `D(a || p)` of Bernoulli distributions, in
/// nats, `0 <= a, p <= 1` (common practice; `ln_1p` forms keep it accurate
/// when `a` is close to `p`).
pub fn kl_bernoulli(a: f64, p: f64) -> f64 {
    let term = |x: f64, y: f64| -> f64 {
        if x <= 0.0 {
            0.0
        } else {
            // x ln(x/y) = x ln(1 + (x - y)/y)
            x * ((x - y) / y).ln_1p()
        }
    };
    (term(a, p) + term(1.0 - a, 1.0 - p)).max(0.0)
}

/// Stirling's error `ln n! - [(n + 1/2) ln n - n + ln(2 pi)/2]` (exact
/// values below 16 from `ln_gamma`, the series `1/12n - 1/360n^3 + 1/1260n^5
/// - 1/1680n^7` above; common practice).
fn stirling_err(n: f64) -> f64 {
    const HALF_LN_2PI: f64 = 0.918_938_533_204_672_8;
    if n < 16.0 {
        if n == 0.0 {
            return -HALF_LN_2PI;
        }
        statrs::function::gamma::ln_gamma(n + 1.0) - (n + 0.5) * n.ln() + n - HALF_LN_2PI
    } else {
        let nn = n * n;
        (1.0 / 12.0 - (1.0 / 360.0 - (1.0 / 1260.0 - 1.0 / (1680.0 * nn)) / nn) / nn) / n
    }
}

/// `x ln(x / m) + m - x`, computed without cancellation (Loader's bd0).
fn bd0(x: f64, m: f64) -> f64 {
    if (x - m).abs() < 0.1 * (x + m) {
        let v = (x - m) / (x + m);
        let mut s = (x - m) * v;
        let mut ej = 2.0 * x * v;
        let v2 = v * v;
        let mut j = 1.0;
        loop {
            ej *= v2;
            j += 2.0;
            let s1 = s + ej / j;
            if s1 == s {
                return s1;
            }
            s = s1;
        }
    }
    x * (x / m).ln() + m - x
}

/// `ln P(X = k)` for `X ~ Binomial(n, p)`, `0 < p < 1` (Loader's form).
pub fn binomial_ln_pmf(n: u64, p: f64, k: u64) -> f64 {
    let (nf, kf) = (n as f64, k as f64);
    let q = 1.0 - p;
    if k == 0 {
        return nf * q.ln();
    }
    if k == n {
        return nf * p.ln();
    }
    let lc = stirling_err(nf)
        - stirling_err(kf)
        - stirling_err(nf - kf)
        - bd0(kf, nf * p)
        - bd0(nf - kf, nf * q);
    let lf = (2.0 * std::f64::consts::PI).ln() + kf.ln() + (-kf / nf).ln_1p();
    lc - 0.5 * lf
}

/// `P(X <= k)` for `X ~ Binomial(n, p)` with `k` below the mean, summed
/// downwards from `k` until the terms no longer change the sum. For `k` at or
/// above the mean it returns 1 (an upper bound; callers only ask below).
pub fn binomial_lower_tail(n: u64, p: f64, k: u64) -> f64 {
    if k >= n || (k as f64) >= n as f64 * p {
        return 1.0;
    }
    let ln_top = binomial_ln_pmf(n, p, k);
    // ratio pmf(j - 1) / pmf(j) = j q / ((n - j + 1) p)
    let q = 1.0 - p;
    let mut sum = 1.0;
    let mut term = 1.0;
    let mut j = k;
    while j > 0 {
        term *= (j as f64 * q) / ((n - j + 1) as f64 * p);
        let s1 = sum + term;
        if s1 == sum {
            break;
        }
        sum = s1;
        j -= 1;
    }
    // The terms fall at least geometrically, so the rest is at most the
    // last term over (1 - ratio); add a relative 1e-12 for rounding.
    (ln_top.exp() * sum * (1.0 + 1e-12)).min(1.0)
}

/// The Chernoff-KL bound `exp(-n D(k/n || p))` on `P(X <= k)`, `k <= n p`.
pub fn binomial_lower_tail_chernoff(n: u64, p: f64, k: u64) -> f64 {
    let a = k as f64 / n as f64;
    if a >= p {
        return 1.0;
    }
    (-(n as f64) * kl_bernoulli(a, p)).exp()
}

/// The smallest win threshold `t` (accept iff `W >= t`) whose abort
/// probability `P(W <= t - 1)` for honest devices is at most `eps_c`,
/// with `W ~ Binomial(n, p)`, by the exact tail (`exact`) or the
/// Chernoff-KL bound. Returns `(t, abort probability bound at t)`.
pub fn wins_threshold(n: u64, p: f64, eps_c: f64, exact: bool) -> (u64, f64) {
    let tail = |k: u64| {
        if exact {
            binomial_lower_tail(n, p, k)
        } else {
            binomial_lower_tail_chernoff(n, p, k)
        }
    };
    // Largest k with tail(k) <= eps_c; the tail grows with k.
    let mean = (n as f64 * p).floor() as u64;
    if tail(0) > eps_c {
        return (0, 0.0);
    }
    let (mut lo, mut hi) = (0u64, mean.min(n));
    if tail(hi) <= eps_c {
        return (hi + 1, tail(hi));
    }
    while hi - lo > 1 {
        let mid = lo + (hi - lo) / 2;
        if tail(mid) <= eps_c {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    (lo + 1, tail(lo))
}

/// The per-round score of honest devices (see the module docs).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ScoreModel {
    /// Test probability gamma.
    pub gamma: f64,
    /// Win probability w_exp of a test round.
    pub w: f64,
    /// Offset nu: a won test round scores `1 - nu`, a lost one `-nu`.
    pub nu: f64,
}

impl ScoreModel {
    /// `E X = gamma (w - nu)`.
    pub fn mean(&self) -> f64 {
        self.gamma * (self.w - self.nu)
    }

    /// `Var X = gamma (w (1 - nu)^2 + (1 - w) nu^2) - (gamma (w - nu))^2`.
    pub fn variance(&self) -> f64 {
        let (g, w, nu) = (self.gamma, self.w, self.nu);
        (g * (w * (1.0 - nu).powi(2) + (1.0 - w) * nu * nu) - self.mean().powi(2)).max(0.0)
    }

    /// `ln E exp(-lambda X)`, computed around the largest exponent.
    fn ln_mgf_neg(&self, lambda: f64) -> f64 {
        let (g, w, nu) = (self.gamma, self.w, self.nu);
        let e = [-lambda * (1.0 - nu), lambda * nu, 0.0];
        let pr = [g * w, g * (1.0 - w), 1.0 - g];
        let top = e[0].max(e[1]).max(e[2]);
        let s: f64 = (0..3).map(|i| pr[i] * (e[i] - top).exp()).sum();
        top + s.ln()
    }

    /// The Chernoff rate `I(a) = sup_{lambda >= 0} [-lambda a - ln E e^{-lambda X}]`,
    /// so that `P(S <= N a) <= exp(-N I(a))` for `a <= E X`. The supremum
    /// of this concave function is found by golden-section search; any
    /// lambda gives a valid bound, so an inexact maximiser only loosens it.
    pub fn chernoff_rate(&self, a: f64) -> f64 {
        if a >= self.mean() {
            return 0.0;
        }
        let f = |l: f64| -l * a - self.ln_mgf_neg(l);
        // Bracket: grow the upper end while f still increases.
        let mut hi = 1.0;
        while hi < 1e6 && f(2.0 * hi) > f(hi) {
            hi *= 2.0;
        }
        let (x, fx) = golden_max(f, 0.0, 2.0 * hi, 200);
        let _ = x;
        fx.max(0.0)
    }
}

/// Golden-section search for the maximum of a unimodal `f` on `[a, b]`:
/// `(argmax, max)` after `iters` steps (deterministic).
pub fn golden_max(f: impl Fn(f64) -> f64, a: f64, b: f64, iters: usize) -> (f64, f64) {
    let r = (5f64.sqrt() - 1.0) / 2.0;
    let (mut a, mut b) = (a, b);
    let mut c = b - r * (b - a);
    let mut d = a + r * (b - a);
    let mut fc = f(c);
    let mut fd = f(d);
    for _ in 0..iters {
        if fc >= fd {
            b = d;
            d = c;
            fd = fc;
            c = b - r * (b - a);
            fc = f(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + r * (b - a);
            fd = f(d);
        }
    }
    if fc >= fd {
        (c, fc)
    } else {
        (d, fd)
    }
}

/// Threshold on the score sum `S = W - nu N_test` (accept iff `S >= t`)
/// for completeness `eps_c`: Chernoff (exact MGF) or Bernstein. Returns
/// `(t, abort probability bound at t)`.
pub fn score_threshold(n: u64, m: &ScoreModel, eps_c: f64, method: TailMethod) -> (f64, f64) {
    let nf = n as f64;
    let l = (1.0 / eps_c).ln();
    match method {
        TailMethod::Bernstein => {
            // X >= -nu, so E X - X <= E X + nu = b.
            let b = m.mean() + m.nu;
            let v = nf * m.variance();
            let t = b * l / 3.0 + ((b * l / 3.0).powi(2) + 2.0 * v * l).sqrt();
            (nf * m.mean() - t, eps_c)
        }
        _ => {
            // a* with I(a*) = ln(1/eps_c)/N, by bisection (I decreases in a
            // below the mean). Keep the lower end: a smaller threshold only
            // raises the abort bound... so keep the end where I >= target.
            let target = l / nf;
            let (mut lo, mut hi) = (-m.nu, m.mean());
            if m.chernoff_rate(lo) < target {
                // Even the minimum score is not unlikely enough: accept all.
                return (-m.nu * nf, 1.0);
            }
            for _ in 0..200 {
                let mid = 0.5 * (lo + hi);
                if m.chernoff_rate(mid) >= target {
                    lo = mid;
                } else {
                    hi = mid;
                }
            }
            // P(S < N lo) <= P(S <= N lo) <= exp(-N I(lo)) <= eps_c.
            (nf * lo, (-nf * m.chernoff_rate(lo)).exp())
        }
    }
}

/// Hoeffding's tolerance `delta = sqrt(ln(1/eps_c) / (2 N)) / gamma` and its
/// inverse `eps_c = exp(-2 N gamma^2 delta^2)` are
/// [`super::eat::delta_for_completeness`] and [`super::eat::completeness`].
#[cfg(test)]
mod tests {
    use super::*;
    use statrs::distribution::{Binomial, DiscreteCDF};

    #[test]
    fn kl_known_values() {
        // D(1/2 || 1/4) = 1/2 ln(2) + 1/2 ln(2/3) (direct computation).
        let want = 0.5 * (2.0f64).ln() + 0.5 * (0.5f64 / 0.75).ln();
        assert!((kl_bernoulli(0.5, 0.25) - want).abs() < 1e-15);
        assert_eq!(kl_bernoulli(0.3, 0.3), 0.0);
        assert!((kl_bernoulli(0.0, 0.5) - 2f64.ln()).abs() < 1e-15);
    }

    #[test]
    fn exact_tail_matches_statrs() {
        // Reference: statrs' Binomial CDF (regularised incomplete beta), a
        // general-purpose library.
        for &(n, p) in &[
            (100u64, 0.3),
            (1000, 0.0076),
            (20_000, 0.78),
            (100_000, 0.076),
        ] {
            let d = Binomial::new(p, n).unwrap();
            let mean = n as f64 * p;
            for frac in [0.5, 0.8, 0.9, 0.97] {
                let k = (mean * frac) as u64;
                let want = d.cdf(k);
                if want < 1e-290 {
                    continue;
                }
                let got = binomial_lower_tail(n, p, k);
                assert!(
                    (got - want).abs() <= 1e-9 * want,
                    "n {n} p {p} k {k}: {got} vs {want}"
                );
                assert!(got <= binomial_lower_tail_chernoff(n, p, k) * (1.0 + 1e-12));
            }
        }
    }

    #[test]
    fn thresholds_are_tight_and_valid() {
        for &(n, p, eps) in &[(10_000u64, 0.0076, 1e-6), (1_000_000, 0.78, 1e-10)] {
            let (t, e) = wins_threshold(n, p, eps, true);
            assert!(e <= eps);
            // one more win needed would exceed eps_c
            assert!(binomial_lower_tail(n, p, t) > eps);
            let (tc, _) = wins_threshold(n, p, eps, false);
            assert!(tc <= t, "Chernoff is looser: {tc} <= {t}");
        }
    }

    #[test]
    fn score_chernoff_reduces_to_kl_for_nu_zero() {
        // With nu = 0 the score is W: the rate is D(a || gamma w).
        let m = ScoreModel {
            gamma: 0.1,
            w: 0.8,
            nu: 0.0,
        };
        for a in [0.05, 0.07, 0.079] {
            let want = kl_bernoulli(a, 0.08);
            assert!((m.chernoff_rate(a) - want).abs() < 1e-12, "a {a}");
        }
    }

    #[test]
    fn score_thresholds_hold_by_simulation_order() {
        // Chernoff is never looser than Bernstein (both bound the same tail).
        let m = ScoreModel {
            gamma: 0.01,
            w: 0.76,
            nu: 0.5,
        };
        let (tc, ec) = score_threshold(10_000_000_000, &m, 1e-10, TailMethod::Chernoff);
        let (tb, _) = score_threshold(10_000_000_000, &m, 1e-10, TailMethod::Bernstein);
        assert!(ec <= 1e-10 * (1.0 + 1e-9));
        assert!(tc >= tb, "{tc} vs {tb}");
        assert!(tc < 1e10 * m.mean());
    }
}
