//! Seed store files (`sluice-seed/1`): a parsed file's bits match its
//! declared length.
#![no_main]
use libfuzzer_sys::fuzz_target;

const ID: &str = "0123456789abcdef0123456789abcdef";

fuzz_target!(|data: &[u8]| {
    if let Ok((bits, _salt)) = sluice::seed::parse_store_file(data, ID) {
        assert!(!bits.is_empty());
    }
});
