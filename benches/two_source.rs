//! Throughput of the two-source extractor per engine, at the valid lengths
//! n = 65371 and 1048573 with m = 0.6 n (about the classical m_max at
//! min-entropy rate 0.8 per source, spec Table 6), once with Y passed per
//! call (each run has its own second source) and once with Y bound.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use sluice::bits::Bits;
use sluice::extract::{Engine, Extractor, TwoSource};
use std::time::Duration;

fn pseudo_bits(seed: u64, n: usize) -> Bits {
    // The crate's one test generator.
    sluice::bits::pseudo::bits(seed | 1, n)
}

fn benches(c: &mut Criterion) {
    let mut group = c.benchmark_group("two-source");
    group.sample_size(10);
    group.warm_up_time(Duration::from_millis(300));
    group.measurement_time(Duration::from_secs(2));
    for n in [65371usize, 1048573] {
        let m = n * 3 / 5;
        group.throughput(Throughput::Elements(n as u64));
        for engine in Engine::all_supported() {
            if engine.name() == "portable" && n > 1 << 18 {
                continue;
            }
            let Ok(plan) = TwoSource::with_engine(n, m, engine) else {
                continue;
            };
            let x = pseudo_bits(1, n);
            let y = pseudo_bits(2, n);
            let mut z = Bits::zeros(m);
            group.bench_with_input(
                BenchmarkId::new(format!("{}/one-shot", engine.name()), n),
                &n,
                |b, _| b.iter(|| plan.extract(&x, &y, &mut z)),
            );
            let bound = plan.with_seed(&y);
            group.bench_with_input(
                BenchmarkId::new(format!("{}/bound", engine.name()), n),
                &n,
                |b, _| b.iter(|| bound.extract(&x, &mut z)),
            );
        }
    }
    group.finish();
}

criterion_group!(two_source, benches);
criterion_main!(two_source);
