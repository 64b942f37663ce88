//! Certificates (`sluice-certificate/1`).
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        if let Ok(c) = sluice::certify::certificate::Certificate::from_json_str(text) {
            let _ = c.validate();
            let _ = c.to_json_string();
        }
    }
});
