//! Vector files (`sluice-vectors 1`) and their data fields (small sizes
//! only, so a run stays fast).
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let Ok(cases) = sluice::vectors::parse(text) else {
        return;
    };
    for c in cases {
        if c.input_bits <= 1 << 16 {
            if let Ok(b) = c.input.bits(c.input_bits) {
                assert_eq!(b.len(), c.input_bits);
            }
        }
        let _ = sluice::vectors::trevisan_spec(&c);
    }
});
