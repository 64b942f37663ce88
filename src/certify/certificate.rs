//! The certificate: the document that hands a certified smooth min-entropy
//! to the planner and the extractor (`spec/certification.md` 3.8 and 3.9;
//! `spec/hashing-and-composition.md` 4.1, 4.6 and 5).
//!
//! # Schema `sluice-certificate/2`
//!
//! One JSON object; unknown fields are refused. Numbers are JSON numbers
//! (integers for counts and bits). Version 1 documents (no `bound`,
//! `checks`, `record.wins`) are still read: they were written with the
//! first-order bound (`first-2016`) for both outputs, and are recomputed as
//! such.
//!
//! | field | meaning |
//! | --- | --- |
//! | `schema` | `"sluice-certificate/2"` (or `/1`, read only) |
//! | `mode` | `"entropy-accumulation"` (spec 3) or `"iid-estimate"` (spec 4, the weaker model) |
//! | `setup` | `"separated"`, `"shielded"` or `"single-device"` |
//! | `device_independent` | false exactly for `"single-device"` |
//! | `labels` | plain-language labels that must be shown with the figure (setup; i.i.d.; "not device-independent") |
//! | `accepted` | whether the run passed the test; false means abort: `min_entropy_bits` is 0 and nothing may be extracted |
//! | `string.length_bits` | n, the length of the certified bit string: `2 N_rounds` (spec 3.8) |
//! | `string.digest` | data digest of that string (`spec/conventions.md`: BLAKE3 of the 8-byte little-endian bit length and the packed MSB-first bytes), 64 lower-case hex digits |
//! | `string.layout` | `"a1 b1 a2 b2 ... aN bN"`: bit `2(i-1)` is a_i, bit `2i-1` is b_i; or `"a1 a2 ... aN"` (Alice's bits only, N bits) |
//! | `min_entropy_bits` | k: the certified smooth min-entropy of the whole string, already reduced by the charge for every statistic in `public_statistics` and by the 1-bit margin, floored |
//! | `eps_s` | smoothing parameter of k (0 for the i.i.d. estimate) |
//! | `eps_cert` | the certification's own failure term, counted once per certificate in eps_total (hashing spec 5) |
//! | `eps_cert_source` | `"eps_EA"` (entropy accumulation) or `"eps_est"` (i.i.d. estimate) |
//! | `blocks` | always 1: the string must be hashed as one block |
//! | `per_block_bounds` | always false: the bound is global, so it gives no per-block bounds (hashing spec 4.1) |
//! | `public_statistics` | the statistics counted as public: `"wins"`, `"s-hat"`, `{"pair-count": [x, y]}` |
//! | `public_values` | the values of exactly those statistics (others are never written here) |
//! | `disclosure_charge_bits` | D_pub, subtracted from k (spec 3.9) |
//! | `parameters` | the protocol parameters fixed before the run, and where they came from (`source`: `"file"` with `file_digest` = BLAKE3 hex of the parameters file, or `"options"`) |
//! | `record` | the record: `form` (`"round-file"` or `"counts"`), `file_digest` (BLAKE3 hex of the file as stored), `file_bytes`, `compressed`, `rounds`, `test_rounds`, `wins` (private, for recomputation), `pair_counts` (private, when known) |
//! | `bound` | the bound and every parameter needed to recompute k: `name` (`"improved-2019"` or `"first-2016"`), `keep` (`"pairs"` or `"alice"`), `test` (`kind` `"wins"` or `"score"`, `nu`, `threshold`, `tail`, `completeness`), `tangent_point`, `alpha` (improved), `ceiling_k` (first), `keep_charge_bits` (N_test for Alice's bits only), `terms` (improved: every term of B) |
//! | `checks` | the consistency checks of the record with the protocol: `level` (the failure probability each allows honest devices), `test_rounds_range` (the N_test range the declared gamma allows), `inputs_checked` (false for counts) |
//! | `result` | the terms behind k: `bound_bits` (B), `first_order_bits`, `second_order_bits`, `tangent_point`, `ceiling_k`, `margin_bits`, `completeness_error`, `win_lower_bound` (i.i.d.), `zero_reason` |
//! | `tool` | the program and version that wrote it |
//!
//! The certificate holds digests of the raw data: it belongs in the private
//! record, like the raw data themselves (`spec/conventions.md`, data
//! digests). Optional fields that do not apply are `null`.

use super::improved::{figure, improved_bound_at, Acceptance, ImprovedParams, ImprovedTerms, Keep};
use super::{Error, ErrorKind, Mode, PublicStat, Setup};
use serde::{Deserialize, Serialize};

/// The schema name and version this module writes and reads.
pub const SCHEMA: &str = "sluice-certificate/2";

/// The previous version, still read (first-order bound, both outputs).
pub const SCHEMA_V1: &str = "sluice-certificate/1";

/// The layout of the certified string (spec 3.8).
pub const PAIR_LAYOUT: &str = "a1 b1 a2 b2 ... aN bN";

/// The layout of Alice's bits only.
pub const ALICE_LAYOUT: &str = "a1 a2 ... aN";

/// The label of a certificate computed from counts typed in by the
/// operator (the record itself was never read).
pub const COUNTS_LABEL: &str = "unchecked: computed from counts supplied by the operator; the round record itself was not read, so nothing ties this figure to the raw string";

/// The certified bit string.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CertifiedString {
    /// Length n in bits.
    pub length_bits: u64,
    /// Data digest (lower-case hex).
    pub digest: String,
    /// Bit layout, [`PAIR_LAYOUT`].
    pub layout: String,
}

/// Protocol parameters as fixed before the run (spec 3.1).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Parameters {
    /// N_rounds.
    pub rounds: u64,
    /// gamma.
    pub test_probability: f64,
    /// w_exp (entropy accumulation).
    pub expected_win: Option<f64>,
    /// delta (entropy accumulation).
    pub tolerance: Option<f64>,
    /// eps_s (entropy accumulation).
    pub smoothing: Option<f64>,
    /// eps_EA (entropy accumulation).
    pub acceptance: Option<f64>,
    /// eps_est (i.i.d. estimate).
    pub estimation_error: Option<f64>,
    /// `"file"` or `"options"`.
    pub source: String,
    /// BLAKE3 hex of the parameters file, when `source` is `"file"`.
    pub file_digest: Option<String>,
}

/// The record the figure was computed from.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RecordInfo {
    /// `"round-file"` or `"counts"`.
    pub form: String,
    /// BLAKE3 hex of the file as stored.
    pub file_digest: Option<String>,
    /// Size of the file as stored.
    pub file_bytes: Option<u64>,
    /// Whether it was gzip-compressed.
    pub compressed: bool,
    /// N_rounds in the record.
    pub rounds: u64,
    /// N_test.
    pub test_rounds: u64,
    /// W (private: for recomputation; `null` in version 1).
    #[serde(default)]
    pub wins: Option<u64>,
    /// `[x][y]` test rounds with inputs (x, y), when the rounds were read.
    #[serde(default)]
    pub pair_counts: Option<[[u64; 2]; 2]>,
}

/// The bound and every parameter that fixes k (module docs).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BoundRecord {
    /// `"improved-2019"` or `"first-2016"`.
    pub name: String,
    /// Which string is certified.
    pub keep: Keep,
    /// The acceptance test fixed before the run.
    pub test: Acceptance,
    /// Tangent point w_t (0 when none applies).
    pub tangent_point: f64,
    /// alpha (improved bound).
    pub alpha: Option<f64>,
    /// Ceiling k (first-order bound).
    pub ceiling_k: Option<u64>,
    /// Bits charged for keeping Alice's bits only (N_test), else 0.
    pub keep_charge_bits: u64,
    /// Every term of B (improved bound).
    pub terms: Option<ImprovedTerms>,
}

/// The checks of the record against the protocol (issue: misuse paths).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ChecksRecord {
    /// Probability that honest devices fail each check (added to the
    /// completeness error).
    pub level: f64,
    /// The range of N_test that the declared gamma allows at that level.
    pub test_rounds_range: [u64; 2],
    /// Whether the test inputs were checked for uniformity (false for
    /// counts).
    pub inputs_checked: bool,
}

/// Bound names.
pub const BOUND_IMPROVED: &str = "improved-2019";
/// The first-order bound of spec 3.
pub const BOUND_FIRST: &str = "first-2016";

/// The values of the statistics declared public.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct PublicValues {
    /// W, if public.
    pub wins: Option<u64>,
    /// S_hat, if public.
    pub s_hat: Option<f64>,
    /// `[x, y, N_xy, N_same_xy]` for each pair count declared public.
    pub pair_counts: Vec<[u64; 4]>,
}

/// The terms behind the figure.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ResultTerms {
    /// B before margin, charge and floor (entropy accumulation), or the
    /// i.i.d. bound before the charge.
    pub bound_bits: f64,
    /// First-order term.
    pub first_order_bits: Option<f64>,
    /// Second-order term.
    pub second_order_bits: Option<f64>,
    /// Tangent point w_t.
    pub tangent_point: Option<f64>,
    /// Ceiling k at w_t.
    pub ceiling_k: Option<u64>,
    /// Rounding margin subtracted (bits).
    pub margin_bits: f64,
    /// Completeness error eps_c.
    pub completeness_error: Option<f64>,
    /// w_L of the i.i.d. estimate.
    pub win_lower_bound: Option<f64>,
    /// Why the figure is 0, if it is.
    pub zero_reason: Option<String>,
}

/// A certificate (see the module docs for the schema).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Certificate {
    /// [`SCHEMA`].
    pub schema: String,
    /// Model of the figure.
    pub mode: Mode,
    /// Declared setup.
    pub setup: Setup,
    /// False for a single-device setup.
    pub device_independent: bool,
    /// Labels to show with the figure.
    pub labels: Vec<String>,
    /// Passed the test.
    pub accepted: bool,
    /// The certified string.
    pub string: CertifiedString,
    /// k in bits.
    pub min_entropy_bits: u64,
    /// eps_s.
    pub eps_s: f64,
    /// eps_cert.
    pub eps_cert: f64,
    /// `"eps_EA"` or `"eps_est"`.
    pub eps_cert_source: String,
    /// Always 1.
    pub blocks: u64,
    /// Always false.
    pub per_block_bounds: bool,
    /// Statistics counted as public.
    pub public_statistics: Vec<PublicStat>,
    /// Their values.
    pub public_values: PublicValues,
    /// D_pub.
    pub disclosure_charge_bits: u64,
    /// Protocol parameters.
    pub parameters: Parameters,
    /// The record.
    pub record: RecordInfo,
    /// The terms.
    pub result: ResultTerms,
    /// Program and version.
    pub tool: String,
    /// The bound and its parameters (`null` in version 1: first-2016).
    #[serde(default)]
    pub bound: Option<BoundRecord>,
    /// The record checks (`null` in version 1).
    #[serde(default)]
    pub checks: Option<ChecksRecord>,
}

/// What an extractor takes from a certificate (spec 3.8): hash exactly the
/// string named by `digest` and `n` bits, as one block, with min-entropy
/// `k`, smoothing `eps_s`, and `eps_cert` counted once in eps_total.
#[derive(Debug, Clone, PartialEq)]
pub struct ExtractorInput {
    /// Input length n in bits (`2 N_rounds`).
    pub n: u64,
    /// Certified smooth min-entropy k in bits.
    pub k: u64,
    /// Smoothing parameter.
    pub eps_s: f64,
    /// Certification failure term, once per certificate.
    pub eps_cert: f64,
    /// Data digest of the string.
    pub digest: String,
}

fn invalid(field: &str, msg: String) -> Error {
    Error::new(ErrorKind::Certificate(msg)).in_field(field)
}

fn is_hex_digest(s: &str) -> bool {
    s.len() == 64
        && s.bytes()
            .all(|c| c.is_ascii_digit() || (b'a'..=b'f').contains(&c))
}

impl Certificate {
    /// Parses and validates a certificate; errors name the field.
    pub fn from_json_str(text: &str) -> Result<Certificate, Error> {
        let c: Certificate = serde_json::from_str(text).map_err(|e| {
            Error::new(ErrorKind::Certificate(format!(
                "not a {SCHEMA} document: {e} (line {}, column {})",
                e.line(),
                e.column()
            )))
        })?;
        c.validate()?;
        Ok(c)
    }

    /// The inputs for the extractor, or an error naming `accepted` or
    /// `min_entropy_bits` when there is nothing to extract (an aborted run
    /// outputs nothing; spec 3.1).
    pub fn extractor_input(&self) -> Result<ExtractorInput, Error> {
        self.check_figure()?;
        if !self.accepted {
            return Err(invalid(
                "accepted",
                "false: the run aborted, so the protocol outputs nothing".into(),
            ));
        }
        if self.min_entropy_bits == 0 {
            return Err(invalid(
                "min_entropy_bits",
                "0: the certificate certifies no entropy, so nothing can be extracted".into(),
            ));
        }
        Ok(ExtractorInput {
            n: self.string.length_bits,
            k: self.min_entropy_bits,
            eps_s: self.eps_s,
            eps_cert: self.eps_cert,
            digest: self.string.digest.clone(),
        })
    }

    /// The string kept: Alice's bits or both outputs (version 1: both).
    pub fn keep(&self) -> Keep {
        self.bound.as_ref().map_or(Keep::Pairs, |b| b.keep)
    }

    /// The bound's name (version 1: `first-2016`).
    pub fn bound_name(&self) -> &str {
        self.bound.as_ref().map_or(BOUND_FIRST, |b| b.name.as_str())
    }

    /// Recomputes the figure from the certificate's own parameters and
    /// counts, the way `sluice certify` computed it: the largest
    /// `min_entropy_bits` these support. Errors name a field that disagrees
    /// with the others.
    pub fn recompute(&self) -> Result<u64, Error> {
        use super::chsh::{hmin_single, s_from_win};
        use super::eat::{disclosure_charge, eat_plan, EatParams};
        use super::record::Summary;
        let p = &self.parameters;
        let n_test = self.record.test_rounds;
        // W: private in version 2, public by default in version 1. Without
        // it the acceptance cannot be re-checked: refused.
        let Some(wins) = self.record.wins.or(self.public_values.wins) else {
            return Err(invalid(
                "record.wins",
                "missing: without the win count the acceptance and the figure cannot be recomputed; run sluice certify again on the record (this version keeps the private counts in the certificate)".into(),
            ));
        };
        if wins > n_test {
            return Err(invalid(
                "record.wins",
                format!("{wins} wins in {n_test} test rounds"),
            ));
        }
        let mut s = Summary::from_counts(p.rounds, n_test, wins);
        match self.record.pair_counts {
            Some(pc) => {
                s.pair_counts = pc;
                s.has_pair_counts = true;
            }
            None => {
                for pc in &self.public_values.pair_counts {
                    s.pair_counts[pc[0] as usize & 1][pc[1] as usize & 1] = pc[2];
                }
            }
        }
        if self.public_statistics.contains(&PublicStat::SHat) && self.record.pair_counts.is_none() {
            return Err(invalid(
                "record.pair_counts",
                "missing: S_hat is public, so its charge needs the four pair counts".into(),
            ));
        }
        let d_min = disclosure_charge(&self.public_statistics, &s);
        if self.disclosure_charge_bits < d_min {
            return Err(invalid(
                "disclosure_charge_bits",
                format!(
                    "{} bits, but publishing {} costs {d_min} bits (see README, \"From a Bell-test record to extracted bits\")",
                    self.disclosure_charge_bits,
                    self.public_statistics
                        .iter()
                        .map(|p| p.name())
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            ));
        }
        if let (Some(w), Some(pw)) = (self.record.wins, self.public_values.wins) {
            if w != pw {
                return Err(invalid(
                    "public_values.wins",
                    format!("{pw}, but the record holds {w} wins"),
                ));
            }
        }
        if let Some(c) = &self.checks {
            let [lo, hi] = c.test_rounds_range;
            if n_test < lo || n_test > hi {
                return Err(invalid(
                    "record.test_rounds",
                    format!("{n_test} lies outside the range {lo}..={hi} that the declared gamma allows"),
                ));
            }
        }
        let d = self.disclosure_charge_bits as f64;
        let bits = match self.mode {
            Mode::IidEstimate => {
                let w_l = self.result.win_lower_bound.ok_or_else(|| {
                    invalid(
                        "result.win_lower_bound",
                        "missing for an i.i.d. estimate".into(),
                    )
                })?;
                let eps = p.estimation_error.unwrap_or(self.eps_cert);
                if eps != self.eps_cert {
                    return Err(invalid(
                        "eps_cert",
                        format!(
                            "{:e}, but the parameters give eps_est = {eps:e}",
                            self.eps_cert
                        ),
                    ));
                }
                let w = wins;
                if n_test == 0 {
                    return Err(invalid("record.test_rounds", "0 test rounds".into()));
                }
                let want = super::iid::iid_win_lower_bound(n_test, w, eps);
                if w_l > want + 1e-12 {
                    return Err(invalid(
                        "result.win_lower_bound",
                        format!("{w_l}, but {w} wins in {n_test} test rounds give {want}"),
                    ));
                }
                let h = p.rounds as f64 * hmin_single(s_from_win(w_l)) - d;
                if h > 0.0 {
                    h.floor() as u64
                } else {
                    0
                }
            }
            Mode::EntropyAccumulation => {
                let (Some(eps_s), Some(eps_ea)) = (p.smoothing, p.acceptance) else {
                    return Err(invalid(
                        "parameters",
                        "smoothing and acceptance are needed to recompute the figure".into(),
                    ));
                };
                if self.eps_s != eps_s {
                    return Err(invalid(
                        "eps_s",
                        format!(
                            "{:e}, but the parameters give smoothing {eps_s:e}",
                            self.eps_s
                        ),
                    ));
                }
                if self.eps_cert != eps_ea {
                    return Err(invalid(
                        "eps_cert",
                        format!(
                            "{:e}, but the parameters give acceptance eps_EA {eps_ea:e}",
                            self.eps_cert
                        ),
                    ));
                }
                let keep_charge = match &self.bound {
                    Some(b) => {
                        let want = match b.keep {
                            Keep::Pairs => 0,
                            Keep::Alice => n_test,
                        };
                        if b.keep_charge_bits != want {
                            return Err(invalid(
                                "bound.keep_charge_bits",
                                format!(
                                    "{}, but keeping {} charges {want}",
                                    b.keep_charge_bits,
                                    b.keep.name()
                                ),
                            ));
                        }
                        want as f64
                    }
                    None => 0.0,
                };
                let b_bits = match self.bound.as_ref().map(|b| (b.name.as_str(), b)) {
                    None | Some((BOUND_FIRST, _)) => {
                        let (Some(w_exp), Some(delta)) = (p.expected_win, p.tolerance) else {
                            return Err(invalid(
                                "parameters",
                                "expected_win and tolerance are needed by the first-order bound"
                                    .into(),
                            ));
                        };
                        let ep = EatParams {
                            n_rounds: p.rounds,
                            gamma: p.test_probability,
                            w_exp,
                            delta,
                            eps_s,
                            eps_ea,
                        };
                        if let (Some(w), Some(b)) = (self.record.wins, &self.bound) {
                            if (w as f64 >= ep.threshold_wins()) != b.test.accepts(w, n_test) {
                                return Err(invalid(
                                    "bound.test",
                                    "the threshold does not match the tolerance".into(),
                                ));
                            }
                        }
                        let r = eat_plan(&ep)?;
                        if r.w_t > 0.0 {
                            r.bound_bits
                        } else {
                            0.0
                        }
                    }
                    Some((BOUND_IMPROVED, b)) => {
                        let alpha = b
                            .alpha
                            .ok_or_else(|| invalid("bound.alpha", "missing".into()))?;
                        if !(alpha > 1.0
                            && alpha < 2.0
                            && b.tangent_point > 0.75
                            && b.tangent_point < 1.0)
                        {
                            return Err(invalid(
                                "bound.alpha",
                                format!("alpha {alpha} and tangent point {} must lie in (1, 2) and (3/4, 1)", b.tangent_point),
                            ));
                        }
                        let ip = ImprovedParams {
                            n_rounds: p.rounds,
                            gamma: p.test_probability,
                            eps_s,
                            eps_ea,
                            acceptance: b.test,
                        };
                        ip.validate()?;
                        improved_bound_at(&ip, b.tangent_point, alpha).bound_bits
                    }
                    Some((other, _)) => {
                        return Err(invalid(
                            "bound.name",
                            format!(
                            "{other:?}: this version knows {BOUND_IMPROVED:?} and {BOUND_FIRST:?}"
                        ),
                        ))
                    }
                };
                if let Some(b) = &self.bound {
                    let w = wins;
                    if b.test.accepts(w, n_test) != self.accepted {
                        return Err(invalid(
                            "accepted",
                            format!(
                                "{}, but {w} wins in {n_test} test rounds {} the test",
                                self.accepted,
                                if b.test.accepts(w, n_test) {
                                    "pass"
                                } else {
                                    "fail"
                                }
                            ),
                        ));
                    }
                }
                figure(b_bits, d + keep_charge)
            }
        };
        Ok(if self.accepted { bits } else { 0 })
    }

    /// Refuses a certificate whose `min_entropy_bits` exceeds what its own
    /// parameters and counts give ([`Certificate::recompute`]).
    pub fn check_figure(&self) -> Result<(), Error> {
        let k = self.recompute()?;
        if self.min_entropy_bits > k {
            return Err(invalid(
                "min_entropy_bits",
                format!(
                    "{} bits claimed, but the certificate's own parameters and counts give {k}: it was edited or is corrupt; run sluice certify again",
                    self.min_entropy_bits
                ),
            ));
        }
        Ok(())
    }

    /// The certificate as pretty JSON.
    pub fn to_json_string(&self) -> String {
        serde_json::to_string_pretty(self).expect("a certificate always serialises")
    }

    /// Checks the rules of the schema (see the module docs).
    pub fn validate(&self) -> Result<(), Error> {
        if self.schema != SCHEMA && self.schema != SCHEMA_V1 {
            return Err(invalid(
                "schema",
                format!(
                    "{:?} is not supported; this version reads {SCHEMA:?}",
                    self.schema
                ),
            ));
        }
        if self.device_independent != self.setup.device_independent() {
            return Err(invalid(
                "device_independent",
                format!(
                    "{} does not match the setup {:?}",
                    self.device_independent, self.setup
                ),
            ));
        }
        if self.setup == Setup::SingleDevice
            && !self
                .labels
                .iter()
                .any(|l| l.contains("not device-independent"))
        {
            return Err(invalid(
                "labels",
                "a single-device certificate must carry the label \"not device-independent\""
                    .into(),
            ));
        }
        if !is_hex_digest(&self.string.digest) {
            return Err(invalid(
                "string.digest",
                format!("{:?} is not 64 lower-case hex digits", self.string.digest),
            ));
        }
        let keep = self.keep();
        let layout = match keep {
            Keep::Pairs => PAIR_LAYOUT,
            Keep::Alice => ALICE_LAYOUT,
        };
        if self.string.layout != layout {
            return Err(invalid(
                "string.layout",
                format!(
                    "{:?}: the string kept ({}) has the layout {layout:?}",
                    self.string.layout,
                    keep.name()
                ),
            ));
        }
        if self.string.length_bits != keep.string_bits(self.parameters.rounds) {
            return Err(invalid(
                "string.length_bits",
                format!(
                    "{} bits, but the certified string {layout} of {} rounds has {}",
                    self.string.length_bits,
                    self.parameters.rounds,
                    keep.string_bits(self.parameters.rounds)
                ),
            ));
        }
        if self.record.form == "counts" && !self.labels.iter().any(|l| l == COUNTS_LABEL) {
            return Err(invalid(
                "labels",
                "a certificate computed from counts must carry the \"unchecked\" label".into(),
            ));
        }
        if self.record.rounds != self.parameters.rounds {
            return Err(invalid(
                "record.rounds",
                format!(
                    "{} rounds, but the parameters fix {}",
                    self.record.rounds, self.parameters.rounds
                ),
            ));
        }
        // At most one bit per round (spec 5 row 6: g <= 1, f_min <= 1).
        if self.min_entropy_bits > self.parameters.rounds {
            return Err(invalid(
                "min_entropy_bits",
                format!(
                    "{} bits exceeds the {} rounds (at most 1 bit per round)",
                    self.min_entropy_bits, self.parameters.rounds
                ),
            ));
        }
        if !self.accepted && self.min_entropy_bits != 0 {
            return Err(invalid(
                "min_entropy_bits",
                format!(
                    "{} bits for an aborted run (must be 0)",
                    self.min_entropy_bits
                ),
            ));
        }
        match self.mode {
            Mode::EntropyAccumulation => {
                if !(self.eps_s > 0.0 && self.eps_s < 1.0) {
                    return Err(invalid("eps_s", format!("{} is not in (0, 1)", self.eps_s)));
                }
                if self.eps_cert_source != "eps_EA" {
                    return Err(invalid(
                        "eps_cert_source",
                        format!(
                            "{:?}: entropy accumulation certifies with eps_EA",
                            self.eps_cert_source
                        ),
                    ));
                }
            }
            Mode::IidEstimate => {
                if self.eps_s != 0.0 {
                    return Err(invalid(
                        "eps_s",
                        format!(
                            "{}: the i.i.d. estimate has eps_s = 0 (its failure probability is eps_cert)",
                            self.eps_s
                        ),
                    ));
                }
                if self.eps_cert_source != "eps_est" {
                    return Err(invalid(
                        "eps_cert_source",
                        format!(
                            "{:?}: the i.i.d. estimate certifies with eps_est",
                            self.eps_cert_source
                        ),
                    ));
                }
            }
        }
        if !(self.eps_cert > 0.0 && self.eps_cert < 1.0) {
            return Err(invalid(
                "eps_cert",
                format!("{} is not in (0, 1)", self.eps_cert),
            ));
        }
        if self.blocks != 1 {
            return Err(invalid(
                "blocks",
                format!(
                    "{}: a certificate covers one string as one block",
                    self.blocks
                ),
            ));
        }
        if self.per_block_bounds {
            return Err(invalid(
                "per_block_bounds",
                "true: this schema has no per-block bounds".into(),
            ));
        }
        if self.public_values.wins.is_some() != self.public_statistics.contains(&PublicStat::Wins) {
            return Err(invalid(
                "public_values.wins",
                "present exactly when \"wins\" is a public statistic".into(),
            ));
        }
        if self.public_values.s_hat.is_some() && !self.public_statistics.contains(&PublicStat::SHat)
        {
            return Err(invalid(
                "public_values.s_hat",
                "present although \"s-hat\" is not declared public".into(),
            ));
        }
        for pc in &self.public_values.pair_counts {
            if pc[0] > 1
                || pc[1] > 1
                || !self
                    .public_statistics
                    .contains(&PublicStat::PairCount(pc[0] as u8, pc[1] as u8))
            {
                return Err(invalid(
                    "public_values.pair_counts",
                    format!("pair ({}, {}) is not declared public", pc[0], pc[1]),
                ));
            }
        }
        Ok(())
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;

    pub(crate) fn sample() -> Certificate {
        Certificate {
            schema: SCHEMA.into(),
            mode: Mode::EntropyAccumulation,
            setup: Setup::Separated,
            device_independent: true,
            labels: vec![Setup::Separated.label().into(), COUNTS_LABEL.into()],
            accepted: true,
            string: CertifiedString {
                length_bits: 200_000_000,
                digest: "ab".repeat(32),
                layout: PAIR_LAYOUT.into(),
            },
            min_entropy_bits: 52_402_726,
            eps_s: 1e-6,
            eps_cert: 1e-6,
            eps_cert_source: "eps_EA".into(),
            blocks: 1,
            per_block_bounds: false,
            public_statistics: vec![PublicStat::Wins],
            public_values: PublicValues {
                wins: Some(8_400_000),
                ..Default::default()
            },
            disclosure_charge_bits: 24,
            parameters: Parameters {
                rounds: 100_000_000,
                test_probability: 0.1,
                expected_win: Some(0.84),
                tolerance: Some(0.002),
                smoothing: Some(1e-6),
                acceptance: Some(1e-6),
                estimation_error: None,
                source: "options".into(),
                file_digest: None,
            },
            record: RecordInfo {
                form: "counts".into(),
                file_digest: None,
                file_bytes: None,
                compressed: false,
                rounds: 100_000_000,
                test_rounds: 10_000_000,
                wins: Some(8_400_000),
                pair_counts: None,
            },
            result: ResultTerms {
                bound_bits: 52_402_751.07,
                first_order_bits: Some(71_121_628.6),
                second_order_bits: Some(18_718_877.5),
                tangent_point: Some(0.819729082),
                ceiling_k: Some(101),
                margin_bits: 1.0,
                completeness_error: Some(3.35e-4),
                win_lower_bound: None,
                zero_reason: None,
            },
            tool: "sluice test".into(),
            bound: None,
            checks: None,
        }
    }

    #[test]
    fn edited_figures_are_refused() {
        // Issue "no way to overstate security", item 5: a certificate whose
        // figure or error terms were edited is refused before use.
        assert_eq!(sample().recompute().unwrap(), 52_402_726);
        sample().check_figure().unwrap();
        type Change = fn(&mut Certificate);
        let cases: Vec<(Change, &str)> = vec![
            (|c| c.min_entropy_bits = 52_402_727, "min_entropy_bits"),
            (|c| c.min_entropy_bits = 90_000_000, "min_entropy_bits"),
            (|c| c.eps_s = 1e-30, "eps_s"),
            (|c| c.eps_cert = 1e-30, "eps_cert"),
            (
                |c| {
                    c.eps_cert = 1e-30;
                    c.parameters.acceptance = Some(1e-30);
                },
                "min_entropy_bits",
            ),
            (|c| c.disclosure_charge_bits = 0, "disclosure_charge_bits"),
            (
                |c| c.public_values.wins = Some(9_000_000),
                "public_values.wins",
            ),
        ];
        for (change, field) in cases {
            let mut c = sample();
            change(&mut c);
            let e = c.extractor_input().unwrap_err();
            assert_eq!(e.position().field.as_deref(), Some(field), "{e}");
        }
    }

    #[test]
    fn round_trip() {
        let c = sample();
        let text = c.to_json_string();
        assert!(text.contains("\"schema\": \"sluice-certificate/2\""));
        assert!(text.contains("\"mode\": \"entropy-accumulation\""));
        assert_eq!(Certificate::from_json_str(&text).unwrap(), c);
    }

    #[test]
    fn extractor_input_is_one_block_of_the_pair_string() {
        let c = sample();
        let e = c.extractor_input().unwrap();
        assert_eq!((e.n, e.k), (200_000_000, 52_402_726));
        assert_eq!(e.eps_cert, 1e-6);
        let mut aborted = sample();
        aborted.accepted = false;
        aborted.min_entropy_bits = 0;
        let err = aborted.extractor_input().unwrap_err();
        assert_eq!(err.position().field.as_deref(), Some("accepted"));
    }

    #[test]
    fn validation_names_the_field() {
        type Change = fn(&mut Certificate);
        let cases: Vec<(Change, &str)> = vec![
            (|c| c.schema = "sluice-certificate/9".into(), "schema"),
            (|c| c.string.length_bits = 100_000_000, "string.length_bits"),
            (|c| c.string.digest = "XYZ".into(), "string.digest"),
            (|c| c.blocks = 4, "blocks"),
            (|c| c.per_block_bounds = true, "per_block_bounds"),
            (|c| c.eps_s = 0.0, "eps_s"),
            (|c| c.eps_cert = 1.5, "eps_cert"),
            (|c| c.min_entropy_bits = 100_000_001, "min_entropy_bits"),
            (|c| c.accepted = false, "min_entropy_bits"),
            (|c| c.setup = Setup::SingleDevice, "device_independent"),
            (|c| c.public_values.wins = None, "public_values.wins"),
            (|c| c.mode = Mode::IidEstimate, "eps_s"),
        ];
        for (change, field) in cases {
            let mut c = sample();
            change(&mut c);
            let e = Certificate::from_json_str(&c.to_json_string()).unwrap_err();
            assert_eq!(e.position().field.as_deref(), Some(field), "{e}");
            assert!(e.to_string().starts_with(&format!("{field}: ")), "{e}");
        }
        let e = Certificate::from_json_str("{\"schema\": 3}").unwrap_err();
        assert!(e.to_string().contains("line 1"), "{e}");
        let mut v: serde_json::Value = serde_json::from_str(&sample().to_json_string()).unwrap();
        v["extra"] = serde_json::json!(1);
        let e = Certificate::from_json_str(&v.to_string()).unwrap_err();
        assert!(e.to_string().contains("unknown field `extra`"), "{e}");
    }
}
