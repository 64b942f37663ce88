//! Runs the built `sluice assess` binary on small files.

use std::path::Path;
use std::process::Command;

fn sluice() -> Command {
    Command::new(env!("CARGO_BIN_EXE_sluice"))
}

/// First 100 bits of π (statistics.md, named inputs PI100).
const PI100: &str = "1100100100001111110110101010001000100001011010001100001000110100110001001100011001100010100010111000";

fn json(out: &std::process::Output) -> serde_json::Value {
    serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
        panic!(
            "not JSON ({e}): {}\nstderr: {}",
            String::from_utf8_lossy(&out.stdout),
            String::from_utf8_lossy(&out.stderr)
        )
    })
}

fn kind<'a>(v: &'a serde_json::Value, test: &str, label: &str) -> &'a serde_json::Value {
    v["kinds"]
        .as_array()
        .unwrap()
        .iter()
        .find(|k| k["test"] == test && k["label"] == label)
        .unwrap_or_else(|| panic!("no {test} {label}"))
}

/// Deterministic pseudo-random bytes (xorshift64, seed stated) for a
/// fictional device's output file.
fn pseudo_random(n: usize, seed: u64) -> Vec<u8> {
    // The crate's one test generator; bits 32..40 of each step.
    let mut p = sluice::bits::pseudo::Pseudo(seed);
    (0..n).map(|_| (p.next() >> 32) as u8).collect()
}

/// statistics.md 2.1 F-2, 2.3 RU-2 and 2.13 CS-2/CS-3 through the command
/// line, on PI100 as ASCII (one sequence); tests below their minimum
/// sizes are reported as not applicable with the reason.
#[test]
fn output_single_sequence_pi100_json() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("pi100.txt");
    std::fs::write(&f, format!("{PI100}\n")).unwrap();
    let out = sluice()
        .args(["assess", "output"])
        .arg(&f)
        .args(["--format", "ascii", "--json"])
        .output()
        .unwrap();
    let v = json(&out);
    assert_eq!(v["sequences"], 1);
    assert_eq!(v["sequence_bits"], 100);
    let p = |t: &str, l: &str| kind(&v, t, l)["p_value"].as_f64().unwrap();
    assert!((p("frequency", "") - 0.109599).abs() <= 5e-7);
    assert!((p("runs", "") - 0.500798).abs() <= 5e-7);
    assert!((p("cumulative-sums", "forward") - 0.219194).abs() <= 5e-7);
    assert!((p("cumulative-sums", "backward") - 0.114866).abs() <= 5e-7);
    let na = v["not_applicable"].as_array().unwrap();
    let rank = na.iter().find(|x| x["test"] == "rank").unwrap();
    assert!(rank["reason"].as_str().unwrap().contains("38912"));
    assert!(out.status.success(), "no test flagged: exit 0");
    // text form carries the caution line
    let out = sluice()
        .args(["assess", "output"])
        .arg(&f)
        .args(["--format", "ascii"])
        .output()
        .unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(
        text.contains("statistical tests cannot certify randomness"),
        "{text}"
    );
    assert!(text.contains("overall:"));
}

/// Many sequences: the proportion band of SP 800-22 4.2.1 (statistics.md
/// 4: m = 100 gives [0.9601504, 1.0198496]) and the uniformity check, and
/// the SVG plot.
#[test]
fn output_many_sequences_with_plot() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("lab-device-7.bin");
    std::fs::write(&f, pseudo_random(100 * 250, 0x1234_5678_9abc_def1)).unwrap();
    let svg = dir.path().join("p.svg");
    let out = sluice()
        .args(["assess", "output"])
        .arg(&f)
        .args([
            "--sequences",
            "100",
            "--sequence-bits",
            "2000",
            "--json",
            "--plot",
        ])
        .arg(&svg)
        .output()
        .unwrap();
    let v = json(&out);
    assert_eq!(v["sequences"], 100);
    let k = kind(&v, "frequency", "");
    let lo = k["interval"][0].as_f64().unwrap();
    assert!((lo - 0.9601504).abs() < 5e-8);
    assert_eq!(k["sequences"], 100);
    assert!(
        k["uniformity"].is_array(),
        "100 >= 55 sequences: uniformity computed"
    );
    let bins: u64 = k["bins"]
        .as_array()
        .unwrap()
        .iter()
        .map(|b| b.as_u64().unwrap())
        .sum();
    assert_eq!(bins, 100);
    let s = std::fs::read_to_string(&svg).unwrap();
    assert!(s.contains("<svg") && s.contains("acceptable range"), "svg");
}

/// Health tests through the command line: an all-zero raw file fails the
/// repetition count test at bit C − 1 = 20 for H = 1 (cutoff 21,
/// statistics.md 5.1 RCT-4), and the adaptive proportion test (cutoff 589,
/// APT-3) at bit 588; the exit status is 1 and the red flag is raised.
#[test]
fn raw_all_zero_fails_health_tests() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("zeros.bin");
    std::fs::write(&f, vec![0u8; 4096]).unwrap();
    let out = sluice()
        .args(["assess", "raw"])
        .arg(&f)
        .args(["--claimed-entropy", "1", "--json"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let v = json(&out);
    assert_eq!(v["repetition_count"]["cutoff"], 21);
    assert_eq!(v["repetition_count"]["first_failure"], 20);
    assert_eq!(v["adaptive_proportion"]["cutoff"], 589);
    assert_eq!(v["adaptive_proportion"]["first_failure"], 588);
    assert_eq!(v["red_flag"], true);
    assert_eq!(v["health_passed"], false);
}

/// A pseudo-random raw file passes the health tests at H = 0.5, gives
/// estimates close to 1 bit, lists what was left out, and draws a plot.
#[test]
fn raw_pseudo_random_passes() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("lab-device-7-raw.bin");
    std::fs::write(&f, pseudo_random(40_000, 0x0dd_ba11_cafe_f00d)).unwrap();
    let svg = dir.path().join("raw.svg");
    let out = sluice()
        .args(["assess", "raw"])
        .arg(&f)
        .args(["--claimed-entropy", "0.5", "--json", "--plot"])
        .arg(&svg)
        .output()
        .unwrap();
    let v = json(&out);
    assert_eq!(v["health_passed"], true);
    assert_eq!(v["red_flag"], false);
    assert_eq!(out.status.code(), Some(0));
    let est = v["assessment"]["estimates"].as_array().unwrap();
    assert_eq!(est.len(), 6);
    let min = v["assessment"]["min_entropy"].as_f64().unwrap();
    assert!(min > 0.7 && min <= 1.0, "{min}");
    assert_eq!(v["assessment"]["left_out"].as_array().unwrap().len(), 4);
    assert!(std::fs::read_to_string(&svg).unwrap().contains("<svg"));
}

fn stderr_of(args: &[&str], file: &Path) -> (Option<i32>, String) {
    let out = sluice()
        .args(&args[..2])
        .arg(file)
        .args(&args[2..])
        .output()
        .unwrap();
    (out.status.code(), String::from_utf8(out.stderr).unwrap())
}

/// Errors say what and where, and exit with status 2.
#[test]
fn errors_name_the_problem() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("short.bin");
    std::fs::write(&f, [0x5au8; 100]).unwrap();
    let (code, err) = stderr_of(
        &[
            "assess",
            "output",
            "--sequences",
            "2",
            "--sequence-bits",
            "1000",
        ],
        &f,
    );
    assert_eq!(code, Some(2));
    assert!(
        err.contains("2 sequences of 1000 bits need 2000 bits, but the input holds 800"),
        "{err}"
    );
    let g = dir.path().join("bad.txt");
    std::fs::write(&g, "0101x").unwrap();
    let (code, err) = stderr_of(&["assess", "raw", "--format", "ascii"], &g);
    assert_eq!(code, Some(2));
    assert!(err.contains("byte 4") && err.contains("'x'"), "{err}");
    let (code, err) = stderr_of(&["assess", "raw", "--claimed-entropy", "1.5"], &f);
    assert_eq!(code, Some(2));
    assert!(err.contains("--claimed-entropy 1.5"), "{err}");
}

/// `--bit-order lsb` and `--input-bits` change what is read: 0x01 bytes
/// are all-zero-but-one MSB first and one-then-zeros LSB first; the RCT
/// over 16 bits with a 7-zero run differs.
#[test]
fn bit_order_and_input_bits_options() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("ones.hex");
    std::fs::write(&f, "8080808080808080").unwrap();
    let run = |order: &str| {
        let out = sluice()
            .args(["assess", "raw"])
            .arg(&f)
            .args([
                "--format",
                "hex",
                "--bit-order",
                order,
                "--input-bits",
                "40",
                "--json",
                "--claimed-entropy",
                "1",
            ])
            .output()
            .unwrap();
        json(&out)
    };
    let msb = run("msb");
    let lsb = run("lsb");
    assert_eq!(msb["bits"], 40);
    // MSB first: 1000000010000000...; LSB first: 0000000100000001...
    assert_eq!(msb["assessment"]["samples"], 40);
    let mcv = |v: &serde_json::Value| {
        v["assessment"]["estimates"][0]["detail"]
            .as_str()
            .unwrap()
            .to_string()
    };
    assert_eq!(mcv(&msb), mcv(&lsb), "same counts either way");
    let first = |v: &serde_json::Value| {
        v["assessment"]["estimates"][2]["detail"]
            .as_str()
            .unwrap()
            .to_string()
    };
    assert_ne!(
        first(&msb),
        first(&lsb),
        "Markov sees the first bit: 1 vs 0"
    );
}
