//! The one command builder of the command-line tests: `sluice ARGS` as a
//! `Command`, in a folder, with a ledger and a test hook or none. The
//! helper modules (`cli_common`, `files_common`, `ledger_common`) build on
//! it.
#![allow(dead_code)]

use std::path::Path;
use std::process::Command;

/// The binary under test: `SLUICE_TEST_BIN` if set (to run the tests
/// against another build, e.g. to see them fail on an older one), else
/// this build's.
pub fn bin() -> String {
    std::env::var("SLUICE_TEST_BIN").unwrap_or_else(|_| env!("CARGO_BIN_EXE_sluice").to_string())
}

/// `sluice ARGS`, not started: run in `dir` when given, with
/// `SLUICE_LEDGER=ledger` when given, and the test hook `hook` (empty: the
/// variable is removed).
pub fn command(args: &[&str], dir: Option<&Path>, ledger: Option<&Path>, hook: &str) -> Command {
    let mut c = Command::new(bin());
    c.args(args);
    if let Some(d) = dir {
        c.current_dir(d);
    }
    if let Some(l) = ledger {
        c.env("SLUICE_LEDGER", l);
    }
    if hook.is_empty() {
        c.env_remove("SLUICE_TEST_HOOK");
    } else {
        c.env("SLUICE_TEST_HOOK", hook);
    }
    c
}
