//! Test-only fault injection (hidden, unstable): with the environment
//! variable `SLUICE_TEST_HOOK` set to a comma-separated list of
//! `POINT:abort` (the process aborts, as if killed), `POINT:pause=MS`
//! (it sleeps), `POINT:tear` (a journal append writes half its bytes, then
//! aborts) or `POINT:enospc` (the write at that point fails as on a full
//! disk), the process does so when it reaches the named point. Points:
//! `before-reserve`, `after-reserve`, `during-write`, `after-rename`,
//! `before-commit`, `journal-write`, `head-write`, `output-write`,
//! `seed-store-write`. Unset, nothing happens. The reliability tests in
//! `tests/ledger_*.rs` and `tests/files_*.rs` use it to stop runs at exact
//! places.

/// The environment variable read.
pub const VAR: &str = "SLUICE_TEST_HOOK";

fn actions(name: &str) -> Vec<String> {
    let Ok(spec) = std::env::var(VAR) else {
        return Vec::new();
    };
    spec.split(',')
        .filter_map(|item| item.split_once(':'))
        .filter(|(p, _)| *p == name)
        .map(|(_, a)| a.to_string())
        .collect()
}

/// Called at a named point of a run: aborts or pauses if asked to.
pub fn point(name: &str) {
    for action in actions(name) {
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

/// Whether the hook asks to tear the write at `name`.
pub fn tear(name: &str) -> bool {
    actions(name).iter().any(|a| a == "tear")
}

/// The error a write at `name` should fail with, if the hook asks for a
/// full disk there.
pub fn injected_error(name: &str) -> Option<std::io::Error> {
    actions(name).iter().any(|a| a == "enospc").then(|| {
        std::io::Error::new(
            std::io::ErrorKind::StorageFull,
            "No space left on device (injected by SLUICE_TEST_HOOK)",
        )
    })
}
