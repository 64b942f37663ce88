//! Journals (`sluice-journal/1`) and head files: any bytes replay to a
//! state or a problem with a position, never a panic.
#![no_main]
use libfuzzer_sys::fuzz_target;
use sluice::ledger::{replay, Head};

fuzz_target!(|data: &[u8]| {
    let r = replay(data);
    assert_eq!(r.records.len(), r.line_digests.len());
    assert_eq!(r.state.lines as usize, r.records.len());
    if let Some(p) = &r.problem {
        assert!(p.line().is_some() || r.records.is_empty());
        let _ = p.to_string();
    }
    if let Ok(h) = Head::parse(data) {
        let _ = sluice::ledger::check_head(&r, h.lines, &h.head, Some(h.bytes));
    }
});
