//! Parameters files of `certify` (key = value), read and merged exactly as
//! the command does, then the protocol's own checks.
#![no_main]
use libfuzzer_sys::fuzz_target;
use sluice::certify::params::{read_key_values, Declared, PARAM_KEYS};

fuzz_target!(|data: &[u8]| {
    let Ok(kv) = read_key_values(data, &PARAM_KEYS) else {
        return;
    };
    let mut d = Declared::default();
    let _ = d.merge(&kv, false);
});
