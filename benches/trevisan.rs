//! Benchmarks of GF(2^l) multiplication and of the Trevisan extractor at the
//! sizes of the cost model (`spec/trevisan.md` sections 6 and 7).
//!
//! - `gf2l-mul/<path>/<l>`: one product in GF(2^l), l = 64, 128, 256, 261,
//!   281, 521, for every product path of this CPU (`Field::path_name`:
//!   portable, pclmul, vpclmul256, pclmul-fold); a dependent chain, so this
//!   is latency.
//! - `gf2l-mul-4chains/<path>/<l>`: four independent chains per iteration
//!   (throughput, as in the interleaved Horner loop), l = 256 and 261.
//! - `trevisan/<n>/<variant>`: a whole extraction at n = 2^16 with the
//!   worked-table parameters (k_s = 0.9n, eps_total = 1e-12).
//! - `trevisan-slice/<n>/<variant>`: n = 2^20 with the table's l and design
//!   but only 4096 output bits; the cost per output bit does not depend on m
//!   (nb - 1 products each), so the full time is about m times the per-bit
//!   time. Set `SLUICE_BENCH_FULL=1` to also time one whole n = 2^20 run of
//!   each variant once (tens of seconds each).

use criterion::{black_box, criterion_group, BenchmarkId, Criterion, Throughput};
use sluice::bits::Bits;
use sluice::extract::trevisan::{DesignKind, OneBit, Trevisan, TrevisanSpec};
use sluice::extract::Extractor;
use sluice::gf2::field::{Field, FieldPath};
use sluice::gf2::Backend;
use std::time::{Duration, Instant};

fn random_bits(len: usize, mut s: u64) -> Bits {
    let words: Vec<u64> = (0..len.div_ceil(64))
        .map(|_| {
            s ^= s >> 12;
            s ^= s << 25;
            s ^= s >> 27;
            s.wrapping_mul(0x2545_f491_4f6c_dd1d)
        })
        .collect();
    Bits::from_words(words, len)
}

fn ph(n: usize, m: usize, l: usize, design: DesignKind, c: u64) -> TrevisanSpec {
    TrevisanSpec {
        n,
        m,
        one_bit: OneBit::Ph,
        field_bits: l,
        design,
        design_factor: c,
        prime: None,
    }
}

/// The fixed-width product paths of this CPU, each once (`Field::paths`;
/// named by `FieldPath::name`: portable, pclmul, vpclmul256, pclmul-fold).
fn field_paths(l: usize) -> Vec<Field> {
    let mut v: Vec<Field> = Vec::new();
    for be in Backend::all_supported() {
        let f = Field::with_backend(l, be).unwrap();
        for path in f.paths() {
            if path != FieldPath::Generic && !v.iter().any(|h| h.path() == path) {
                v.push(f.clone().with_path(path).unwrap());
            }
        }
    }
    v
}

fn bench_field(c: &mut Criterion) {
    // Latency: each product takes the previous one as input (a dependent
    // chain through `Field::mul`, call included), as one Horner chain does.
    let mut g = c.benchmark_group("gf2l-mul");
    for l in [64usize, 128, 256, 261, 281, 521] {
        for f in field_paths(l) {
            let w = f.words();
            let a = random_bits(l, 1).words().to_vec();
            let mut x = random_bits(l, 2).words().to_vec();
            let mut t = vec![0u64; w];
            g.bench_with_input(BenchmarkId::new(f.path_name(), l), &l, |b, _| {
                b.iter(|| {
                    f.mul(&x, black_box(&a), &mut t);
                    x.copy_from_slice(&t);
                })
            });
        }
    }
    g.finish();
    // Throughput: four independent chains per iteration (the interleaving
    // of the Horner loop); criterion reports time per 4 products and the
    // product rate.
    let mut g = c.benchmark_group("gf2l-mul-4chains");
    g.throughput(Throughput::Elements(4));
    for l in [256usize, 261] {
        for f in field_paths(l) {
            let w = f.words();
            let a = random_bits(l, 1).words().to_vec();
            let mut xs: Vec<Vec<u64>> = (0..4)
                .map(|i| random_bits(l, 2 + i).words().to_vec())
                .collect();
            let mut t = vec![0u64; w];
            g.bench_with_input(BenchmarkId::new(f.path_name(), l), &l, |b, _| {
                b.iter(|| {
                    for x in xs.iter_mut() {
                        f.mul(x, black_box(&a), &mut t);
                        x.copy_from_slice(&t);
                    }
                })
            });
        }
    }
    g.finish();
}

/// (label, spec) at n = 2^16 and (slices of) n = 2^20, from the worked table
/// of spec section 6 (k_s = 0.9n, eps_total = 1e-12).
/// (label, spec) of whole runs, and (label, spec of a slice, full m).
type Variants = (
    Vec<(&'static str, TrevisanSpec)>,
    Vec<(&'static str, TrevisanSpec, usize)>,
);

fn variants() -> Variants {
    let n16 = 1 << 16;
    let n20 = 1 << 20;
    let small = vec![
        ("ph-poly-c1", ph(n16, 29473, 237, DesignKind::Poly, 1)),
        ("ph-block", ph(n16, 58632, 241, DesignKind::Block, 1)),
    ];
    // (label, spec, full m)
    let large = vec![
        (
            "ph-poly-c1",
            ph(n20, 4096, 255, DesignKind::Poly, 1),
            383_932,
        ),
        (
            "ph-block",
            ph(n20, 4096, 261, DesignKind::Block, 1),
            943_344,
        ),
    ];
    (small, large)
}

fn bench_trevisan(c: &mut Criterion) {
    let (small, large) = variants();
    let mut g = c.benchmark_group("trevisan");
    g.sample_size(10).measurement_time(Duration::from_secs(8));
    for (label, spec) in small {
        let tr = Trevisan::new(&spec).unwrap();
        let x = random_bits(spec.n, 3);
        let y = random_bits(tr.seed_bits(), 4);
        let mut z = Bits::zeros(spec.m);
        g.throughput(Throughput::Elements(spec.m as u64));
        g.bench_function(BenchmarkId::new(format!("{}", spec.n), label), |b| {
            b.iter(|| tr.extract(black_box(&x), &y, &mut z))
        });
    }
    g.finish();
    let mut g = c.benchmark_group("trevisan-slice");
    g.sample_size(10).measurement_time(Duration::from_secs(8));
    for (label, spec, _) in large {
        let tr = Trevisan::new(&spec).unwrap();
        let x = random_bits(spec.n, 3);
        let y = random_bits(tr.seed_bits(), 4);
        let mut z = Bits::zeros(spec.m);
        g.throughput(Throughput::Elements(spec.m as u64));
        g.bench_function(BenchmarkId::new(format!("{}", spec.n), label), |b| {
            b.iter(|| tr.extract(black_box(&x), &y, &mut z))
        });
    }
    g.finish();
}

/// One whole n = 2^20 run per variant, timed once (on request).
fn full_runs() {
    let Some(which) = std::env::var_os("SLUICE_BENCH_FULL") else {
        return;
    };
    let which = which.to_string_lossy().to_string();
    let (_, large) = variants();
    for (label, spec, m) in large {
        if which != "1" && which != label {
            continue;
        }
        let spec = TrevisanSpec { m, ..spec };
        let tr = Trevisan::new(&spec).unwrap();
        let x = random_bits(spec.n, 3);
        let y = random_bits(tr.seed_bits(), 4);
        let mut z = Bits::zeros(spec.m);
        let t0 = Instant::now();
        tr.extract(&x, &y, &mut z);
        let dt = t0.elapsed();
        println!(
            "full run n = {} {label}: m = {m}, l = {}, d = {}: {:.2} s ({:.1} us per output bit, {} threads)",
            spec.n,
            spec.field_bits,
            tr.seed_bits(),
            dt.as_secs_f64(),
            dt.as_secs_f64() * 1e6 / m as f64,
            rayon::current_num_threads()
        );
        black_box(&z);
    }
}

criterion_group!(benches, bench_field, bench_trevisan);

fn main() {
    benches();
    full_runs();
    Criterion::default().configure_from_args().final_summary();
}
