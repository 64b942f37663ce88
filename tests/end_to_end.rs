//! Simulated Bell-test record -> certify -> extract with the certificate ->
//! receipt -> verify, as a lab would run it (demo data of a fictional bench).

use serde_json::Value;
use sluice::certify::simulate::SimulatedDevice;
use std::path::Path;
use std::process::{Command, Output};

fn sluice(dir: &Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_sluice"))
        .current_dir(dir)
        .args(args)
        .output()
        .unwrap()
}

fn err(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

const PARAMS: &str = "rounds = 1000000\ntest-probability = 1\nexpected-win = 0.85\n\
    tolerance = 0.003\nsmoothing = 1e-6\nacceptance = 1e-6\n";

#[test]
fn record_to_verified_output() {
    let d = tempfile::tempdir().unwrap();
    let p = d.path();
    let mut text = Vec::new();
    SimulatedDevice::new(0.853, 1.0, 21).write_record(1_000_000, &mut text);
    std::fs::write(p.join("run.rounds"), &text).unwrap();
    std::fs::write(p.join("run.params"), PARAMS).unwrap();
    let o = sluice(
        p,
        &[
            "certify",
            "run.rounds",
            "--params",
            "run.params",
            "--setup",
            "separated",
            "-o",
            "run.cert.json",
            "--raw-out",
            "run.raw",
        ],
    );
    assert!(o.status.success(), "{}", err(&o));
    let cert: Value =
        serde_json::from_str(&std::fs::read_to_string(p.join("run.cert.json")).unwrap()).unwrap();
    let k = cert["min_entropy_bits"].as_u64().unwrap();
    // A seed from the operating system's source, longer than any plan needs.
    let mut seed = vec![0u8; 2_000_000 / 8 + 1000];
    getrandom_fill(&mut seed);
    std::fs::write(p.join("seed.bin"), &seed).unwrap();

    // The planner takes the same figures from the certificate, and refuses to
    // split the certified string into blocks.
    let o = sluice(
        p,
        &[
            "plan",
            "--certificate",
            "run.cert.json",
            "--target-error",
            "1e-5",
            "--json",
            "--quiet",
        ],
    );
    assert!(o.status.success(), "{}", err(&o));
    let plan: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(plan["inputs"]["n"], 2_000_000);
    assert_eq!(plan["inputs"]["k"].as_f64().unwrap(), k as f64);
    let o = sluice(
        p,
        &[
            "plan",
            "--certificate",
            "run.cert.json",
            "--target-error",
            "1e-5",
            "--blocks",
            "2",
            "--quiet",
        ],
    );
    assert_eq!(o.status.code(), Some(2), "{}", err(&o));

    // An explicit seed file with a certificate records no use of the seed:
    // refused unless the operator declares their own record (issue "no way
    // to overstate security", item 6).
    let o = sluice(
        p,
        &[
            "extract",
            "run.raw",
            "--certificate",
            "run.cert.json",
            "--target-error",
            "1e-5",
            "--seed-file",
            "seed.bin",
            "--allow-longer-seed",
            "-o",
            "out.bin",
            "--quiet",
        ],
    );
    assert_eq!(o.status.code(), Some(2), "{}", err(&o));
    assert!(err(&o).contains("--own-seed-record"), "{}", err(&o));
    assert!(!p.join("out.bin").exists());
    // Extraction with the certificate: n, k, eps_s, eps_cert come from it.
    let o = sluice(
        p,
        &[
            "extract",
            "run.raw",
            "--certificate",
            "run.cert.json",
            "--target-error",
            "1e-5",
            "--seed-file",
            "seed.bin",
            "--allow-longer-seed",
            "--own-seed-record",
            "-o",
            "out.bin",
            "--quiet",
            "--json",
        ],
    );
    assert!(o.status.success(), "{}", err(&o));
    let j: Value = serde_json::from_slice(&o.stdout).unwrap();
    let m = j["output_bits_per_block"].as_u64().unwrap();
    assert_eq!(j["input_bits_per_block"], 2_000_000);
    // The leftover hash lemma bound (spec/hashing 2.3): m <= k - 2 log2(1/eps_ext).
    assert!(
        m > 0 && (m as f64) <= k as f64 - 2.0 * (1.0f64 / 1e-5).log2(),
        "m = {m}, k = {k}"
    );
    let receipt: Value =
        serde_json::from_str(&std::fs::read_to_string(p.join("out.bin.receipt.json")).unwrap())
            .unwrap();
    assert_eq!(receipt["schema"], "sluice-receipt/1");
    assert_eq!(receipt["construction"]["output_bits"], m);
    assert_eq!(receipt["input"]["digest"], cert["string"]["digest"]);
    assert!(receipt["certificate"]["setup"]
        .as_str()
        .unwrap()
        .starts_with("separated"));
    assert_eq!(receipt["errors"]["eps_cert"], cert["eps_cert"]);
    assert!(receipt["errors"]["eps_total"].as_f64().unwrap() <= 1e-5);
    assert!(
        receipt["output_digest"].is_null(),
        "no output digest unless asked"
    );
    assert!(receipt["seed"]["id"].is_null() || receipt["seed"]["id"].as_str().unwrap().len() == 32);
    // The seed's digest and the operator's declaration are in the receipt,
    // and so are the certificate's model, bound and labels.
    assert_eq!(receipt["seed"]["digest"].as_str().unwrap().len(), 64);
    assert_eq!(receipt["seed"]["own_record"], true);
    assert_eq!(receipt["certificate"]["mode"], "entropy-accumulation");
    assert_eq!(receipt["certificate"]["bound"], cert["bound"]["name"]);
    assert_eq!(receipt["certificate"]["labels"], cert["labels"]);

    // The receipt, the input and the seed reproduce the output.
    let v = sluice(
        p,
        &[
            "verify",
            "run.raw",
            "--receipt",
            "out.bin.receipt.json",
            "--seed-file",
            "seed.bin",
            "--allow-longer-seed",
            "--claimed",
            "out.bin",
        ],
    );
    assert_eq!(
        v.status.code(),
        Some(0),
        "{}{}",
        String::from_utf8_lossy(&v.stdout),
        err(&v)
    );

    // A raw file that is not the certified string is refused before anything is written.
    let mut other = std::fs::read(p.join("run.raw")).unwrap();
    other[10] ^= 1;
    std::fs::write(p.join("other.raw"), &other).unwrap();
    let o = sluice(
        p,
        &[
            "extract",
            "other.raw",
            "--certificate",
            "run.cert.json",
            "--target-error",
            "1e-5",
            "--seed-file",
            "seed.bin",
            "--allow-longer-seed",
            "-o",
            "bad.bin",
            "--quiet",
        ],
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(err(&o).contains("not the string"), "{}", err(&o));
    assert!(!p.join("bad.bin").exists() && !p.join("bad.bin.receipt.json").exists());
    // verify with the receipt also notices the wrong input.
    let v = sluice(
        p,
        &[
            "verify",
            "other.raw",
            "--receipt",
            "out.bin.receipt.json",
            "--seed-file",
            "seed.bin",
            "--allow-longer-seed",
            "--claimed",
            "out.bin",
        ],
    );
    assert_eq!(v.status.code(), Some(1));
    // A certificate covers one block: splitting it is refused.
    let o = sluice(
        p,
        &[
            "extract",
            "run.raw",
            "--certificate",
            "run.cert.json",
            "--target-error",
            "1e-5",
            "--seed-file",
            "seed.bin",
            "--allow-longer-seed",
            "--block-bits",
            "1000000",
            "-o",
            "split.bin",
            "--quiet",
        ],
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(err(&o).contains("one block"), "{}", err(&o));
}

fn getrandom_fill(buf: &mut [u8]) {
    use rand_core::{OsRng, RngCore};
    OsRng.fill_bytes(buf);
}
