//! 8 processes extract in parallel with one seed whose budget admits
//! exactly 5 uses (issue 5): exactly 5 succeed, 3 are refused by the budget
//! rule, the journal verifies and the seed's spent error is 5 charges.
//! Repeated 50 times with random start delays and pauses after reserving.

mod ledger_common;
use ledger_common::*;
use std::process::{Command, Stdio};

#[test]
fn eight_parallel_runs_five_admitted() {
    let mut rng = Rng(0x5eed_1234_abcd_0001);
    for rep in 0..50 {
        let dir = tempfile::tempdir().unwrap();
        let ledger = dir.path().join("L");
        // Budget 5.5 charges: the 6th use would exceed it.
        let budget = format!("{:e}", 5.5 * CHARGE);
        let seed = new_seed(&ledger, "600", &budget);
        let mut raws = Vec::new();
        for i in 0..8 {
            let p = raw_file(dir.path(), &format!("raw{i}.bin"), &mut rng);
            ok(
                &ledger,
                &[
                    "ledger",
                    "commit-raw",
                    p.to_str().unwrap(),
                    "--origin",
                    "test rig",
                ],
            );
            raws.push(p);
        }
        let mut children = Vec::new();
        for (i, raw) in raws.iter().enumerate() {
            let out = dir.path().join(format!("out{i}.bin"));
            let start = rng.below(15);
            let pause = rng.below(15);
            let args = extract_args(raw.to_str().unwrap(), out.to_str().unwrap(), &seed)
                .into_iter()
                .map(String::from)
                .collect::<Vec<_>>();
            let child = Command::new(BIN)
                .args(&args)
                .env("SLUICE_LEDGER", &ledger)
                .env(
                    "SLUICE_TEST_HOOK",
                    format!("before-reserve:pause={start},after-reserve:pause={pause}"),
                )
                .stdout(Stdio::piped())
                .stderr(Stdio::piped())
                .spawn()
                .unwrap();
            children.push((out, child));
        }
        let mut succeeded = 0;
        let mut refused = 0;
        for (out, child) in children {
            let o = child.wait_with_output().unwrap();
            let err = String::from_utf8_lossy(&o.stderr);
            if o.status.success() {
                succeeded += 1;
                assert!(out.exists());
                let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
                // serde_json's default float parsing may be 1 ulp off.
                let c = v["charged"].as_f64().unwrap();
                assert!((c / CHARGE - 1.0).abs() < 1e-12, "charged {c}");
            } else {
                refused += 1;
                assert!(err.contains("budget rule"), "rep {rep}: {err}");
                assert!(!out.exists(), "rep {rep}: refused run left an output");
            }
        }
        assert_eq!((succeeded, refused), (5, 3), "rep {rep}");
        let (good, v) = verify_json(&ledger);
        assert!(good, "rep {rep}: {v}");
        assert_eq!(v["unresolved_uses"].as_array().unwrap().len(), 0);
        let s = seed_state(&ledger, &seed);
        assert_eq!(s["uses"], 5);
        assert_eq!(s["committed"], 5);
        let spent = s["spent"].as_f64().unwrap();
        assert!(
            (spent - 5.0 * CHARGE).abs() < 1e-20,
            "rep {rep}: spent {spent}"
        );
    }
}
