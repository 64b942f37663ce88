//! Certification: from the record of a CHSH Bell test to a certified smooth
//! min-entropy (`spec/certification.md`).
//!
//! Pure maths and parsing over caller-supplied bytes: nothing here opens
//! files, prints or touches the ledger.
//!
//! - [`chsh`]: the CHSH game and the single-round bounds (spec 1, 2).
//! - [`eat`]: the entropy-accumulation bound with the tangent-point rule,
//!   completeness error and its inverse (spec 3).
//! - [`iid`]: the i.i.d. estimate, always labelled as the weaker model
//!   (spec 4), and the legacy regression formula (spec 5).
//! - [`record`]: the round file format and its streaming parser, and the
//!   summary of a record (spec 1, 8).
//! - [`input`]: reading a round file (plain or gzip), a parameters or
//!   counts file and a raw output file from caller-opened streams.
//! - [`planning`]: the protocol resolved from the declared parameters,
//!   and the planning figures of `certify --plan`.
//! - [`run`]: the certification of one run: parameters resolved before
//!   the record is read, then the decision, the figure and its records.
//! - [`certificate`]: the certificate document the extractor consumes
//!   (spec 3.8, 3.9; `spec/hashing-and-composition.md` 5).
//! - [`simulate`]: a simulated CHSH device for demos and tests only.
//!
//! ```
//! use sluice::certify::eat::{eat_plan, EatParams};
//! // spec 3.7 worked example: 52 402 723 bits with W published.
//! let p = EatParams { n_rounds: 100_000_000, gamma: 0.1, w_exp: 0.84, delta: 0.002,
//!                     eps_s: 1e-6, eps_ea: 1e-6 };
//! assert_eq!(eat_plan(&p).unwrap().bits, 52_402_723);
//! ```

#![forbid(unsafe_code)]

pub mod certificate;
pub mod chsh;
pub mod eat;
mod error;
pub mod iid;
pub mod improved;
pub mod input;
pub mod params;
pub mod planning;
pub mod record;
pub mod run;
pub mod simulate;
pub mod tail;
pub mod tradeoff;

pub use error::{Error, ErrorKind, Position};

use serde::{Deserialize, Serialize};

/// A statistic of the record declared public (spec 3.9). W is public by
/// default; per-round test results can never be declared public.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum PublicStat {
    /// The number W of won test rounds.
    Wins,
    /// The same/different count of test rounds with inputs (x, y).
    PairCount(u8, u8),
    /// The estimated CHSH value S_hat (charged as the four pair counts).
    SHat,
}

impl PublicStat {
    /// Parses `wins`, `s-hat` or `pair-XY` (XY in 00, 01, 10, 11).
    pub fn parse(text: &str) -> Result<PublicStat, Error> {
        match text {
            "wins" => Ok(PublicStat::Wins),
            "s-hat" => Ok(PublicStat::SHat),
            "pair-00" => Ok(PublicStat::PairCount(0, 0)),
            "pair-01" => Ok(PublicStat::PairCount(0, 1)),
            "pair-10" => Ok(PublicStat::PairCount(1, 0)),
            "pair-11" => Ok(PublicStat::PairCount(1, 1)),
            _ => Err(Error::bad_parameter(
                "public",
                format!("{text:?}"),
                "a public statistic is one of wins, s-hat, pair-00, pair-01, pair-10, pair-11",
            )),
        }
    }

    /// The name [`PublicStat::parse`] reads.
    pub fn name(self) -> String {
        match self {
            PublicStat::Wins => "wins".into(),
            PublicStat::SHat => "s-hat".into(),
            PublicStat::PairCount(x, y) => format!("pair-{x}{y}"),
        }
    }
}

/// Which model the certified figure is computed in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Mode {
    /// Entropy accumulation (spec 3): devices may have memory.
    EntropyAccumulation,
    /// The i.i.d. estimate (spec 4), the weaker model.
    IidEstimate,
}

/// How the two devices were kept from signalling (spec 6, cautions 1-2).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Setup {
    /// Space-like separation: each output was fixed before the other input
    /// could reach it at light speed.
    Separated,
    /// Shielding without such timing (a weaker, trusted assumption).
    Shielded,
    /// Both parties on one device: not device-independent.
    SingleDevice,
}

impl Setup {
    /// Whether the result may be called device-independent.
    pub fn device_independent(self) -> bool {
        !matches!(self, Setup::SingleDevice)
    }

    /// The label printed with every result.
    pub fn label(self) -> &'static str {
        match self {
            Setup::Separated => "separated devices (no signalling enforced by distance and timing)",
            Setup::Shielded => "shielded devices (no signalling assumed from shielding, not enforced by timing: a trusted assumption)",
            Setup::SingleDevice => "single device - not device-independent: the CHSH value describes the device; it does not certify randomness independently of it",
        }
    }
}

/// The cautions of spec 6, in plain words, printed with every result; the
/// i.i.d. mode adds its label (spec 4).
pub fn cautions(mode: Mode) -> &'static [&'static str] {
    const COMMON: [&str; 8] = [
        "No signalling: the two devices must not influence each other during a round. The reliable way is distance and timing: each device must have produced its output before any signal, even at light speed, could bring it the other device's input (at 30 m that is 100 ns). Shielding without such timing is a weaker, trusted assumption. If neither holds, the number is not a certificate.",
        "One chip is not a Bell test: two qubits on one processor, or two detectors in one unshielded box, can talk through cross-talk, shared control lines or timing. A CHSH value measured there describes the chip; it does not certify randomness independently of the device, and such a result is labelled \"not device-independent\".",
        "Inputs: inputs and test flags must come from a trusted random source, uniform, independent of the devices and of anyone who could build or watch them, fresh for each round. The devices must not learn which rounds are tests other than through the inputs they see. The randomness used this way (about N_rounds (h(gamma) + 2 gamma) bits) must be subtracted before claiming a net gain.",
        "Every round counts (detection loophole): a round where a detector does not fire must still get an output decided before the run (for example \"no click\" = 0). Dropping such rounds makes the result device-dependent. With a maximally entangled state CHSH needs a detection efficiency above 2(sqrt 2 - 1) = 82.8 %.",
        "Memory: devices may remember earlier rounds and runs. This certificate covers one run. Reused devices can leak earlier outputs through later ones; keep them isolated from any outgoing channel. Use a fresh extractor seed for every run, independent of the input and test bits, registered before it is disclosed.",
        "Fix everything before the run: N_rounds, gamma, w_exp, delta, eps_s and eps_EA. If the test fails, abort; do not rerun until a run passes and do not lower the threshold after seeing the data. Values typed in after the run give a planning estimate, not a certificate.",
        "What the number assumes: quantum theory is correct; the recording and post-processing computer is trusted; the rounds are performed one after another; the adversary may hold quantum side information. The extracted output is only as good as this entropy claim and these assumptions.",
        "Statistics and digests: the certified figure is reduced for every statistic declared public; all other counts, the certificate's digests of the raw data and any digest of the output are secret and belong in the private record. The standards and evaluators that apply to your application (for example a certification body) decide whether this figure suffices.",
    ];
    const WITH_IID: [&str; 9] = [
        COMMON[0], COMMON[1], COMMON[2], COMMON[3], COMMON[4], COMMON[5], COMMON[6], COMMON[7],
        "This is an i.i.d. estimate: it also assumes independent, identical rounds, so it is not a device-independent certificate against devices with memory or a supplier who programs them.",
    ];
    match mode {
        Mode::EntropyAccumulation => &COMMON,
        Mode::IidEstimate => &WITH_IID,
    }
}

/// `0 < eps < 1` (spec 8).
pub(crate) fn check_eps(name: &str, eps: f64) -> Result<(), Error> {
    if eps > 0.0 && eps < 1.0 {
        Ok(())
    } else {
        Err(Error::bad_parameter(
            name,
            eps,
            "an error parameter must lie strictly between 0 and 1",
        ))
    }
}

/// `0 < gamma <= 1` (spec 8).
pub(crate) fn check_gamma(gamma: f64) -> Result<(), Error> {
    if gamma > 0.0 && gamma <= 1.0 {
        Ok(())
    } else {
        Err(Error::bad_parameter(
            "gamma",
            gamma,
            "the test probability gamma must satisfy 0 < gamma <= 1",
        ))
    }
}

/// Refuses a win fraction more than 5 standard deviations above the
/// quantum maximum (spec 8), for entropy accumulation.
pub fn check_win_fraction(wins: u64, n_test: u64) -> Result<(), Error> {
    check_not_above_quantum(wins, n_test, 5.0)
}

/// Refuses a win fraction above `W_QUANTUM + z sigma`,
/// `sigma = sqrt(w_obs (1 - w_obs) / N_test)` (spec 8, common practice;
/// `z = 5` for entropy accumulation, 0 for the i.i.d. estimate).
pub(crate) fn check_not_above_quantum(wins: u64, n_test: u64, z: f64) -> Result<(), Error> {
    if n_test == 0 {
        return Ok(());
    }
    let w_obs = wins as f64 / n_test as f64;
    let sigma = (w_obs * (1.0 - w_obs) / n_test as f64).sqrt();
    if w_obs > chsh::W_QUANTUM + z * sigma {
        let beyond = if z > 0.0 {
            format!("by more than {z} standard deviations (sigma = {sigma:.2e})")
        } else {
            "(the i.i.d. estimate refuses any excess)".to_string()
        };
        return Err(Error::new(ErrorKind::AboveQuantum {
            w_obs,
            wins,
            n_test,
            beyond,
        })
        .in_field("wins"));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn public_names_round_trip() {
        for p in [
            PublicStat::Wins,
            PublicStat::SHat,
            PublicStat::PairCount(0, 1),
            PublicStat::PairCount(1, 1),
        ] {
            assert_eq!(PublicStat::parse(&p.name()).unwrap(), p);
        }
        let e = PublicStat::parse("per-round").unwrap_err();
        assert!(
            e.to_string().starts_with("public: value \"per-round\""),
            "{e}"
        );
    }

    #[test]
    fn cautions_cover_section_6() {
        // spec 6 lists seven cautions; the i.i.d. mode adds its label.
        let c = cautions(Mode::EntropyAccumulation);
        assert!(c.len() >= 7);
        assert!(c.iter().any(|s| s.contains("82.8 %")));
        assert!(cautions(Mode::IidEstimate)
            .iter()
            .any(|s| s.contains("i.i.d.")));
        assert!(Setup::SingleDevice
            .label()
            .contains("not device-independent"));
    }
}
