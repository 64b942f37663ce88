//! NIST SP 800-90B: continuous health tests (section 4.4) and the
//! min-entropy estimators for binary samples (section 6.3), with the final
//! estimate the minimum over the estimators (statistics.md section 5).

pub mod estimators;
pub mod health;
