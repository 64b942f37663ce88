//! `sluice extract --extractor two-source` and `sluice verify` for it, with
//! the output checked against the definition of
//! `spec/hashing-and-composition.md` 6.2 (`reference::two_source`).

use sluice::bits::{BitOrder, Bits};
use sluice::extract::reference;
use std::path::Path;
use std::process::{Command, Output};

mod cli_common;
use cli_common::{pseudo, sluice};

fn err(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn setup(xbits: usize, ybits: usize) -> (tempfile::TempDir, Bits, Bits) {
    let d = tempfile::tempdir().unwrap();
    let x = pseudo(11, xbits);
    let y = pseudo(23, ybits);
    std::fs::write(d.path().join("x.bin"), x.to_packed(BitOrder::Msb)).unwrap();
    std::fs::write(d.path().join("y.bin"), y.to_packed(BitOrder::Msb)).unwrap();
    (d, x, y)
}

#[test]
fn extract_matches_definition_and_verify_agrees() {
    // 2000 bytes = 16000 bits each; 15971 is the largest valid n not above
    // 16000 (computed independently of valid_n: multiplicative order of 2
    // mod n by a Python loop).
    let (d, x, y) = setup(16000, 16000);
    let n = 15971usize;
    assert!(sluice::plan::two_source::valid_n(n as u64));
    assert_eq!(sluice::plan::two_source::largest_n(16000), Some(n as u64));
    let args = [
        "extract",
        "x.bin",
        "--extractor",
        "two-source",
        "--second-source",
        "y.bin",
        "--input-bits",
        "15971",
        "--output-bits",
        "1001",
        "-o",
        "out.bin",
    ];
    let o = sluice(d.path(), &args);
    assert!(o.status.success(), "{}", err(&o));
    let e = err(&o);
    assert!(
        e.contains("caution: classical side information only; the two sources must be independent"),
        "{e}"
    );
    assert!(!e.contains("Seeds must be"), "no seed caution: {e}");
    let want = reference::two_source(&x.slice(0, n), &y.slice(0, n), 1001);
    let got = std::fs::read(d.path().join("out.bin")).unwrap();
    assert_eq!(got, want.to_packed(BitOrder::Msb));

    // --quiet drops the cautions.
    let mut q = args.to_vec();
    q.push("--quiet");
    let o = sluice(d.path(), &q);
    assert!(o.status.success(), "{}", err(&o));
    assert!(!err(&o).contains("caution"), "{}", err(&o));

    let verify = |claimed: &str| {
        sluice(
            d.path(),
            &[
                "verify",
                "x.bin",
                "--extractor",
                "two-source",
                "--second-source",
                "y.bin",
                "--input-bits",
                "15971",
                "--output-bits",
                "1001",
                "--claimed",
                claimed,
            ],
        )
    };
    let o = verify("out.bin");
    assert_eq!(o.status.code(), Some(0), "{}", err(&o));
    let mut bad = want.clone();
    bad.set(500, !bad.get(500));
    std::fs::write(d.path().join("bad.bin"), bad.to_packed(BitOrder::Msb)).unwrap();
    let o = verify("bad.bin");
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stdout).contains("first differing bit 500"));
}

#[test]
fn whole_files_of_a_valid_length() {
    // 13 bits in ASCII: the first check row of spec 6.2.
    let d = tempfile::tempdir().unwrap();
    std::fs::write(d.path().join("x.txt"), "1100111001010\n").unwrap();
    std::fs::write(d.path().join("y.txt"), "1101011100000\n").unwrap();
    let o = sluice(
        d.path(),
        &[
            "extract",
            "x.txt",
            "--format",
            "ascii",
            "--extractor",
            "two-source",
            "--second-source",
            "y.txt",
            "--output-bits",
            "5",
            "-o",
            "z.txt",
            "--quiet",
        ],
    );
    assert!(o.status.success(), "{}", err(&o));
    let z = std::fs::read_to_string(d.path().join("z.txt")).unwrap();
    // spec/hashing-and-composition.md 6.2, check row 1 [computed there].
    assert_eq!(z.trim(), "00010");
}

#[test]
fn refusals_say_what_and_where() {
    let (d, _, _) = setup(8 * 1024, 8 * 1000);
    let base = |extra: &[&str]| {
        let mut a = vec![
            "extract",
            "x.bin",
            "--extractor",
            "two-source",
            "--second-source",
            "y.bin",
            "--output-bits",
            "100",
            "-o",
            "out.bin",
        ];
        a.extend_from_slice(extra);
        sluice(d.path(), &a)
    };
    // Invalid n: the suggestion is the largest valid n not above the data
    // (8000 bits in y.bin; 7949 computed as for 15971 above).
    assert_eq!(sluice::plan::two_source::largest_n(8000), Some(7949));
    let o = base(&["--input-bits", "8000"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        err(&o).contains("largest valid n not above 8000 is 7949"),
        "{}",
        err(&o)
    );
    // Different lengths without --input-bits.
    let o = base(&[]);
    assert_eq!(o.status.code(), Some(2));
    assert!(err(&o).contains("--input-bits"), "{}", err(&o));
    assert!(err(&o).contains("7949"), "{}", err(&o));
    // More bits asked than a file holds.
    let o = base(&["--input-bits", "8011"]);
    assert!(
        err(&o).contains("y.bin: 8011 bits asked for"),
        "{}",
        err(&o)
    );
    // m = n refused.
    let o = sluice(
        d.path(),
        &[
            "extract",
            "x.bin",
            "--extractor",
            "two-source",
            "--second-source",
            "y.bin",
            "--input-bits",
            "7949",
            "--output-bits",
            "7949",
            "-o",
            "out.bin",
        ],
    );
    assert!(err(&o).contains("must be in 1..=7948"), "{}", err(&o));
    // A seed file is refused.
    let o = base(&["--input-bits", "7949", "--seed-file", "y.bin"]);
    assert!(
        err(&o).contains("--seed-file does not apply"),
        "{}",
        err(&o)
    );
    // No --output-bits: the planner is not used.
    let o = sluice(
        d.path(),
        &[
            "extract",
            "x.bin",
            "--extractor",
            "two-source",
            "--second-source",
            "y.bin",
            "--input-bits",
            "7949",
            "-o",
            "out.bin",
        ],
    );
    assert!(err(&o).contains("needs --output-bits"), "{}", err(&o));
    // Same file twice, also through another name.
    let o = sluice(
        d.path(),
        &[
            "extract",
            "x.bin",
            "--extractor",
            "two-source",
            "--second-source",
            "./x.bin",
            "--input-bits",
            "7949",
            "--output-bits",
            "10",
            "-o",
            "out.bin",
        ],
    );
    assert!(err(&o).contains("are the same file"), "{}", err(&o));
    // Identical contents in two files.
    std::fs::copy(d.path().join("x.bin"), d.path().join("x2.bin")).unwrap();
    let o = sluice(
        d.path(),
        &[
            "extract",
            "x.bin",
            "--extractor",
            "two-source",
            "--second-source",
            "x2.bin",
            "--input-bits",
            "7949",
            "--output-bits",
            "10",
            "-o",
            "out.bin",
        ],
    );
    assert!(err(&o).contains("are identical"), "{}", err(&o));
    // --second-source without two-source.
    let o = sluice(
        d.path(),
        &[
            "extract",
            "x.bin",
            "--extractor",
            "toeplitz",
            "--second-source",
            "y.bin",
            "--seed-file",
            "y.bin",
            "--output-bits",
            "10",
            "-o",
            "out.bin",
        ],
    );
    assert!(
        err(&o).contains("--second-source applies to --extractor two-source only"),
        "{}",
        err(&o)
    );
    // No ledger: --new-seed is refused.
    let o = base(&["--input-bits", "7949", "--new-seed"]);
    assert!(err(&o).contains("no seed and no ledger"), "{}", err(&o));
    assert!(!d.path().join("out.bin").exists());
}

fn plan(args: &[&str], cache: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_sluice"))
        .arg("plan")
        .args(args)
        .env("XDG_CACHE_HOME", cache)
        .env("HOME", cache)
        .output()
        .unwrap()
}

// spec/hashing-and-composition.md 6.5, Table 6 [computed there, params.py]:
// n = 1019, k1 = k2 = 0.9 n, eps = 1e-6: classical m = 776 at 8.899e-7,
// Markov (unverified) m = 131 at 7.444e-7.
#[test]
fn plan_two_source_table_6() {
    let d = tempfile::tempdir().unwrap();
    let args = [
        "--two-source",
        "--input-bits",
        "1019",
        "--min-entropy-rate",
        "0.9",
        "--second-min-entropy-rate",
        "0.9",
        "--target-error",
        "1e-6",
    ];
    // Every error term is given; none is taken as 0 silently (common
    // practice: an unstated smoothing term would overstate the claim).
    let o = plan(&args, d.path());
    assert_eq!(o.status.code(), Some(2), "{}", err(&o));
    assert!(
        err(&o).contains("--smoothing, --second-smoothing, --cert-error missing"),
        "{}",
        err(&o)
    );
    let mut with_zero = args.to_vec();
    with_zero.extend(["--smoothing", "0", "--cert-error", "0"]);
    let o = plan(&with_zero, d.path());
    assert!(
        err(&o).contains("--second-smoothing missing"),
        "{}",
        err(&o)
    );
    let mut args = args.to_vec();
    args.extend([
        "--smoothing",
        "0",
        "--second-smoothing",
        "0",
        "--cert-error",
        "0",
    ]);
    let o = plan(&args, d.path());
    assert!(o.status.success(), "{}", err(&o));
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(
        out.contains("classical side information only: m = 776 bits, extractor error 8.899e-7"),
        "{out}"
    );
    assert!(
        !out.contains("Markov"),
        "Markov mode is off by default: {out}"
    );
    assert!(err(&o)
        .contains("note: classical side information only; the two sources must be independent"));

    let mut m = args.to_vec();
    m.push("--markov-unverified");
    let o = plan(&m, d.path());
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(out.contains("UNVERIFIED constants"), "{out}");
    assert!(
        out.contains("m = 131 bits, extractor error 7.444e-7"),
        "{out}"
    );

    // Raw strings longer than n: 1024 bits keep n = 1019 and lower each
    // bound by 5 (spec 6.1, 1.5).
    let o = plan(
        &[
            "--two-source",
            "--input-bits",
            "1024",
            "--min-entropy",
            "922.1",
            "--second-min-entropy",
            "922.1",
            "--smoothing",
            "0",
            "--second-smoothing",
            "0",
            "--cert-error",
            "0",
            "--target-error",
            "1e-6",
            "--quiet",
        ],
        d.path(),
    );
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(out.contains("n = 1019 bits kept"), "{out}");
    assert!(out.contains("m = 776 bits"), "{out}");

    // Markov mode with smoothing needs the explicit assumption (spec 6.4
    // item 3).
    let mut s: Vec<&str> = m.clone();
    let i = s.iter().position(|a| *a == "--smoothing").unwrap();
    s[i + 1] = "1e-9";
    let o = plan(&s, d.path());
    assert_eq!(o.status.code(), Some(2));
    assert!(err(&o).contains("--accept-markov-smoothing"), "{}", err(&o));
    s.push("--accept-markov-smoothing");
    let o = plan(&s, d.path());
    assert!(o.status.success(), "{}", err(&o));
    assert!(String::from_utf8_lossy(&o.stdout).contains("accepted by you"));
}
