//! The CHSH game and the single-round entropy bounds
//! (`spec/certification.md`, sections 1 and 2).
//!
//! Everything here is a pure function of the CHSH value S or the win
//! probability w of the game (uniform inputs, `S = 8 w - 4`).

use std::f64::consts::{LN_2, SQRT_2};

/// Classical (local) maximum of the CHSH win probability, 3/4
/// (Clauser, Horne, Shimony, Holt, PRL 23, 880 (1969); spec 1).
pub const W_CLASSICAL: f64 = 0.75;

/// Quantum maximum of the win probability, cos^2(pi/8) = (2 + sqrt 2)/4
/// (Cirel'son, Lett. Math. Phys. 4, 93 (1980); spec 1).
pub const W_QUANTUM: f64 = 0.853_553_390_593_273_7;

/// Quantum maximum of the CHSH value, 2 sqrt 2 (spec 1).
pub const S_QUANTUM: f64 = 2.0 * SQRT_2;

/// g'(3/4+) = 4 / ln 2, the slope of [`g`] at the classical point (spec 2.2).
pub const G_PRIME_AT_CLASSICAL: f64 = 4.0 / LN_2;

/// Distance from the quantum maximum to which win probabilities are clamped
/// before [`g_prime`] is evaluated (spec 8, "never evaluate g' at r = 1";
/// common practice).
pub const QUANTUM_CLAMP: f64 = 1e-12;

/// CHSH value from the win probability: `S = 8 w - 4` (spec 1; uniform inputs).
pub fn s_from_win(w: f64) -> f64 {
    8.0 * w - 4.0
}

/// Win probability from the CHSH value: `w = (S + 4) / 8` (spec 1).
pub fn win_from_s(s: f64) -> f64 {
    (s + 4.0) / 8.0
}

/// The CHSH winning condition `a XOR b = x AND y` (spec 1).
pub fn wins(x: u8, y: u8, a: u8, b: u8) -> bool {
    (a ^ b) == (x & y)
}

/// Binary entropy `h(p) = -p log p - (1-p) log(1-p)`, with `h(0) = h(1) = 0`
/// (spec conventions before section 1).
pub fn binary_entropy(p: f64) -> f64 {
    if p <= 0.0 || p >= 1.0 {
        return 0.0;
    }
    -p * p.log2() - (1.0 - p) * (1.0 - p).log2()
}

/// Bound on the adversary's probability of guessing one party's output for a
/// fixed input, `1/2 + 1/2 sqrt(2 - S^2/4)`, with S clamped to
/// `[2, 2 sqrt 2]` (spec 2.1 and 8; Pironio et al., Nature 464, 1021
/// (2010), from memory per the spec).
pub fn pguess_single(s: f64) -> f64 {
    let s = s.clamp(2.0, S_QUANTUM);
    0.5 + 0.5 * (2.0 - s * s / 4.0).max(0.0).sqrt()
}

/// Single-round min-entropy bound `f_min(S) = 1 - log(1 + sqrt(2 - S^2/4))`
/// for one output, 0 for `S <= 2` (spec 2.1; Pironio et al. 2010; the value
/// is `-log2` of [`pguess_single`]).
pub fn hmin_single(s: f64) -> f64 {
    if s <= 2.0 {
        return 0.0;
    }
    let s = s.min(S_QUANTUM);
    (1.0 - (1.0 + (2.0 - s * s / 4.0).max(0.0).sqrt()).log2()).max(0.0)
}

/// `r(w) = sqrt(16 w (w - 1) + 3)`, clamped to `[0, 1]` (spec 2.2).
fn r_of(w: f64) -> f64 {
    (16.0 * w * (w - 1.0) + 3.0).max(0.0).sqrt().min(1.0)
}

/// Single-round von Neumann entropy bound against quantum side information,
/// `g(w) = 1 - h(1/2 + 1/2 r(w))`, 0 for `w <= 3/4`, 1 at and above the
/// quantum maximum (spec 2.2; Acin et al., PRL 98, 230501 (2007); Pironio et
/// al., New J. Phys. 11, 045021 (2009)).
pub fn g(w: f64) -> f64 {
    if w <= W_CLASSICAL {
        return 0.0;
    }
    if w >= W_QUANTUM {
        return 1.0;
    }
    1.0 - binary_entropy(0.5 + 0.5 * r_of(w))
}

/// [`g`] as a function of the CHSH value S (spec 2.2).
pub fn g_of_s(s: f64) -> f64 {
    g(win_from_s(s))
}

/// `atanh(r) / r`, equal to 1 for `r < 1e-8` (spec 8).
fn atanh_over_r(r: f64) -> f64 {
    if r < 1e-8 {
        1.0
    } else {
        r.atanh() / r
    }
}

/// Slope of [`g`]: `g'(w) = log((1+r)/(1-r)) (8w - 4) / r`, evaluated as
/// `(2/ln 2) (atanh(r)/r) (8w - 4)`, which stays accurate near `r = 0`
/// where it tends to `4/ln 2` (spec 2.2 and 8). For `w <= 3/4` it returns
/// `4/ln 2`; at the quantum maximum it is infinite (callers clamp first).
pub fn g_prime(w: f64) -> f64 {
    if w <= W_CLASSICAL {
        return G_PRIME_AT_CLASSICAL;
    }
    if w >= W_QUANTUM {
        return f64::INFINITY;
    }
    let r = r_of(w);
    (2.0 / LN_2) * atanh_over_r(r) * (8.0 * w - 4.0)
}

/// The largest w in `[3/4, (2+sqrt 2)/4)` with `g'(w) <= y`: bisection, 200
/// halvings, returning the lower end (spec 8; g' is increasing by 2.2).
/// Returns 3/4 if `y <= g'(3/4+)`.
pub fn g_prime_inverse(y: f64) -> f64 {
    let mut lo = W_CLASSICAL;
    let mut hi = W_QUANTUM;
    if y.is_nan() || y <= G_PRIME_AT_CLASSICAL {
        return lo;
    }
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        // `g_prime(mid) <= y` is false for NaN or infinity, which only moves
        // the upper end down, as intended.
        if g_prime(mid) <= y {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    lo
}

/// Right end of the plateau where `ceil(g'(w)/gamma) = k`: the point w_k
/// with `g'(w_k) = k gamma (1 - 1e-12)`, found by [`g_prime_inverse`];
/// `None` if the plateau is empty, `k gamma (1 - 1e-12) <= g'(3/4+)`
/// (spec 3.6 and 8).
pub fn plateau_end(k: u64, gamma: f64) -> Option<f64> {
    let y = k as f64 * gamma * (1.0 - 1e-12);
    if y <= G_PRIME_AT_CLASSICAL {
        None
    } else {
        Some(g_prime_inverse(y))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn classical_and_quantum_maxima() {
        // spec 5 rows 1-2 (CHSH 1969; Tsirelson 1980): 3/4 and cos^2(pi/8).
        let c = (std::f64::consts::PI / 8.0).cos();
        assert!((W_QUANTUM - c * c).abs() < 1e-16);
        assert!((W_QUANTUM - (2.0 + SQRT_2) / 4.0).abs() < 1e-16);
        assert!((s_from_win(W_QUANTUM) - 2.828_427_124_746_190_3).abs() < 1e-14);
        assert_eq!(s_from_win(W_CLASSICAL), 2.0);
        assert_eq!(win_from_s(2.0), 0.75);
    }

    #[test]
    fn classical_strategies_win_at_most_three_quarters() {
        // spec 1 (CHSH 1969): enumerate the 16 deterministic strategies
        // a = A(x), b = B(y); the best wins 3 of the 4 input pairs.
        let mut best = 0;
        for sa in 0..4u8 {
            for sb in 0..4u8 {
                let won = (0..4u8)
                    .filter(|&xy| {
                        let (x, y) = (xy >> 1, xy & 1);
                        wins(x, y, (sa >> x) & 1, (sb >> y) & 1)
                    })
                    .count();
                best = best.max(won);
            }
        }
        assert_eq!(best, 3);
    }

    #[test]
    fn table_2_3() {
        // spec 2.3 table (closed forms checked there against an optimisation
        // over Bell-diagonal attacks), to 1e-6.
        let rows: [(f64, f64, f64, f64, f64, f64); 9] = [
            (2.0, 0.75, 1.0, 0.0, 0.0, 5.770780),
            (2.1, 0.7625, 0.973682, 0.038477, 0.075256, 6.280091),
            (2.2, 0.775, 0.944410, 0.082515, 0.157288, 6.858253),
            (2.3, 0.7875, 0.911552, 0.133603, 0.247102, 7.530535),
            (2.4, 0.8, 0.874166, 0.194021, 0.346112, 8.338506),
            (2.5, 0.8125, 0.830719, 0.267568, 0.456436, 9.357850),
            (2.6, 0.825, 0.778388, 0.361438, 0.581580, 10.749756),
            (2.7, 0.8375, 0.710654, 0.492781, 0.728482, 12.970089),
            (2.8, 0.85, 0.600000, 0.736966, 0.918531, 18.902679),
        ];
        for (s, w, pg, fmin, gv, gp) in rows {
            assert!((win_from_s(s) - w).abs() < 1e-12);
            assert!((pguess_single(s) - pg).abs() < 1e-6, "P_guess at S = {s}");
            assert!((hmin_single(s) - fmin).abs() < 1e-6, "f_min at S = {s}");
            assert!((g_of_s(s) - gv).abs() < 1e-6, "g at S = {s}");
            assert!((g_prime(w) - gp).abs() < 1e-6, "g' at w = {w}");
        }
        // Last row: S = 2 sqrt 2.
        assert!((pguess_single(S_QUANTUM) - 0.5).abs() < 1e-12);
        assert!((hmin_single(S_QUANTUM) - 1.0).abs() < 1e-12);
        assert!((g(W_QUANTUM) - 1.0).abs() < 1e-12);
        assert!(g_prime(W_QUANTUM).is_infinite());
    }

    #[test]
    fn end_points() {
        // spec 5 row 3: 0 at S = 2 and 1 at S = 2 sqrt 2 (0.999946 at
        // 2 sqrt 2 - 1e-9). The row names f_min and g together; 0.999946 is
        // the value of f_min there (g is 1 - 1.2e-8 at that point).
        assert_eq!(hmin_single(2.0), 0.0);
        assert_eq!(g_of_s(2.0), 0.0);
        assert_eq!(hmin_single(1.5), 0.0);
        assert!((hmin_single(S_QUANTUM - 1e-9) - 0.999946).abs() < 1e-6);
        assert!((g_of_s(S_QUANTUM - 1e-9) - 1.0).abs() < 1e-7);
        // g'(3/4+) = 4/ln 2 = 5.770780163555854 (spec 2.2); the atanh form
        // joins it continuously.
        assert!((G_PRIME_AT_CLASSICAL - 5.770_780_163_555_854).abs() < 1e-15);
        assert!((g_prime(0.75 + 1e-15) - G_PRIME_AT_CLASSICAL).abs() < 1e-9);
        assert!((g_prime(0.75 + 1e-9) - G_PRIME_AT_CLASSICAL).abs() < 1e-6);
    }

    #[test]
    fn atanh_form_matches_log_form() {
        // spec 8: (2/ln 2)(atanh(r)/r)(8w-4) equals the log form of 2.2.
        for i in 1..100 {
            let w = 0.75 + (W_QUANTUM - 0.75) * i as f64 / 100.0;
            let r = r_of(w);
            let log_form = ((1.0 + r) / (1.0 - r)).log2() * (8.0 * w - 4.0) / r;
            assert!((g_prime(w) - log_form).abs() <= 1e-12 * log_form, "w = {w}");
        }
    }

    #[test]
    fn g_prime_is_the_derivative_and_g_is_convex() {
        // spec 2.2 (checked there numerically): g increasing and convex,
        // g' its derivative (central differences here).
        let mut last_g = 0.0;
        let mut last_gp = 0.0;
        for i in 1..200 {
            let w = 0.75 + (W_QUANTUM - 0.75) * i as f64 / 200.0;
            let h = 1e-7;
            let num = (g(w + h) - g(w - h)) / (2.0 * h);
            assert!((num - g_prime(w)).abs() < 1e-5 * g_prime(w), "w = {w}");
            assert!(g(w) > last_g && g_prime(w) > last_gp);
            last_g = g(w);
            last_gp = g_prime(w);
        }
    }

    #[test]
    fn key_distribution_threshold() {
        // spec 5 row 5 (Woodhead, Acin, Pironio, Quantum 5, 443 (2021),
        // "7.15 %"): S = 2 sqrt 2 (1 - 2Q), rate g(S) - h(Q) vanishes at
        // Q* = 0.0714918 (S = 2.424009).
        let rate = |q: f64| g_of_s(S_QUANTUM * (1.0 - 2.0 * q)) - binary_entropy(q);
        let (mut lo, mut hi) = (0.01, 0.1);
        assert!(rate(lo) > 0.0 && rate(hi) < 0.0);
        for _ in 0..100 {
            let mid = 0.5 * (lo + hi);
            if rate(mid) > 0.0 {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        assert!((lo - 0.071_491_8).abs() < 1e-6, "Q* = {lo}");
        assert!((S_QUANTUM * (1.0 - 2.0 * lo) - 2.424_009).abs() < 1e-6);
    }

    #[test]
    fn pair_entropy_at_tsirelson() {
        // spec 5 row 8: the honest pair distribution at the Tsirelson point
        // gives -log((2 + sqrt 2)/8) = 1.228447 bits, more than the
        // single-output bound of 1 bit the tool uses.
        let v = -((2.0 + SQRT_2) / 8.0).log2();
        assert!((v - 1.228_447).abs() < 1e-6);
        assert!(hmin_single(S_QUANTUM) < v);
    }

    #[test]
    fn inverse_and_plateaus() {
        for y in [6.0, 8.338506, 10.1, 50.0, 1e4] {
            let w = g_prime_inverse(y);
            assert!(g_prime(w) <= y);
            assert!(w < W_QUANTUM);
            // the next float up already exceeds y (bisection converged)
            let up = w + 4.0 * f64::EPSILON;
            assert!(g_prime(up) > y * (1.0 - 1e-12), "y = {y}");
        }
        assert_eq!(g_prime_inverse(5.0), 0.75);
        assert_eq!(plateau_end(57, 0.1), None); // 5.7 < 4/ln 2
        assert!(plateau_end(58, 0.1).is_some());
    }
}
