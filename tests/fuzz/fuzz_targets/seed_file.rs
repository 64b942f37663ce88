//! Seed files: any bytes, any format, a fuzzed needed length.
#![no_main]
use libfuzzer_sys::fuzz_target;
use sluice::bits::Format;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    if data.len() < 3 {
        return;
    }
    let format = [Format::Packed, Format::Ascii, Format::Hex][(data[0] % 3) as usize];
    let needed = u16::from_le_bytes([data[1], data[2]]) as usize;
    let longer = data[0] & 8 != 0;
    match sluice::pipeline::read_seed_from(&data[3..], Path::new("seed"), format, needed, longer) {
        Ok(s) => assert_eq!(s.len(), needed),
        Err(e) => {
            let _ = e.to_string();
        }
    }
});
