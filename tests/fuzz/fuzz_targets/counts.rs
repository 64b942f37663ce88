//! Counts files of `certify --counts` (key = value), read exactly as the
//! command does, then the counts' own consistency checks.
#![no_main]
use libfuzzer_sys::fuzz_target;
use sluice::certify::params::read_counts;

fuzz_target!(|data: &[u8]| {
    if let Ok(mut s) = read_counts(data) {
        assert!(s.n_test <= s.n_rounds && s.wins <= s.n_test);
        s.add_warnings(0.5);
    }
});
