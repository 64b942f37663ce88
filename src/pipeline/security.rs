//! The security inputs of a run (a min-entropy figure with its error terms,
//! or a certificate; the target error, the blocks, the seed deficiency and
//! the objective) and their translation into the selector's input, the
//! labels every derived figure carries, and the speed model the `fastest`
//! objective needs.
//!
//! Messages name the command-line options that set each field (the
//! command line is the main user of these types).

use super::job::JobError;
use crate::certify::certificate::Certificate;
use crate::extract::Extractor;
use crate::plan::compose::Budget;
use crate::plan::measure::{self, Calibration};
use crate::plan::select::{EntropyScope, Objective, SelectorInput, WorkUnit};
use std::path::PathBuf;
use std::time::Duration;

/// The security inputs shared by planning and extraction.
#[derive(Clone, Debug)]
pub struct Security {
    /// Certified smooth min-entropy of each block, in bits.
    pub min_entropy: Option<f64>,
    /// Certified smooth min-entropy per raw bit (0 to 1).
    pub min_entropy_rate: Option<f64>,
    /// A certificate written by `sluice certify`.
    pub certificate: Option<PathBuf>,
    /// Smoothing parameter eps_s of a typed-in figure.
    pub smoothing: Option<f64>,
    /// Failure term eps_cert of a typed-in figure.
    pub cert_error: Option<f64>,
    /// Use a certificate computed from counts typed in by the operator.
    pub trust_counts: bool,
    /// With a certificate and an explicit seed file: the operator keeps
    /// their own record of the seed's uses.
    pub own_seed_record: bool,
    /// Total error allowed for everything produced with the seed.
    pub target_error: Option<f64>,
    /// Number of blocks hashed with the one seed.
    pub blocks: Option<u64>,
    /// Seed deficiency s in bits.
    pub seed_deficiency: f64,
    /// What to optimise.
    pub objective: Objective,
}

/// The selector's inputs, and the certificate they came from (if any).
pub struct Resolved {
    /// The inputs.
    pub input: SelectorInput,
    /// Whether the min-entropy was given as a rate (for error messages).
    pub rate_given: bool,
    /// The certificate (path, contents, file digest), when the figures
    /// came from one.
    pub certificate: Option<(PathBuf, Certificate, String)>,
    /// Labels that must be shown with every figure derived from these
    /// inputs (and written into the receipt).
    pub labels: Vec<String>,
}

/// The label for a manual figure split over several blocks.
pub const PER_BLOCK_CLAIM_LABEL: &str = "per-block min-entropy is the operator's claim: each block's figure must hold given all earlier blocks; splitting a figure certified for the whole string by hand does not give that";

/// The labels a certificate carries into every derived figure.
pub fn certificate_labels(cert: &Certificate) -> Vec<String> {
    let mut l: Vec<String> = cert.labels.clone();
    if !cert.device_independent && !l.iter().any(|x| x.contains("not device-independent")) {
        l.push("not device-independent".into());
    }
    l.push(format!(
        "certificate: {} model, bound {}, string {}",
        match cert.mode {
            crate::certify::Mode::EntropyAccumulation => "entropy accumulation",
            crate::certify::Mode::IidEstimate => "i.i.d. estimate (weaker)",
        },
        cert.bound_name(),
        cert.keep().name()
    ));
    l
}

/// Reads and parses a certificate file: its text and contents.
pub fn read_certificate(path: &std::path::Path) -> Result<(String, Certificate), JobError> {
    let text = std::fs::read_to_string(path).map_err(|e| JobError::Context {
        context: format!("{}: cannot read the certificate", path.display()),
        source: Box::new(e),
    })?;
    let cert = Certificate::from_json_str(&text).map_err(|e| JobError::Context {
        context: format!("{}", path.display()),
        source: Box::new(e),
    })?;
    Ok((text, cert))
}

/// Maps a planning error's field to the option that set it.
fn option_for(field: &str) -> &'static str {
    match field {
        "n" => "--input-bits",
        "k" => "--min-entropy",
        "eps_s" => "--smoothing",
        "eps_cert" => "--cert-error",
        "eps_total" | "eps_ext" => "--target-error",
        "blocks" => "--blocks",
        "seed_deficiency" => "--seed-deficiency",
        _ => "plan",
    }
}

/// A planning error, prefixed with the option that set the field.
pub fn plan_error(e: crate::plan::Error, rate_given: bool) -> JobError {
    let option = match e.field() {
        "k" if rate_given => "--min-entropy-rate",
        f => option_for(f),
    };
    JobError::Refused(format!("{option}: {e}"))
}

impl Security {
    /// Whether any figure that the selector needs was given.
    pub fn any_given(&self) -> bool {
        self.min_entropy.is_some()
            || self.min_entropy_rate.is_some()
            || self.certificate.is_some()
            || self.target_error.is_some()
    }

    /// Builds the selector input for blocks of `n` bits (`None`: from the
    /// certificate) and `blocks` blocks (when `self.blocks` is not given).
    pub fn resolve(&self, n: Option<u64>, blocks: u64) -> Result<Resolved, JobError> {
        let refuse = |s: String| Err(JobError::Refused(s));
        let Some(target) = self.target_error else {
            return refuse(
                "--target-error: give the total error allowed (for example 1e-9)".into(),
            );
        };
        let blocks = self.blocks.unwrap_or(blocks);
        if let Some(path) = &self.certificate {
            let (text, cert) = read_certificate(path)?;
            let ei = cert.extractor_input().map_err(|e| {
                JobError::Refused(format!(
                    "{}: {e}. Rule: a certificate is used only if its figure follows from its own parameters and counts. What to do: use the certificate sluice certify wrote, unedited",
                    path.display()
                ))
            })?;
            if cert.record.form == "counts" && !self.trust_counts {
                return refuse(format!(
                    "{}: refused: this certificate was computed from counts supplied by the operator; the round record was never read, so nothing ties its figure to the raw string. Rule: unchecked figures are used only on explicit request. What to do: certify the round file itself, or give --trust-counts to vouch for the counts (recorded in the receipt)",
                    path.display()
                ));
            }
            let mut labels = certificate_labels(&cert);
            if cert.record.form == "counts" {
                labels.push("used with --trust-counts: the operator vouches for the counts".into());
            }
            if let Some(n) = n {
                if n != ei.n {
                    return refuse(format!(
                        "{}: the certificate covers one string of {} bits as one block; \
                         the input here is {n} bits per block",
                        path.display(),
                        ei.n
                    ));
                }
            }
            let digest = blake3::hash(text.as_bytes()).to_hex().to_string();
            let input = SelectorInput {
                n: ei.n,
                k: ei.k as f64,
                scope: if cert.per_block_bounds {
                    EntropyScope::PerBlock
                } else {
                    EntropyScope::WholeString
                },
                can_abort: Some(true),
                budget: Budget {
                    eps_total: target,
                    eps_cert: ei.eps_cert,
                    eps_seed: 0.0,
                    blocks,
                    eps_s: ei.eps_s,
                    seed_deficiency: self.seed_deficiency,
                },
                objective: self.objective,
            };
            input.validate().map_err(|e| plan_error(e, false))?;
            return Ok(Resolved {
                input,
                rate_given: false,
                certificate: Some((path.clone(), cert, digest)),
                labels,
            });
        }
        let Some(n) = n else {
            return refuse("--input-bits: give the block length in bits".into());
        };
        let k = match (self.min_entropy, self.min_entropy_rate) {
            (Some(k), _) => k,
            (None, Some(r)) => {
                if !(0.0..=1.0).contains(&r) {
                    return refuse(format!(
                        "--min-entropy-rate: {r} is not a rate; it must lie between 0 and 1 \
                         (bits of min-entropy per raw bit)"
                    ));
                }
                r * n as f64
            }
            (None, None) => {
                return refuse("give --min-entropy, --min-entropy-rate or --certificate".into())
            }
        };
        let (Some(eps_s), Some(eps_cert)) = (self.smoothing, self.cert_error) else {
            return refuse(format!(
                "{}: refused: a min-entropy figure typed in needs its error terms. Rule: every error term enters the total; none is taken as 0 silently. What to do: give the smoothing parameter and the certification's failure term of your entropy claim (--smoothing EPS_S --cert-error EPS_C), or an explicit 0 for an exact claim that cannot fail",
                match (self.smoothing, self.cert_error) {
                    (None, None) => "--smoothing and --cert-error are missing",
                    (None, _) => "--smoothing is missing",
                    _ => "--cert-error is missing",
                }
            ));
        };
        let mut labels = vec![
            "min-entropy figure typed in by the operator (not from a sluice certificate)"
                .to_string(),
        ];
        if eps_s == 0.0 {
            labels.push(
                "--smoothing 0: claims the min-entropy holds exactly, without smoothing".into(),
            );
        }
        if eps_cert == 0.0 {
            labels.push("--cert-error 0: claims the entropy certification cannot fail".into());
        }
        if blocks > 1 {
            labels.push(PER_BLOCK_CLAIM_LABEL.into());
        }
        let input = SelectorInput {
            n,
            k,
            scope: EntropyScope::PerBlock,
            can_abort: None,
            budget: Budget {
                eps_total: target,
                eps_cert,
                eps_seed: 0.0,
                blocks,
                eps_s,
                seed_deficiency: self.seed_deficiency,
            },
            objective: self.objective,
        };
        let rate_given = self.min_entropy.is_none();
        input.validate().map_err(|e| plan_error(e, rate_given))?;
        Ok(Resolved {
            input,
            rate_given,
            certificate: None,
            labels,
        })
    }
}

/// Hashing extractor plans for calibration.
fn hashing_extractor(unit: WorkUnit, n: usize, m: usize) -> Option<Box<dyn Extractor>> {
    match unit {
        WorkUnit::ToeplitzProduct => crate::extract::Toeplitz::new(n, m)
            .ok()
            .map(|e| Box::new(e) as Box<dyn Extractor>),
        WorkUnit::ModifiedToeplitzProduct => crate::extract::ModifiedToeplitz::new(n, m)
            .ok()
            .map(|e| Box::new(e) as Box<dyn Extractor>),
        _ => None,
    }
}

/// Identifies what a cached calibration was measured for.
fn cache_key() -> String {
    let hashing: Vec<&str> = [WorkUnit::ToeplitzProduct, WorkUnit::ModifiedToeplitzProduct]
        .into_iter()
        .filter(|u| hashing_extractor(*u, 64, 32).is_some())
        .map(|u| match u {
            WorkUnit::ToeplitzProduct => "toeplitz",
            _ => "modified-toeplitz",
        })
        .collect();
    format!(
        "sluice {} / {} / {}",
        env!("CARGO_PKG_VERSION"),
        crate::gf2::Backend::detect().name(),
        hashing.join(",")
    )
}

#[derive(serde::Serialize, serde::Deserialize)]
struct Cached {
    key: String,
    calibration: Calibration,
}

fn cache_path() -> Option<PathBuf> {
    dirs::cache_dir().map(|d| d.join("sluice").join("plan-speed.json"))
}

/// The speed model: from the cache in the user's cache folder when it
/// matches this build and machine, else measured now (a few milliseconds
/// per unit) and cached. A cache that cannot be read or written is not an
/// error: the model is measured again.
pub fn speed_model() -> Calibration {
    let key = cache_key();
    let path = cache_path();
    if let Some(p) = &path {
        if let Ok(text) = std::fs::read_to_string(p) {
            if let Ok(c) = serde_json::from_str::<Cached>(&text) {
                if c.key == key {
                    return c.calibration;
                }
            }
        }
    }
    let calibration = measure::calibrate(&hashing_extractor, Duration::from_millis(5));
    if let Some(p) = &path {
        let _ = save(
            p,
            &Cached {
                key,
                calibration: calibration.clone(),
            },
        );
    }
    calibration
}

fn save(path: &std::path::Path, c: &Cached) -> std::io::Result<()> {
    let Some(dir) = path.parent() else {
        return Ok(());
    };
    std::fs::create_dir_all(dir)?;
    // Through the one atomic writer (random temporary name, O_EXCL).
    crate::files::atomic::write_all(
        path,
        crate::files::Kind::SpeedCache,
        crate::files::Replace::Any,
        &serde_json::to_vec_pretty(c)?,
    )
}
