//! Counts files of `certify --counts` (key = value), then the counts'
//! own consistency checks.
#![no_main]
use libfuzzer_sys::fuzz_target;
use sluice::certify::record::Summary;
use sluice::files::keyvalue;

fuzz_target!(|data: &[u8]| {
    let Ok(kv) = keyvalue::parse(data, &["rounds", "test-rounds", "wins", "test-probability"]) else {
        return;
    };
    let num = |k: &str| kv.iter().find(|e| e.0 == k).and_then(|e| keyvalue::parse_number::<u64>(&e.1));
    if let (Some(n), Some(t), Some(w)) = (num("rounds"), num("test-rounds"), num("wins")) {
        let mut s = Summary::from_counts(n, t, w);
        if s.check_counts().is_ok() {
            assert!(s.n_test <= s.n_rounds && s.wins <= s.n_test);
            s.add_warnings(0.5);
        }
    }
});
