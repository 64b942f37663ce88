//! Speed of the round-file parser (target: at least 50 M rounds/s on one
//! core from an uncompressed file, issue 6), of the whole one-pass record
//! read (tally, kept string, digest; `certify` must stay I/O bound), and of
//! the improved bound's planner (target: `certify --plan` answers in under
//! a second). Run with `cargo bench --bench certify`; it takes about a
//! minute.

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
    g.bench_function("one pass: tally, kept string and its digest", |b| {
        b.iter(|| {
            let r = sluice::certify::record::read_record(
                BufReader::with_capacity(1 << 20, &data[..]),
                ROUNDS,
                sluice::certify::improved::Keep::Pairs,
                std::io::sink(),
                || {},
            )
            .unwrap();
            black_box(r.raw_digest)
        })
    });
    g.finish();
}

fn plan(c: &mut Criterion) {
    // The planner at the second reference row (gamma 0.01, w 0.76, N 1e10,
    // eps 1e-10): every acceptance test, nu optimised.
    let mut g = c.benchmark_group("improved-plan");
    g.sample_size(10);
    g.measurement_time(std::time::Duration::from_secs(8));
    g.bench_function("plan_tests gamma 0.01 N 1e10", |b| {
        b.iter(|| {
            let v = sluice::certify::improved::plan_tests(
                10_000_000_000,
                0.01,
                0.76,
                1e-10,
                1e-10,
                1e-10,
                &|_| 34.0,
            )
            .unwrap();
            black_box(v)
        })
    });
    g.finish();
}

criterion_group!(benches, parse, plan);
criterion_main!(benches);
