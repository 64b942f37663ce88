//! Tamper and rule tests of the journal (issue 5). The SHA3-256 values are
//! checked in `record.rs` against FIPS 202 examples; here every edit must be
//! detected and the first bad line named.

use super::*;
use std::collections::BTreeMap;

const RAW: &str = "1111111111111111111111111111111111111111111111111111111111111111";
const RAW2: &str = "2222222222222222222222222222222222222222222222222222222222222222";
const SEED: &str = "0123456789abcdef0123456789abcdef";

fn seed_created(budget: f64) -> Body {
    Body::SeedCreated {
        seed: SEED.into(),
        bits: 64,
        source: "os".into(),
        deficiency: 0.0,
        eps_seed: 0.0,
        origin: "test".into(),
        budget,
        store_digest: None,
    }
}

fn reserve(use_id: &str, raw: &str, error: f64) -> Body {
    Body::UseReserved {
        use_id: uid(use_id),
        seed: SEED.into(),
        construction: "toeplitz".into(),
        params: BTreeMap::from([("n".into(), 32), ("m".into(), 8)]),
        input_digest: raw.into(),
        blocks: 1,
        seed_bits: 39,
        error,
        device_independent: false,
        cross_run_asserted: false,
        repeat_reason: None,
        output: None,
    }
}

/// Use identifiers of the tests: 32 hex digits derived from a short name.
fn uid(name: &str) -> String {
    format!("{:0>32}", hex::encode(name))
}

fn raw(d: &str) -> Body {
    Body::RawCommitted {
        digest: d.into(),
        bits: 32,
        origin: "lab bench 3".into(),
    }
}

/// A small journal of 7 lines.
fn sample() -> (tempfile::TempDir, Ledger) {
    let dir = tempfile::tempdir().unwrap();
    let l = Ledger::new(dir.path());
    l.append(|_| Ok::<_, Error>((vec![seed_created(1e-6), raw(RAW), raw(RAW2)], ())))
        .unwrap();
    l.append(|_| Ok::<_, Error>((vec![reserve("u1", RAW, 1e-7)], ())))
        .unwrap();
    l.append(|_| {
        Ok::<_, Error>((
            vec![Body::UseCommitted {
                use_id: uid("u1"),
                output_digest: RAW2.into(),
                receipt_digest: None,
            }],
            (),
        ))
    })
    .unwrap();
    l.append(|_| Ok::<_, Error>((vec![reserve("u2", RAW2, 1e-7)], ())))
        .unwrap();
    (dir, l)
}

fn lines(l: &Ledger) -> Vec<String> {
    std::fs::read_to_string(l.journal_path())
        .unwrap()
        .lines()
        .map(String::from)
        .collect()
}

fn write_lines(l: &Ledger, ls: &[String]) {
    let mut t = ls.join("\n");
    t.push('\n');
    std::fs::write(l.journal_path(), t).unwrap();
}

fn first_bad_line(l: &Ledger) -> Option<u64> {
    l.read().unwrap().problem.map(|p| p.line().unwrap())
}

#[test]
fn sample_verifies_and_derives_state() {
    let (_d, l) = sample();
    let r = l.read().unwrap();
    assert!(r.problem.is_none(), "{:?}", r.problem);
    assert_eq!(r.records.len(), 7);
    let s = r.state.seed(SEED).unwrap();
    assert_eq!((s.uses, s.committed, s.bits_consumed), (2, 1, 78));
    assert!((s.spent - 2e-7).abs() < 1e-20);
    // u2 never committed: flagged, and still charged.
    let open: Vec<_> = r.state.unresolved().map(|u| u.use_id.clone()).collect();
    assert_eq!(open, vec![uid("u2")]);
}

#[test]
fn one_changed_byte_is_detected_at_its_line() {
    let (_d, l) = sample();
    let orig = std::fs::read(l.journal_path()).unwrap();
    // Change one byte of the "time" value in every line but the last: the
    // next line's prev no longer matches, so that line is named. (The last
    // line is covered by no digest yet: only a head digest kept elsewhere,
    // printed by `ledger verify`, reveals an edit there.)
    let ls = lines(&l);
    let mut start = 0usize;
    for (i, line) in ls[..ls.len() - 1].iter().enumerate() {
        let at = start + line.find("\"time\":").unwrap() + 7;
        let mut b = orig.clone();
        b[at] = if b[at] == b'9' { b'8' } else { b'9' };
        std::fs::write(l.journal_path(), &b).unwrap();
        let bad = first_bad_line(&l).expect("detected");
        assert_eq!(bad, i as u64 + 2, "edit in line {}", i + 1);
        start += line.len() + 1;
    }
    std::fs::write(l.journal_path(), &orig).unwrap();
    assert_eq!(first_bad_line(&l), None);
}

#[test]
fn deleted_line_is_detected() {
    let (_d, l) = sample();
    let mut ls = lines(&l);
    ls.remove(3);
    write_lines(&l, &ls);
    assert_eq!(first_bad_line(&l), Some(4));
    let e = l.read().unwrap().problem.unwrap().to_string();
    assert!(e.contains("line 4") && e.contains("sequence"), "{e}");
}

#[test]
fn swapped_lines_are_detected() {
    let (_d, l) = sample();
    let mut ls = lines(&l);
    ls.swap(2, 3);
    write_lines(&l, &ls);
    assert_eq!(first_bad_line(&l), Some(3));
}

#[test]
fn forged_appended_lines_are_detected() {
    let (_d, l) = sample();
    let ls = lines(&l);
    // (a) a copy of an old line with its seq fixed up: prev is stale.
    let mut forged: Record = serde_json::from_str(&ls[1]).unwrap();
    forged.seq = 8;
    let mut a = ls.clone();
    a.push(record::to_line(&forged));
    write_lines(&l, &a);
    assert_eq!(first_bad_line(&l), Some(8));
    // (b) a well-chained line that raises the budget: the rules catch it.
    let mut b = ls.clone();
    let rec = Record {
        seq: 8,
        prev: record::line_digest(ls[6].as_bytes()),
        time: u64::MAX / 2,
        body: Body::BudgetSet {
            seed: SEED.into(),
            budget: 0.5,
        },
    };
    b.push(record::to_line(&rec));
    write_lines(&l, &b);
    let p = l.read().unwrap().problem.unwrap();
    assert_eq!(p.line(), Some(8));
    assert!(p.to_string().contains("only be lowered"), "{p}");
    // (c) a well-chained commit for a use that was never reserved.
    let mut c = ls.clone();
    let rec = Record {
        seq: 8,
        prev: record::line_digest(ls[6].as_bytes()),
        time: u64::MAX / 2,
        body: Body::UseCommitted {
            use_id: uid("ghost"),
            output_digest: RAW.into(),
            receipt_digest: None,
        },
    };
    c.push(record::to_line(&rec));
    write_lines(&l, &c);
    assert!(l
        .read()
        .unwrap()
        .problem
        .unwrap()
        .to_string()
        .contains("never reserved"));
}

#[test]
fn torn_tail_is_detected_and_repaired_only_then() {
    let (_d, l) = sample();
    // A journal that verifies has nothing to repair.
    assert!(l.repair().is_err());
    let mut b = std::fs::read(l.journal_path()).unwrap();
    b.extend_from_slice(b"{\"seq\":8,\"prev\":\"ab");
    std::fs::write(l.journal_path(), &b).unwrap();
    let r = l.read().unwrap();
    assert!(matches!(
        r.problem.as_ref().unwrap().kind,
        ErrorKind::TornTail { bytes: 19 }
    ));
    assert_eq!(r.problem.unwrap().line(), Some(8));
    // Appending is refused until repaired.
    assert!(l.append(|_| Ok::<_, Error>((vec![raw(RAW)], ()))).is_err());
    let (copy, dropped) = l.repair().unwrap();
    assert_eq!(dropped, 19);
    assert_eq!(std::fs::read(&copy).unwrap(), b);
    let r = l.read().unwrap();
    assert!(r.problem.is_none(), "{:?}", r.problem);
    assert_eq!(r.records.last().unwrap().body.kind(), "repair");
    // Any other damage is never repaired.
    let mut ls = lines(&l);
    ls.swap(1, 2);
    write_lines(&l, &ls);
    assert!(l.repair().is_err());
}

#[test]
fn not_ours_and_unknown_kind() {
    let dir = tempfile::tempdir().unwrap();
    let l = Ledger::new(dir.path());
    std::fs::write(l.journal_path(), "{\"hello\":1}\n").unwrap();
    let p = l.read().unwrap().problem.unwrap();
    assert!(matches!(p.kind, ErrorKind::NotOurs { .. }), "{p}");
    let (_d, l) = sample();
    let mut ls = lines(&l);
    ls[6] = ls[6].replace("use-reserved", "use-borrowed");
    write_lines(&l, &ls);
    let p = l.read().unwrap().problem.unwrap();
    assert!(
        matches!(p.kind, ErrorKind::UnknownKind { .. }) && p.line() == Some(7),
        "{p}"
    );
}

#[test]
fn rules_refuse_and_leave_the_journal_unchanged() {
    let (_d, l) = sample();
    let before = std::fs::read(l.journal_path()).unwrap();
    let refuse = |b: Body| {
        let e = l.append(|_| Ok::<_, Error>((vec![b], ()))).unwrap_err();
        assert_eq!(std::fs::read(l.journal_path()).unwrap(), before);
        e.to_string()
    };
    // Same raw data twice (4.6).
    let e = refuse(reserve("u3", RAW, 1e-7));
    assert!(
        e.contains("one extraction per raw data") && e.contains("line 5"),
        "{e}"
    );
    // Past the budget (4.3): 2e-7 spent, 1e-6 budget.
    let mut b = reserve("u3", RAW, 9e-7);
    if let Body::UseReserved { repeat_reason, .. } = &mut b {
        *repeat_reason = Some("earlier output discarded unused".into());
    }
    let e = refuse(b);
    assert!(e.contains("budget rule"), "{e}");
    // Raw data never committed.
    let e = refuse(reserve("u3", &"3".repeat(64), 1e-8));
    assert!(e.contains("not committed"), "{e}");
    // Raising a budget.
    let e = refuse(Body::BudgetSet {
        seed: SEED.into(),
        budget: 2e-6,
    });
    assert!(e.contains("only be lowered"), "{e}");
}

#[test]
fn disclosure_before_commitment_is_refused() {
    let (_d, l) = sample();
    let late = "4".repeat(64);
    l.append(|_| {
        Ok::<_, Error>((
            vec![
                Body::SeedDisclosed {
                    seed: SEED.into(),
                    how: "revealed".into(),
                },
                raw(&late),
            ],
            (),
        ))
    })
    .unwrap();
    let e = l
        .append(|_| Ok::<_, Error>((vec![reserve("u9", &late, 1e-8)], ())))
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("disclosed at line 8") && e.contains("committed at line 9"),
        "{e}"
    );
}

#[test]
fn device_independent_seed_is_one_run_only() {
    let (_d, l) = sample();
    let d = "5".repeat(64);
    let mut b = reserve("u7", &d, 1e-8);
    if let Body::UseReserved {
        device_independent, ..
    } = &mut b
    {
        *device_independent = true;
    }
    l.append(|_| Ok::<_, Error>((vec![raw(&d)], ()))).unwrap();
    let e = l
        .append(|_| Ok::<_, Error>((vec![b.clone()], ())))
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("fresh-seed rule") && e.contains("Seeds and the ledger") && e.contains("line 5"),
        "{e}"
    );
    if let Body::UseReserved {
        cross_run_asserted, ..
    } = &mut b
    {
        *cross_run_asserted = true;
    }
    l.append(|_| Ok::<_, Error>((vec![b], ()))).unwrap();
}

proptest::proptest! {
    #![proptest_config(proptest::prelude::ProptestConfig::with_cases(200))]
    /// Any change of one byte before the last line is detected, at the
    /// changed line or the next (the next line's `prev` no longer matches).
    #[test]
    fn any_one_byte_change_is_detected(pos in 0usize..10_000, xor in 1u8..=255) {
        let (_d, l) = sample();
        let mut b = std::fs::read(l.journal_path()).unwrap();
        let last_start = b[..b.len() - 1].iter().rposition(|&c| c == b'\n').unwrap() + 1;
        let at = pos % last_start;
        b[at] ^= xor;
        let r = replay(&b);
        let line_of = 1 + b[..at].iter().filter(|&&c| c == b'\n').count() as u64;
        let p = r.problem.expect("detected");
        let bad = p.line().unwrap();
        proptest::prop_assert!(bad == line_of || bad == line_of + 1, "changed line {line_of}, named {bad}: {p}");
    }
}
