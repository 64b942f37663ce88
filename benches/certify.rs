//! Speed of the round-file parser (target: at least 50 M rounds/s on one
//! core from an uncompressed file, issue 6). Run with
//! `cargo bench --bench certify`; it takes well under a minute.

use criterion::{black_box, criterion_group, criterion_main, Criterion, Throughput};
use sluice::bits::Bits;
use sluice::certify::record::{RecordReader, Tally};
use sluice::certify::simulate::SimulatedDevice;
use std::io::BufReader;

const ROUNDS: u64 = 4_000_000;

fn record() -> Vec<u8> {
    let mut out = Vec::with_capacity(ROUNDS as usize * 6 + 200);
    SimulatedDevice::new(0.84, 0.1, 1).write_record(ROUNDS, &mut out);
    out
}

fn parse(c: &mut Criterion) {
    let data = record();
    let mut g = c.benchmark_group("round-file");
    g.sample_size(10);
    g.measurement_time(std::time::Duration::from_secs(6));
    g.warm_up_time(std::time::Duration::from_secs(1));
    g.throughput(Throughput::Elements(ROUNDS));
    g.bench_function("counts only", |b| {
        b.iter(|| {
            let mut r = RecordReader::new(BufReader::with_capacity(1 << 20, &data[..]));
            let mut t = Tally::new();
            while r.read_rounds(1 << 20, &mut t, None).unwrap() > 0 {}
            assert_eq!(t.rounds(), ROUNDS);
            black_box(t)
        })
    });
    g.bench_function("counts and raw output bits", |b| {
        let mut pairs = Bits::new();
        b.iter(|| {
            let mut r = RecordReader::new(BufReader::with_capacity(1 << 20, &data[..]));
            let mut t = Tally::new();
            let mut x = 0u64;
            while r.read_rounds(1 << 20, &mut t, Some(&mut pairs)).unwrap() > 0 {
                x ^= pairs.words()[0];
            }
            black_box((t, x))
        })
    });
    // From a file on disk (in the page cache after the first pass), as
    // the command reads it.
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bench.rounds");
    std::fs::write(&path, &data).unwrap();
    g.bench_function("counts only, from a file", |b| {
        b.iter(|| {
            let f = std::fs::File::open(&path).unwrap();
            let mut r = RecordReader::new(BufReader::with_capacity(1 << 20, f));
            let mut t = Tally::new();
            while r.read_rounds(1 << 20, &mut t, None).unwrap() > 0 {}
            assert_eq!(t.rounds(), ROUNDS);
            black_box(t)
        })
    });
    g.finish();
}

criterion_group!(benches, parse);
criterion_main!(benches);
