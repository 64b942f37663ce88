//! CHSH round files compressed with gzip, read as `certify` reads them
//! (magic bytes, then a multi-member decoder): the first byte picks raw
//! fuzzed gzip bytes or fuzzed text compressed here.
#![no_main]
use flate2::bufread::MultiGzDecoder;
use libfuzzer_sys::fuzz_target;
use sluice::certify::record::{RecordReader, Tally};
use std::io::{BufRead, BufReader, Write};

fuzz_target!(|data: &[u8]| {
    let Some((&mode, body)) = data.split_first() else {
        return;
    };
    let bytes = if mode & 1 == 0 {
        body.to_vec()
    } else {
        let mut e = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
        e.write_all(body).unwrap();
        e.finish().unwrap()
    };
    let mut raw = BufReader::new(&bytes[..]);
    let gz = raw.fill_buf().map(|b| b.starts_with(&[0x1f, 0x8b])).unwrap_or(false);
    let text: Box<dyn BufRead> = if gz {
        Box::new(BufReader::new(MultiGzDecoder::new(raw)))
    } else {
        Box::new(raw)
    };
    let mut reader = RecordReader::new(text);
    let mut tally = Tally::new();
    // Bounded: a tiny gzip member can expand a lot.
    for _ in 0..64 {
        match reader.read_rounds(1024, &mut tally, None) {
            Ok(0) | Err(_) => break,
            Ok(_) => {}
        }
    }
});
