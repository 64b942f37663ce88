//! The misuse paths of `sluice certify` and of the certificate downstream,
//! each with a record or certificate crafted to trigger it (issue "no way to
//! overstate security"), and the improved bound's command-line flow.

use serde_json::Value;
use sluice::bits::io::read_bits;
use sluice::bits::{BitOrder, Format};
use sluice::certify::certificate::{Certificate, COUNTS_LABEL};
use sluice::certify::simulate::SimulatedDevice;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn sluice(dir: &Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_sluice"))
        .current_dir(dir)
        .env("XDG_CACHE_HOME", dir)
        .env("HOME", dir)
        .args(args)
        .output()
        .expect("the binary runs")
}

fn err(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).to_string()
}

fn out(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).to_string()
}

fn write(dir: &Path, name: &str, bytes: &[u8]) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, bytes).unwrap();
    p
}

/// Rounds "T X Y A B" with outputs always a = b = 0, inputs cycling through
/// the given test pairs (fictional bench data).
fn constant_output_record(n: usize, test_pairs: &[(u8, u8)], every_round_a_test: bool) -> Vec<u8> {
    let mut t = Vec::new();
    for i in 0..n {
        if every_round_a_test || i % 2 == 0 {
            let (x, y) = test_pairs[i % test_pairs.len()];
            t.extend_from_slice(format!("1{x}{y}00\n").as_bytes());
        } else {
            t.extend_from_slice(b"00000\n");
        }
    }
    t
}

const EA_OPTS: &[&str] = &[
    "--expected-win",
    "0.75",
    "--tolerance",
    "0.0",
    "--smoothing",
    "1e-6",
    "--acceptance",
    "1e-6",
    "--bound",
    "first-2016",
    "--setup",
    "separated",
];

#[test]
fn every_round_a_test_with_declared_gamma_one_half_is_refused() {
    // Item 1: every round is a test round, outputs a = b = 0, declared
    // gamma = 0.5. On the earlier main this was accepted with ~281,000 bits.
    let d = tempfile::tempdir().unwrap();
    let pairs = [(0, 0), (0, 1), (1, 0), (1, 1)];
    write(
        d.path(),
        "r.txt",
        &constant_output_record(20_000, &pairs, true),
    );
    let mut args = vec![
        "certify",
        "r.txt",
        "--rounds",
        "20000",
        "--test-probability",
        "0.5",
        "-o",
        "c.json",
    ];
    args.extend_from_slice(EA_OPTS);
    let o = sluice(d.path(), &args);
    assert_eq!(o.status.code(), Some(2), "{}", out(&o));
    let e = err(&o);
    assert!(
        e.contains("20000 test rounds") && e.contains("Rule:") && e.contains("What to do:"),
        "{e}"
    );
    assert!(!d.path().join("c.json").exists());
}

#[test]
fn biased_test_inputs_are_refused() {
    // Item 2: P(x = y = 1) = 0.15 and constant outputs win 85 % of the test
    // rounds (above the quantum maximum only because the inputs are biased).
    let d = tempfile::tempdir().unwrap();
    let mut pairs = Vec::new();
    for i in 0..100 {
        pairs.push(match i {
            0..=14 => (1, 1),
            15..=43 => (0, 0),
            44..=71 => (0, 1),
            _ => (1, 0),
        });
    }
    write(
        d.path(),
        "r.txt",
        &constant_output_record(20_000, &pairs, true),
    );
    let mut args = vec![
        "certify",
        "r.txt",
        "--rounds",
        "20000",
        "--test-probability",
        "1",
    ];
    args.extend_from_slice(EA_OPTS);
    let o = sluice(d.path(), &args);
    assert_eq!(o.status.code(), Some(2), "{}", out(&o));
    assert!(
        err(&o).contains("test inputs (") && err(&o).contains("uniform and independent"),
        "{}",
        err(&o)
    );
}

/// spec 3.7 worked example as counts, with a zero raw file of the right size.
fn counts_certificate(d: &Path) {
    write(
        d,
        "counts.txt",
        b"rounds = 1e6\ntest-rounds = 100000\nwins = 84000\n",
    );
    write(d, "zeros.bin", &vec![0u8; 250_000]);
    let o = sluice(
        d,
        &[
            "certify",
            "--counts",
            "counts.txt",
            "--raw-in",
            "zeros.bin",
            "--rounds",
            "1e6",
            "--test-probability",
            "0.1",
            "--expected-win",
            "0.84",
            "--completeness",
            "1e-6",
            "--test",
            "wins",
            "--smoothing",
            "1e-6",
            "--acceptance",
            "1e-6",
            "--setup",
            "separated",
            "-o",
            "counts.cert.json",
        ],
    );
    assert!(o.status.success(), "{}", err(&o));
}

#[test]
fn counts_certificates_are_labelled_and_need_an_acknowledgement() {
    // Item 4: a certificate from counts binds any file of the right size:
    // labelled unchecked everywhere, and extraction needs --trust-counts.
    let d = tempfile::tempdir().unwrap();
    let p = d.path();
    counts_certificate(p);
    let c =
        Certificate::from_json_str(&std::fs::read_to_string(p.join("counts.cert.json")).unwrap())
            .unwrap();
    assert!(c.labels.iter().any(|l| l == COUNTS_LABEL));
    assert!(c.min_entropy_bits > 0);
    write(p, "seed.bin", &vec![0x5au8; 300_000]);
    let extract = |extra: &[&str]| {
        let mut a = vec![
            "extract",
            "zeros.bin",
            "--certificate",
            "counts.cert.json",
            "--target-error",
            "1e-5",
            "--seed-file",
            "seed.bin",
            "--allow-longer-seed",
            "--own-seed-record",
            "-o",
            "out.bin",
            "--quiet",
        ];
        a.extend_from_slice(extra);
        sluice(p, &a)
    };
    let o = extract(&[]);
    assert_eq!(o.status.code(), Some(2));
    assert!(err(&o).contains("--trust-counts"), "{}", err(&o));
    assert!(!p.join("out.bin").exists());
    let o = extract(&["--trust-counts"]);
    assert!(o.status.success(), "{}", err(&o));
    assert!(err(&o).contains("label: unchecked"), "{}", err(&o));
    // Item 3: the labels reach the receipt and the verify output.
    let r: Value =
        serde_json::from_str(&std::fs::read_to_string(p.join("out.bin.receipt.json")).unwrap())
            .unwrap();
    assert_eq!(r["certificate"]["record_form"], "counts");
    assert!(r["certificate"]["labels"].to_string().contains("unchecked"));
    assert!(r["labels"].to_string().contains("--trust-counts"));
    let v = sluice(
        p,
        &[
            "verify",
            "zeros.bin",
            "--receipt",
            "out.bin.receipt.json",
            "--seed-file",
            "seed.bin",
            "--allow-longer-seed",
            "--claimed",
            "out.bin",
        ],
    );
    assert_eq!(v.status.code(), Some(0), "{}", err(&v));
    assert!(out(&v).contains("label: unchecked"), "{}", out(&v));
}

#[test]
fn edited_certificates_are_refused_by_plan_and_extract() {
    // Item 5: editing min_entropy_bits or the error terms is refused before
    // any use (the figure is recomputed from the certificate's own fields).
    let d = tempfile::tempdir().unwrap();
    let p = d.path();
    counts_certificate(p);
    let text = std::fs::read_to_string(p.join("counts.cert.json")).unwrap();
    let v: Value = serde_json::from_str(&text).unwrap();
    type Edit = Box<dyn Fn(&mut Value)>;
    let edits: Vec<(&str, Edit)> = vec![
        (
            "min_entropy_bits",
            Box::new(|v| v["min_entropy_bits"] = 900_000.into()),
        ),
        ("eps_s", Box::new(|v| v["eps_s"] = 1e-30.into())),
        ("eps_cert", Box::new(|v| v["eps_cert"] = 1e-30.into())),
        (
            "min_entropy_bits",
            Box::new(|v| {
                v["eps_cert"] = 1e-30.into();
                v["parameters"]["acceptance"] = 1e-30.into();
            }),
        ),
    ];
    for (field, edit) in edits {
        let mut w = v.clone();
        edit(&mut w);
        write(
            p,
            "edited.json",
            serde_json::to_string_pretty(&w).unwrap().as_bytes(),
        );
        let o = sluice(
            p,
            &[
                "plan",
                "--certificate",
                "edited.json",
                "--trust-counts",
                "--target-error",
                "1e-5",
            ],
        );
        assert_eq!(o.status.code(), Some(2), "{field}: {}", out(&o));
        assert!(
            err(&o).contains(&format!("{field}:")),
            "{field}: {}",
            err(&o)
        );
        let o = sluice(
            p,
            &[
                "extract",
                "zeros.bin",
                "--certificate",
                "edited.json",
                "--trust-counts",
                "--target-error",
                "1e-5",
                "--new-seed",
                "--ledger",
                "ledger",
                "-o",
                "out.bin",
            ],
        );
        assert_eq!(o.status.code(), Some(2), "{field}: {}", out(&o));
        assert!(!p.join("out.bin").exists());
    }
}

#[test]
fn improved_bound_flow_with_score_test_and_alice_bits() {
    // The plan fixes a score test; a simulated run certifies with it; the
    // Alice-only string is the even bits of the pair string and certifies
    // N_test bits fewer.
    let d = tempfile::tempdir().unwrap();
    let p = d.path();
    let plan = sluice(
        p,
        &[
            "certify",
            "--plan",
            "--rounds",
            "1e6",
            "--test-probability",
            "0.5",
            "--expected-win",
            "0.85",
            "--completeness",
            "1e-6",
            "--smoothing",
            "1e-6",
            "--acceptance",
            "1e-6",
            "--json",
        ],
    );
    assert!(plan.status.success(), "{}", err(&plan));
    let pj: Value = serde_json::from_slice(&plan.stdout).unwrap();
    let params = pj["parameters_file"].as_str().unwrap().to_string();
    assert!(params.contains("test = "), "{params}");
    write(p, "run.params", params.as_bytes());
    let mut text = Vec::new();
    SimulatedDevice::new(0.853, 0.5, 5).write_record(1_000_000, &mut text);
    write(p, "run.rounds", &text);
    let run = |keep: &str, raw: &str, cert: &str| {
        sluice(
            p,
            &[
                "certify",
                "run.rounds",
                "--params",
                "run.params",
                "--keep",
                keep,
                "--setup",
                "separated",
                "--raw-out",
                raw,
                "-o",
                cert,
            ],
        )
    };
    // The params file from --plan names keep = pairs: giving --keep again
    // is a clash, so write a copy without it for the Alice run.
    let o = run("pairs", "pairs.raw", "pairs.json");
    assert_eq!(o.status.code(), Some(2), "keep given twice: {}", err(&o));
    let no_keep: String = params
        .lines()
        .filter(|l| !l.starts_with("keep"))
        .map(|l| format!("{l}\n"))
        .collect();
    write(p, "run.params", no_keep.as_bytes());
    let o = run("pairs", "pairs.raw", "pairs.json");
    assert!(o.status.success(), "{}", err(&o));
    let o = run("alice", "alice.raw", "alice.json");
    assert!(o.status.success(), "{}", err(&o));
    let cp = Certificate::from_json_str(&std::fs::read_to_string(p.join("pairs.json")).unwrap())
        .unwrap();
    let ca = Certificate::from_json_str(&std::fs::read_to_string(p.join("alice.json")).unwrap())
        .unwrap();
    assert_eq!(cp.bound_name(), "improved-2019");
    assert_eq!(cp.recompute().unwrap(), cp.min_entropy_bits);
    assert_eq!(ca.recompute().unwrap(), ca.min_entropy_bits);
    assert_eq!(ca.string.length_bits, 1_000_000);
    assert_eq!(
        ca.min_entropy_bits + ca.record.test_rounds,
        cp.min_entropy_bits
    );
    let pairs = read_bits(
        &p.join("pairs.raw"),
        Format::Packed,
        BitOrder::Msb,
        Some(2_000_000),
    )
    .unwrap();
    let alice = read_bits(
        &p.join("alice.raw"),
        Format::Packed,
        BitOrder::Msb,
        Some(1_000_000),
    )
    .unwrap();
    let want: Vec<bool> = pairs.iter().step_by(2).collect();
    assert_eq!(alice.iter().collect::<Vec<_>>(), want);
    // The certified figure stays below the asymptotic N g(w_exp) (spec 2.2).
    assert!((cp.min_entropy_bits as f64) < 1e6 * sluice::certify::chsh::g(0.85));
}
