//! Outside check: certificates written with the improved bound are
//! recomputed by an independent Python/scipy script (tests/certify_outside.py):
//! the bound term by term, scipy's own optimum, the binomial and Chernoff
//! completeness, and the record-check range. Skipped only when python3 or
//! the packages are missing and SLUICE_REQUIRE_OUTSIDE is unset; CI sets it.

use sluice::certify::simulate::SimulatedDevice;
use std::path::Path;
use std::process::Command;

fn sluice(dir: &Path, args: &[&str]) {
    let o = Command::new(env!("CARGO_BIN_EXE_sluice"))
        .current_dir(dir)
        .args(args)
        .output()
        .expect("the binary runs");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

#[test]
fn scipy_recomputes_improved_certificates() {
    let d = tempfile::tempdir().unwrap();
    let p = d.path();
    let mut text = Vec::new();
    SimulatedDevice::new(0.852, 0.2, 17).write_record(2_000_000, &mut text);
    std::fs::write(p.join("run.rounds"), &text).unwrap();
    let common = [
        "certify",
        "run.rounds",
        "--rounds",
        "2e6",
        "--test-probability",
        "0.2",
        "--expected-win",
        "0.85",
        "--completeness",
        "1e-8",
        "--smoothing",
        "1e-9",
        "--acceptance",
        "1e-9",
        "--setup",
        "separated",
    ];
    let mut certs = Vec::new();
    for (name, extra) in [
        ("wins.json", vec!["--test", "wins", "--tail", "binomial"]),
        (
            "score.json",
            vec!["--test", "score", "--score-offset", "0.55"],
        ),
        (
            "alice.json",
            vec![
                "--test",
                "score",
                "--score-offset",
                "0.6",
                "--keep",
                "alice",
            ],
        ),
    ] {
        let mut a: Vec<&str> = common.to_vec();
        a.extend(extra);
        a.extend(["-o", name]);
        sluice(p, &a);
        certs.push(p.join(name));
    }
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/certify_outside.py");
    let out = match Command::new("python3").arg(&script).args(&certs).output() {
        Ok(o) => o,
        Err(e) => {
            assert!(
                std::env::var_os("SLUICE_REQUIRE_OUTSIDE").is_none(),
                "python3 not runnable: {e}"
            );
            eprintln!("skipped: python3 not found");
            return;
        }
    };
    if out.status.code() == Some(3) {
        assert!(
            std::env::var_os("SLUICE_REQUIRE_OUTSIDE").is_none(),
            "numpy/scipy missing: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        eprintln!("skipped: {}", String::from_utf8_lossy(&out.stderr));
        return;
    }
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{text}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(text.contains(" 0 failed"), "{text}");
}
