//! Receipts (`sluice-receipt/1`): a parsed receipt has consistent sizes.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        if let Ok(r) = sluice::pipeline::receipt::Receipt::from_json_str(text) {
            let c = &r.construction;
            assert!(1 <= c.output_bits && c.output_bits <= c.input_bits);
        }
    }
});
