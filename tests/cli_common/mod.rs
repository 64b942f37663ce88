//! Helpers shared by the command-line tests: run the binary, make test bits.

use sluice::bits::Bits;
use std::path::Path;
use std::process::{Command, Output};

const BIN: &str = env!("CARGO_BIN_EXE_sluice");

/// Runs `sluice ARGS` in `dir` and returns its output.
pub fn sluice(dir: &Path, args: &[&str]) -> Output {
    Command::new(BIN)
        .current_dir(dir)
        .args(args)
        .output()
        .unwrap()
}

/// `n` deterministic test bits (xorshift64, common practice for test data).
pub fn pseudo(seed: u64, n: usize) -> Bits {
    let mut s = seed | 1;
    Bits::from_words(
        (0..n.div_ceil(64))
            .map(|_| {
                s ^= s << 13;
                s ^= s >> 7;
                s ^= s << 17;
                s
            })
            .collect(),
        n,
    )
}
