//! The certification of one run (`sluice certify`): the parameters fixed
//! before the run resolved and checked ([`resolve_run`]), then, from the
//! summary of the record, the accept/abort decision, the certified bits,
//! the reason for 0 bits and the records a certificate carries
//! ([`certify_run`]). Plain inputs, plain results; the caller reads the
//! record, writes the files and prints.

use super::certificate::{
    BoundRecord, ChecksRecord, PublicValues, ResultTerms, BOUND_FIRST, BOUND_IMPROVED, COUNTS_LABEL,
};
use super::eat::{disclosure_charge, eat_certify, ZeroReason, MARGIN_BITS};
use super::iid::{iid_estimate, IID_LABEL};
use super::improved::{figure, improved_optimise, Keep};
use super::params::Declared;
use super::planning::{need, protocol, Bound, Protocol};
use super::record::Summary;
use super::{check_win_fraction, Error, ErrorKind, Mode, PublicStat, Setup};

fn protocol_error(what: impl Into<String>) -> Error {
    Error::new(ErrorKind::Protocol { what: what.into() })
}

/// The model of a run with what it needs.
#[derive(Debug, Clone, Copy)]
pub enum Model {
    /// Entropy accumulation with the protocol fixed before the run.
    EntropyAccumulation(Protocol),
    /// The i.i.d. estimate with its failure probability eps_est.
    Iid {
        /// eps_est.
        eps_est: f64,
    },
}

/// The parameters of a run, resolved and checked before the record is read.
#[derive(Debug, Clone, Copy)]
pub struct RunParams {
    /// N_rounds.
    pub n_rounds: u64,
    /// gamma.
    pub gamma: f64,
    /// The model.
    pub model: Model,
    /// The string kept (pairs for the i.i.d. estimate).
    pub keep: Keep,
    /// The level of the record checks: the certificate's own error level
    /// (eps_EA, or eps_est).
    pub level: f64,
}

impl RunParams {
    /// The mode of the figure.
    pub fn mode(&self) -> Mode {
        match self.model {
            Model::EntropyAccumulation(_) => Mode::EntropyAccumulation,
            Model::Iid { .. } => Mode::IidEstimate,
        }
    }

    /// The protocol (entropy accumulation only).
    pub fn protocol(&self) -> Option<&Protocol> {
        match &self.model {
            Model::EntropyAccumulation(p) => Some(p),
            Model::Iid { .. } => None,
        }
    }
}

/// Resolves and checks the declared parameters of a run in `mode`, before
/// its record is read. Errors name the parameter as its option (`--name`),
/// in this order: N_rounds and gamma missing, gamma outside (0, 1], N_rounds
/// 0, then the protocol ([`protocol`]; the test must be fixed), or for the
/// i.i.d. estimate eps_est missing or outside (0, 1) and `keep = alice`
/// (which applies to entropy accumulation only).
pub fn resolve_run(d: &Declared, mode: Mode) -> Result<RunParams, Error> {
    let n = need(d.rounds, "rounds")?;
    let gamma = need(d.gamma, "test-probability")?;
    if !(gamma > 0.0 && gamma <= 1.0) {
        return Err(protocol_error(format!(
            "--test-probability {gamma}: gamma must satisfy 0 < gamma <= 1"
        )));
    }
    if n == 0 {
        return Err(protocol_error("--rounds 0: N_rounds must be at least 1"));
    }
    let (model, keep, level) = match mode {
        Mode::EntropyAccumulation => {
            let p = protocol(d, false)?
                .ok_or_else(|| protocol_error("the acceptance test is not fixed"))?;
            (Model::EntropyAccumulation(p), p.keep, p.eps_ea())
        }
        Mode::IidEstimate => {
            let e = need(d.eps_est, "estimation-error")?;
            if !(e > 0.0 && e < 1.0) {
                return Err(protocol_error(format!(
                    "--estimation-error {e}: must lie strictly between 0 and 1"
                )));
            }
            if d.keep.as_deref() == Some("alice") {
                return Err(protocol_error("--keep alice applies to entropy accumulation; the i.i.d. estimate certifies the pair string"));
            }
            (Model::Iid { eps_est: e }, Keep::Pairs, e)
        }
    };
    Ok(RunParams {
        n_rounds: n,
        gamma,
        model,
        keep,
        level,
    })
}

/// The certification of one run: everything a certificate records about
/// the figure.
#[derive(Debug, Clone, PartialEq)]
pub struct Certified {
    /// Whether the run passed the test (always true for the i.i.d.
    /// estimate, which has no test).
    pub accepted: bool,
    /// The certified smooth min-entropy k in bits (0 when aborted).
    pub min_entropy_bits: u64,
    /// eps_s (0 for the i.i.d. estimate).
    pub eps_s: f64,
    /// eps_cert: eps_EA, or eps_est.
    pub eps_cert: f64,
    /// `"eps_EA"` or `"eps_est"`.
    pub eps_cert_source: &'static str,
    /// D_pub, the bits charged for the statistics declared public.
    pub disclosure_charge_bits: u64,
    /// The terms behind the figure, with the reason for 0 bits.
    pub terms: ResultTerms,
    /// The bound and its parameters (entropy accumulation).
    pub bound: Option<BoundRecord>,
    /// The record checks passed.
    pub checks: ChecksRecord,
}

/// Certifies the record summarised in `s` under the parameters `p`, with
/// the statistics `public` declared public:
///
/// 1. the record must be one the protocol could have produced
///    ([`Summary::check_protocol`] at `p.level`), else refused;
/// 2. entropy accumulation: a win fraction far above the quantum maximum is
///    refused ([`check_win_fraction`]); the run is accepted iff it passes
///    the acceptance test; `k = figure(B, D_pub + keep charge)` when
///    accepted (and a bound applies), else 0, with the reason
///    ([`ZeroReason`]); the keep charge is N_test when only Alice's bits
///    are kept;
/// 3. the i.i.d. estimate: `k = max(0, floor(H_iid))` ([`iid_estimate`]).
pub fn certify_run(p: &RunParams, s: &Summary, public: &[PublicStat]) -> Result<Certified, Error> {
    let (lo, hi) = s.check_protocol(p.gamma, p.level)?;
    let checks = ChecksRecord {
        level: p.level,
        test_rounds_range: [lo, hi],
        inputs_checked: s.has_pair_counts,
    };
    let d_pub = disclosure_charge(public, s);
    let keep = p.keep;
    let level = p.level;
    match p.model {
        Model::EntropyAccumulation(prot) => {
            check_win_fraction(s.wins, s.n_test)?;
            let acc = prot.acceptance();
            let keep_charge = match keep {
                Keep::Pairs => 0,
                Keep::Alice => s.n_test,
            };
            let charges = (d_pub + keep_charge) as f64;
            let (accepted, bits, terms, bound) = match prot.bound {
                Bound::First(e) => {
                    let res = eat_certify(&e, s, public)?;
                    let bits = if res.accepted && res.w_t > 0.0 {
                        figure(res.bound_bits, charges)
                    } else {
                        0
                    };
                    let zero = if bits > 0 {
                        None
                    } else if !res.accepted {
                        Some(ZeroReason::Aborted)
                    } else {
                        Some(res.zero_reason.unwrap_or(ZeroReason::ChargesExceedBound))
                    };
                    let applies = res.w_t > 0.0;
                    let bound = BoundRecord {
                        name: BOUND_FIRST.into(),
                        keep,
                        test: acc,
                        tangent_point: res.w_t,
                        alpha: None,
                        ceiling_k: applies.then_some(res.k),
                        keep_charge_bits: keep_charge,
                        terms: None,
                    };
                    let terms = ResultTerms {
                        bound_bits: res.bound_bits,
                        first_order_bits: Some(res.first_order_bits),
                        second_order_bits: Some(res.second_order_bits),
                        tangent_point: applies.then_some(res.w_t),
                        ceiling_k: applies.then_some(res.k),
                        margin_bits: MARGIN_BITS,
                        completeness_error: Some(acc.completeness + level),
                        win_lower_bound: None,
                        zero_reason: zero.map(|z| z.text().to_string()),
                    };
                    (res.accepted, bits, terms, bound)
                }
                Bound::Improved(i) => {
                    let accepted = acc.accepts(s.wins, s.n_test);
                    let opt = improved_optimise(&i);
                    let bits = match (&opt, accepted) {
                        (Some(t), true) => figure(t.bound_bits, charges),
                        _ => 0,
                    };
                    let zero = if bits > 0 {
                        None
                    } else if !accepted {
                        Some(ZeroReason::Aborted)
                    } else {
                        match opt {
                            None => Some(ZeroReason::ThresholdNotAboveClassical),
                            Some(t) if t.bound_bits <= 0.0 => {
                                Some(ZeroReason::SecondOrderExceedsFirstOrder)
                            }
                            Some(_) => Some(ZeroReason::ChargesExceedBound),
                        }
                    };
                    let bound = BoundRecord {
                        name: BOUND_IMPROVED.into(),
                        keep,
                        test: acc,
                        tangent_point: opt.map_or(0.0, |t| t.w_t),
                        alpha: opt.map(|t| t.alpha),
                        ceiling_k: None,
                        keep_charge_bits: keep_charge,
                        terms: opt,
                    };
                    let terms = ResultTerms {
                        bound_bits: opt.map_or(0.0, |t| t.bound_bits),
                        first_order_bits: opt.map(|t| t.first_order_bits),
                        second_order_bits: opt
                            .map(|t| t.second_order_bits + t.eps_term_bits + t.third_order_bits),
                        tangent_point: opt.map(|t| t.w_t),
                        ceiling_k: None,
                        margin_bits: MARGIN_BITS,
                        completeness_error: Some(acc.completeness + level),
                        win_lower_bound: None,
                        zero_reason: zero.map(|z| z.text().to_string()),
                    };
                    (accepted, bits, terms, bound)
                }
            };
            Ok(Certified {
                accepted,
                min_entropy_bits: bits,
                eps_s: prot.eps_s(),
                eps_cert: prot.eps_ea(),
                eps_cert_source: "eps_EA",
                disclosure_charge_bits: d_pub,
                terms,
                bound: Some(bound),
                checks,
            })
        }
        Model::Iid { eps_est } => {
            let (bits, w_l) = iid_estimate(p.n_rounds, s.n_test, s.wins, eps_est, d_pub)?;
            let bound = bits + d_pub as f64;
            let k = if bits > 0.0 { bits.floor() as u64 } else { 0 };
            let zero = (k == 0).then(|| {
                if bound <= 0.0 {
                    "the lower confidence bound on the win probability does not exceed 3/4"
                } else {
                    "the charge for published statistics exceeds the bound"
                }
                .to_string()
            });
            Ok(Certified {
                accepted: true,
                min_entropy_bits: k,
                eps_s: 0.0,
                eps_cert: eps_est,
                eps_cert_source: "eps_est",
                disclosure_charge_bits: d_pub,
                terms: ResultTerms {
                    bound_bits: bound,
                    first_order_bits: None,
                    second_order_bits: None,
                    tangent_point: None,
                    ceiling_k: None,
                    margin_bits: 0.0,
                    completeness_error: None,
                    win_lower_bound: Some(w_l),
                    zero_reason: zero,
                },
                bound: None,
                checks,
            })
        }
    }
}

/// The values of the statistics declared public (spec 3.9), each as the
/// summary holds it.
pub fn public_values(public: &[PublicStat], s: &Summary) -> PublicValues {
    PublicValues {
        wins: public.contains(&PublicStat::Wins).then_some(s.wins),
        s_hat: if public.contains(&PublicStat::SHat) {
            s.s_hat
        } else {
            None
        },
        pair_counts: public
            .iter()
            .filter_map(|p| match *p {
                PublicStat::PairCount(x, y) => Some([
                    x as u64,
                    y as u64,
                    s.pair_counts[x as usize][y as usize],
                    s.same_counts[x as usize][y as usize],
                ]),
                _ => None,
            })
            .collect(),
    }
}

/// The labels shown with a figure and recorded in its certificate: the
/// setup, the i.i.d. label, the counts label when the record itself was
/// not read (`from_counts`), and each input warning.
pub fn labels(setup: Setup, mode: Mode, from_counts: bool, warnings: &[String]) -> Vec<String> {
    let mut labels = vec![setup.label().to_string()];
    if mode == Mode::IidEstimate {
        labels.push(IID_LABEL.to_string());
    }
    if from_counts {
        labels.push(COUNTS_LABEL.into());
    }
    for w in warnings {
        labels.push(format!("warning: {w}"));
    }
    labels
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The spec 3.7 worked example (`spec/certification.md`): N = 1e8,
    /// gamma = 0.1, w_exp = 0.84, delta = 0.002, eps_s = eps_EA = 1e-6,
    /// first-2016 bound; planning figure 52 402 723 bits with W published,
    /// charged ceil(log2(N + 1)) = 27 bits there.
    fn worked_example(keep: &str) -> Declared {
        Declared {
            rounds: Some(100_000_000),
            gamma: Some(0.1),
            w_exp: Some(0.84),
            delta: Some(0.002),
            eps_s: Some(1e-6),
            eps_ea: Some(1e-6),
            bound: Some(BOUND_FIRST.into()),
            keep: Some(keep.into()),
            ..Declared::default()
        }
    }

    fn run(d: &Declared, mode: Mode) -> RunParams {
        resolve_run(d, mode).unwrap()
    }

    #[test]
    fn first_bound_accepts_and_charges_what_is_published() {
        let p = run(&worked_example("pairs"), Mode::EntropyAccumulation);
        assert_eq!(p.level, 1e-6);
        // N_test = gamma N exactly, W = w_exp N_test: above the threshold
        // gamma N (w_exp - delta) = 8 380 000.
        let s = Summary::from_counts(100_000_000, 10_000_000, 8_400_000);
        let c = certify_run(&p, &s, &[PublicStat::Wins]).unwrap();
        assert!(c.accepted);
        // W takes N_test + 1 values: ceil(log2(1e7 + 1)) = 24 bits, 3 fewer
        // than the plan charges, so the figure is the spec's plus 3 (the
        // bound B does not depend on W in the tolerance form).
        assert_eq!(c.disclosure_charge_bits, 24);
        assert_eq!(c.min_entropy_bits, 52_402_723 + 3);
        assert_eq!(c.terms.zero_reason, None);
        assert_eq!(
            (c.eps_s, c.eps_cert, c.eps_cert_source),
            (1e-6, 1e-6, "eps_EA")
        );
        // Completeness exp(-2 N gamma^2 delta^2) = exp(-8) (spec 3.5) plus
        // the record checks' level 1e-6, by hand: 3.364626279e-4.
        let ce = c.terms.completeness_error.unwrap();
        assert!((ce - 3.364_626_279_025_119e-4).abs() < 1e-15, "{ce}");
        let b = c.bound.unwrap();
        assert_eq!(b.name, BOUND_FIRST);
        assert_eq!(b.keep_charge_bits, 0);
        assert!(b.tangent_point > 0.75 && b.ceiling_k.is_some());
        assert_eq!(c.checks.level, 1e-6);
        assert!(!c.checks.inputs_checked);
        let [lo, hi] = c.checks.test_rounds_range;
        assert!(lo < 10_000_000 && 10_000_000 < hi);

        // Nothing published: 24 bits more.
        let none = certify_run(&p, &s, &[]).unwrap();
        assert_eq!(none.min_entropy_bits, 52_402_723 + 27);
    }

    #[test]
    fn keeping_alices_bits_costs_n_test() {
        let p = run(&worked_example("alice"), Mode::EntropyAccumulation);
        assert_eq!(p.keep, Keep::Alice);
        let s = Summary::from_counts(100_000_000, 10_000_000, 8_400_000);
        let c = certify_run(&p, &s, &[PublicStat::Wins]).unwrap();
        assert_eq!(c.min_entropy_bits, 52_402_726 - 10_000_000);
        assert_eq!(c.bound.unwrap().keep_charge_bits, 10_000_000);
    }

    #[test]
    fn a_failed_test_aborts_with_zero_bits() {
        let p = run(&worked_example("pairs"), Mode::EntropyAccumulation);
        // One win below the threshold 8 380 000.
        let s = Summary::from_counts(100_000_000, 10_000_000, 8_379_999);
        let c = certify_run(&p, &s, &[PublicStat::Wins]).unwrap();
        assert!(!c.accepted);
        assert_eq!(c.min_entropy_bits, 0);
        assert_eq!(
            c.terms.zero_reason.as_deref(),
            Some(ZeroReason::Aborted.text())
        );
        // The certificate of an aborted run still records the bound.
        assert!(c.bound.is_some());

        // The improved bound aborts the same way, and with a threshold at
        // most 3/4 certifies nothing even when the test passes.
        let mut d = worked_example("pairs");
        d.bound = None;
        d.test = Some("wins".into());
        let c = certify_run(&run(&d, Mode::EntropyAccumulation), &s, &[]).unwrap();
        assert!(!c.accepted && c.min_entropy_bits == 0);
        assert_eq!(c.bound.as_ref().unwrap().name, BOUND_IMPROVED);
        d.w_exp = Some(0.751);
        let s = Summary::from_counts(100_000_000, 10_000_000, 8_400_000);
        let c = certify_run(&run(&d, Mode::EntropyAccumulation), &s, &[]).unwrap();
        assert!(c.accepted);
        assert_eq!(c.min_entropy_bits, 0);
        assert_eq!(
            c.terms.zero_reason.as_deref(),
            Some(ZeroReason::ThresholdNotAboveClassical.text())
        );
    }

    #[test]
    fn improved_bound_passing_run_certifies_less_than_n() {
        let mut d = worked_example("pairs");
        d.bound = None;
        d.test = Some("wins".into());
        let p = run(&d, Mode::EntropyAccumulation);
        let s = Summary::from_counts(100_000_000, 10_000_000, 8_400_000);
        let c = certify_run(&p, &s, &[PublicStat::Wins]).unwrap();
        assert!(c.accepted);
        // Positive, and below N r(w_acc) <= N (one bit per round at most
        // from the pair string, spec 2).
        assert!(c.min_entropy_bits > 0 && c.min_entropy_bits < 100_000_000);
        let t = c.bound.unwrap().terms.unwrap();
        assert_eq!(
            c.min_entropy_bits,
            (t.bound_bits - 1.0 - 24.0).floor() as u64
        );
    }

    #[test]
    fn records_the_protocol_could_not_produce_are_refused() {
        let p = run(&worked_example("pairs"), Mode::EntropyAccumulation);
        // Half the rounds flagged as tests with gamma = 0.1.
        let s = Summary::from_counts(100_000_000, 50_000_000, 40_000_000);
        let e = certify_run(&p, &s, &[]).unwrap_err();
        assert!(matches!(e.kind(), ErrorKind::Refused { .. }), "{e}");
        // A win fraction far above cos^2(pi/8).
        let s = Summary::from_counts(100_000_000, 10_000_000, 9_000_000);
        let e = certify_run(&p, &s, &[]).unwrap_err();
        assert!(matches!(e.kind(), ErrorKind::AboveQuantum { .. }), "{e}");
    }

    #[test]
    fn iid_estimate_follows_spec_4() {
        let d = Declared {
            rounds: Some(1_000_000),
            gamma: Some(0.1),
            eps_est: Some(1e-6),
            ..Declared::default()
        };
        let p = run(&d, Mode::IidEstimate);
        assert_eq!(p.mode(), Mode::IidEstimate);
        assert!(p.protocol().is_none());
        let s = Summary::from_counts(1_000_000, 100_000, 85_000);
        let c = certify_run(&p, &s, &[PublicStat::Wins]).unwrap();
        // Computed by hand (python3, f64) from spec 4:
        // w_L = 0.85 - sqrt(ln(1e6) / 2e5) = 0.841688709,
        // S_L = 8 w_L - 4, H = N [1 - log2(1 + sqrt(2 - S_L^2/4))]
        // = 552905.197, less ceil(log2(1e5 + 1)) = 17: floor 552888.
        assert!(c.accepted);
        assert_eq!(c.disclosure_charge_bits, 17);
        assert_eq!(c.min_entropy_bits, 552_888);
        assert!((c.terms.bound_bits - 552_905.197_330_302_6).abs() < 1e-6);
        assert!((c.terms.win_lower_bound.unwrap() - 0.841_688_709_318_654_5).abs() < 1e-12);
        assert_eq!(
            (c.eps_s, c.eps_cert, c.eps_cert_source),
            (0.0, 1e-6, "eps_est")
        );
        assert!(c.bound.is_none());
        // At the classical maximum nothing is certified.
        let s = Summary::from_counts(1_000_000, 100_000, 75_000);
        let c = certify_run(&p, &s, &[]).unwrap();
        assert_eq!(c.min_entropy_bits, 0);
        assert!(c.terms.zero_reason.unwrap().contains("does not exceed 3/4"));
    }

    #[test]
    fn parameters_are_checked_before_the_record() {
        let mut d = worked_example("pairs");
        d.gamma = Some(0.0);
        let e = resolve_run(&d, Mode::EntropyAccumulation).unwrap_err();
        assert_eq!(
            e.to_string(),
            "--test-probability 0: gamma must satisfy 0 < gamma <= 1"
        );
        let mut d = worked_example("pairs");
        d.rounds = Some(0);
        let e = resolve_run(&d, Mode::EntropyAccumulation).unwrap_err();
        assert_eq!(e.to_string(), "--rounds 0: N_rounds must be at least 1");
        let mut d = worked_example("pairs");
        d.rounds = None;
        let e = resolve_run(&d, Mode::EntropyAccumulation).unwrap_err();
        assert!(e.to_string().starts_with("--rounds is missing"), "{e}");
        // The improved bound needs the test fixed.
        let mut d = worked_example("pairs");
        d.bound = None;
        d.delta = None;
        d.eps_c = Some(1e-3);
        let e = resolve_run(&d, Mode::EntropyAccumulation).unwrap_err();
        assert!(e.to_string().starts_with("--test is missing"), "{e}");
        // i.i.d.: eps_est required, inside (0, 1), pairs only.
        let mut d = Declared {
            rounds: Some(1000),
            gamma: Some(0.5),
            ..Declared::default()
        };
        let e = resolve_run(&d, Mode::IidEstimate).unwrap_err();
        assert!(
            e.to_string().starts_with("--estimation-error is missing"),
            "{e}"
        );
        d.eps_est = Some(1.0);
        let e = resolve_run(&d, Mode::IidEstimate).unwrap_err();
        assert_eq!(
            e.to_string(),
            "--estimation-error 1: must lie strictly between 0 and 1"
        );
        d.eps_est = Some(1e-3);
        d.keep = Some("alice".into());
        let e = resolve_run(&d, Mode::IidEstimate).unwrap_err();
        assert!(e.to_string().starts_with("--keep alice applies"), "{e}");
        d.keep = None;
        let p = resolve_run(&d, Mode::IidEstimate).unwrap();
        assert_eq!((p.keep, p.level), (Keep::Pairs, 1e-3));
    }

    #[test]
    fn public_values_and_labels() {
        let mut s = Summary::from_counts(100, 40, 30);
        s.pair_counts = [[10, 11], [9, 10]];
        s.same_counts = [[8, 9], [7, 2]];
        s.s_hat = Some(2.5);
        s.input_warnings = vec!["odd".into()];
        let v = public_values(&[PublicStat::PairCount(1, 0), PublicStat::Wins], &s);
        assert_eq!(v.wins, Some(30));
        assert_eq!(v.s_hat, None);
        assert_eq!(v.pair_counts, vec![[1, 0, 9, 7]]);
        assert_eq!(public_values(&[PublicStat::SHat], &s).s_hat, Some(2.5));
        assert_eq!(public_values(&[], &s), PublicValues::default());

        let l = labels(Setup::Shielded, Mode::IidEstimate, true, &s.input_warnings);
        assert_eq!(
            l,
            vec![
                Setup::Shielded.label().to_string(),
                IID_LABEL.to_string(),
                COUNTS_LABEL.to_string(),
                "warning: odd".to_string()
            ]
        );
        let l = labels(Setup::Separated, Mode::EntropyAccumulation, false, &[]);
        assert_eq!(l, vec![Setup::Separated.label().to_string()]);
    }
}
