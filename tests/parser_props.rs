//! Property tests of every parser's error path (issue 15 item 10): for
//! arbitrary bytes, and for a valid file of each kind with one byte
//! changed, inserted or removed, each parser returns a value or an error
//! that says what and where; it never panics and never allocates from a
//! size it has not checked (the fuzz targets in tests/fuzz run the same
//! parsers under libFuzzer). The valid files are the fuzz seeds.

use proptest::prelude::*;
use sluice::bits::io::BlockReader;
use sluice::bits::{BitOrder, Bits, Format};
use std::path::Path;

fn seed(target: &str, name: &str) -> Vec<u8> {
    std::fs::read(
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("tests/fuzz/seeds")
            .join(target)
            .join(name),
    )
    .unwrap()
}

/// One byte changed, inserted or removed at `pos`.
fn mutate(mut b: Vec<u8>, op: u8, pos: usize, byte: u8) -> Vec<u8> {
    if b.is_empty() {
        return vec![byte];
    }
    let at = pos % b.len();
    match op % 3 {
        0 => b[at] = byte,
        1 => b.insert(at, byte),
        _ => {
            b.remove(at);
        }
    }
    b
}

fn bytes() -> impl Strategy<Value = Vec<u8>> {
    proptest::collection::vec(any::<u8>(), 0..400)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(300))]

    #[test]
    fn raw_bits_in_any_format(b in bytes(), f in 0u8..3, lsb: bool, block in 1usize..200) {
        let format = [Format::Packed, Format::Ascii, Format::Hex][f as usize];
        let order = if lsb { BitOrder::Lsb } else { BitOrder::Msb };
        let mut r = BlockReader::new(&b[..], Path::new("raw.bin"), format, order);
        let mut out = Bits::zeros(block);
        loop {
            match r.next_block(&mut out) {
                Ok(true) => {}
                Ok(false) => break,
                Err(e) => {
                    // Says where: the file and the byte.
                    let t = e.to_string();
                    prop_assert!(t.starts_with("raw.bin: ") && t.contains("byte "), "{}", t);
                    break;
                }
            }
        }
    }

    #[test]
    fn seed_files(b in bytes(), f in 0u8..3, needed in 0usize..3000, longer: bool) {
        let format = [Format::Packed, Format::Ascii, Format::Hex][f as usize];
        match sluice::pipeline::read_seed_from(&b[..], Path::new("s.seed"), format, needed, longer) {
            Ok(s) => prop_assert_eq!(s.len(), needed),
            Err(e) => prop_assert!(e.to_string().contains("s.seed")),
        }
    }

    #[test]
    fn journals_and_head_files(op: u8, pos: usize, byte: u8, junk in bytes()) {
        for b in [mutate(seed("journal", "journal.jsonl"), op, pos, byte), junk.clone()] {
            let r = sluice::ledger::replay(&b);
            prop_assert_eq!(r.records.len(), r.line_digests.len());
            if let Some(p) = &r.problem {
                // Names the line (and byte) it stopped at.
                prop_assert!(p.line().is_some(), "{}", p);
                prop_assert!(p.to_string().contains("line "), "{}", p);
            }
        }
        for b in [mutate(seed("journal", "head.json"), op, pos, byte), junk] {
            if let Err(e) = sluice::ledger::Head::parse(&b) {
                prop_assert!(!e.is_empty());
            }
        }
    }

    #[test]
    fn seed_store_files(op: u8, pos: usize, byte: u8, junk in bytes()) {
        let id = "0123456789abcdef0123456789abcdef";
        let good = seed("seed_store", "store.json");
        prop_assert!(sluice::seed::parse_store_file(&good, id).is_ok());
        for b in [mutate(good, op, pos, byte), junk] {
            match sluice::seed::parse_store_file(&b, id) {
                Ok((bits, _)) => prop_assert!(!bits.is_empty()),
                Err(e) => prop_assert!(!e.is_empty()),
            }
        }
    }

    #[test]
    fn receipts_and_certificates(op: u8, pos: usize, byte: u8) {
        for name in ["toeplitz.json", "trevisan.json"] {
            let b = mutate(seed("receipt", name), op, pos, byte);
            if let Ok(t) = std::str::from_utf8(&b) {
                if let Ok(r) = sluice::pipeline::receipt::Receipt::from_json_str(t) {
                    let c = &r.construction;
                    prop_assert!(1 <= c.output_bits && c.output_bits <= c.input_bits);
                }
            }
        }
        let b = mutate(seed("certificate", "cert.json"), op, pos, byte);
        if let Ok(t) = std::str::from_utf8(&b) {
            if let Err(e) = sluice::certify::certificate::Certificate::from_json_str(t) {
                prop_assert!(!e.to_string().is_empty());
            }
        }
    }

    #[test]
    fn vector_files(op: u8, pos: usize, byte: u8) {
        let b = mutate(seed("vectors", "small.vec"), op, pos, byte);
        if let Ok(t) = std::str::from_utf8(&b) {
            match sluice::vectors::parse(t) {
                Ok(cases) => {
                    for c in cases {
                        if c.input_bits <= 1 << 16 {
                            let _ = c.input.bits(c.input_bits);
                        }
                    }
                }
                Err(e) => prop_assert!(e.line >= 1 && !e.message.is_empty()),
            }
        }
    }

    #[test]
    fn params_and_counts(op: u8, pos: usize, byte: u8) {
        let keys = ["rounds", "test-probability", "expected-win", "tolerance", "smoothing",
                    "acceptance", "estimation-error", "test-rounds", "wins"];
        for (t, n) in [("params", "params.txt"), ("counts", "counts.txt")] {
            let b = mutate(seed(t, n), op, pos, byte);
            match sluice::files::keyvalue::parse(&b, &keys) {
                Ok(kv) => {
                    for (k, v, line) in kv {
                        prop_assert!(keys.contains(&k.as_str()) && line >= 1);
                        let _ = sluice::files::keyvalue::parse_number::<u64>(&v);
                    }
                }
                Err(e) => {
                    let s = e.to_string();
                    prop_assert!(s.contains("line ") || s.contains("byte "), "{}", s);
                }
            }
        }
    }

    #[test]
    fn chsh_round_files(op: u8, pos: usize, byte: u8) {
        use sluice::certify::record::{RecordReader, Tally};
        let b = mutate(seed("chsh_rounds", "rounds.txt"), op, pos, byte);
        let mut reader = RecordReader::new(&b[..]);
        let mut tally = Tally::new();
        let mut pairs = Bits::new();
        loop {
            match reader.read_rounds(16, &mut tally, Some(&mut pairs)) {
                Ok(0) => break,
                Ok(_) => {}
                Err(e) => {
                    prop_assert!(e.to_string().contains("line"), "{}", e);
                    break;
                }
            }
        }
    }
}
