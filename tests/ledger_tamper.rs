//! Tampering with a ledger (issue 15 items 6-8), through the library:
//! random edits of the journal (one byte changed, a line deleted, two lines
//! swapped, a cut at a line boundary or inside a line, the last line
//! changed, an extra key with the chain recomputed) and of the seed store
//! (one file copied over another with its identifier changed, a byte of the
//! bits or the salt changed). Every edit must be caught: by `replay` and
//! the head file on read, by `repair` refusing anything but a torn tail
//! past the head, by the binding digest on load. Prints tried / held
//! (`-- --nocapture`); `SLUICE_STRESS=1` runs ten times as many.

use sluice::bits::Bits;
use sluice::ledger::{Body, Ledger};
use sluice::seed::{Origin, Store};
use std::collections::BTreeMap;

/// The crate's one test generator (seeded, replayable), over lengths.
struct Rng(sluice::bits::pseudo::Pseudo);
impl Rng {
    fn below(&mut self, n: usize) -> usize {
        self.0.below(n as u64) as usize
    }
}

fn digest(i: u64) -> String {
    format!("{:064x}", i * 0x9e37_79b9_7f4a_7c15)
}

/// A ledger with two seeds and a dozen uses, built through the library.
fn build(dir: &std::path::Path) -> (Ledger, Vec<String>) {
    let l = Ledger::new(dir.join("L"));
    let store = Store::new(l.clone());
    let mut seeds = Vec::new();
    for k in 0..2u64 {
        let bits = Bits::from_words(vec![0x1234_5678_9abc_def0 ^ k, k, !k], 190);
        seeds.push(
            store
                .register(
                    &bits,
                    Origin::File {
                        deficiency: 0.0,
                        origin: format!("fictional lab, seed {k}"),
                    },
                    1e-3,
                )
                .unwrap(),
        );
    }
    for i in 0..12u64 {
        let d = digest(i + 1);
        let u = format!("{:032x}", i + 1);
        let seed = seeds[(i % 2) as usize].clone();
        l.append(|_| {
            Ok::<_, sluice::ledger::Error>((
                vec![
                    Body::RawCommitted {
                        digest: d.clone(),
                        bits: 512,
                        origin: "bench".into(),
                    },
                    Body::UseReserved {
                        use_id: u.clone(),
                        seed,
                        construction: "toeplitz".into(),
                        params: BTreeMap::from([("n".into(), 512), ("m".into(), 64)]),
                        input_digest: d.clone(),
                        blocks: 1,
                        seed_bits: 100,
                        error: 1e-6,
                        device_independent: false,
                        cross_run_asserted: false,
                        repeat_reason: None,
                        output: Some(format!("/fictional/out{i}")),
                    },
                ],
                (),
            ))
        })
        .unwrap();
        if i % 3 != 2 {
            l.append(|_| {
                Ok::<_, sluice::ledger::Error>((
                    vec![Body::UseCommitted {
                        use_id: u.clone(),
                        output_digest: digest(100 + i),
                        receipt_digest: None,
                    }],
                    (),
                ))
            })
            .unwrap();
        }
    }
    (l, seeds)
}

fn rechain(lines: &mut [String], from: usize) {
    for i in from.max(1)..lines.len() {
        let prev = sluice::ledger::record::line_digest(lines[i - 1].as_bytes());
        let at = lines[i].find("\"prev\":\"").unwrap() + 8;
        lines[i].replace_range(at..at + 64, &prev);
    }
}

#[test]
fn every_edit_of_the_journal_or_the_store_is_caught() {
    let rounds = if std::env::var("SLUICE_STRESS").is_ok_and(|v| v == "1") {
        10_000
    } else {
        1_000
    };
    let d = tempfile::tempdir().unwrap();
    let (l, seeds) = build(d.path());
    let store = Store::new(l.clone());
    let journal = std::fs::read(l.journal_path()).unwrap();
    let text = String::from_utf8(journal.clone()).unwrap();
    let lines: Vec<String> = text.lines().map(String::from).collect();
    assert!(l.read().unwrap().problem.is_none());
    let files: Vec<_> = seeds
        .iter()
        .map(|s| l.seeds_dir().join(format!("{s}.seed.json")))
        .collect();
    let originals: Vec<Vec<u8>> = files.iter().map(|f| std::fs::read(f).unwrap()).collect();
    let mut rng = Rng(sluice::bits::pseudo::Pseudo(0x7a3_0015));
    let mut tried = BTreeMap::<&str, (u32, u32)>::new();
    for _ in 0..rounds {
        let kind = rng.below(9);
        let mut edited: Vec<u8>;
        let name;
        match kind {
            0 => {
                name = "byte changed";
                edited = journal.clone();
                let at = rng.below(edited.len());
                edited[at] ^= 1 + rng.below(255) as u8;
            }
            1 => {
                name = "line deleted";
                let mut ls = lines.clone();
                ls.remove(rng.below(ls.len()));
                edited = (ls.join("\n") + "\n").into_bytes();
            }
            2 => {
                name = "lines swapped";
                let mut ls = lines.clone();
                let a = rng.below(ls.len() - 1);
                ls.swap(a, a + 1);
                edited = (ls.join("\n") + "\n").into_bytes();
            }
            3 => {
                name = "cut at a line boundary";
                let keep = 1 + rng.below(lines.len() - 1);
                edited = (lines[..keep].join("\n") + "\n").into_bytes();
            }
            4 => {
                name = "cut inside a line";
                edited = journal[..1 + rng.below(journal.len() - 2)].to_vec();
                if edited.ends_with(b"\n") {
                    edited.pop();
                }
            }
            5 => {
                name = "last line changed";
                let mut ls = lines.clone();
                let last = ls.len() - 1;
                ls[last] = ls[last].replace("\"time\":", "\"time\":9");
                edited = (ls.join("\n") + "\n").into_bytes();
            }
            6 => {
                name = "extra key, chain recomputed";
                let mut ls = lines.clone();
                let i = 1 + rng.below(ls.len() - 1);
                ls[i] = ls[i].replacen(",\"kind\":", ",\"note\":\"x\",\"kind\":", 1);
                rechain(&mut ls, i + 1);
                edited = (ls.join("\n") + "\n").into_bytes();
            }
            _ => {
                name = "seed store file edited";
                let which = rng.below(2);
                let other = 1 - which;
                let bytes = match rng.below(3) {
                    // Copied over the other seed's file, identifier changed.
                    0 => String::from_utf8(originals[other].clone())
                        .unwrap()
                        .replace(&seeds[other], &seeds[which])
                        .into_bytes(),
                    // A digit of the data or the salt changed.
                    k => {
                        let t = String::from_utf8(originals[which].clone()).unwrap();
                        let key = if k == 1 { "\"data\":\"" } else { "\"salt\":\"" };
                        let at = t.find(key).unwrap() + key.len() + rng.below(40);
                        let mut b = t.into_bytes();
                        b[at] = if b[at] == b'0' { b'1' } else { b'0' };
                        b
                    }
                };
                std::fs::write(&files[which], &bytes).unwrap();
                let caught = store.load(&seeds[which]).is_err();
                std::fs::write(&files[which], &originals[which]).unwrap();
                let e = tried.entry(name).or_default();
                e.0 += 1;
                e.1 += u32::from(caught);
                assert!(caught, "{name}: not caught");
                continue;
            }
        }
        if edited == journal {
            continue;
        }
        std::fs::write(l.journal_path(), &edited).unwrap();
        let r = l.read().unwrap();
        // Caught on read; and never "repaired" away unless it is a torn
        // tail past the head file (none of these edits is one).
        let caught = r.problem.is_some() && l.repair().is_err();
        std::fs::write(l.journal_path(), &journal).unwrap();
        let e = tried.entry(name).or_default();
        e.0 += 1;
        e.1 += u32::from(caught);
        assert!(caught, "{name}: not caught");
    }
    assert!(l.read().unwrap().problem.is_none());
    let total: (u32, u32) = tried.values().fold((0, 0), |a, b| (a.0 + b.0, a.1 + b.1));
    eprintln!("tampering: {} edits tried, {} caught", total.0, total.1);
    for (k, (t, h)) in &tried {
        eprintln!("  {k}: {t} tried, {h} caught");
    }
}
