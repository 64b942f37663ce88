//! Throughput of one Toeplitz / modified Toeplitz hash, m = n/2, per engine,
//! n = 2^14 .. 2^22, seed bound once (as the pipeline runs it).

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use sluice::bits::Bits;
use sluice::extract::{Engine, Extractor, ModifiedToeplitz, Toeplitz};
use std::time::Duration;

fn pseudo_bits(seed: u64, n: usize) -> Bits {
    // The crate's one test generator.
    sluice::bits::pseudo::bits(seed | 1, n)
}

fn bench_family(c: &mut Criterion, family: &str) {
    let mut group = c.benchmark_group(family);
    group.sample_size(10);
    group.warm_up_time(Duration::from_millis(300));
    group.measurement_time(Duration::from_secs(2));
    let max_log: u32 = std::env::var("SLUICE_BENCH_MAX_LOG2")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(22);
    for log_n in (14..=max_log).step_by(2) {
        let n = 1usize << log_n;
        let m = n / 2;
        group.throughput(Throughput::Elements(n as u64));
        for engine in Engine::all_supported() {
            // The portable kernel is two orders of magnitude slower; keep its
            // sizes small so the whole bench stays short.
            if engine.name() == "portable" && log_n > 18 {
                continue;
            }
            let plan: Box<dyn Extractor> = match family {
                "toeplitz" => Box::new(Toeplitz::with_engine(n, m, engine).unwrap()),
                _ => Box::new(ModifiedToeplitz::with_engine(n, m, engine).unwrap()),
            };
            let x = pseudo_bits(1, n);
            let s = pseudo_bits(2, plan.seed_bits());
            let bound = plan.with_seed(&s);
            let mut y = Bits::zeros(m);
            group.bench_with_input(
                BenchmarkId::new(engine.name(), format!("2^{log_n}")),
                &n,
                |b, _| b.iter(|| bound.extract(&x, &mut y)),
            );
        }
    }
    group.finish();
}

fn benches(c: &mut Criterion) {
    bench_family(c, "toeplitz");
    bench_family(c, "modified-toeplitz");
}

criterion_group!(toeplitz, benches);
criterion_main!(toeplitz);
