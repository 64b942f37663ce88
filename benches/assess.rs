//! Speed of the statistical assessment (targets from issue 7, measured on
//! the 2-core build machine): the SP 800-22 battery (the `assess output`
//! target is 10^8 bits = 100 sequences of 10^6 in at most 60 s, run in
//! parallel over sequences), the SP 800-90B health tests (at least
//! 1 Gbit/s) and the estimators on 10^6 samples (at most 10 s).
//! Inputs are seeded pseudo-random bits (the crate's one test generator, seeds below).

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use rayon::prelude::*;
use sluice::assess::sp800_22::{bit_values, run_battery, run_battery_values, Config};
use sluice::assess::sp800_90b::{estimators, health};
use sluice::bits::Bits;
use std::time::Duration;

fn pseudo_random_bits(n: usize, seed: u64) -> Bits {
    // The crate's one test generator.
    sluice::bits::pseudo::Pseudo(seed).bits(n)
}

fn battery(c: &mut Criterion) {
    let mut g = c.benchmark_group("sp800_22");
    g.sample_size(10)
        .warm_up_time(Duration::from_secs(1))
        .measurement_time(Duration::from_secs(8));
    let one = pseudo_random_bits(1_000_000, 0x5eed_0001);
    g.throughput(Throughput::Elements(1_000_000));
    g.bench_function(BenchmarkId::new("battery", "1 x 10^6 bits"), |b| {
        b.iter(|| run_battery(&one, &Config::default()))
    });
    let ten: Vec<Vec<u8>> = (0..10)
        .map(|i| bit_values(&pseudo_random_bits(1_000_000, 0x5eed_0100 + i)))
        .collect();
    g.throughput(Throughput::Elements(10_000_000));
    g.bench_function(
        BenchmarkId::new("battery parallel", "10 x 10^6 bits"),
        |b| {
            b.iter(|| {
                ten.par_iter()
                    .map(|x| run_battery_values(x, &Config::default()).len())
                    .sum::<usize>()
            })
        },
    );
    g.finish();
}

fn health_tests(c: &mut Criterion) {
    let mut g = c.benchmark_group("sp800_90b health");
    g.sample_size(10)
        .warm_up_time(Duration::from_secs(1))
        .measurement_time(Duration::from_secs(4));
    let n = 100_000_000;
    let bits = pseudo_random_bits(n, 0x5eed_0002);
    let (rc, ac) = (
        health::rct_cutoff(0.8, 1).unwrap(),
        health::apt_cutoff(0.8, 1, 1024).unwrap(),
    );
    g.throughput(Throughput::Elements(n as u64));
    g.bench_function(BenchmarkId::new("repetition count", "10^8 bits"), |b| {
        b.iter(|| health::rct_bits(&bits, rc))
    });
    g.bench_function(BenchmarkId::new("adaptive proportion", "10^8 bits"), |b| {
        b.iter(|| health::apt_bits(&bits, ac))
    });
    g.finish();
}

fn estimates(c: &mut Criterion) {
    let mut g = c.benchmark_group("sp800_90b estimators");
    g.sample_size(10)
        .warm_up_time(Duration::from_secs(1))
        .measurement_time(Duration::from_secs(8));
    let x = bit_values(&pseudo_random_bits(1_000_000, 0x5eed_0003));
    g.bench_function(BenchmarkId::new("all six", "10^6 samples"), |b| {
        b.iter(|| estimators::assess_binary(&x))
    });
    g.finish();
}

criterion_group!(benches, battery, health_tests, estimates);
criterion_main!(benches);
