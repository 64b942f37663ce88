//! The protocol of a run resolved from the declared parameters, and the
//! planning figures (`certify --plan`): plain functions returning plain
//! data; the command line formats and prints them.
//!
//! Errors for parameters that are missing or do not fit together name the
//! parameter as its option, `--name` (the same name is its key in a
//! parameters file).

use super::certificate::{BOUND_FIRST, BOUND_IMPROVED};
use super::eat::{
    completeness, delta_for_completeness, eat_plan, log2_values_ceil, EatParams, EatResult,
};
use super::improved::{
    asymptotic_rate, figure, improved_optimise, input_randomness_bits, plan_tests, Acceptance,
    ImprovedParams, ImprovedTerms, Keep, PlannedTest, TestKind,
};
use super::params::Declared;
use super::record::test_rounds_range;
use super::tail::TailMethod;
use super::{Error, ErrorKind};
use serde::Serialize;

fn protocol_error(what: impl Into<String>) -> Error {
    Error::new(ErrorKind::Protocol { what: what.into() })
}

/// The value of a declared parameter, or an error naming it.
pub fn need<T>(v: Option<T>, name: &str) -> Result<T, Error> {
    v.ok_or_else(|| {
        protocol_error(format!(
            "--{name} is missing (give it as an option or in the --params file)"
        ))
    })
}

/// The parameters of the first-2016 bound with tolerance `delta`.
pub fn eat_params(d: &Declared, delta: f64) -> Result<EatParams, Error> {
    Ok(EatParams {
        n_rounds: need(d.rounds, "rounds")?,
        gamma: need(d.gamma, "test-probability")?,
        w_exp: need(d.w_exp, "expected-win")?,
        delta,
        eps_s: need(d.eps_s, "smoothing")?,
        eps_ea: need(d.eps_ea, "acceptance")?,
    })
}

/// The bound chosen and everything it needs, fixed before the run.
#[derive(Debug, Clone, Copy)]
pub enum Bound {
    /// First-order bound of spec 3 (tolerance form).
    First(EatParams),
    /// Improved bound with its acceptance test.
    Improved(ImprovedParams),
}

/// The protocol of a run: the bound, the string kept, and the level of the
/// record checks.
#[derive(Debug, Clone, Copy)]
pub struct Protocol {
    /// The bound and its parameters.
    pub bound: Bound,
    /// The string kept.
    pub keep: Keep,
    /// The expected win probability of honest devices.
    pub w_exp: f64,
}

impl Protocol {
    /// The smoothing parameter eps_s.
    pub fn eps_s(&self) -> f64 {
        match &self.bound {
            Bound::First(p) => p.eps_s,
            Bound::Improved(p) => p.eps_s,
        }
    }
    /// The acceptance parameter eps_EA.
    pub fn eps_ea(&self) -> f64 {
        match &self.bound {
            Bound::First(p) => p.eps_ea,
            Bound::Improved(p) => p.eps_ea,
        }
    }
    /// The bound's name as the certificate records it.
    pub fn name(&self) -> &'static str {
        match self.bound {
            Bound::First(_) => BOUND_FIRST,
            Bound::Improved(_) => BOUND_IMPROVED,
        }
    }
    /// The acceptance test as a record.
    pub fn acceptance(&self) -> Acceptance {
        match &self.bound {
            Bound::First(p) => Acceptance {
                kind: TestKind::Wins,
                nu: 0.0,
                threshold: p.threshold_wins(),
                tail: TailMethod::Hoeffding,
                completeness: completeness(p.n_rounds, p.gamma, p.delta),
            },
            Bound::Improved(p) => p.acceptance,
        }
    }
}

fn parse_tail(t: &str) -> Result<TailMethod, Error> {
    TailMethod::parse(t).ok_or_else(|| {
        protocol_error(format!(
            "--tail {t:?}: use binomial, chernoff, bernstein or hoeffding"
        ))
    })
}

/// The tolerance delta of the first-2016 bound: declared, or derived from
/// the completeness target; `missing` is the message when neither is given.
fn first_delta(d: &Declared, n: u64, gamma: f64, missing: &str) -> Result<f64, Error> {
    match (d.delta, d.eps_c) {
        (Some(delta), _) => Ok(delta),
        (None, Some(eps_c)) => {
            if !(eps_c > 0.0 && eps_c < 1.0) {
                return Err(protocol_error(format!(
                    "--completeness {eps_c}: must lie strictly between 0 and 1"
                )));
            }
            Ok(delta_for_completeness(n, gamma, eps_c))
        }
        (None, None) => Err(protocol_error(missing)),
    }
}

/// Resolves the protocol; `plan` allows the test (and nu) to be left open
/// (`Ok(None)` for the improved bound then: the planner compares tests).
pub fn protocol(d: &Declared, plan: bool) -> Result<Option<Protocol>, Error> {
    let n = need(d.rounds, "rounds")?;
    let gamma = need(d.gamma, "test-probability")?;
    let w_exp = need(d.w_exp, "expected-win")?;
    let keep = match d.keep.as_deref() {
        None | Some("pairs") => Keep::Pairs,
        Some(_) => Keep::Alice,
    };
    let bound = d.bound.as_deref().unwrap_or(BOUND_IMPROVED);
    if bound == BOUND_FIRST {
        if d.test.as_deref() == Some("score") || d.nu.is_some() {
            return Err(protocol_error("--test score: the first-2016 bound takes the win-count test only (use --bound improved-2019)"));
        }
        if d.tail.as_deref().is_some_and(|t| t != "hoeffding") {
            return Err(protocol_error(
                "--tail: the first-2016 bound derives its tolerance with hoeffding (Hoeffding 1963)",
            ));
        }
        let delta = first_delta(
            d,
            n,
            gamma,
            "--tolerance or --completeness is missing (fixed before the run)",
        )?;
        let p = eat_params(d, delta)?;
        p.validate()?;
        return Ok(Some(Protocol {
            bound: Bound::First(p),
            keep,
            w_exp,
        }));
    }
    let eps_s = need(d.eps_s, "smoothing")?;
    let eps_ea = need(d.eps_ea, "acceptance")?;
    let acceptance = if let Some(delta) = d.delta {
        if d.test.as_deref() == Some("score") {
            return Err(protocol_error(
                "--tolerance gives a win-count threshold; for --test score give --completeness",
            ));
        }
        Acceptance {
            kind: TestKind::Wins,
            nu: 0.0,
            threshold: gamma * n as f64 * (w_exp - delta),
            tail: TailMethod::Hoeffding,
            completeness: completeness(n, gamma, delta),
        }
    } else {
        let eps_c = need(d.eps_c, "completeness")?;
        let kind = match d.test.as_deref() {
            Some("wins") => TestKind::Wins,
            Some(_) => TestKind::Score,
            None if plan => return Ok(None),
            None => return Err(protocol_error("--test is missing: the acceptance test (wins or score) is fixed before the run; certify --plan compares them")),
        };
        let nu = match kind {
            TestKind::Wins => 0.0,
            TestKind::Score => match d.nu {
                Some(nu) => nu,
                None if plan => return Ok(None),
                None => return Err(protocol_error("--score-offset is missing: --test score needs the nu fixed before the run (certify --plan chooses one)")),
            },
        };
        let tail = match (d.tail.as_deref(), kind) {
            (Some(t), _) => parse_tail(t)?,
            (None, TestKind::Wins) => TailMethod::Binomial,
            (None, TestKind::Score) => TailMethod::Chernoff,
        };
        Acceptance::for_completeness(n, gamma, w_exp, eps_c, kind, nu, tail)?
    };
    let p = ImprovedParams {
        n_rounds: n,
        gamma,
        eps_s,
        eps_ea,
        acceptance,
    };
    p.validate()?;
    Ok(Some(Protocol {
        bound: Bound::Improved(p),
        keep,
        w_exp,
    }))
}

/// Bits charged besides the margin when planning: W published (at most
/// `ceil(log2(N + 1))`) and, keeping Alice's bits only, the largest N_test
/// the record checks let pass.
pub fn planning_charge(n: u64, gamma: f64, level: f64, keep: Keep) -> f64 {
    let w = log2_values_ceil(n) as f64;
    match keep {
        Keep::Pairs => w,
        Keep::Alice => w + test_rounds_range(n, gamma, level).1 as f64,
    }
}

/// One acceptance test compared by the improved plan.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PlanRow {
    /// `wins` or `score`.
    pub test: &'static str,
    /// The tail method's name.
    pub tail: &'static str,
    /// The score offset nu (0 for the win count).
    pub score_offset: f64,
    /// The acceptance threshold.
    pub threshold: f64,
    /// The threshold as a win fraction.
    pub w_acc: f64,
    /// Abort probability of honest devices: the test's plus the level of
    /// the record checks.
    pub completeness_error: f64,
    /// The planning figure in bits.
    pub bits: u64,
    /// `bits / N`.
    pub bits_per_round: f64,
    /// The terms at the optimum (None if nothing can be certified).
    pub terms: Option<ImprovedTerms>,
}

/// The improved-2019 plan: the tests compared and the best one.
#[derive(Debug, Clone)]
pub struct ImprovedPlan {
    /// N_rounds.
    pub rounds: u64,
    /// gamma.
    pub gamma: f64,
    /// w_exp.
    pub w_exp: f64,
    /// eps_s.
    pub eps_s: f64,
    /// eps_EA.
    pub eps_ea: f64,
    /// The completeness target, when declared.
    pub eps_c: Option<f64>,
    /// The string kept.
    pub keep: Keep,
    /// The level of the record checks (eps_EA).
    pub level: f64,
    /// One row per test compared.
    pub rows: Vec<PlanRow>,
    /// Index of the best row (most bits; the first of equals).
    pub chosen: usize,
    /// The acceptance test of the best row.
    pub best: Acceptance,
    /// `N r(w_exp)`.
    pub asymptotic_bits: f64,
    /// Trusted input randomness used, `N (h(gamma) + 2 gamma)`.
    pub input_randomness_bits: f64,
    /// Best bits less the input randomness.
    pub net_gain_bits: f64,
    /// The range of N_test the record checks let pass.
    pub test_rounds_range: [u64; 2],
    /// The parameters file to fix before the run (with its comment line).
    pub parameters_file: String,
}

/// Plans a run with the improved-2019 bound: the test fixed in `fixed`
/// (from [`protocol`]), or else every test [`plan_tests`] compares,
/// filtered by the declared test and tail.
pub fn plan_improved(d: &Declared, fixed: Option<Protocol>) -> Result<ImprovedPlan, Error> {
    let n = need(d.rounds, "rounds")?;
    let gamma = need(d.gamma, "test-probability")?;
    let w_exp = need(d.w_exp, "expected-win")?;
    let eps_s = need(d.eps_s, "smoothing")?;
    let eps_ea = need(d.eps_ea, "acceptance")?;
    let keep = match d.keep.as_deref() {
        Some("alice") => Keep::Alice,
        _ => Keep::Pairs,
    };
    let level = eps_ea;
    let charge = planning_charge(n, gamma, level, keep);
    let candidates: Vec<PlannedTest> = match fixed {
        Some(Protocol {
            bound: Bound::Improved(p),
            ..
        }) => {
            let terms = improved_optimise(&p);
            vec![PlannedTest {
                acceptance: p.acceptance,
                terms,
                bits: terms.map_or(0, |t| figure(t.bound_bits, charge)),
            }]
        }
        _ => {
            let eps_c = need(d.eps_c, "completeness")?;
            let all = plan_tests(n, gamma, w_exp, eps_c, eps_s, eps_ea, &|_| charge)?;
            let want_kind = match d.test.as_deref() {
                Some("wins") => Some(TestKind::Wins),
                Some("score") => Some(TestKind::Score),
                _ => None,
            };
            all.into_iter()
                .filter(|t| want_kind.is_none_or(|k| t.acceptance.kind == k))
                .filter(|t| {
                    d.tail
                        .as_deref()
                        .is_none_or(|x| x == t.acceptance.tail.name())
                })
                .collect()
        }
    };
    if candidates.is_empty() {
        return Err(protocol_error("--tail: no acceptance test of this kind takes that tail (wins: binomial, chernoff; score: chernoff, bernstein)"));
    }
    let chosen = candidates
        .iter()
        .enumerate()
        .max_by(|a, b| a.1.bits.cmp(&b.1.bits).then(b.0.cmp(&a.0)))
        .map(|(i, _)| i)
        .unwrap_or(0);
    let (lo, hi) = test_rounds_range(n, gamma, level);
    let rows: Vec<PlanRow> = candidates
        .iter()
        .map(|t| PlanRow {
            test: match t.acceptance.kind {
                TestKind::Wins => "wins",
                TestKind::Score => "score",
            },
            tail: t.acceptance.tail.name(),
            score_offset: t.acceptance.nu,
            threshold: t.acceptance.threshold,
            w_acc: t.acceptance.w_acc(n, gamma),
            completeness_error: t.acceptance.completeness + level,
            bits: t.bits,
            bits_per_round: t.bits as f64 / n as f64,
            terms: t.terms,
        })
        .collect();
    let best = &candidates[chosen];
    let input_bits = input_randomness_bits(n, gamma);
    let mut params_file = format!(
        "# fixed before the run (certify --plan)\nrounds = {n}\ntest-probability = {gamma}\nexpected-win = {w_exp}\nsmoothing = {eps_s:e}\nacceptance = {eps_ea:e}\nbound = {BOUND_IMPROVED}\nkeep = {}\n",
        keep.name()
    );
    match best.acceptance.tail {
        TailMethod::Hoeffding => {
            params_file.push_str(&format!(
                "tolerance = {}\n",
                w_exp - best.acceptance.threshold / (gamma * n as f64)
            ));
        }
        t => {
            params_file.push_str(&format!(
                "completeness = {:e}\ntest = {}\ntail = {}\n",
                need(d.eps_c, "completeness")?,
                rows[chosen].test,
                t.name()
            ));
            if best.acceptance.kind == TestKind::Score {
                params_file.push_str(&format!("score-offset = {}\n", best.acceptance.nu));
            }
        }
    }
    Ok(ImprovedPlan {
        rounds: n,
        gamma,
        w_exp,
        eps_s,
        eps_ea,
        eps_c: d.eps_c,
        keep,
        level,
        chosen,
        best: best.acceptance,
        asymptotic_bits: n as f64 * asymptotic_rate(w_exp),
        input_randomness_bits: input_bits,
        net_gain_bits: best.bits as f64 - input_bits,
        test_rounds_range: [lo, hi],
        parameters_file: params_file,
        rows,
    })
}

impl ImprovedPlan {
    /// Certified bits per round (planning, W published) at `n` rounds and
    /// test probability `g`, with the best test: its threshold re-derived
    /// from the completeness target, or scaled from the planned one when
    /// the tolerance was declared. 0 where nothing can be certified.
    pub fn rate(&self, n: u64, g: f64) -> f64 {
        let a = self.best;
        let acc = match self.eps_c {
            Some(e) => Acceptance::for_completeness(n, g, self.w_exp, e, a.kind, a.nu, a.tail),
            None => Ok(Acceptance {
                threshold: a.threshold / (self.gamma * self.rounds as f64) * g * n as f64,
                ..a
            }),
        };
        let Ok(acc) = acc else { return 0.0 };
        let p = ImprovedParams {
            n_rounds: n,
            gamma: g,
            eps_s: self.eps_s,
            eps_ea: self.eps_ea,
            acceptance: acc,
        };
        improved_optimise(&p).map_or(0.0, |t| {
            figure(t.bound_bits, planning_charge(n, g, self.level, self.keep)) as f64 / n as f64
        })
    }
}

/// Plans a run with the first-2016 bound (the pair string only): the
/// parameters with the tolerance resolved, and the figure.
pub fn plan_first(d: &Declared) -> Result<(EatParams, EatResult), Error> {
    if d.keep.as_deref() == Some("alice") {
        return Err(protocol_error("--keep alice: --plan computes the Alice-only figure with --bound improved-2019 (the first-2016 plan covers the pair string a1 b1 .. aN bN)"));
    }
    let n = need(d.rounds, "rounds")?;
    let gamma = need(d.gamma, "test-probability")?;
    let delta = first_delta(d, n, gamma, "--tolerance or --completeness is missing")?;
    let p = eat_params(d, delta)?;
    let res = eat_plan(&p)?;
    Ok((p, res))
}

/// Certified bits per round (planning, first-2016 bound, W published) at
/// `n` rounds and test probability `gamma`: the tolerance re-derived from
/// `eps_c` when given, else `p.delta`. 0 where nothing can be certified.
pub fn plan_rate(p: &EatParams, n: u64, gamma: f64, eps_c: Option<f64>) -> f64 {
    let delta = match eps_c {
        Some(e) => delta_for_completeness(n, gamma, e),
        None => p.delta,
    };
    let q = EatParams {
        n_rounds: n,
        gamma,
        delta,
        ..*p
    };
    if delta >= q.w_exp {
        return 0.0;
    }
    eat_plan(&q)
        .map(|r| r.bits as f64 / n as f64)
        .unwrap_or(0.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::certify::params::{read_key_values, PARAM_KEYS};

    fn declared() -> Declared {
        Declared {
            rounds: Some(100_000_000),
            gamma: Some(0.1),
            w_exp: Some(0.84),
            eps_s: Some(1e-6),
            eps_ea: Some(1e-6),
            eps_c: Some(1e-6),
            ..Default::default()
        }
    }

    #[test]
    fn missing_parameters_are_named() {
        let d = Declared {
            rounds: None,
            ..declared()
        };
        let e = protocol(&d, true).unwrap_err();
        assert_eq!(
            e.to_string(),
            "--rounds is missing (give it as an option or in the --params file)"
        );
        // Certifying needs the test fixed; planning compares the tests.
        let e = protocol(&declared(), false).unwrap_err();
        assert!(e.to_string().starts_with("--test is missing"), "{e}");
        assert!(protocol(&declared(), true).unwrap().is_none());
        let d = Declared {
            bound: Some(BOUND_FIRST.into()),
            eps_c: None,
            ..declared()
        };
        let e = protocol(&d, true).unwrap_err();
        assert!(
            e.to_string().starts_with("--tolerance or --completeness"),
            "{e}"
        );
    }

    #[test]
    fn charge_is_the_bits_of_w() {
        // W takes one of N + 1 values: ceil(log2(1001)) = 10 bits.
        assert_eq!(planning_charge(1000, 0.5, 1e-6, Keep::Pairs), 10.0);
        // 2^10 - 1 rounds: exactly 1024 values, 10 bits.
        assert_eq!(planning_charge(1023, 0.5, 1e-6, Keep::Pairs), 10.0);
        let alice = planning_charge(1000, 0.5, 1e-6, Keep::Alice);
        assert!(alice > 10.0 + 500.0 && alice <= 10.0 + 1000.0, "{alice}");
    }

    #[test]
    fn improved_plan_picks_the_best_and_its_file_reads_back() {
        let plan = plan_improved(&declared(), None).unwrap();
        assert!(plan.rows.len() >= 2);
        let best = plan.rows[plan.chosen].bits;
        assert!(best > 0);
        assert!(plan.rows.iter().all(|r| r.bits <= best));
        for r in &plan.rows {
            assert_eq!(r.bits_per_round, r.bits as f64 / 1e8);
            assert!(r.completeness_error > 1e-6);
        }
        // The certified bits per round never exceed the asymptotic rate.
        assert!((best as f64) < plan.asymptotic_bits);
        // The parameters file fixes the chosen test: read back, it gives a
        // protocol with the same acceptance test.
        let kv = read_key_values(plan.parameters_file.as_bytes(), &PARAM_KEYS).unwrap();
        let mut d = Declared::default();
        d.merge(&kv, false).unwrap();
        let p = protocol(&d, false).unwrap().unwrap();
        assert_eq!(p.acceptance().kind, plan.best.kind);
        assert_eq!(p.acceptance().tail, plan.best.tail);
        // Re-planning that protocol gives the chosen row's figure.
        let again = plan_improved(&d, Some(p)).unwrap();
        assert_eq!(again.rows.len(), 1);
        assert_eq!(again.rows[0].bits, best);
        // The plot's rate at the planned point is the plan's figure.
        assert_eq!(plan.rate(100_000_000, 0.1), best as f64 / 1e8);
    }

    #[test]
    fn first_plan_covers_pairs_only() {
        let d = Declared {
            bound: Some(BOUND_FIRST.into()),
            delta: Some(0.002),
            eps_c: None,
            ..declared()
        };
        let (p, res) = plan_first(&d).unwrap();
        // The worked example of the module docs: 52 402 723 bits.
        assert_eq!(res.bits, 52_402_723);
        assert_eq!(
            plan_rate(&p, p.n_rounds, p.gamma, None),
            res.bits as f64 / 1e8
        );
        let e = plan_first(&Declared {
            keep: Some("alice".into()),
            ..d
        })
        .unwrap_err();
        assert!(e.to_string().starts_with("--keep alice"), "{e}");
    }
}
