//! Raw bit files in every format (packed, ASCII, hex; both bit orders),
//! read in blocks of a fuzzed size, and the whole-string parsers.
#![no_main]
use libfuzzer_sys::fuzz_target;
use sluice::bits::io::BlockReader;
use sluice::bits::{BitOrder, Bits, Format};
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    if data.len() < 2 {
        return;
    }
    let format = [Format::Packed, Format::Ascii, Format::Hex][(data[0] % 3) as usize];
    let order = if data[0] & 4 == 0 { BitOrder::Msb } else { BitOrder::Lsb };
    let block = 1 + data[1] as usize * 7;
    let body = &data[2..];
    let mut r = BlockReader::new(body, Path::new("fuzz"), format, order);
    let mut b = Bits::zeros(block);
    let mut total = 0u64;
    loop {
        match r.next_block(&mut b) {
            Ok(true) => total += block as u64,
            Ok(false) => break,
            Err(e) => {
                let _ = e.to_string();
                return;
            }
        }
    }
    // Never more bits than the bytes can hold.
    assert!(total <= 8 * body.len() as u64);
    let mut rest = Bits::new();
    if r.read_to_end(&mut rest).is_ok() {
        assert!(rest.len() < block || block == 0);
    }
    if let Ok(s) = std::str::from_utf8(body) {
        if let Ok(b) = Bits::from_ascii(s) {
            assert_eq!(Bits::from_ascii(&b.to_ascii()).unwrap(), b);
        }
        let _ = Bits::from_hex(s, None, order);
    }
});
