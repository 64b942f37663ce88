//! Runs the built `sluice certify` binary on simulated records and on the
//! worked examples of `spec/certification.md`.

use serde_json::Value;
use sluice::bits::digest::data_digest;
use sluice::bits::io::read_bits;
use sluice::bits::{BitOrder, Format};
use sluice::certify::certificate::Certificate;
use sluice::certify::simulate::SimulatedDevice;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn sluice(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_sluice"))
        .args(args)
        .output()
        .expect("the binary runs")
}

fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).to_string()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).to_string()
}

fn json(o: &Output) -> Value {
    serde_json::from_slice(&o.stdout).unwrap_or_else(|e| panic!("not JSON ({e}): {}", stdout(o)))
}

fn write(dir: &Path, name: &str, bytes: &[u8]) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, bytes).unwrap();
    p
}

/// A record of the fictional bench (demo data) and its raw output bits.
fn simulated(n: u64, w: f64, gamma: f64, seed: u64) -> (Vec<u8>, Vec<bool>) {
    let mut text = Vec::new();
    SimulatedDevice::new(w, gamma, seed).write_record(n, &mut text);
    let mut bits = Vec::new();
    for line in text.split(|&c| c == b'\n') {
        if line.len() == 5 {
            bits.push(line[3] == b'1');
            bits.push(line[4] == b'1');
        }
    }
    (text, bits)
}

const PARAMS_1E6: &str = "# fixed before the run (fictional bench QM-7)\n\
    rounds = 1000000\n\
    test-probability = 1\n\
    expected-win = 0.85\n\
    tolerance = 0.003\n\
    smoothing = 1e-6\n\
    acceptance = 1e-6\n";

#[test]
fn certifies_a_simulated_record_and_writes_the_raw_string() {
    let dir = tempfile::tempdir().unwrap();
    let (text, bits) = simulated(1_000_000, 0.853, 1.0, 11);
    let rec = write(dir.path(), "run.rounds", &text);
    let params = write(dir.path(), "run.params", PARAMS_1E6.as_bytes());
    let cert = dir.path().join("run.cert.json");
    let raw = dir.path().join("run.raw");
    let o = sluice(&[
        "certify",
        rec.to_str().unwrap(),
        "--params",
        params.to_str().unwrap(),
        "--setup",
        "separated",
        "-o",
        cert.to_str().unwrap(),
        "--raw-out",
        raw.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let out = stdout(&o);
    assert!(out.contains("ACCEPT"), "{out}");
    assert!(out.contains("No signalling"), "cautions printed: {out}");
    let c = Certificate::from_json_str(&std::fs::read_to_string(&cert).unwrap()).unwrap();
    assert!(c.accepted);
    assert_eq!(c.string.length_bits, 2_000_000);
    assert_eq!(c.blocks, 1);
    assert!(!c.per_block_bounds);
    assert_eq!(c.parameters.source, "file");
    // The raw output is exactly a1 b1 .. aN bN (spec 3.8), packed MSB-first
    // (conventions.md), and the certificate names it by its data digest.
    let got = read_bits(&raw, Format::Packed, BitOrder::Msb, Some(2_000_000)).unwrap();
    assert_eq!(got.iter().collect::<Vec<_>>(), bits);
    assert_eq!(c.string.digest, data_digest(&got));
    assert_eq!(std::fs::metadata(&raw).unwrap().len(), 250_000);
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        assert_eq!(
            std::fs::metadata(&raw).unwrap().permissions().mode() & 0o777,
            0o600
        );
    }
    // The figure equals the library's planning figure for the same
    // parameters with the actual N_test = N_rounds (gamma = 1): the bound
    // does not depend on W once the run passes (spec 3.4).
    let plan = sluice(&[
        "certify",
        "--plan",
        "--params",
        params.to_str().unwrap(),
        "--json",
    ]);
    let p = json(&plan);
    // planning charges ceil(log2(N + 1)) = 20 bits for W, like N_test = N here
    let chosen = p["chosen"].as_u64().unwrap() as usize;
    assert_eq!(
        p["rows"][chosen]["bits"].as_u64().unwrap(),
        c.min_entropy_bits
    );
    assert!(c.min_entropy_bits > 400_000, "{}", c.min_entropy_bits);
    // The certificate names its bound and recomputes from its own fields.
    assert_eq!(c.bound_name(), "improved-2019");
    assert_eq!(c.recompute().unwrap(), c.min_entropy_bits);
    assert_eq!(c.disclosure_charge_bits, 20);
    // No temporary files are left behind.
    let names: Vec<_> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    assert_eq!(names.len(), 4, "{names:?}");
}

#[test]
fn gzip_record_gives_the_same_certificate() {
    let dir = tempfile::tempdir().unwrap();
    let (text, _) = simulated(20_000, 0.85, 0.5, 3);
    let plain = write(dir.path(), "r.txt", &text);
    let mut gz = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
    gz.write_all(&text).unwrap();
    let packed = write(dir.path(), "r.txt.gz", &gz.finish().unwrap());
    let mut certs = Vec::new();
    for (rec, name) in [(&plain, "a.json"), (&packed, "b.json")] {
        let cert = dir.path().join(name);
        let o = sluice(&[
            "certify",
            rec.to_str().unwrap(),
            "--rounds",
            "20000",
            "--test-probability",
            "0.5",
            "--expected-win",
            "0.85",
            "--tolerance",
            "0.02",
            "--smoothing",
            "1e-3",
            "--acceptance",
            "1e-3",
            "--setup",
            "shielded",
            "-o",
            cert.to_str().unwrap(),
            "--json",
        ]);
        assert!(o.status.success(), "{}", stderr(&o));
        certs.push(Certificate::from_json_str(&std::fs::read_to_string(&cert).unwrap()).unwrap());
    }
    assert!(!certs[0].record.compressed && certs[1].record.compressed);
    assert_eq!(certs[0].string, certs[1].string);
    assert_eq!(certs[0].min_entropy_bits, certs[1].min_entropy_bits);
    assert_ne!(certs[0].record.file_digest, certs[1].record.file_digest);
}

#[test]
fn aborted_run_writes_no_raw_output() {
    let dir = tempfile::tempdir().unwrap();
    let (text, _) = simulated(10_000, 0.80, 0.5, 5);
    let rec = write(dir.path(), "r.txt", &text);
    let cert = dir.path().join("c.json");
    let raw = dir.path().join("raw.bin");
    let o = sluice(&[
        "certify",
        rec.to_str().unwrap(),
        "--rounds",
        "10000",
        "--test-probability",
        "0.5",
        "--expected-win",
        "0.85",
        "--tolerance",
        "0.01",
        "--smoothing",
        "1e-6",
        "--acceptance",
        "1e-6",
        "--setup",
        "separated",
        "-o",
        cert.to_str().unwrap(),
        "--raw-out",
        raw.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    assert!(stdout(&o).contains("ABORT"));
    assert!(!raw.exists());
    let c = Certificate::from_json_str(&std::fs::read_to_string(&cert).unwrap()).unwrap();
    assert!(!c.accepted);
    assert_eq!(c.min_entropy_bits, 0);
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 2);
}

#[test]
fn record_errors_name_the_line() {
    let dir = tempfile::tempdir().unwrap();
    let common = [
        "--rounds",
        "3",
        "--test-probability",
        "0.5",
        "--expected-win",
        "0.85",
        "--tolerance",
        "0.01",
        "--smoothing",
        "1e-6",
        "--acceptance",
        "1e-6",
        "--setup",
        "separated",
    ];
    let cases: [(&[u8], &str); 4] = [
        (
            b"# header\n11011\n1x011\n00000\n",
            "line 3: \"1x011\" is not a round",
        ),
        (
            b"11011\n00000\n01100\n",
            "line 3: a generation round (test flag 0) has inputs x = 1, y = 1",
        ),
        (b"11011\n00000\n", "the record holds 2 rounds"),
        (b"11011\n00000\n1101\n", "line 3: \"1101\" is not a round"),
    ];
    for (text, want) in cases {
        let rec = write(dir.path(), "bad.txt", text);
        let mut args = vec!["certify", rec.to_str().unwrap()];
        args.extend_from_slice(&common);
        let o = sluice(&args);
        assert_eq!(o.status.code(), Some(2));
        assert!(
            stderr(&o).contains(want),
            "want {want:?}, got {}",
            stderr(&o)
        );
    }
}

#[test]
fn win_fraction_above_quantum_is_refused_with_its_value() {
    // spec 1 and 8: more than 5 sigma above cos^2(pi/8) is an error naming
    // the value. 9500 of 10000 test rounds won: 0.95.
    let dir = tempfile::tempdir().unwrap();
    let counts = write(
        dir.path(),
        "c.txt",
        b"rounds = 10000\ntest-rounds = 10000\nwins = 9500\n",
    );
    let o = sluice(&[
        "certify",
        "--counts",
        counts.to_str().unwrap(),
        "--rounds",
        "10000",
        "--test-probability",
        "1",
        "--expected-win",
        "0.85",
        "--tolerance",
        "0.01",
        "--smoothing",
        "1e-6",
        "--acceptance",
        "1e-6",
        "--setup",
        "separated",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("win fraction 0.950000"),
        "{}",
        stderr(&o)
    );
}

/// spec 3.7 worked example as counts: N = 1e8, N_test = 1e7, W = 8.4e6.
fn worked_example(extra: &[&str]) -> Output {
    let dir = tempfile::tempdir().unwrap();
    let counts = write(
        dir.path(),
        "c.txt",
        b"rounds = 1e8\ntest-rounds = 10000000\nwins = 8400000\n",
    );
    let mut args = vec![
        "certify",
        "--counts",
        counts.to_str().unwrap(),
        "--rounds",
        "1e8",
        "--test-probability",
        "0.1",
        "--expected-win",
        "0.84",
        "--tolerance",
        "0.002",
        "--smoothing",
        "1e-6",
        "--acceptance",
        "1e-6",
        "--bound",
        "first-2016",
        "--json",
    ];
    args.extend_from_slice(extra);
    sluice(&args)
}

#[test]
fn worked_example_from_counts() {
    // spec 3.7 and 3.9: floor(B - 1) = 52 402 750 bits with W secret; with
    // W public and N_test = 1e7 the charge is 24 bits.
    let o = worked_example(&["--setup", "separated"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v = json(&o);
    assert_eq!(v["min_entropy_bits"], 52_402_726);
    assert_eq!(v["disclosure_charge_bits"], 24);
    assert_eq!(v["public_values"]["wins"], 8_400_000);
    assert_eq!(v["result"]["ceiling_k"], 101);
    let o = worked_example(&["--setup", "separated", "--public", "none"]);
    let v = json(&o);
    assert_eq!(v["min_entropy_bits"], 52_402_750);
    assert!(v["public_values"]["wins"].is_null());
    // The text form keeps W secret when it is not published.
    let o = worked_example(&["--setup", "separated", "--public", "none"]);
    assert!(!stdout(&o).contains("8400000"));
    // Counts cannot publish pair counts.
    let o = worked_example(&["--setup", "separated", "--public", "wins,s-hat"]);
    assert_eq!(o.status.code(), Some(2));
}

#[test]
fn single_device_is_labelled_everywhere() {
    let o = worked_example(&["--setup", "single-device"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v = json(&o);
    assert!(v["labels"][0]
        .as_str()
        .unwrap()
        .contains("not device-independent"));
    let dir = tempfile::tempdir().unwrap();
    let (text, _) = simulated(1000, 0.85, 0.5, 9);
    let rec = write(dir.path(), "r.txt", &text);
    let cert = dir.path().join("c.json");
    let o = sluice(&[
        "certify",
        rec.to_str().unwrap(),
        "--rounds",
        "1000",
        "--test-probability",
        "0.5",
        "--expected-win",
        "0.85",
        "--tolerance",
        "0.05",
        "--smoothing",
        "1e-3",
        "--acceptance",
        "1e-3",
        "--setup",
        "single-device",
        "-o",
        cert.to_str().unwrap(),
    ]);
    assert!(
        stdout(&o).contains("not device-independent"),
        "{}",
        stdout(&o)
    );
    let c = Certificate::from_json_str(&std::fs::read_to_string(&cert).unwrap()).unwrap();
    assert!(!c.device_independent);
    // A setup must be declared.
    let o = worked_example(&[]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("--setup"));
}

#[test]
fn iid_estimate_from_counts() {
    // spec 4 table, first row: 3016 test rounds, 2418 won, eps_est = 0.01:
    // 238.58 bits, minus 12 bits for publishing W, floored: 226.
    let dir = tempfile::tempdir().unwrap();
    let counts = write(
        dir.path(),
        "c.txt",
        b"rounds = 3016\ntest-rounds = 3016\nwins = 2418\n",
    );
    let o = sluice(&[
        "certify",
        "--counts",
        counts.to_str().unwrap(),
        "--rounds",
        "3016",
        "--test-probability",
        "1",
        "--model",
        "iid",
        "--estimation-error",
        "0.01",
        "--setup",
        "separated",
        "--json",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v = json(&o);
    assert_eq!(v["min_entropy_bits"], 226);
    assert!(v["labels"][1]
        .as_str()
        .unwrap()
        .starts_with("i.i.d. estimate"));
    assert!((v["result"]["win_lower_bound"].as_f64().unwrap() - 0.774093).abs() < 1e-6);
}

#[test]
fn plan_reproduces_regression_vectors_and_draws() {
    // spec 5 regression vector 1 and 3.7 (H with W public, planning).
    let dir = tempfile::tempdir().unwrap();
    let svg = dir.path().join("plan.svg");
    let o = sluice(&[
        "certify",
        "--plan",
        "--rounds",
        "1e8",
        "--test-probability",
        "0.1",
        "--expected-win",
        "0.84",
        "--tolerance",
        "0.002",
        "--smoothing",
        "1e-6",
        "--acceptance",
        "1e-6",
        "--bound",
        "first-2016",
        "--json",
        "--plot",
        svg.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v = json(&o);
    assert_eq!(v["result"]["bits"], 52_402_723);
    assert!((v["result"]["bound_bits"].as_f64().unwrap() - 52_402_751.074236).abs() < 1e-3);
    assert!((v["result"]["eps_c"].as_f64().unwrap() - 3.35e-4).abs() < 1e-6);
    let s = std::fs::read_to_string(&svg).unwrap();
    assert!(s.contains("<svg") && s.contains("gamma = 0.1 (given)"));
    // Table A of 3.7: gamma 1, N = 1e6, delta for eps_c = 1e-6: H = 466383.
    let o = sluice(&[
        "certify",
        "--plan",
        "--rounds",
        "1000000",
        "--test-probability",
        "1",
        "--expected-win",
        "0.84",
        "--completeness",
        "1e-6",
        "--smoothing",
        "1e-6",
        "--acceptance",
        "1e-6",
        "--bound",
        "first-2016",
        "--json",
    ]);
    assert_eq!(json(&o)["result"]["bits"], 466_383);
}

#[test]
fn parameters_are_given_once() {
    let dir = tempfile::tempdir().unwrap();
    let params = write(dir.path(), "p.txt", PARAMS_1E6.as_bytes());
    let o = sluice(&[
        "certify",
        "--plan",
        "--params",
        params.to_str().unwrap(),
        "--tolerance",
        "0.001",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("given both"), "{}", stderr(&o));
    let bad = write(dir.path(), "q.txt", b"rounds = 10\ngama = 0.5\n");
    let o = sluice(&["certify", "--plan", "--params", bad.to_str().unwrap()]);
    assert!(
        stderr(&o).contains("line 2: unknown key \"gama\""),
        "{}",
        stderr(&o)
    );
}

#[test]
fn counts_file_may_carry_the_parameters() {
    // Summary form for users with counts only: spec 3.7 worked example in
    // one file (counts and parameters); W public: 52 402 750 - 24 bits.
    let dir = tempfile::tempdir().unwrap();
    let f = write(
        dir.path(),
        "summary.txt",
        b"# fictional bench QM-7, run 12\nrounds = 100000000\ntest-probability = 0.1\n\
          expected-win = 0.84\ntolerance = 0.002\nsmoothing = 1e-6\nacceptance = 1e-6\n\
          bound = first-2016\n\
          test-rounds = 10000000\nwins = 8400000\n",
    );
    let raw = write(dir.path(), "raw.bin", &[]);
    let o = sluice(&[
        "certify",
        "--counts",
        f.to_str().unwrap(),
        "--setup",
        "separated",
        "--json",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(json(&o)["min_entropy_bits"], 52_402_726);
    // A certificate needs the raw string: with counts, --raw-in names it,
    // and its size must match 2 N_rounds bits.
    let cert = dir.path().join("c.json");
    let o = sluice(&[
        "certify",
        "--counts",
        f.to_str().unwrap(),
        "--setup",
        "separated",
        "-o",
        cert.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("--raw-in"), "{}", stderr(&o));
    let o = sluice(&[
        "certify",
        "--counts",
        f.to_str().unwrap(),
        "--setup",
        "separated",
        "--raw-in",
        raw.to_str().unwrap(),
        "-o",
        cert.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("needs 25000000 bytes"),
        "{}",
        stderr(&o)
    );
}
