//! Issue 15, items 1-9, through the built binary: every check here failed
//! on the code before the fix (run them against another build with
//! `SLUICE_TEST_BIN=/path/to/sluice`). Nothing lost (an output never
//! replaces an input; temporary files never stay behind; an interrupted run
//! cleans up and its use stays charged), nothing leaked (owner-only files
//! and folders), nothing bypassed (the seed store bound to the journal, the
//! journal bound to its head), bounded sizes.

mod files_common;
use files_common::*;
use std::path::Path;

fn mode(p: &Path) -> u32 {
    use std::os::unix::fs::PermissionsExt;
    std::fs::metadata(p).unwrap().permissions().mode() & 0o777
}

/// A 1024-bit raw file and a 2048-bit seed file.
fn raw_and_seed(dir: &Path) -> (String, String) {
    let mut rng = Rng(0x5a5a_0001);
    let raw = dir.join("raw.bin");
    std::fs::write(&raw, rng.bytes(128)).unwrap();
    let seed = dir.join("seed.bin");
    std::fs::write(&seed, rng.bytes(256)).unwrap();
    (
        raw.to_str().unwrap().to_string(),
        seed.to_str().unwrap().to_string(),
    )
}

fn explicit<'a>(raw: &'a str, seed: &'a str, out: &'a str) -> Vec<&'a str> {
    vec![
        "extract",
        raw,
        "--extractor",
        "toeplitz",
        "--output-bits",
        "64",
        "--seed-file",
        seed,
        "--allow-longer-seed",
        "-o",
        out,
        "--quiet",
    ]
}

fn certify_args<'a>(record: &'a str, params: &'a str) -> Vec<&'a str> {
    vec![
        "certify",
        record,
        "--params",
        params,
        "--setup",
        "separated",
    ]
}

/// A simulated Bell-test record of a fictional bench, and its parameters.
fn record(dir: &Path) -> (String, String) {
    let mut text = Vec::new();
    sluice::certify::simulate::SimulatedDevice::new(0.853, 1.0, 3).write_record(20_000, &mut text);
    let r = dir.join("run.rounds");
    std::fs::write(&r, &text).unwrap();
    let p = dir.join("run.params");
    std::fs::write(
        &p,
        "rounds = 20000\ntest-probability = 1\nexpected-win = 0.85\ntolerance = 0.01\nsmoothing = 1e-6\nacceptance = 1e-6\n",
    )
    .unwrap();
    (r.to_str().unwrap().into(), p.to_str().unwrap().into())
}

#[test]
fn item1_an_output_never_replaces_an_input() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let l = dir.join("L");
    let (raw, seed) = raw_and_seed(dir);
    let before = std::fs::read(&raw).unwrap();
    let seed_before = std::fs::read(&seed).unwrap();
    // -o RAW, -o SEEDFILE, and a hard link to the input.
    let e = refused(dir, &l, &explicit(&raw, &seed, &raw));
    assert!(e.contains("same file as the input"), "{e}");
    let e = refused(dir, &l, &explicit(&raw, &seed, &seed));
    assert!(e.contains("same file as the seed file"), "{e}");
    let link = dir.join("link.bin");
    std::fs::hard_link(&raw, &link).unwrap();
    refused(dir, &l, &explicit(&raw, &seed, link.to_str().unwrap()));
    // Another spelling of the same path.
    let spelt = format!("{}/./raw.bin", dir.display());
    refused(dir, &l, &explicit(&raw, &seed, &spelt));
    // --receipt RAW in a planned run.
    let out = dir.join("o.bin");
    let e = refused(
        dir,
        &l,
        &[
            "extract",
            &raw,
            "--min-entropy",
            "900",
            "--smoothing",
            "0",
            "--cert-error",
            "0",
            "--target-error",
            "1e-6",
            "--seed-file",
            &seed,
            "--allow-longer-seed",
            "-o",
            out.to_str().unwrap(),
            "--receipt",
            &raw,
            "--quiet",
        ],
    );
    assert!(e.contains("same file as the input"), "{e}");
    assert_eq!(std::fs::read(&raw).unwrap(), before);
    assert_eq!(std::fs::read(&seed).unwrap(), seed_before);
    assert!(!out.exists());

    // certify -o RECORD and --raw-out RECORD.
    let (rec, params) = record(dir);
    let rec_before = std::fs::read(&rec).unwrap();
    let mut a = certify_args(&rec, &params);
    a.extend(["-o", &rec]);
    let e = refused(dir, &l, &a);
    assert!(e.contains("same file as the record"), "{e}");
    let mut a = certify_args(&rec, &params);
    a.extend(["--raw-out", &rec]);
    refused(dir, &l, &a);
    let mut a = certify_args(&rec, &params);
    a.extend(["-o", &params]);
    refused(dir, &l, &a);
    assert_eq!(std::fs::read(&rec).unwrap(), rec_before);
    // extract -o CERT.json (the certificate it reads).
    let cert = dir.join("cert.json");
    let rawout = dir.join("bell.raw");
    let mut a = certify_args(&rec, &params);
    a.extend([
        "-o",
        cert.to_str().unwrap(),
        "--raw-out",
        rawout.to_str().unwrap(),
    ]);
    ok(dir, &l, &a);
    let cert_before = std::fs::read(&cert).unwrap();
    let e = refused(
        dir,
        &l,
        &[
            "extract",
            rawout.to_str().unwrap(),
            "--certificate",
            cert.to_str().unwrap(),
            "--target-error",
            "1e-3",
            "--seed-file",
            &seed,
            "--allow-longer-seed",
            "-o",
            cert.to_str().unwrap(),
            "--quiet",
        ],
    );
    assert!(e.contains("same file as the certificate"), "{e}");
    assert_eq!(std::fs::read(&cert).unwrap(), cert_before);
}

#[test]
fn item1_an_existing_file_is_replaced_only_if_it_is_an_earlier_output_or_with_force() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let l = dir.join("L");
    let (raw, seed) = raw_and_seed(dir);
    let notes = dir.join("notes.txt");
    std::fs::write(&notes, b"lab notes, not an output").unwrap();
    let e = refused(dir, &l, &explicit(&raw, &seed, notes.to_str().unwrap()));
    assert!(e.contains("--force"), "{e}");
    assert_eq!(std::fs::read(&notes).unwrap(), b"lab notes, not an output");
    // With --force it is replaced; the new file is an output (owner-only).
    let mut a = explicit(&raw, &seed, notes.to_str().unwrap());
    a.push("--force");
    ok(dir, &l, &a);
    assert_eq!(std::fs::metadata(&notes).unwrap().len(), 8);
    assert_eq!(mode(&notes), 0o600);
    // An earlier output of the same command is replaced without --force.
    let out = dir.join("out.bin");
    ok(dir, &l, &explicit(&raw, &seed, out.to_str().unwrap()));
    ok(dir, &l, &explicit(&raw, &seed, out.to_str().unwrap()));
    // seed reveal -o EXISTING: refused before the disclosure is recorded.
    let mut rng = Rng(9);
    committed_raw(dir, &l, "r.bin", &mut rng);
    let id = new_seed(dir, &l, "64", "1e-6");
    let before = journal_lines(&l);
    let e = refused(
        dir,
        &l,
        &["seed", "reveal", &id, "-o", notes.to_str().unwrap()],
    );
    assert!(e.contains("--force"), "{e}");
    assert_eq!(journal_lines(&l), before, "nothing recorded");
    assert_eq!(std::fs::metadata(&notes).unwrap().len(), 8);
}

#[test]
fn item2_a_failed_final_step_leaves_no_temporary_file() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let l = dir.join("L");
    let (raw, seed) = raw_and_seed(dir);
    // -o names a folder.
    let folder = dir.join("a-folder");
    std::fs::create_dir(&folder).unwrap();
    refused(dir, &l, &explicit(&raw, &seed, folder.to_str().unwrap()));
    assert!(temp_files(dir).is_empty(), "{:?}", temp_files(dir));
    // seed reveal -o DIR: the seed bits never stay behind in a temp file.
    let mut rng = Rng(10);
    committed_raw(dir, &l, "r.bin", &mut rng);
    let id = new_seed(dir, &l, "64", "1e-6");
    let o = run(
        dir,
        &l,
        "",
        &["seed", "reveal", &id, "-o", folder.to_str().unwrap()],
    );
    assert!(!o.status.success());
    assert!(temp_files(dir).is_empty(), "{:?}", temp_files(dir));
    // A kill leaves a temporary file; the next run into that folder removes
    // it (its process is gone).
    let stale = dir.join(".out.bin.4294967290.0123456789ab.sluice-tmp");
    std::fs::write(&stale, b"bits of a killed run").unwrap();
    let other = dir.join("out.bin.tmp");
    std::fs::write(&other, b"not ours").unwrap();
    ok(
        dir,
        &l,
        &explicit(&raw, &seed, dir.join("out.bin").to_str().unwrap()),
    );
    assert!(!stale.exists(), "stale temporary file not cleaned");
    assert!(other.exists(), "a file that is not ours was removed");
}

#[test]
fn item3_every_output_is_owner_only_and_the_ledger_folders_are_private() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let l = dir.join("L");
    let (rec, params) = record(dir);
    let cert = dir.join("cert.json");
    let rawout = dir.join("bell.raw");
    let mut a = certify_args(&rec, &params);
    a.extend([
        "-o",
        cert.to_str().unwrap(),
        "--raw-out",
        rawout.to_str().unwrap(),
    ]);
    ok(dir, &l, &a);
    assert_eq!(mode(&cert), 0o600, "the certificate holds raw-data digests");
    assert_eq!(mode(&rawout), 0o600);
    let plot = dir.join("plan.svg");
    ok(
        dir,
        &l,
        &[
            "certify",
            "--plan",
            "--rounds",
            "1e8",
            "--test-probability",
            "0.01",
            "--expected-win",
            "0.85",
            "--completeness",
            "1e-3",
            "--smoothing",
            "1e-6",
            "--acceptance",
            "1e-6",
            "--plot",
            plot.to_str().unwrap(),
        ],
    );
    assert_eq!(mode(&plot), 0o600);
    assert!(temp_files(dir).is_empty());
    let mut rng = Rng(11);
    committed_raw(dir, &l, "r.bin", &mut rng);
    new_seed(dir, &l, "64", "1e-6");
    assert_eq!(mode(&l), 0o700, "ledger folder");
    assert_eq!(mode(&l.join("seeds")), 0o700, "seed store");
}

#[test]
fn item4_sigint_and_sigterm_during_extract_clean_up_and_keep_the_use_charged() {
    for (sig, code, point) in [("INT", 130, "after-reserve"), ("TERM", 143, "during-write")] {
        let d = tempfile::tempdir().unwrap();
        let dir = d.path();
        let l = dir.join("L");
        let mut rng = Rng(12);
        let raw = committed_raw(dir, &l, "r.bin", &mut rng);
        let id = new_seed(dir, &l, "600", "1e-6");
        let out = dir.join("out.bin");
        let child = spawn(
            dir,
            &l,
            &format!("{point}:pause=20000"),
            &extract_args(raw.to_str().unwrap(), out.to_str().unwrap(), &id),
        );
        wait_for_journal(&l, "use-reserved");
        if point == "during-write" {
            // The output is complete under its temporary name.
            for _ in 0..200 {
                if !temp_files(dir).is_empty() {
                    break;
                }
                std::thread::sleep(std::time::Duration::from_millis(25));
            }
        }
        signal(&child, sig);
        let o = child.wait_with_output().unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(code), "SIG{sig}: {err}");
        assert!(
            err.contains(&format!("SIG{sig}")) && err.contains("abandoned"),
            "{err}"
        );
        assert!(err.contains("stays charged"), "{err}");
        assert!(!out.exists(), "no partial output");
        assert!(temp_files(dir).is_empty(), "{:?}", temp_files(dir));
        let (good, v) = verify(dir, &l);
        assert!(good, "{v}");
        assert!(v["unresolved_uses"].as_array().unwrap().is_empty(), "{v}");
        let s = seed_state(dir, &l, &id);
        assert_eq!(s["abandoned"], 1);
        let spent = s["spent"].as_f64().unwrap();
        assert!(
            (spent / CHARGE - 1.0).abs() < 1e-9,
            "still charged: {spent}"
        );
    }
}

#[test]
fn item4_ledger_abandon_resolves_an_open_reservation_whose_output_does_not_exist() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let l = dir.join("L");
    let mut rng = Rng(13);
    let raw = committed_raw(dir, &l, "r.bin", &mut rng);
    let id = new_seed(dir, &l, "600", "1e-6");
    let out = dir.join("out.bin");
    let mut child = spawn(
        dir,
        &l,
        "after-reserve:pause=20000",
        &extract_args(raw.to_str().unwrap(), out.to_str().unwrap(), &id),
    );
    wait_for_journal(&l, "use-reserved");
    let (_, v) = verify(dir, &l);
    let use_id = v["unresolved_uses"][0]["use_id"]
        .as_str()
        .unwrap()
        .to_string();
    // While the run lives, abandon is refused.
    let e = refused(dir, &l, &["ledger", "abandon", &use_id]);
    assert!(e.contains("still going"), "{e}");
    child.kill().unwrap(); // SIGKILL: no cleanup at all
    child.wait().unwrap();
    // An output at the recorded path stops it (it may be complete).
    std::fs::write(&out, b"something").unwrap();
    let e = refused(dir, &l, &["ledger", "abandon", &use_id]);
    assert!(e.contains("exists"), "{e}");
    std::fs::remove_file(&out).unwrap();
    let o = ok(dir, &l, &["ledger", "abandon", &use_id, "--json"]);
    assert!(o.contains(&use_id), "{o}");
    let (good, v) = verify(dir, &l);
    assert!(
        good && v["unresolved_uses"].as_array().unwrap().is_empty(),
        "{v}"
    );
    let s = seed_state(dir, &l, &id);
    assert!((s["spent"].as_f64().unwrap() / CHARGE - 1.0).abs() < 1e-9);
    refused(dir, &l, &["ledger", "abandon", &use_id]);
}

#[test]
fn item5_a_full_disk_never_tears_the_journal() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let l = dir.join("L");
    let mut rng = Rng(14);
    let raw = committed_raw(dir, &l, "r.bin", &mut rng);
    let id = new_seed(dir, &l, "600", "1e-6");
    let before = std::fs::read(l.join("journal.jsonl")).unwrap();
    let raw2 = dir.join("r2.bin");
    std::fs::write(&raw2, rng.bytes(64)).unwrap();
    // The append fails after writing part of its bytes, as on a full disk.
    for args in [
        vec![
            "ledger",
            "commit-raw",
            raw2.to_str().unwrap(),
            "--origin",
            "x",
        ],
        extract_args(
            raw.to_str().unwrap(),
            dir.join("o.bin").to_str().unwrap(),
            &id,
        ),
        vec!["seed", "new", "--bits", "64"],
    ] {
        let o = run(dir, &l, "journal-write:enospc", &args);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{args:?}: {err}");
        assert!(
            err.contains("no space left on device") && err.contains("for the ledger at"),
            "{err}"
        );
        assert!(
            err.contains(&l.join("journal.jsonl").display().to_string()),
            "{err}"
        );
        assert_eq!(std::fs::read(l.join("journal.jsonl")).unwrap(), before);
        assert!(verify(dir, &l).0);
    }
    assert!(!dir.join("o.bin").exists());
    assert!(temp_files(dir).is_empty());
    // A seed whose record could not be written left no store file.
    assert_eq!(std::fs::read_dir(l.join("seeds")).unwrap().count(), 1);
}

fn rechain(lines: &mut [String], from: usize) {
    for i in from..lines.len() {
        let prev = sluice::ledger::record::line_digest(lines[i - 1].as_bytes());
        let at = lines[i].find("\"prev\":\"").unwrap() + 8;
        lines[i].replace_range(at..at + 64, &prev);
    }
}

fn write_journal(l: &Path, lines: &[String]) {
    std::fs::write(l.join("journal.jsonl"), lines.join("\n") + "\n").unwrap();
}

#[test]
fn item6_copying_a_seed_file_over_another_is_refused() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let l = dir.join("L");
    let mut rng = Rng(15);
    // Seed A: its budget admits one use, which is spent.
    let budget = format!("{:e}", 1.5 * CHARGE);
    let a = new_seed(dir, &l, "600", &budget);
    let b = new_seed(dir, &l, "600", "1e-6");
    let r1 = committed_raw(dir, &l, "r1.bin", &mut rng);
    ok(
        dir,
        &l,
        &extract_args(r1.to_str().unwrap(), dir.join("o1").to_str().unwrap(), &a),
    );
    // B's file copied over A's, only the identifier changed: A's bits are
    // gone, but without the binding B's budget... (the attack of issue 15).
    let store = l.join("seeds");
    let text = std::fs::read_to_string(store.join(format!("{b}.seed.json"))).unwrap();
    std::fs::write(store.join(format!("{a}.seed.json")), text.replace(&b, &a)).unwrap();
    let r2 = committed_raw(dir, &l, "r2.bin", &mut rng);
    let e = refused(
        dir,
        &l,
        &extract_args(r2.to_str().unwrap(), dir.join("o2").to_str().unwrap(), &a),
    );
    assert!(e.contains("binding digest"), "{e}");
    let e = refused(dir, &l, &["seed", "reveal", &a]);
    assert!(e.contains("binding digest"), "{e}");
}

#[test]
fn item6_registered_bits_cannot_be_registered_again() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let l = dir.join("L");
    let mut rng = Rng(16);
    committed_raw(dir, &l, "r.bin", &mut rng);
    let a = new_seed(dir, &l, "600", "1e-6");
    let f = dir.join("a.seed");
    ok(dir, &l, &["seed", "reveal", &a, "-o", f.to_str().unwrap()]);
    let e = refused(
        dir,
        &l,
        &[
            "seed",
            "import",
            f.to_str().unwrap(),
            "--deficiency",
            "0",
            "--origin",
            "again",
            "--bits",
            "600",
        ],
    );
    assert!(e.contains("already registered") && e.contains(&a), "{e}");
    // Its first 300 bits: a prefix of a registered seed.
    let bytes = std::fs::read(&f).unwrap();
    let half = dir.join("half.seed");
    std::fs::write(&half, &bytes[..38]).unwrap();
    let e = refused(
        dir,
        &l,
        &[
            "seed",
            "import",
            half.to_str().unwrap(),
            "--deficiency",
            "0",
            "--origin",
            "half",
        ],
    );
    assert!(e.contains("already registered"), "{e}");
    assert!(temp_files(dir).is_empty());
    assert_eq!(std::fs::read_dir(l.join("seeds")).unwrap().count(), 1);
}

#[test]
fn item6_a_truncated_or_deleted_journal_is_caught() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let l = dir.join("L");
    let mut rng = Rng(17);
    let a = new_seed(dir, &l, "600", "1e-6");
    let r1 = committed_raw(dir, &l, "r1.bin", &mut rng);
    let (_, v) = verify(dir, &l);
    let early_head = v["head_line"].as_str().unwrap().to_string();
    ok(
        dir,
        &l,
        &extract_args(r1.to_str().unwrap(), dir.join("o1").to_str().unwrap(), &a),
    );
    let full = journal_lines(&l);
    // verify --head with an earlier head: the journal only grew since.
    ok(dir, &l, &["ledger", "verify", "--head", &early_head]);
    let digest_only = early_head.split(':').nth(1).unwrap().to_string();
    ok(dir, &l, &["ledger", "verify", "--head", &digest_only]);
    // Cut at a line boundary (the use's lines removed): caught.
    write_journal(&l, &full[..full.len() - 2]);
    let (good, v) = verify(dir, &l);
    assert!(
        !good && v["problem"].as_str().unwrap().contains("head file"),
        "{v}"
    );
    let r2 = committed_raw_refused(dir, &l, &mut rng);
    assert!(r2.contains("head file"), "{r2}");
    // The last line changed: caught.
    let mut edited = full.clone();
    let last = edited.len() - 1;
    edited[last] = edited[last].replace("\"time\":", "\"time\":1");
    write_journal(&l, &edited);
    assert!(!verify(dir, &l).0);
    // Deleted: no new journal beside the seed store.
    std::fs::remove_file(l.join("journal.jsonl")).unwrap();
    assert!(!verify(dir, &l).0);
    let r = committed_raw_refused(dir, &l, &mut rng);
    assert!(r.contains("head file") || r.contains("seed store"), "{r}");
    // Even without the head file.
    std::fs::remove_file(l.join("journal.head")).unwrap();
    let r = committed_raw_refused(dir, &l, &mut rng);
    assert!(
        r.contains("seed store") && r.contains("deleted or moved"),
        "{r}"
    );
    assert!(!l.join("journal.jsonl").exists());
    // Restored: all is well again.
    write_journal(&l, &full);
    assert!(verify(dir, &l).0);
}

fn committed_raw_refused(dir: &Path, l: &Path, rng: &mut Rng) -> String {
    let p = dir.join(format!("x{}.bin", rng.next()));
    std::fs::write(&p, rng.bytes(64)).unwrap();
    refused(
        dir,
        l,
        &["ledger", "commit-raw", p.to_str().unwrap(), "--origin", "x"],
    )
}

#[test]
fn item7_repair_cuts_only_an_unterminated_last_line() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let l = dir.join("L");
    let mut rng = Rng(18);
    let a = new_seed(dir, &l, "600", "1e-3");
    for i in 0..3 {
        let r = committed_raw(dir, &l, &format!("r{i}.bin"), &mut rng);
        ok(
            dir,
            &l,
            &extract_args(
                r.to_str().unwrap(),
                dir.join(format!("o{i}")).to_str().unwrap(),
                &a,
            ),
        );
    }
    let full = std::fs::read(l.join("journal.jsonl")).unwrap();
    assert!(journal_lines(&l).len() > 10);
    // Cut in the middle of line 9: not a torn append, refused.
    let starts: Vec<usize> = std::iter::once(0)
        .chain(
            full.iter()
                .enumerate()
                .filter(|(_, &c)| c == b'\n')
                .map(|(i, _)| i + 1),
        )
        .collect();
    let cut = starts[8] + 20;
    std::fs::write(l.join("journal.jsonl"), &full[..cut]).unwrap();
    let e = refused(dir, &l, &["ledger", "repair"]);
    assert!(e.contains("head file"), "{e}");
    assert_eq!(
        std::fs::read(l.join("journal.jsonl")).unwrap(),
        &full[..cut]
    );
    std::fs::write(l.join("journal.jsonl"), &full).unwrap();
    // A torn append (killed in the middle of its write) is repaired.
    let r = dir.join("torn.bin");
    std::fs::write(&r, rng.bytes(64)).unwrap();
    let o = run(
        dir,
        &l,
        "journal-write:tear",
        &["ledger", "commit-raw", r.to_str().unwrap(), "--origin", "x"],
    );
    assert!(!o.status.success());
    assert!(!verify(dir, &l).0);
    ok(dir, &l, &["ledger", "repair"]);
    let (good, v) = verify(dir, &l);
    assert!(good, "{v}");
    // No use was lost.
    assert_eq!(seed_state(dir, &l, &a)["uses"], 3);
}

#[test]
fn item8_unknown_keys_and_malformed_digests_are_refused() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let l = dir.join("L");
    let mut rng = Rng(19);
    let a = new_seed(dir, &l, "600", "1e-3");
    let r = committed_raw(dir, &l, "r.bin", &mut rng);
    ok(
        dir,
        &l,
        &extract_args(r.to_str().unwrap(), dir.join("o").to_str().unwrap(), &a),
    );
    let full = journal_lines(&l);
    let commit = full
        .iter()
        .position(|x| x.contains("use-committed"))
        .unwrap();
    // An extra key, chain recomputed: named.
    let mut lines = full.clone();
    lines[commit] = lines[commit].replace(
        "\"kind\":\"use-committed\"",
        "\"kind\":\"use-committed\",\"refund\":1",
    );
    rechain(&mut lines, commit + 1);
    write_journal(&l, &lines);
    let (good, v) = verify(dir, &l);
    let p = v["problem"].as_str().unwrap_or_default().to_string();
    assert!(!good && p.contains("unknown key \"refund\""), "{v}");
    assert_eq!(v["first_bad_line"], commit as u64 + 1);
    // A digest that is not 64 lower-case hex digits.
    let mut lines = full.clone();
    let at = lines[commit].find("\"output_digest\":\"").unwrap() + 17;
    let upper = lines[commit][at..at + 64].to_uppercase();
    lines[commit].replace_range(at..at + 64, &upper);
    rechain(&mut lines, commit + 1);
    write_journal(&l, &lines);
    let (good, v) = verify(dir, &l);
    assert!(
        !good && v["problem"].as_str().unwrap().contains("output_digest"),
        "{v}"
    );
    write_journal(&l, &full);
    assert!(verify(dir, &l).0);
}

#[test]
fn item9_sizes_from_files_and_options_are_checked_before_allocation() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let l = dir.join("L");
    let (raw, _) = raw_and_seed(dir);
    let seed = dir.join("long.seed");
    std::fs::write(&seed, Rng(3).bytes(10_000)).unwrap();
    let seed = seed.to_str().unwrap();
    let out = dir.join("t.bin");
    ok(
        dir,
        &l,
        &[
            "extract",
            &raw,
            "--min-entropy",
            "900",
            "--smoothing",
            "0",
            "--cert-error",
            "0",
            "--target-error",
            "1e-6",
            "--extractor",
            "trevisan",
            "--seed-file",
            seed,
            "--allow-longer-seed",
            "-o",
            out.to_str().unwrap(),
            "--quiet",
        ],
    );
    let receipt = dir.join("t.bin.receipt.json");
    let text = std::fs::read_to_string(&receipt).unwrap();
    for m in ["9223372036854775808", "2147483648", "1099511627776"] {
        let mut v: serde_json::Value = serde_json::from_str(&text).unwrap();
        v["construction"]["output_bits"] =
            serde_json::Value::Number(m.parse::<u64>().unwrap().into());
        let bad = dir.join(format!("bad-{m}.json"));
        std::fs::write(&bad, v.to_string()).unwrap();
        let t0 = std::time::Instant::now();
        let e = refused(
            dir,
            &l,
            &[
                "verify",
                &raw,
                "--receipt",
                bad.to_str().unwrap(),
                "--seed-file",
                seed,
                "--allow-longer-seed",
                "--claimed",
                out.to_str().unwrap(),
            ],
        );
        assert!(e.contains("output_bits"), "{e}");
        // Refused at once, not after minutes of work.
        assert!(t0.elapsed().as_secs() < 10);
    }
    let e = refused(dir, &l, &["seed", "new", "--bits", "18446744073709551615"]);
    assert!(e.contains("bits"), "{e}");
    // assess output --sequences N: sequences of the documented 1,000,000 bits.
    let big = dir.join("big.bin");
    std::fs::write(&big, Rng(4).bytes(250_000)).unwrap();
    let o = run(
        dir,
        &l,
        "",
        &[
            "assess",
            "output",
            big.to_str().unwrap(),
            "--sequences",
            "2",
            "--json",
        ],
    );
    // 0: all passed, 1: something flagged; either way a report.
    assert!(
        matches!(o.status.code(), Some(0 | 1)),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let o = String::from_utf8(o.stdout).unwrap();
    let v: serde_json::Value = serde_json::from_str(&o).unwrap();
    assert_eq!(v["sequence_bits"], 1_000_000, "{}", &o[..200.min(o.len())]);
    assert_eq!(v["sequences"], 2);
    // A length the input cannot hold, in any format, is refused up front.
    let e = refused(
        dir,
        &l,
        &[
            "extract",
            &raw,
            "--format",
            "ascii",
            "--input-bits",
            "1000000000000",
            "--extractor",
            "toeplitz",
            "--output-bits",
            "8",
            "--seed-file",
            seed,
            "--allow-longer-seed",
            "-o",
            dir.join("z").to_str().unwrap(),
        ],
    );
    assert!(!e.contains("memory allocation"), "{e}");
}
