//! Test-only fault injection (hidden, unstable): with the environment
//! variable `SLUICE_TEST_HOOK` set to `POINT:abort`, `POINT:pause=MS` or
//! `journal-write:tear` (write half a journal append, then abort)
//! (several, comma-separated), the process aborts (as if killed) or sleeps
//! when it reaches the named point. Points: `before-reserve`,
//! `after-reserve`, `during-write`, `after-rename`, `before-commit`,
//! `journal-write`. Unset, it does nothing. The reliability tests in
//! `tests/ledger_*.rs` use it to kill runs at exact places.

/// The environment variable read.
#[doc(hidden)]
pub const VAR: &str = "SLUICE_TEST_HOOK";

/// Called at a named point of a run.
#[doc(hidden)]
pub fn point(name: &str) {
    let Ok(spec) = std::env::var(VAR) else {
        return;
    };
    for item in spec.split(',') {
        let Some((p, action)) = item.split_once(':') else {
            continue;
        };
        if p != name {
            continue;
        }
        if action == "abort" {
            std::process::abort();
        }
        if let Some(ms) = action.strip_prefix("pause=") {
            if let Ok(ms) = ms.parse::<u64>() {
                std::thread::sleep(std::time::Duration::from_millis(ms));
            }
        }
    }
}

/// Whether the hook asks to tear the journal append at `name`.
#[doc(hidden)]
pub fn tear(name: &str) -> bool {
    std::env::var(VAR).is_ok_and(|spec| spec.split(',').any(|i| i == format!("{name}:tear")))
}
