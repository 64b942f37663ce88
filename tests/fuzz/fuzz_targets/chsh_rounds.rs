//! CHSH round files (plain text), with and without the raw output pairs.
#![no_main]
use libfuzzer_sys::fuzz_target;
use sluice::bits::Bits;
use sluice::certify::record::{RecordReader, Tally};

fuzz_target!(|data: &[u8]| {
    let mut reader = RecordReader::new(data);
    let mut tally = Tally::new();
    let mut pairs = Bits::new();
    loop {
        match reader.read_rounds(64, &mut tally, Some(&mut pairs)) {
            Ok(0) => break,
            Ok(n) => assert!(n <= 64 && pairs.len() == 2 * n as usize),
            Err(e) => {
                let _ = e.to_string();
                return;
            }
        }
    }
    if let Ok(s) = tally.summary(0.5) {
        assert!(s.n_test <= s.n_rounds);
    }
});
