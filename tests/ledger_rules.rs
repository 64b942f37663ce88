//! Ordering, double use, tamper and bad input, through the built binary
//! (issue 5; rules of `spec/hashing-and-composition.md` 4.1, 4.3, 4.6).

mod ledger_common;
use ledger_common::*;

fn fail(ledger: &std::path::Path, args: &[&str]) -> String {
    let o = sluice(ledger, args);
    assert!(!o.status.success(), "sluice {args:?} should fail");
    String::from_utf8_lossy(&o.stderr).into_owned() + &String::from_utf8_lossy(&o.stdout)
}

fn journal(ledger: &std::path::Path) -> Vec<u8> {
    std::fs::read(ledger.join("journal.jsonl")).unwrap_or_default()
}

#[test]
fn use_after_disclosure_is_refused_naming_the_rule_and_lines() {
    let dir = tempfile::tempdir().unwrap();
    let l = dir.path().join("L");
    let mut rng = Rng(7);
    let early = raw_file(dir.path(), "early.bin", &mut rng);
    commit_raw(&l, &early, "run 1");
    let seed = new_seed(&l, "600", "1e-6");
    let shown = dir.path().join("seed.bin");
    ok(
        &l,
        &["seed", "reveal", &seed, "-o", shown.to_str().unwrap()],
    );
    assert_eq!(std::fs::metadata(&shown).unwrap().len(), 75);
    let late = raw_file(dir.path(), "late.bin", &mut rng);
    commit_raw(&l, &late, "run 2");
    let out = dir.path().join("o.bin");
    let before = journal(&l);
    let e = fail(
        &l,
        &extract_args(late.to_str().unwrap(), out.to_str().unwrap(), &seed),
    );
    // journal: 1 start, 2 raw early, 3 seed, 4 disclosed, 5 raw late.
    assert!(
        e.contains("timing rule")
            && e.contains("disclosed at line 4")
            && e.contains("committed at line 5"),
        "{e}"
    );
    assert_eq!(
        journal(&l),
        before,
        "a refused use must leave the journal unchanged"
    );
    assert!(!out.exists());
    // Raw data committed before the disclosure may still be used.
    ok(
        &l,
        &extract_args(early.to_str().unwrap(), out.to_str().unwrap(), &seed),
    );
    // And the revealed seed verifies the output (the explicit mode records nothing).
    let before = journal(&l);
    let v = ok(
        &l,
        &[
            "verify",
            early.to_str().unwrap(),
            "--seed-file",
            shown.to_str().unwrap(),
            "--allow-longer-seed",
            "--receipt",
            &format!("{}.receipt.json", out.display()),
            "--claimed",
            out.to_str().unwrap(),
        ],
    );
    assert!(v.starts_with("match"), "{v}");
    assert_eq!(journal(&l), before);
}

#[test]
fn same_raw_twice_needs_a_reason_which_is_recorded() {
    let dir = tempfile::tempdir().unwrap();
    let l = dir.path().join("L");
    let mut rng = Rng(11);
    let raw = raw_file(dir.path(), "raw.bin", &mut rng);
    commit_raw(&l, &raw, "run 1");
    let seed = new_seed(&l, "600", "1e-6");
    let o1 = dir.path().join("o1.bin");
    let o2 = dir.path().join("o2.bin");
    ok(
        &l,
        &extract_args(raw.to_str().unwrap(), o1.to_str().unwrap(), &seed),
    );
    let e = fail(
        &l,
        &extract_args(raw.to_str().unwrap(), o2.to_str().unwrap(), &seed),
    );
    assert!(
        e.contains("one extraction per raw data") && e.contains("already used at line 4"),
        "{e}"
    );
    assert!(!o2.exists());
    // A different new seed is refused too: the rule is about the raw data.
    let new_seed_args: Vec<&str> = vec![
        "extract",
        raw.to_str().unwrap(),
        "-o",
        o2.to_str().unwrap(),
        "--new-seed",
        "--min-entropy",
        "400",
        "--smoothing",
        "0",
        "--cert-error",
        "0",
        "--target-error",
        "1e-9",
        "--quiet",
    ];
    let before = journal(&l);
    let seeds_before = std::fs::read_dir(l.join("seeds")).unwrap().count();
    let e = fail(&l, &new_seed_args);
    assert!(e.contains("one extraction per raw data"), "{e}");
    assert_eq!(journal(&l), before);
    assert_eq!(
        std::fs::read_dir(l.join("seeds")).unwrap().count(),
        seeds_before
    );
    let mut with_reason = extract_args(raw.to_str().unwrap(), o2.to_str().unwrap(), &seed);
    with_reason.extend(["--repeat-reason", "first output was discarded unused"]);
    ok(&l, &with_reason);
    let log = ok(&l, &["ledger", "log", "--seed", &seed]);
    assert!(
        log.contains("repeat allowed: \"first output was discarded unused\""),
        "{log}"
    );
    let s = seed_state(&l, &seed);
    assert_eq!(s["uses"], 2);
}

#[test]
fn tampered_journal_fails_verify_naming_the_line() {
    let dir = tempfile::tempdir().unwrap();
    let l = dir.path().join("L");
    let mut rng = Rng(13);
    for i in 0..3 {
        let raw = raw_file(dir.path(), &format!("r{i}.bin"), &mut rng);
        commit_raw(&l, &raw, "bench");
    }
    let _ = new_seed(&l, "64", "1e-6");
    let orig = journal(&l);
    let text = String::from_utf8(orig.clone()).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    let cases: Vec<(&str, String, &str)> = vec![
        // one byte changed in line 2 ("bench" -> "bench" with one letter changed)
        ("byte", text.replacen("\"bench\"", "\"bencH\"", 1), "line 3"),
        (
            "delete",
            [&lines[..2], &lines[3..]].concat().join("\n") + "\n",
            "line 3",
        ),
        (
            "swap",
            {
                let mut v = lines.clone();
                v.swap(1, 2);
                v.join("\n") + "\n"
            },
            "line 2",
        ),
        (
            "forged",
            format!("{text}{}\n", lines[1].replace("\"seq\":2", "\"seq\":6")),
            "line 6",
        ),
    ];
    for (what, bad, line) in cases {
        std::fs::write(l.join("journal.jsonl"), &bad).unwrap();
        let o = sluice(&l, &["ledger", "verify"]);
        let msg = String::from_utf8_lossy(&o.stdout);
        assert_eq!(o.status.code(), Some(1), "{what}: {msg}");
        assert!(msg.contains(line), "{what}: expected {line}: {msg}");
        // Nothing but a torn tail is ever repaired.
        let _ = fail(&l, &["ledger", "repair"]);
        assert_eq!(journal(&l), bad.as_bytes(), "{what}: repair touched it");
    }
    std::fs::write(l.join("journal.jsonl"), &orig).unwrap();
    ok(&l, &["ledger", "verify"]);
}

#[test]
fn bad_input_is_refused_and_nothing_is_written() {
    let dir = tempfile::tempdir().unwrap();
    // Not our ledger.
    let l = dir.path().join("other");
    std::fs::create_dir_all(&l).unwrap();
    std::fs::write(l.join("journal.jsonl"), "name,value\nalpha,1\n").unwrap();
    let e = fail(&l, &["seed", "new", "--bits", "64"]);
    assert!(
        e.contains("not a sluice journal") && e.contains("line 1"),
        "{e}"
    );
    assert_eq!(journal(&l), b"name,value\nalpha,1\n");
    assert!(!l.join("seeds").exists() || std::fs::read_dir(l.join("seeds")).unwrap().count() == 0);
    // Unknown record kind.
    let l2 = dir.path().join("L2");
    let _ = new_seed(&l2, "64", "1e-6");
    let t = String::from_utf8(journal(&l2))
        .unwrap()
        .replace("seed-created", "seed-grown");
    std::fs::write(l2.join("journal.jsonl"), &t).unwrap();
    let o = sluice(&l2, &["ledger", "verify"]);
    let msg = String::from_utf8_lossy(&o.stdout);
    assert_eq!(o.status.code(), Some(1));
    assert!(
        msg.contains("unknown record kind \"seed-grown\"") && msg.contains("line 2"),
        "{msg}"
    );
    let e = fail(&l2, &["seed", "list"]);
    assert!(e.contains("unknown record kind"), "{e}");
    assert_eq!(journal(&l2), t.as_bytes());
    // A seed file of the wrong length.
    let l3 = dir.path().join("L3");
    let f = dir.path().join("seed.bin");
    std::fs::write(&f, [0x5au8; 8]).unwrap();
    let e = fail(
        &l3,
        &[
            "seed",
            "import",
            f.to_str().unwrap(),
            "--bits",
            "100",
            "--deficiency",
            "0",
            "--origin",
            "dice",
        ],
    );
    assert!(e.contains("holds 64 bits, not the 100"), "{e}");
    assert!(!l3.exists(), "nothing may be written");
    // A stored seed too short for the extractor.
    ok(
        &l3,
        &[
            "seed",
            "import",
            f.to_str().unwrap(),
            "--bits",
            "64",
            "--deficiency",
            "0",
            "--origin",
            "dice",
        ],
    );
    let id = serde_json::from_str::<serde_json::Value>(&ok(&l3, &["seed", "list", "--json"]))
        .unwrap()[0]["seed"]
        .as_str()
        .unwrap()
        .to_string();
    let mut rng = Rng(17);
    let raw = raw_file(dir.path(), "raw.bin", &mut rng);
    ok(
        &l3,
        &[
            "ledger",
            "commit-raw",
            raw.to_str().unwrap(),
            "--origin",
            "x",
        ],
    );
    let before = journal(&l3);
    let out = dir.path().join("o.bin");
    let e = fail(
        &l3,
        &extract_args(raw.to_str().unwrap(), out.to_str().unwrap(), &id),
    );
    assert!(
        e.contains("holds 64 bits") && e.contains("needs 511"),
        "{e}"
    );
    assert_eq!(journal(&l3), before);
    assert!(!out.exists());
    // Budgets that are not a number in (0, 1).
    let l4 = dir.path().join("L4");
    for b in ["0", "1", "1.5", "-1e-6", "abc", "NaN"] {
        let e = fail(
            &l4,
            &["seed", "new", "--bits", "64", &format!("--budget={b}")],
        );
        assert!(e.contains("(0, 1)"), "{b}: {e}");
    }
    assert!(!l4.exists(), "nothing may be written");
    // A refused first record (unknown seed) leaves no journal behind.
    let l5 = dir.path().join("L5");
    let e = fail(&l5, &["seed", "retire", "0123456789abcdef0123456789abcdef"]);
    assert!(e.contains("not registered"), "{e}");
    assert!(!l5.exists(), "nothing may be written");
}

#[test]
fn budget_only_lowered_and_retired_seed_refused() {
    let dir = tempfile::tempdir().unwrap();
    let l = dir.path().join("L");
    let seed = new_seed(&l, "600", "1e-6");
    ok(&l, &["seed", "budget", &seed, "5e-7"]);
    let e = fail(&l, &["seed", "budget", &seed, "2e-6"]);
    assert!(e.contains("may only be lowered"), "{e}");
    ok(&l, &["seed", "retire", &seed]);
    let mut rng = Rng(19);
    let raw = raw_file(dir.path(), "raw.bin", &mut rng);
    commit_raw(&l, &raw, "x");
    let out = dir.path().join("o.bin");
    let e = fail(
        &l,
        &extract_args(raw.to_str().unwrap(), out.to_str().unwrap(), &seed),
    );
    assert!(e.contains("retired"), "{e}");
    // show never prints bits without --reveal; list shows the account.
    let show = ok(&l, &["seed", "show", &seed]);
    assert!(!show.contains("bits (hex"), "{show}");
    assert!(ok(&l, &["seed", "list"]).contains("retired"));
}

#[test]
fn recycled_seed_needs_the_assertion_and_is_cut_from_the_output() {
    let dir = tempfile::tempdir().unwrap();
    let l = dir.path().join("L");
    let out = dir.path().join("out.bin");
    std::fs::write(&out, [0xa5u8; 16]).unwrap();
    let e = fail(
        &l,
        &[
            "seed",
            "recycle",
            out.to_str().unwrap(),
            "--bits",
            "40",
            "--output-error",
            "1e-9",
        ],
    );
    assert!(
        e.contains("--assert-recycling-condition") && e.contains("Seeds and the ledger"),
        "{e}"
    );
    assert!(!l.exists());
    // Larger than the output: compose::recycle refuses (d_B <= |Z_A|, 4.2).
    let e = fail(
        &l,
        &[
            "seed",
            "recycle",
            out.to_str().unwrap(),
            "--bits",
            "200",
            "--output-error",
            "1e-9",
            "--assert-recycling-condition",
        ],
    );
    assert!(!e.is_empty());
    assert_eq!(std::fs::read(&out).unwrap(), [0xa5u8; 16]);
    let v: serde_json::Value = serde_json::from_str(&ok(
        &l,
        &[
            "seed",
            "recycle",
            out.to_str().unwrap(),
            "--bits",
            "40",
            "--output-error",
            "1e-9",
            "--assert-recycling-condition",
            "--json",
        ],
    ))
    .unwrap();
    // The cut bits are no longer delivered: 128 - 40 = 88 bits = 11 bytes.
    assert_eq!(std::fs::read(&out).unwrap(), [0xa5u8; 11]);
    let s = seed_state(&l, v["seed"].as_str().unwrap());
    assert_eq!(s["source"], "recycled");
    assert_eq!(s["bits"], 40);
    assert_eq!(s["eps_seed"].as_f64().unwrap(), 1e-9);
}

#[test]
fn explicit_seed_file_mode_records_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let l = dir.path().join("L");
    let mut rng = Rng(23);
    let raw = raw_file(dir.path(), "raw.bin", &mut rng);
    let seed = dir.path().join("s.bin");
    std::fs::write(&seed, [0x3cu8; 64]).unwrap();
    let out = dir.path().join("o.bin");
    ok(
        &l,
        &[
            "extract",
            raw.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "--seed-file",
            seed.to_str().unwrap(),
            "--allow-longer-seed",
            "--min-entropy",
            "400",
            "--smoothing",
            "0",
            "--cert-error",
            "0",
            "--target-error",
            "1e-9",
            "--quiet",
        ],
    );
    assert!(out.exists());
    assert!(!l.exists(), "the explicit mode must not touch the ledger");
    let r = std::fs::read_to_string(format!("{}.receipt.json", out.display())).unwrap();
    assert!(r.contains("\"id\": null"), "{r}");
}

#[test]
fn new_seed_run_records_the_seed_and_the_receipt_names_it() {
    let dir = tempfile::tempdir().unwrap();
    let l = dir.path().join("L");
    let mut rng = Rng(29);
    let raw = raw_file(dir.path(), "raw.bin", &mut rng);
    commit_raw(&l, &raw, "x");
    let out = dir.path().join("o.bin");
    let v: serde_json::Value = serde_json::from_str(&ok(
        &l,
        &[
            "extract",
            raw.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "--new-seed",
            "--seed-budget",
            "1e-8",
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
        ],
    ))
    .unwrap();
    let id = v["seed"].as_str().unwrap();
    // conventions.md: a random 32-hex identifier; the receipt carries it.
    assert!(id.len() == 32 && id.bytes().all(|b| b"0123456789abcdef".contains(&b)));
    let r: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(format!("{}.receipt.json", out.display())).unwrap(),
    )
    .unwrap();
    assert_eq!(r["seed"]["id"], id);
    assert_eq!(r["seed"]["bits"], 511);
    let s = seed_state(&l, id);
    assert_eq!(
        (
            s["uses"].as_u64(),
            s["committed"].as_u64(),
            s["bits"].as_u64()
        ),
        (Some(1), Some(1), Some(511))
    );
    assert_eq!(s["budget"].as_f64().unwrap(), 1e-8);
    // The receipt digest in the ledger is BLAKE3 of the receipt file.
    let recs: serde_json::Value =
        serde_json::from_str(&ok(&l, &["ledger", "export", "--json"])).unwrap();
    let commit = recs["records"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["kind"] == "use-committed")
        .unwrap();
    let bytes = std::fs::read(format!("{}.receipt.json", out.display())).unwrap();
    assert_eq!(
        commit["receipt_digest"],
        blake3::hash(&bytes).to_hex().to_string()
    );
}

const PARAMS: &str = "rounds = 200000\ntest-probability = 1\nexpected-win = 0.85\n\
    tolerance = 0.005\nsmoothing = 1e-6\nacceptance = 1e-6\n";

/// Certifies a simulated run of a fictional bench (demo data) and returns
/// the raw file and certificate names.
fn certified_run(dir: &std::path::Path, name: &str, sim_seed: u64) -> (String, String) {
    use sluice::certify::simulate::SimulatedDevice;
    let mut text = Vec::new();
    SimulatedDevice::new(0.853, 1.0, sim_seed).write_record(200_000, &mut text);
    let rounds = dir.join(format!("{name}.rounds"));
    std::fs::write(&rounds, &text).unwrap();
    let params = dir.join("run.params");
    std::fs::write(&params, PARAMS).unwrap();
    let cert = dir.join(format!("{name}.cert.json"));
    let raw = dir.join(format!("{name}.raw"));
    let o = std::process::Command::new(BIN)
        .args([
            "certify",
            rounds.to_str().unwrap(),
            "--params",
            params.to_str().unwrap(),
            "--setup",
            "separated",
            "-o",
            cert.to_str().unwrap(),
            "--raw-out",
            raw.to_str().unwrap(),
        ])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    (raw.to_str().unwrap().into(), cert.to_str().unwrap().into())
}

#[test]
fn device_independent_seed_is_fresh_per_run_unless_asserted() {
    let dir = tempfile::tempdir().unwrap();
    let l = dir.path().join("L");
    let (raw1, cert1) = certified_run(dir.path(), "run1", 21);
    let (raw2, cert2) = certified_run(dir.path(), "run2", 22);
    ok(&l, &["ledger", "commit-raw", &raw1, "--origin", "run 1"]);
    ok(&l, &["ledger", "commit-raw", &raw2, "--origin", "run 2"]);
    let o1 = dir.path().join("o1.bin");
    let v: serde_json::Value = serde_json::from_str(&ok(
        &l,
        &[
            "extract",
            &raw1,
            "-o",
            o1.to_str().unwrap(),
            "--new-seed",
            "--seed-budget",
            "0.1",
            "--certificate",
            &cert1,
            "--target-error",
            "1e-4",
            "--quiet",
            "--json",
        ],
    ))
    .unwrap();
    let id = v["seed"].as_str().unwrap().to_string();
    let o2 = dir.path().join("o2.bin");
    let base = [
        "extract",
        &raw2,
        "-o",
        o2.to_str().unwrap(),
        "--seed",
        &id,
        "--certificate",
        &cert2,
        "--target-error",
        "1e-4",
        "--quiet",
    ];
    let e = fail(&l, &base);
    assert!(
        e.contains("fresh-seed rule") && e.contains("Seeds and the ledger") && e.contains("line 5"),
        "{e}"
    );
    assert!(!o2.exists());
    let mut asserted = base.to_vec();
    asserted.push("--assert-cross-run-condition");
    ok(&l, &asserted);
    let log = ok(&l, &["ledger", "log", "--seed", &id]);
    assert!(log.contains("cross-run condition asserted"), "{log}");
}

/// Makes a named pipe at `p` and writes `bytes` into it from a thread (the
/// open blocks until the reader opens the pipe).
#[cfg(unix)]
fn pipe_with(p: &std::path::Path, bytes: Vec<u8>) -> std::thread::JoinHandle<()> {
    let st = std::process::Command::new("mkfifo")
        .arg(p)
        .status()
        .unwrap();
    assert!(st.success(), "mkfifo");
    let p = p.to_path_buf();
    std::thread::spawn(move || {
        use std::io::Write;
        let mut f = std::fs::OpenOptions::new().write(true).open(&p).unwrap();
        // The reader may stop early (a refusal); a broken pipe is fine.
        let _ = f.write_all(&bytes);
    })
}

/// A ledgered run reads its input once (digested while it is hashed): a
/// named pipe, which can be read only once, gives the same output and the
/// same recorded digest as the file it carries. A pipe that ends early is
/// refused before anything is reserved: the journal is unchanged.
#[cfg(unix)]
#[test]
fn a_ledgered_run_reads_its_input_once() {
    let dir = tempfile::tempdir().unwrap();
    let l = dir.path().join("L");
    let mut rng = Rng(23);
    let raw = raw_file(dir.path(), "raw.bin", &mut rng);
    commit_raw(&l, &raw, "rig");
    let seed = new_seed(&l, "600", "1e-6");
    let bytes = std::fs::read(&raw).unwrap();
    let (o1, o2) = (dir.path().join("o1.bin"), dir.path().join("o2.bin"));
    ok(
        &l,
        &extract_args(raw.to_str().unwrap(), o1.to_str().unwrap(), &seed),
    );
    let pipe = dir.path().join("pipe");
    let writer = pipe_with(&pipe, bytes.clone());
    let mut args = extract_args(pipe.to_str().unwrap(), o2.to_str().unwrap(), &seed);
    args.extend(["--input-bits", "512", "--repeat-reason", "read-once check"]);
    ok(&l, &args);
    writer.join().unwrap();
    assert_eq!(std::fs::read(&o1).unwrap(), std::fs::read(&o2).unwrap());
    let digests: Vec<serde_json::Value> = {
        let v: serde_json::Value =
            serde_json::from_str(&ok(&l, &["ledger", "export", "--json"])).unwrap();
        v["records"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|r| r["kind"] == "use-reserved")
            .map(|r| r["input_digest"].clone())
            .collect()
    };
    assert_eq!(digests.len(), 2);
    assert_eq!(digests[0], digests[1], "the pipe's digest is the file's");
    // Half the bits: refused at the end of the pipe, nothing reserved.
    std::fs::remove_file(&pipe).unwrap();
    let writer = pipe_with(&pipe, bytes[..32].to_vec());
    let o3 = dir.path().join("o3.bin");
    let before = journal(&l);
    let mut args = extract_args(pipe.to_str().unwrap(), o3.to_str().unwrap(), &seed);
    args.extend(["--input-bits", "512", "--repeat-reason", "short pipe"]);
    let e = fail(&l, &args);
    writer.join().unwrap();
    assert!(
        e.contains("ends after 256 bits") && e.contains("nothing was reserved"),
        "{e}"
    );
    assert_eq!(
        journal(&l),
        before,
        "a run refused before reserving leaves the journal unchanged"
    );
    assert!(!o3.exists());
    let temps: Vec<_> = std::fs::read_dir(dir.path())
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| sluice::files::atomic::is_temp_name(&e.file_name().to_string_lossy()))
        .collect();
    assert!(temps.is_empty(), "temporary files left: {temps:?}");
}

/// `verify --seed ID` recomputes with the stored seed where it lives:
/// nothing is written to the ledger, no disclosure is recorded, and the
/// seed stays usable; a wrong input or output is still caught.
#[test]
fn verify_with_a_stored_seed_records_nothing_and_discloses_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let l = dir.path().join("L");
    let mut rng = Rng(29);
    let raw = raw_file(dir.path(), "raw.bin", &mut rng);
    commit_raw(&l, &raw, "rig");
    let seed = new_seed(&l, "600", "1e-6");
    let out = dir.path().join("o.bin");
    ok(
        &l,
        &extract_args(raw.to_str().unwrap(), out.to_str().unwrap(), &seed),
    );
    let receipt = format!("{}.receipt.json", out.display());
    let before = journal(&l);
    let args = |input: &str, claimed: &str| -> Vec<String> {
        [
            "verify",
            input,
            "--seed",
            &seed,
            "--receipt",
            &receipt,
            "--claimed",
            claimed,
        ]
        .iter()
        .map(|s| s.to_string())
        .collect()
    };
    let a = args(raw.to_str().unwrap(), out.to_str().unwrap());
    let v = ok(&l, &a.iter().map(String::as_str).collect::<Vec<_>>());
    assert!(v.starts_with("match"), "{v}");
    assert_eq!(journal(&l), before, "verify must not write to the ledger");
    // A flipped output bit is a mismatch (exit 1).
    let mut bytes = std::fs::read(&out).unwrap();
    bytes[0] ^= 0x80;
    let bad = dir.path().join("bad.bin");
    std::fs::write(&bad, &bytes).unwrap();
    let a = args(raw.to_str().unwrap(), bad.to_str().unwrap());
    let o = sluice(&l, &a.iter().map(String::as_str).collect::<Vec<_>>());
    assert_eq!(
        o.status.code(),
        Some(1),
        "{}",
        String::from_utf8_lossy(&o.stdout)
    );
    // Another raw file is not the receipt's input.
    let other = raw_file(dir.path(), "other.bin", &mut rng);
    let a = args(other.to_str().unwrap(), out.to_str().unwrap());
    let o = sluice(&l, &a.iter().map(String::as_str).collect::<Vec<_>>());
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stdout).contains("MISMATCH"));
    // The seed was not disclosed: a later run on new raw data may use it.
    assert_eq!(journal(&l), before);
    commit_raw(&l, &other, "rig");
    let out2 = dir.path().join("o2.bin");
    ok(
        &l,
        &extract_args(other.to_str().unwrap(), out2.to_str().unwrap(), &seed),
    );
}
