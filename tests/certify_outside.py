#!/usr/bin/env python3
"""Outside check of sluice certificates written with the improved bound.

Recomputes, without any sluice code, from the formulas in the module docs of
src/certify/improved.rs and src/certify/tradeoff.rs (themselves from Dupuis
and Fawzi, IEEE Trans. Inf. Theory 65, 7596 (2019), constants from memory):

- g(w) = 1 - h(1/2 + 1/2 sqrt(16 w (w - 1) + 3)) and its slope, by plain
  math, and the slope also by central differences;
- B at the certificate's own (w_t, alpha, nu, threshold), term by term;
- that min_entropy_bits <= floor(B - 1 - D_pub - keep charge);
- that no (w_t, alpha) found by scipy.optimize gives a larger B than the one
  recorded by more than a relative 1e-6 (sluice's optimiser is not far off)
  -- a larger B would not be an error, only a missed bit count;
- the completeness of the acceptance test with scipy.stats.binom (win count:
  exact binomial tail) or scipy's optimiser for the Chernoff rate (score);
- the range of test rounds the record checks allow, with scipy.stats.binom.

Usage: certify_outside.py CERT.json [CERT.json ...]. Exit 0 when every check
passes, 1 otherwise, 3 when numpy/scipy are missing. Prints "N passed, M
failed".
"""
import json
import math
import sys

try:
    import numpy as np
    from scipy import optimize, stats
except ImportError as e:  # pragma: no cover
    print(f"missing python package: {e}", file=sys.stderr)
    sys.exit(3)

WQ = (2 + math.sqrt(2)) / 4
LN2 = math.log(2)


def h2(p):
    if p <= 0 or p >= 1:
        return 0.0
    return -p * math.log2(p) - (1 - p) * math.log2(1 - p)


def g(w):
    if w <= 0.75:
        return 0.0
    r = math.sqrt(max(0.0, 16 * w * (w - 1) + 3))
    return 1 - h2(0.5 + 0.5 * min(r, 1.0))


def gp(w):
    r = math.sqrt(max(0.0, 16 * w * (w - 1) + 3))
    return math.log2((1 + r) / (1 - r)) * (8 * w - 4) / r


def bound(N, gamma, eps_s, eps_ea, nu, w_acc, w_t, alpha, d=4.0):
    s = gp(w_t)
    a0 = g(w_t) - s * w_t
    h = a0 + s * w_acc
    # Var over omega in [0, 1]: scipy's bounded scalar search and both ends
    def var_at(om):
        return (s * s / gamma) * (om * (1 - nu) ** 2 + (1 - om) * nu ** 2) - s * s * (om - nu) ** 2
    r = optimize.minimize_scalar(lambda om: -var_at(om), bounds=(0, 1), method="bounded",
                                 options={"xatol": 1e-12})
    var = max(var_at(0.0), var_at(1.0), -r.fun)
    R = nu * s + (1 - nu) * s / gamma
    V = math.log2(2 * d * d + 1) + math.sqrt(2 + var)
    E = 2 * math.log2(d) + R
    lnK = (alpha - 1) * E * LN2 + 3 * math.log(E * LN2 + math.log1p(math.e ** 2 * 2.0 ** (-E))) \
        - math.log(6 * (2 - alpha) ** 3 * LN2)
    geps = -math.log2(eps_s ** 2 / (1 + math.sqrt(1 - eps_s ** 2)))
    third = math.exp(min(700.0, math.log(N) + 2 * math.log(alpha - 1) + lnK))
    return N * h - N * (alpha - 1) * LN2 / 2 * V * V \
        - alpha * (geps + alpha * math.log2(1 / eps_ea)) / (alpha - 1) - third


passed = 0
failed = 0


def check(ok, what):
    global passed, failed
    if ok:
        passed += 1
    else:
        failed += 1
        print("FAILED:", what)


for path in sys.argv[1:]:
    c = json.load(open(path))
    b = c["bound"]
    p = c["parameters"]
    N, gamma = p["rounds"], p["test_probability"]
    eps_s, eps_ea = p["smoothing"], p["acceptance"]
    t = b["test"]
    nu, thr = t["nu"], t["threshold"]
    w_acc = nu + thr / (gamma * N)
    w_exp = p["expected_win"]
    # slope by central differences against the closed form
    wt = b["tangent_point"]
    num = (g(wt + 1e-7) - g(wt - 1e-7)) / 2e-7
    check(abs(num - gp(wt)) < 1e-5 * gp(wt), f"{path}: slope at w_t")
    B = bound(N, gamma, eps_s, eps_ea, nu, w_acc, wt, b["alpha"])
    rec = b["terms"]["bound_bits"]
    check(abs(B - rec) <= 1e-6 * abs(rec) + 1e-3, f"{path}: B {B} vs recorded {rec}")
    charges = c["disclosure_charge_bits"] + b["keep_charge_bits"]
    check(c["min_entropy_bits"] <= max(0, math.floor(B - 1 - charges)),
          f"{path}: k {c['min_entropy_bits']} above floor(B - 1 - charges)")
    # scipy's own optimum over (w_t, log(alpha - 1))
    def neg(x):
        w, la = x
        if not (0.75 < w <= min(w_acc, WQ - 1e-12)) or not (-35 < la < math.log(0.999)):
            return 1e300
        return -bound(N, gamma, eps_s, eps_ea, nu, w_acc, w, 1 + math.exp(la))
    best = -1e300
    for w0 in np.linspace(0.75 + 1e-6, min(w_acc, WQ - 1e-9), 4)[1:]:
        for la0 in (-16.0, -10.0, -5.0):
            r = optimize.minimize(neg, [w0, la0], method="Nelder-Mead",
                                  options={"xatol": 1e-12, "fatol": 1e-6, "maxiter": 4000})
            best = max(best, -r.fun)
    check(best <= rec + 1e-6 * abs(rec) + 1.0,
          f"{path}: scipy finds B = {best}, sluice recorded {rec} (sluice is not optimal)")
    check(rec >= best - 1e-4 * abs(best), f"{path}: sluice's B {rec} far below scipy's {best}")
    # completeness of the acceptance test
    if t["kind"] == "wins" and t["tail"] == "binomial":
        tail = stats.binom.cdf(math.ceil(thr) - 1, N, gamma * w_exp)
        check(tail <= t["completeness"] * (1 + 1e-6), f"{path}: binomial tail {tail} vs {t['completeness']}")
        check(stats.binom.cdf(math.ceil(thr), N, gamma * w_exp) > t["completeness"] * (1 - 1e-6),
              f"{path}: the threshold could be higher")
    elif t["kind"] == "score" and t["tail"] == "chernoff":
        pr = [gamma * w_exp, gamma * (1 - w_exp), 1 - gamma]
        vals = [1 - nu, -nu, 0.0]
        a = thr / N
        def f(l):
            return l * a + math.log(sum(q * math.exp(-l * v) for q, v in zip(pr, vals)))
        r = optimize.minimize_scalar(f, bounds=(0, 200), method="bounded", options={"xatol": 1e-14})
        chern = math.exp(N * r.fun)
        check(chern <= t["completeness"] * (1 + 1e-4), f"{path}: Chernoff bound {chern} vs {t['completeness']}")
    # the range of test rounds the record checks allow
    ch = c["checks"]
    lo, hi = ch["test_rounds_range"]
    if gamma < 1:
        check(stats.binom.cdf(lo - 1, N, gamma) <= ch["level"] / 2 * (1 + 1e-6), f"{path}: low end {lo}")
        check(stats.binom.sf(hi, N, gamma) <= ch["level"] / 2 * (1 + 1e-6), f"{path}: high end {hi}")
    check(lo <= c["record"]["test_rounds"] <= hi, f"{path}: N_test in range")
    # never above the asymptotic rate
    check(c["min_entropy_bits"] <= N * g(w_exp), f"{path}: above N g(w_exp)")

print(f"{passed} passed, {failed} failed")
sys.exit(0 if failed == 0 else 1)
