//! `sluice demo`: each step's result, read from its `--json` document.

use std::process::Command;

fn demo(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_sluice"))
        .arg("demo")
        .args(args)
        .output()
        .expect("run sluice demo")
}

#[test]
fn demo_steps_hold_together() {
    let dir = tempfile::tempdir().unwrap();
    let keep = dir.path().join("kept");
    let out = demo(&["--json", "--keep", keep.to_str().unwrap()]);
    assert!(
        out.status.success(),
        "demo failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).expect("one JSON document");
    assert_eq!(j["ok"], true);
    let order: Vec<&str> = j["order"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s.as_str().unwrap())
        .collect();
    assert_eq!(
        order,
        [
            "parameters",
            "run",
            "certify",
            "plan",
            "commit_raw",
            "seed",
            "extract",
            "verify",
            "assess",
            "ledger"
        ]
    );
    let s = &j["steps"];
    for name in &order {
        assert!(
            s[name]["command"].as_str().is_some_and(|c| !c.is_empty()),
            "step {name} names no command"
        );
    }
    // The parameters were fixed by the plan and the run certified.
    assert_eq!(s["parameters"]["rounds"], 4_000_000);
    assert!(s["parameters"]["planned_bits"].as_u64().unwrap() > 0);
    assert_eq!(s["certify"]["accepted"], true);
    let k = s["certify"]["min_entropy_bits"].as_u64().unwrap();
    assert!(k > 0);
    assert_eq!(s["certify"]["string_bits"], 8_000_000);
    assert!(s["certify"]["command"]
        .as_str()
        .unwrap()
        .contains("--setup separated"));
    // The output is exactly the planned length, below the certified figure.
    let m = s["plan"]["output_bits"].as_u64().unwrap();
    assert!(m > 0 && m < k, "m {m}, k {k}");
    assert_eq!(s["extract"]["output_bits"], m);
    assert_eq!(s["extract"]["blocks"], 1);
    assert!(s["extract"]["eps_total"].as_f64().unwrap() <= 1e-8);
    assert_eq!(s["seed"]["bits"], s["plan"]["seed_bits"]);
    // The output was recomputed and matched.
    assert_eq!(s["verify"]["matches"], true);
    assert_eq!(s["verify"]["computed_bits"], m);
    // Assessments ran.
    assert_eq!(s["assess"]["raw"]["health_passed"], true);
    assert!(s["assess"]["raw"]["min_entropy_estimate"]
        .as_f64()
        .is_some());
    assert!(s["assess"]["output"]["tests_run"].as_u64().unwrap() >= 5);
    assert!(s["assess"]["output"]["p_values"].as_u64().unwrap() > 0);
    // The ledger verifies, the raw string committed before the seed existed,
    // no disclosure recorded.
    assert_eq!(s["ledger"]["ok"], true);
    let kinds: Vec<&str> = s["ledger"]["kinds"]
        .as_array()
        .unwrap()
        .iter()
        .map(|k| k.as_str().unwrap())
        .collect();
    assert_eq!(
        kinds,
        [
            "journal-started",
            "raw-committed",
            "seed-created",
            "use-reserved",
            "use-committed"
        ]
    );
    // Every file is kept; the secret ones owner-only.
    for f in [
        "params.txt",
        "record.txt",
        "cert.json",
        "raw.bin",
        "output.bin",
    ] {
        assert!(keep.join(f).is_file(), "{f} missing");
    }
    assert_eq!(
        std::fs::metadata(keep.join("output.bin")).unwrap().len(),
        m.div_ceil(8)
    );
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let mode = std::fs::metadata(keep.join("output.bin"))
            .unwrap()
            .permissions()
            .mode();
        assert_eq!(mode & 0o077, 0, "output.bin is readable by others");
    }
    // The seed's bits were never printed.
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(!text.contains("\"data\""));

    // A second run in the same folder is refused (the raw data were used).
    let again = demo(&["--keep", keep.to_str().unwrap()]);
    assert_eq!(again.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&again.stderr).contains("earlier demo run"));
}

#[test]
fn demo_without_files_prints_each_step_and_cleans_up() {
    let out = demo(&[]);
    assert!(
        out.status.success(),
        "demo failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8_lossy(&out.stdout);
    for cmd in [
        "sluice certify --plan",
        "sluice certify record.txt --params params.txt --setup separated",
        "sluice plan --certificate",
        "sluice ledger commit-raw",
        "sluice seed new",
        "sluice extract raw.bin --certificate",
        "sluice verify",
        "sluice assess raw",
        "sluice ledger verify",
    ] {
        assert!(text.contains(cmd), "no {cmd:?} in:\n{text}");
    }
    assert!(text.contains("temporary folder, now removed"));
    assert!(text.contains("caution:"));
}
