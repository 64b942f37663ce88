//! Helpers of the file-safety and stress tests (issue 15): run the binary
//! with a ledger, send signals, find temporary files left behind.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::{Child, Command, Output, Stdio};

/// The binary under test: `SLUICE_TEST_BIN` if set (to run these tests
/// against another build, e.g. to see them fail on an older one), else
/// this build's.
pub fn bin() -> String {
    cmd_common::bin()
}

#[path = "../cmd_common/mod.rs"]
mod cmd_common;

/// Runs `sluice ARGS` in `dir` with the ledger `ledger` and the test hook
/// `hook` (empty: none).
pub fn run(dir: &Path, ledger: &Path, hook: &str, args: &[&str]) -> Output {
    command(dir, ledger, hook, args)
        .output()
        .expect("run sluice")
}

/// The command, not started.
pub fn command(dir: &Path, ledger: &Path, hook: &str, args: &[&str]) -> Command {
    cmd_common::command(args, Some(dir), Some(ledger), hook)
}

/// Starts `sluice ARGS` with piped output.
pub fn spawn(dir: &Path, ledger: &Path, hook: &str, args: &[&str]) -> Child {
    command(dir, ledger, hook, args)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("start sluice")
}

/// Runs and asserts success; returns standard output.
pub fn ok(dir: &Path, ledger: &Path, args: &[&str]) -> String {
    let o = run(dir, ledger, "", args);
    assert!(
        o.status.success(),
        "sluice {args:?} failed: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8(o.stdout).unwrap()
}

/// Runs and asserts exit status 2 (refusal); returns standard error.
pub fn refused(dir: &Path, ledger: &Path, args: &[&str]) -> String {
    let o = run(dir, ledger, "", args);
    let err = String::from_utf8_lossy(&o.stderr).into_owned();
    assert_eq!(o.status.code(), Some(2), "sluice {args:?}: {err}");
    err
}

/// Sends a signal by name (`INT`, `TERM`, `KILL`) with the system's `kill`.
pub fn signal(child: &Child, name: &str) {
    let st = Command::new("kill")
        .arg(format!("-{name}"))
        .arg(child.id().to_string())
        .status()
        .expect("run kill");
    assert!(st.success(), "kill -{name} failed");
}

/// Temporary names anywhere under `dir`: ours (`.NAME.PID.RANDOM.sluice-tmp`)
/// and the older spellings (`.NAME.RANDOM.tmp`, `.NAME.tmp-PID`), so the
/// tests also catch them on an older build.
pub fn temp_files(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        let Ok(rd) = std::fs::read_dir(&d) else {
            continue;
        };
        for e in rd.flatten() {
            let p = e.path();
            let n = e.file_name().to_string_lossy().into_owned();
            let temp = n.ends_with(".sluice-tmp") || (n.starts_with('.') && n.contains(".tmp"));
            if p.is_dir() {
                stack.push(p);
            } else if temp {
                out.push(p);
            }
        }
    }
    out
}

/// The crate's one test generator (seeded so a failure can be replayed).
pub use sluice::bits::pseudo::Pseudo as Rng;

/// Per use of [`extract_args`]: n = 512, k = 400, target 1e-9; the planner
/// picks m = 340, so the charge is eps_ext = 2^(-(k - m)/2) = 2^-30
/// (leftover hash lemma, hashing spec 2.3, 4.3; eps_s = 0).
pub const CHARGE: f64 = 9.313225746154785e-10;

/// A ledgered extraction of a 512-bit raw file with seed `seed`.
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

/// Writes 64 pseudo-random bytes (512 bits) and commits them to the ledger.
pub fn committed_raw(dir: &Path, ledger: &Path, name: &str, rng: &mut Rng) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, rng.bytes(64)).unwrap();
    ok(
        dir,
        ledger,
        &[
            "ledger",
            "commit-raw",
            p.to_str().unwrap(),
            "--origin",
            "bench 4 of a fictional lab",
        ],
    );
    p
}

/// A new seed from the operating system.
pub fn new_seed(dir: &Path, ledger: &Path, bits: &str, budget: &str) -> String {
    let out = ok(
        dir,
        ledger,
        &["seed", "new", "--bits", bits, "--budget", budget, "--json"],
    );
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    v["seed"].as_str().unwrap().to_string()
}

/// `ledger verify --json`: (ok, document).
pub fn verify(dir: &Path, ledger: &Path) -> (bool, serde_json::Value) {
    let o = run(dir, ledger, "", &["ledger", "verify", "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout)
        .unwrap_or_else(|e| panic!("verify output: {e}: {}", String::from_utf8_lossy(&o.stderr)));
    (o.status.success(), v)
}

/// A seed's account (`seed show --json`).
pub fn seed_state(dir: &Path, ledger: &Path, id: &str) -> serde_json::Value {
    serde_json::from_str(&ok(dir, ledger, &["seed", "show", id, "--json"])).unwrap()
}

/// The journal's lines.
pub fn journal_lines(ledger: &Path) -> Vec<String> {
    std::fs::read_to_string(ledger.join("journal.jsonl"))
        .unwrap_or_default()
        .lines()
        .map(String::from)
        .collect()
}

/// Waits (up to 20 s) until the journal holds a line containing `needle`.
pub fn wait_for_journal(ledger: &Path, needle: &str) {
    for _ in 0..400 {
        if journal_lines(ledger).iter().any(|l| l.contains(needle)) {
            return;
        }
        std::thread::sleep(std::time::Duration::from_millis(50));
    }
    panic!("the journal never showed {needle:?}");
}
