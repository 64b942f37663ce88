//! The reports of `sluice assess raw|output`: built by `assess`, printed
//! there and drawn by `plot` (a module of their own, so that neither of
//! those two imports the other).

use serde::Serialize;
use sluice::assess::many::Summary;
use sluice::assess::sp800_22::{TestId, TestReport};
use sluice::assess::sp800_90b::{estimators, health};

/// What `assess raw` found.
#[derive(Serialize)]
pub(super) struct RawReport {
    pub(super) file: String,
    pub(super) bits: usize,
    pub(super) claimed_entropy: Option<f64>,
    pub(super) health_entropy: f64,
    pub(super) health_entropy_source: &'static str,
    pub(super) repetition_count: health::HealthOutcome,
    pub(super) adaptive_proportion: health::HealthOutcome,
    pub(super) adaptive_proportion_window: usize,
    pub(super) health_passed: bool,
    pub(super) estimator_samples: usize,
    pub(super) assessment: estimators::Assessment,
    pub(super) comparison: String,
    pub(super) red_flag: bool,
    pub(super) notes: Vec<String>,
    pub(super) caution: &'static str,
}

#[derive(Serialize)]
pub(super) struct KindSummary {
    pub(super) test: TestId,
    pub(super) section: &'static str,
    pub(super) label: String,
    #[serde(flatten)]
    pub(super) summary: Summary,
    /// The P-value itself, when one sequence was tested.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub(super) p_value: Option<f64>,
    pub(super) flagged: bool,
}

#[derive(Serialize)]
pub(super) struct NotRun {
    pub(super) test: TestId,
    pub(super) section: &'static str,
    pub(super) sequences: usize,
    pub(super) reason: String,
}

#[derive(Serialize)]
pub(super) struct OutputReport {
    pub(super) file: String,
    pub(super) bits: usize,
    pub(super) sequences: usize,
    pub(super) sequence_bits: usize,
    pub(super) alpha: f64,
    pub(super) parameters: Vec<(TestId, String)>,
    pub(super) kinds: Vec<KindSummary>,
    pub(super) not_applicable: Vec<NotRun>,
    /// With one sequence: its reports in full.
    pub(super) single: Option<Vec<TestReport>>,
    pub(super) flagged: usize,
    pub(super) overall: String,
    pub(super) caution: &'static str,
}
