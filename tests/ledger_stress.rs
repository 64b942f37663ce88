//! Stress tests of issue 15 item 11, through the built binary: 32
//! processes on one budget, kills (SIGKILL) at random times, SIGINT at
//! random times, a full disk on a small tmpfs, and after each of them no
//! temporary file left behind. Short by default; `SLUICE_STRESS=1` runs the
//! long versions. Each test prints its figures (tried / held) on standard
//! error (`cargo test --release --test ledger_stress -- --nocapture`).

mod files_common;
use files_common::*;
use std::path::Path;
use std::time::Duration;

fn long() -> bool {
    std::env::var("SLUICE_STRESS").is_ok_and(|v| !v.is_empty() && v != "0")
}

/// Every reservation that names an existing output is committed or that
/// output's run is still going; every committed use's output exists.
fn outputs_match_reservations(dir: &Path, l: &Path) {
    let out = ok(dir, l, &["ledger", "export", "--json"]);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let uses = v["state"]["uses"].as_object().unwrap();
    let mut reserved_outputs = std::collections::BTreeSet::new();
    for u in uses.values() {
        if let Some(o) = u["output"].as_str() {
            reserved_outputs.insert(o.to_string());
            if u["committed"] == true {
                assert!(Path::new(o).exists(), "committed output {o} missing");
            }
        }
    }
    for e in std::fs::read_dir(dir).unwrap().flatten() {
        let name = e.file_name().to_string_lossy().into_owned();
        if name.starts_with("out") && !name.ends_with(".json") {
            let p = std::fs::canonicalize(e.path()).unwrap();
            assert!(
                reserved_outputs.contains(&p.display().to_string()),
                "output {name} exists without a reservation"
            );
        }
    }
}

/// Brings the ledger back to a verified state after a kill: repairs a torn
/// tail, abandons reservations of dead runs whose output does not exist.
/// Returns (torn tails repaired, reservations abandoned).
fn recover(dir: &Path, l: &Path) -> (u32, u32) {
    let (mut torn, mut abandoned) = (0, 0);
    let (good, v) = verify(dir, l);
    if !good {
        let p = v["problem"].as_str().unwrap_or_default().to_string();
        assert!(
            p.contains("torn last line"),
            "only a torn tail may be left: {p}"
        );
        ok(dir, l, &["ledger", "repair"]);
        torn += 1;
    }
    let (good, v) = verify(dir, l);
    assert!(good, "{v}");
    for u in v["unresolved_uses"].as_array().unwrap() {
        let id = u["use_id"].as_str().unwrap();
        let o = run(dir, l, "", &["ledger", "abandon", id]);
        if o.status.success() {
            abandoned += 1;
        } else {
            // Its output exists: the run finished but was killed before
            // committing. The output is kept and the use stays open (and
            // charged); remove it and resolve, as a user would.
            let e = String::from_utf8_lossy(&o.stderr);
            assert!(e.contains("exists"), "{e}");
            let path = v["unresolved_uses"]
                .as_array()
                .unwrap()
                .iter()
                .find(|x| x["use_id"] == id)
                .unwrap()["output"]
                .as_str()
                .unwrap()
                .to_string();
            std::fs::remove_file(path).unwrap();
            ok(dir, l, &["ledger", "abandon", id]);
            abandoned += 1;
        }
    }
    (torn, abandoned)
}

#[test]
fn thirty_two_processes_share_one_budget() {
    let reps = if long() { 20 } else { 2 };
    let mut rng = Rng(0x0032_3232);
    let (mut tried, mut held) = (0, 0);
    for rep in 0..reps {
        let d = tempfile::tempdir().unwrap();
        let dir = d.path();
        let l = dir.join("L");
        // Budget 20.5 charges: exactly 20 of the 32 runs fit.
        let budget = format!("{:e}", 20.5 * CHARGE);
        let seed = new_seed(dir, &l, "600", &budget);
        let raws: Vec<_> = (0..32)
            .map(|i| committed_raw(dir, &l, &format!("raw{i}.bin"), &mut rng))
            .collect();
        let mut children = Vec::new();
        for (i, raw) in raws.iter().enumerate() {
            let out = dir.join(format!("out{i}.bin"));
            let hook = format!(
                "before-reserve:pause={},after-reserve:pause={}",
                rng.below(20),
                rng.below(20)
            );
            let args = extract_args(raw.to_str().unwrap(), out.to_str().unwrap(), &seed);
            let child = spawn(dir, &l, &hook, &args);
            children.push((out.clone(), child));
        }
        let (mut good, mut refused_n) = (0, 0);
        for (out, child) in children {
            let o = child.wait_with_output().unwrap();
            if o.status.success() {
                good += 1;
                assert!(out.exists());
            } else {
                let e = String::from_utf8_lossy(&o.stderr);
                assert!(e.contains("budget rule"), "rep {rep}: {e}");
                assert!(!out.exists());
                refused_n += 1;
            }
        }
        assert_eq!((good, refused_n), (20, 12), "rep {rep}");
        let (ok_, v) = verify(dir, &l);
        assert!(
            ok_ && v["unresolved_uses"].as_array().unwrap().is_empty(),
            "{v}"
        );
        let s = seed_state(dir, &l, &seed);
        assert_eq!(s["uses"], 20);
        let spent = s["spent"].as_f64().unwrap();
        assert!((spent / (20.0 * CHARGE) - 1.0).abs() < 1e-9, "{spent}");
        assert!(temp_files(dir).is_empty(), "{:?}", temp_files(dir));
        outputs_match_reservations(dir, &l);
        tried += 32;
        held += 32;
    }
    eprintln!("concurrency: {reps} rounds of 32 processes on one budget of 20 uses: {tried} runs tried, {held} held (exactly 20 admitted per round, the rest refused, spent = 20 charges, no temporary file)");
}

#[test]
fn kills_at_random_times_never_break_the_accounting() {
    let runs = if long() { 300 } else { 30 };
    let mut rng = Rng(0xdead_0015);
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let l = dir.join("L");
    let seed = new_seed(dir, &l, "600", "0.5");
    let (mut torn, mut abandoned, mut finished) = (0, 0, 0);
    let mut charges = 0u64;
    for i in 0..runs {
        let raw = committed_raw(dir, &l, &format!("raw{i}.bin"), &mut rng);
        let out = dir.join(format!("out{i}.bin"));
        let args = extract_args(raw.to_str().unwrap(), out.to_str().unwrap(), &seed);
        // A new seed too, now and then, so registration is killed as well.
        let mut child = if i % 5 == 4 {
            let a: Vec<&str> = vec![
                "extract",
                raw.to_str().unwrap(),
                "-o",
                out.to_str().unwrap(),
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
            spawn(dir, &l, "", &a)
        } else {
            spawn(dir, &l, "", &args)
        };
        std::thread::sleep(Duration::from_micros(rng.below(60_000)));
        let _ = child.kill();
        let st = child.wait().unwrap();
        if st.success() {
            finished += 1;
        }
        let (t, a) = recover(dir, &l);
        torn += t;
        abandoned += a;
        outputs_match_reservations(dir, &l);
        // Never under-counted: every reservation stays charged.
        let out = ok(dir, &l, &["ledger", "export", "--json"]);
        let v: serde_json::Value = serde_json::from_str(&out).unwrap();
        let reserved = v["records"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|r| r["kind"] == "use-reserved" && r["seed"] == seed.as_str())
            .count() as u64;
        let s = seed_state(dir, &l, &seed);
        assert_eq!(s["uses"].as_u64().unwrap(), reserved);
        let spent = s["spent"].as_f64().unwrap();
        assert!(
            spent >= reserved as f64 * CHARGE * (1.0 - 1e-9),
            "run {i}: {spent}"
        );
        charges = reserved;
    }
    // One more run into the same folders: the stale temporary files of the
    // killed runs go.
    let raw = committed_raw(dir, &l, "last.bin", &mut rng);
    ok(
        dir,
        &l,
        &extract_args(
            raw.to_str().unwrap(),
            dir.join("out-last.bin").to_str().unwrap(),
            &seed,
        ),
    );
    let left = temp_files(dir);
    assert!(left.is_empty(), "{left:?}");
    eprintln!("kills: {runs} runs killed at random times (SIGKILL, 0-60 ms): {runs} held (journal verifies after repairing {torn} torn tails, {abandoned} dead reservations resolved with `ledger abandon`, {finished} runs finished first, {charges} reservations of the shared seed all charged, no output without its reservation, no temporary file after the next run)");
}

#[test]
fn sigint_at_random_times_cleans_up_at_once() {
    let runs = if long() { 200 } else { 20 };
    let mut rng = Rng(0x5191_0015);
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let l = dir.join("L");
    let seed = new_seed(dir, &l, "600", "0.5");
    let (mut interrupted, mut finished, mut held, mut early, mut after_commit) = (0, 0, 0, 0, 0);
    for i in 0..runs {
        let raw = committed_raw(dir, &l, &format!("raw{i}.bin"), &mut rng);
        let out = dir.join(format!("out{i}.bin"));
        // Half the runs pause somewhere, so the signal lands inside them.
        let hook = match rng.below(4) {
            0 => "after-reserve:pause=200",
            1 => "during-write:pause=200",
            2 => "before-commit:pause=200",
            _ => "",
        };
        let child = spawn(
            dir,
            &l,
            hook,
            &extract_args(raw.to_str().unwrap(), out.to_str().unwrap(), &seed),
        );
        std::thread::sleep(Duration::from_micros(rng.below(150_000)));
        signal(&child, "INT");
        let o = child.wait_with_output().unwrap();
        match o.status.code() {
            Some(0) => finished += 1,
            Some(130) => {
                interrupted += 1;
                // An output survives only if its use was committed before
                // the signal (the run had finished).
                if out.exists() {
                    let v: serde_json::Value =
                        serde_json::from_str(&ok(dir, &l, &["ledger", "export", "--json"]))
                            .unwrap();
                    let path = std::fs::canonicalize(&out).unwrap().display().to_string();
                    let committed = v["state"]["uses"]
                        .as_object()
                        .unwrap()
                        .values()
                        .any(|u| u["output"] == path.as_str() && u["committed"] == true);
                    assert!(
                        committed,
                        "run {i}: interrupted, yet an output: {}",
                        String::from_utf8_lossy(&o.stderr)
                    );
                    after_commit += 1;
                }
            }
            // The signal came before the process installed its handler
            // (within its first instants): the default action, before any
            // file or record was touched.
            None if std::os::unix::process::ExitStatusExt::signal(&o.status) == Some(2) => {
                early += 1;
                assert!(!out.exists());
            }
            other => panic!(
                "run {i}: status {other:?}: {}",
                String::from_utf8_lossy(&o.stderr)
            ),
        }
        // At once, without any repair: verified, nothing open, no temp.
        let (good, v) = verify(dir, &l);
        assert!(good, "run {i}: {v}");
        assert!(
            v["unresolved_uses"].as_array().unwrap().is_empty(),
            "run {i}: {v}"
        );
        assert!(temp_files(dir).is_empty(), "run {i}: {:?}", temp_files(dir));
        outputs_match_reservations(dir, &l);
        held += 1;
    }
    eprintln!("SIGINT: {runs} runs interrupted at random times: {held} held ({interrupted} stopped with status 130 ({after_commit} of them after their commit, output kept), {finished} finished first, {early} stopped before the handler was installed; every time the journal verified at once with no open reservation and no temporary file)");
}

/// A tmpfs mounted for the test, unmounted when dropped.
struct Tmpfs(std::path::PathBuf);

impl Tmpfs {
    fn mount(at: &Path, size: &str) -> Result<Tmpfs, String> {
        std::fs::create_dir_all(at).map_err(|e| e.to_string())?;
        let o = std::process::Command::new("mount")
            .args([
                "-t",
                "tmpfs",
                "-o",
                &format!("size={size},mode=0700"),
                "tmpfs",
            ])
            .arg(at)
            .output()
            .map_err(|e| e.to_string())?;
        if o.status.success() {
            Ok(Tmpfs(at.to_path_buf()))
        } else {
            Err(String::from_utf8_lossy(&o.stderr).trim().to_string())
        }
    }
}

impl Drop for Tmpfs {
    fn drop(&mut self) {
        let _ = std::process::Command::new("umount").arg(&self.0).status();
    }
}

/// Fills the file system holding `dir` with a file `filler`.
fn fill(filler: &Path) {
    use std::io::Write;
    let mut f = std::fs::File::create(filler).unwrap();
    let block = vec![0u8; 4096];
    while f.write_all(&block).is_ok() {}
    let one = [0u8; 1];
    while f.write_all(&one).is_ok() {}
    let _ = f.sync_all();
}

#[test]
fn full_disk_on_a_small_tmpfs() {
    let d = tempfile::tempdir().unwrap();
    let mnt = d.path().join("mnt");
    let _fs = match Tmpfs::mount(&mnt, "256k") {
        Ok(fs) => fs,
        Err(e) => {
            eprintln!("SKIPPED full_disk_on_a_small_tmpfs: cannot mount a tmpfs here ({e}); run as root (CI does) to include it");
            return;
        }
    };
    let dir = mnt.as_path();
    let l = dir.join("L");
    let outside = d.path();
    let mut rng = Rng(0xf011);
    let seed = new_seed(dir, &l, "600", "0.5");
    // A torn tail to repair later, on the full disk.
    let raws: Vec<_> = (0..40)
        .map(|i| {
            let p = outside.join(format!("raw{i}.bin"));
            std::fs::write(&p, rng.bytes(64)).unwrap();
            p
        })
        .collect();
    ok(
        dir,
        &l,
        &[
            "ledger",
            "commit-raw",
            raws[0].to_str().unwrap(),
            "--origin",
            "x",
        ],
    );
    let filler = dir.join("filler");
    fill(&filler);
    let (mut tried, mut held, mut full_refusals) = (0, 0, 0);
    let mut left_open = 0;
    // Free space step by step; at every step try each command once.
    let mut freed = 0u64;
    let size = std::fs::metadata(&filler).unwrap().len();
    let mut i = 1;
    while freed < 64 * 1024 && i + 2 < raws.len() {
        let before = std::fs::read(l.join("journal.jsonl")).unwrap();
        let out = dir.join(format!("out{i}.bin"));
        for args in [
            vec![
                "ledger",
                "commit-raw",
                raws[i].to_str().unwrap(),
                "--origin",
                "y",
            ],
            extract_args(raws[0].to_str().unwrap(), out.to_str().unwrap(), &seed),
            vec!["seed", "new", "--bits", "256"],
        ] {
            tried += 1;
            let o = run(dir, &l, "", &args);
            let err = String::from_utf8_lossy(&o.stderr);
            if !o.status.success() {
                if err.contains("no space left on device tmpfs") {
                    full_refusals += 1;
                    assert!(
                        err.contains(&format!("mounted at {}", mnt.display())),
                        "{err}"
                    );
                } else {
                    // Refused by a rule (raw data already used once the
                    // first extraction succeeded).
                    assert!(
                        err.contains("already used") || err.contains("one extraction"),
                        "{args:?}: {err}"
                    );
                }
            }
            // Whatever happened: the journal verifies (never torn), it
            // only grew, and no temporary file stays.
            let (good, v) = verify(outside, &l);
            assert!(good, "{args:?}: {v}");
            let now = std::fs::read(l.join("journal.jsonl")).unwrap();
            assert!(now.starts_with(&before), "{args:?}: the journal lost bytes");
            assert!(temp_files(dir).is_empty(), "{:?}", temp_files(dir));
            // An open reservation only when even its abandon could not be
            // written (then the message says so); resolved below.
            let open = v["unresolved_uses"].as_array().unwrap().len();
            if open > left_open {
                assert!(err.contains("left open"), "{args:?}: {err}");
                left_open = open;
            }
            held += 1;
        }
        i += 1;
        freed += 2048;
        let f = std::fs::OpenOptions::new()
            .write(true)
            .open(&filler)
            .unwrap();
        f.set_len(size.saturating_sub(freed)).unwrap();
    }
    assert!(
        full_refusals >= 3,
        "the disk was never full ({full_refusals})"
    );
    // Reservations left open on the full disk resolve once there is room.
    std::fs::remove_file(&filler).unwrap();
    let (_, v) = verify(outside, &l);
    for u in v["unresolved_uses"].as_array().unwrap() {
        ok(
            dir,
            &l,
            &["ledger", "abandon", u["use_id"].as_str().unwrap()],
        );
    }
    let (good, v) = verify(outside, &l);
    assert!(
        good && v["unresolved_uses"].as_array().unwrap().is_empty(),
        "{v}"
    );
    // Repair on a full disk leaves no empty copy.
    let torn = outside.join("torn.bin");
    std::fs::write(&torn, rng.bytes(64)).unwrap();
    let o = run(
        dir,
        &l,
        "journal-write:tear",
        &[
            "ledger",
            "commit-raw",
            torn.to_str().unwrap(),
            "--origin",
            "t",
        ],
    );
    assert!(!o.status.success());
    let filler2 = dir.join("filler2");
    fill(&filler2);
    let o = run(dir, &l, "", &["ledger", "repair"]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        !o.status.success() && err.contains("no space left"),
        "{err}"
    );
    let copies: Vec<_> = std::fs::read_dir(&l)
        .unwrap()
        .flatten()
        .filter(|e| e.file_name().to_string_lossy().contains("before-repair"))
        .collect();
    assert!(copies.is_empty(), "repair on a full disk left {copies:?}");
    assert!(temp_files(dir).is_empty());
    std::fs::remove_file(&filler2).unwrap();
    ok(dir, &l, &["ledger", "repair"]);
    assert!(verify(outside, &l).0);
    eprintln!("disk full: {tried} commands tried on a 256 KiB tmpfs freed 2 KiB at a time: {held} held ({full_refusals} refused with \"no space left on device tmpfs ...\", journal never torn and only grown, no temporary file, {left_open} reservation(s) left open by a failed abandon, resolved once space was freed); repair on the full disk left no copy and worked once space was freed");
}
