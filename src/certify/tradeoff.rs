//! Min-tradeoff functions for the spot-checking CHSH protocol: the tangent
//! of [`g`] (spec 3.3) and its one-parameter "crossover" family.
//!
//! # The family
//!
//! A round's test value C takes the values 1 (won test round), 0 (lost test
//! round) and `skip` (generation round). An affine function f on
//! distributions q of C is given by its three values `f(1)`, `f(0)`,
//! `f(skip)`: `f(q) = q(1) f(1) + q(0) f(0) + q(skip) f(skip)`. For a tangent
//! point `w_t` in `(3/4, (2 + sqrt 2)/4)`, with `s = g'(w_t)` and
//! `a0 = g(w_t) - s w_t` (so that `a0 + s w` is the tangent of g at w_t),
//! and an offset `nu` in `[0, 1]`:
//!
//! ```text
//! f(skip) = a0 + nu s
//! f(1)    = a0 + nu s + (1 - nu) s / gamma
//! f(0)    = a0 + nu s - nu s / gamma
//! ```
//!
//! `nu = 0` is the tangent function of spec 3.3 (`f(skip) = f(0) = a0`).
//! On an observed frequency `q^ = (W, N_test - W, N - N_test) / N`,
//! `f(q^) = a0 + nu s + (s / gamma) (W - nu N_test) / N`: a function of the
//! score sum `S = W - nu N_test` alone (a won test round scores `1 - nu`, a
//! lost one `-nu`). That is why the acceptance test on S with offset nu goes
//! with this member of the family.
//!
//! # Validity (proof)
//!
//! A min-tradeoff function must satisfy `f(q) <= H(O_i | S_i E)` for every
//! distribution q that some state of the devices in round i can give C, and
//! every such state (Dupuis, Fawzi, Renner, CMP 379, 867 (2020), Def. 4.1,
//! from memory; for distributions that no state gives, the condition is
//! empty). In this protocol the test flag T_i comes from the trusted seed, so
//! every achievable q has `q(skip) = 1 - gamma` exactly, and
//! `q(1) = gamma omega`, `q(0) = gamma (1 - omega)` where omega is the win
//! probability of the devices' state on test inputs. On such q:
//!
//! ```text
//! f(q) = (1 - gamma)(a0 + nu s) + gamma omega (a0 + nu s + (1 - nu) s/gamma)
//!        + gamma (1 - omega)(a0 + nu s - nu s/gamma)
//!      = a0 + nu s + omega (1 - nu) s - (1 - omega) nu s
//!      = a0 + s omega,
//! ```
//!
//! the tangent of g at w_t evaluated at omega, whatever nu is. Since g is
//! convex on `[3/4, (2 + sqrt 2)/4]` (spec 2.2), its tangent lies below it
//! there; for `omega <= 3/4` the tangent is at most `g(3/4) = 0` (it is
//! increasing and lies below g at 3/4). Hence `f(q) <= g(omega) <=
//! H(O_i | S_i E)` (spec 3.3 for the last step, for each state with win
//! probability omega), for every achievable q: f is a valid min-tradeoff
//! function for every nu (and every real nu, although only `[0, 1]` is used).
//! The grid test below checks `f(q_omega) <= g(omega)` numerically.
//!
//! # The quantities the improved bound needs
//!
//! - `Max(f)`: the largest value of f over all distributions, the largest
//!   of the three values: `f(1)` for `nu <= 1`.
//! - `Min_Sigma(f)`: the smallest value over achievable distributions. We
//!   take the minimum over the larger set `omega in [0, 1]` (with
//!   `q(skip) = 1 - gamma`): `a0` (omega = 0). A smaller minimum only
//!   enlarges the range `R = Max(f) - Min_Sigma(f) = nu s + (1 - nu) s/gamma`,
//!   which lowers the bound (conservative).
//! - `Var_Sigma(f)`: the largest variance of f(C) under achievable q. We
//!   take the maximum over `omega in [0, 1]` (again a superset):
//!   `Var = (s^2/gamma)(omega (1 - nu)^2 + (1 - omega) nu^2) - s^2 (omega - nu)^2`,
//!   a concave quadratic in omega maximised in closed form.

use super::chsh::{g, g_prime};
use serde::{Deserialize, Serialize};

/// One member of the crossover family.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Crossover {
    /// Test probability gamma.
    pub gamma: f64,
    /// Tangent point w_t.
    pub w_t: f64,
    /// Offset nu in [0, 1].
    pub nu: f64,
}

impl Crossover {
    /// The slope `s = g'(w_t)`.
    pub fn slope(&self) -> f64 {
        g_prime(self.w_t)
    }

    /// `a0 = g(w_t) - s w_t`, the tangent's value at omega = 0.
    pub fn intercept(&self) -> f64 {
        g(self.w_t) - self.slope() * self.w_t
    }

    /// `(f(1), f(0), f(skip))`.
    pub fn values(&self) -> (f64, f64, f64) {
        let (s, a0, nu, gm) = (self.slope(), self.intercept(), self.nu, self.gamma);
        let skip = a0 + nu * s;
        (skip + (1.0 - nu) * s / gm, skip - nu * s / gm, skip)
    }

    /// `f(q)` for the distribution `q = (q(1), q(0), q(skip))`.
    pub fn eval(&self, q1: f64, q0: f64, qskip: f64) -> f64 {
        let (f1, f0, fs) = self.values();
        q1 * f1 + q0 * f0 + qskip * fs
    }

    /// `f` on the observed frequency of a score sum: `a0 + nu s + (s/gamma)
    /// (S / N)` with `S/N` the score per round.
    pub fn at_score_per_round(&self, score_per_round: f64) -> f64 {
        let s = self.slope();
        self.intercept() + self.nu * s + s / self.gamma * score_per_round
    }

    /// `R = Max(f) - Min_Sigma(f) = nu s + (1 - nu) s / gamma` (module docs).
    pub fn range(&self) -> f64 {
        let s = self.slope();
        self.nu * s + (1.0 - self.nu) * s / self.gamma
    }

    /// The variance of f(C) under `q_omega`.
    pub fn variance_at(&self, omega: f64) -> f64 {
        let s = self.slope();
        let (gm, nu) = (self.gamma, self.nu);
        let second = s * s / gm * (omega * (1.0 - nu).powi(2) + (1.0 - omega) * nu * nu);
        (second - s * s * (omega - nu).powi(2)).max(0.0)
    }

    /// `Var_Sigma(f)`: the maximum of [`Crossover::variance_at`] over
    /// `omega in [0, 1]` (module docs), from the vertex of the parabola.
    pub fn max_variance(&self) -> f64 {
        let om = self.nu + (1.0 - 2.0 * self.nu) / (2.0 * self.gamma);
        let mut v = self.variance_at(0.0).max(self.variance_at(1.0));
        if om > 0.0 && om < 1.0 {
            v = v.max(self.variance_at(om));
        }
        v
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::certify::chsh::W_QUANTUM;

    #[test]
    fn valid_on_a_grid() {
        // The proof in the module docs, checked numerically: on every
        // achievable distribution (q(skip) = 1 - gamma, win probability
        // omega) f lies below g(omega), for every nu, w_t and gamma on a grid.
        for &gamma in &[1.0, 0.5, 0.1, 0.01, 1e-4] {
            for i in 1..20 {
                let w_t = 0.75 + (W_QUANTUM - 0.75) * i as f64 / 20.0;
                for j in 0..=10 {
                    let f = Crossover {
                        gamma,
                        w_t,
                        nu: j as f64 / 10.0,
                    };
                    for k in 0..=200 {
                        let om = W_QUANTUM * k as f64 / 200.0;
                        let v = f.eval(gamma * om, gamma * (1.0 - om), 1.0 - gamma);
                        let slack = 1e-9 * (1.0 + f.range());
                        assert!(
                            v <= g(om) + slack,
                            "gamma {gamma} w_t {w_t} nu {} omega {om}: f = {v} > g = {}",
                            f.nu,
                            g(om)
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn nu_zero_is_the_tangent_of_3_3() {
        let f = Crossover {
            gamma: 0.1,
            w_t: 0.819729082,
            nu: 0.0,
        };
        let (f1, f0, fs) = f.values();
        assert_eq!(f0, fs);
        // spec 3.3: ||grad f_t||_inf = g'(w_t)/gamma = f(1) - f(0).
        assert!((f1 - f0 - g_prime(0.819729082) / 0.1).abs() < 1e-9);
        assert!((f.range() - g_prime(0.819729082) / 0.1).abs() < 1e-9);
    }

    #[test]
    fn score_form_matches_the_frequency_form() {
        let f = Crossover {
            gamma: 0.01,
            w_t: 0.76,
            nu: 0.55,
        };
        let (n, n_test, w) = (1e6, 10_321.0, 7_900.0);
        let direct = f.eval(w / n, (n_test - w) / n, (n - n_test) / n);
        let score = f.at_score_per_round((w - 0.55 * n_test) / n);
        assert!((direct - score).abs() < 1e-9 * direct.abs().max(1.0));
    }

    #[test]
    fn variance_is_the_maximum_over_omega() {
        for &(gamma, nu) in &[(0.01, 0.5), (0.1, 0.0), (1.0, 0.7), (1e-4, 0.8)] {
            let f = Crossover {
                gamma,
                w_t: 0.77,
                nu,
            };
            let scan = (0..=10_000)
                .map(|k| f.variance_at(k as f64 / 10_000.0))
                .fold(0.0f64, f64::max);
            assert!(f.max_variance() >= scan * (1.0 - 1e-12));
            assert!(f.max_variance() <= scan * (1.0 + 1e-6));
        }
    }
}
