//! Helpers shared by the command-line tests: run the binary, make test bits.

use sluice::bits::Bits;
use std::path::Path;
use std::process::Output;

#[path = "../cmd_common/mod.rs"]
mod cmd_common;

/// Runs `sluice ARGS` in `dir` and returns its output.
pub fn sluice(dir: &Path, args: &[&str]) -> Output {
    let mut c = cmd_common::command(args, Some(dir), None, "");
    // As before the shared builder: the caller's environment is kept.
    if let Ok(h) = std::env::var("SLUICE_TEST_HOOK") {
        c.env("SLUICE_TEST_HOOK", h);
    }
    c.output().unwrap()
}

/// `n` deterministic test bits (the crate's one test generator,
/// `sluice::bits::pseudo`).
pub fn pseudo(seed: u64, n: usize) -> Bits {
    sluice::bits::pseudo::bits(seed | 1, n)
}
