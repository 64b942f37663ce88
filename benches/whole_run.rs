//! Whole-run sizes: one Toeplitz hash (seed preparation included, as a run
//! uses its seed once) by the additive FFT, n = 2^20 .. 2^26, m = n/2 and
//! m = n/20, on rayon pools of 1 and 2 threads.
//!
//! Environment:
//! * `SLUICE_BENCH_MAX_LOG2` (20..=30, default 26): the largest n = 2^K;
//! * `SLUICE_BENCH_KERNELS=all`: every additive-FFT kernel this CPU runs
//!   (default: the fastest one only);
//! * `SLUICE_GF2X=/path/libgf2x.so`: also the full product `S * X` of the
//!   same operands by gf2x (loaded at run time, see `sluice::gf2::outside`;
//!   one thread), so the ratio can be read off the same run. Its window is
//!   compared with ours once per size before timing.
//!
//! Filter as usual, e.g. `cargo bench --bench whole_run -- 'n/2/1t'`.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, SamplingMode};
use sluice::bits::Bits;
use sluice::extract::{Engine, Extractor, Toeplitz};
use sluice::gf2::outside::Gf2x;
use sluice::gf2::Backend;
use std::time::Duration;

fn pseudo_bits(seed: u64, n: usize) -> Bits {
    let mut s = seed | 1;
    let words = (0..n.div_ceil(64))
        .map(|_| {
            s ^= s << 13;
            s ^= s >> 7;
            s ^= s << 17;
            s
        })
        .collect();
    Bits::from_words(words, n)
}

fn engines() -> Vec<Engine> {
    if std::env::var("SLUICE_BENCH_KERNELS").as_deref() == Ok("all") {
        Backend::all_supported()
            .into_iter()
            .map(Engine::Additive)
            .collect()
    } else {
        vec![Engine::Additive(Backend::detect())]
    }
}

fn whole_run(c: &mut Criterion) {
    let max_log: u32 = std::env::var("SLUICE_BENCH_MAX_LOG2")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(26)
        .clamp(20, 30);
    let gf2x = std::env::var_os("SLUICE_GF2X").map(|p| {
        Gf2x::load(std::path::Path::new(&p)).unwrap_or_else(|e| panic!("SLUICE_GF2X: {e}"))
    });
    let pools: Vec<(usize, rayon::ThreadPool)> = [1usize, 2]
        .into_iter()
        .map(|t| {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(t)
                .build()
                .expect("thread pool");
            (t, pool)
        })
        .collect();
    let mut group = c.benchmark_group("whole-run");
    group.sample_size(10);
    group.sampling_mode(SamplingMode::Flat);
    group.warm_up_time(Duration::from_millis(500));
    group.measurement_time(Duration::from_secs(3));
    for log_n in 20..=max_log {
        let n = 1usize << log_n;
        let size = format!("2^{log_n}");
        for (m, label) in [(n / 2, "m=n/2"), (n / 20, "m=n/20")] {
            let x = pseudo_bits(1, n);
            let s = pseudo_bits(2, n + m - 1);
            if let Some(g) = &gf2x {
                let mut full = vec![0u64; s.words().len() + x.words().len()];
                g.mul(&mut full, s.words(), x.words());
                let full = Bits::from_words(full, 64 * (s.words().len() + x.words().len()));
                let mut ours = Bits::zeros(m);
                Toeplitz::with_engine(n, m, Engine::Additive(Backend::detect()))
                    .expect("plan")
                    .extract(&x, &s, &mut ours);
                assert!(
                    full.slice(n - 1, m) == ours,
                    "gf2x and sluice disagree at n = {size}, {label}: check the gf2x build"
                );
                let mut c = vec![0u64; s.words().len() + x.words().len()];
                group.bench_function(
                    BenchmarkId::new(format!("gf2x-full-product/{label}/1t"), &size),
                    |b| b.iter(|| g.mul(&mut c, s.words(), x.words())),
                );
            }
            for engine in engines() {
                // The portable kernel is far slower; keep it to small sizes.
                if engine == Engine::Additive(Backend::Portable) && log_n > 22 {
                    continue;
                }
                let plan = Toeplitz::with_engine(n, m, engine).expect("plan");
                let mut y = Bits::zeros(m);
                for (t, pool) in &pools {
                    group.bench_function(
                        BenchmarkId::new(format!("{}/{label}/{t}t", engine.name()), &size),
                        |b| pool.install(|| b.iter(|| plan.extract(&x, &s, &mut y))),
                    );
                }
            }
        }
    }
    group.finish();
}

criterion_group!(benches, whole_run);
criterion_main!(benches);
