//! Helpers shared by the ledger reliability tests (real processes).
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::Output;

pub const BIN: &str = env!("CARGO_BIN_EXE_sluice");

#[path = "../cmd_common/mod.rs"]
mod cmd_common;

/// Per use of the runs below: n = 512, k = 400, target 1e-9; the planner
/// picks m = 340, so the charge is the leftover hash lemma's
/// eps_ext = 2^(-(k - m)/2) = 2^-30 (hashing spec 2.3, 4.3; eps_s = 0).
pub const CHARGE: f64 = 9.313225746154785e-10;

pub fn sluice(ledger: &Path, args: &[&str]) -> Output {
    cmd_common::command(args, None, Some(ledger), "")
        .output()
        .expect("run sluice")
}

pub fn ok(ledger: &Path, args: &[&str]) -> String {
    let o = sluice(ledger, args);
    assert!(
        o.status.success(),
        "sluice {args:?} failed: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8(o.stdout).unwrap()
}

/// The crate's one test generator, for timing and contents (seeded, so a
/// failure can be replayed).
pub use sluice::bits::pseudo::Pseudo as Rng;

/// Writes 64 distinct pseudo-random bytes (512 bits) as a raw file.
pub fn raw_file(dir: &Path, name: &str, rng: &mut Rng) -> PathBuf {
    let p = dir.join(name);
    let bytes: Vec<u8> = (0..64).map(|_| rng.next() as u8).collect();
    std::fs::write(&p, bytes).unwrap();
    p
}

pub fn new_seed(ledger: &Path, bits: &str, budget: &str) -> String {
    let out = ok(
        ledger,
        &["seed", "new", "--bits", bits, "--budget", budget, "--json"],
    );
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    v["seed"].as_str().unwrap().to_string()
}

pub fn extract_args<'a>(raw: &'a str, out: &'a str, seed: &'a str) -> Vec<&'a str> {
    vec![
        "extract",
        raw,
        "-o",
        out,
        "--seed",
        seed,
        "--min-entropy",
        "400",
        "--smoothing",
        "0",
        "--cert-error",
        "0",
        "--target-error",
        "1e-9",
        "--quiet",
        "--json",
    ]
}

pub fn verify_json(ledger: &Path) -> (bool, serde_json::Value) {
    let o = sluice(ledger, &["ledger", "verify", "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout)
        .unwrap_or_else(|e| panic!("verify output: {e}: {}", String::from_utf8_lossy(&o.stderr)));
    (o.status.success(), v)
}

pub fn seed_state(ledger: &Path, id: &str) -> serde_json::Value {
    let out = ok(ledger, &["seed", "show", id, "--json"]);
    serde_json::from_str(&out).unwrap()
}

/// Commits a raw file to the ledger (`ledger commit-raw FILE --origin ORIGIN`).
pub fn commit_raw(ledger: &Path, raw: &Path, origin: &str) {
    ok(
        ledger,
        &[
            "ledger",
            "commit-raw",
            raw.to_str().unwrap(),
            "--origin",
            origin,
        ],
    );
}
