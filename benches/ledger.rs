//! Journal replay and append speed (the lock, replay and fsync of one
//! append, and a full replay of a journal of 2000 uses).

use criterion::{criterion_group, criterion_main, Criterion};
use sluice::ledger::{replay, Body, Error, Ledger};
use std::collections::BTreeMap;

const SEED: &str = "0123456789abcdef0123456789abcdef";

fn filled(uses: usize) -> (tempfile::TempDir, Ledger) {
    let dir = tempfile::tempdir().unwrap();
    let l = Ledger::new(dir.path());
    let mut bodies = vec![Body::SeedCreated {
        seed: SEED.into(),
        bits: 2_000_000,
        source: "os".into(),
        deficiency: 0.0,
        eps_seed: 0.0,
        origin: "bench".into(),
        budget: 0.5,
        store_digest: None,
    }];
    for i in 0..uses {
        let d = format!("{i:064x}");
        let u = format!("{i:032x}");
        bodies.push(Body::RawCommitted {
            digest: d.clone(),
            bits: 1 << 20,
            origin: "bench".into(),
        });
        bodies.push(Body::UseReserved {
            use_id: u.clone(),
            seed: SEED.into(),
            construction: "toeplitz".into(),
            params: BTreeMap::from([("n".into(), 1 << 20), ("m".into(), 838781)]),
            input_digest: d.clone(),
            blocks: 1,
            seed_bits: 1887356,
            error: 1e-12,
            device_independent: false,
            cross_run_asserted: false,
            repeat_reason: None,
            output: None,
        });
        bodies.push(Body::UseCommitted {
            use_id: u,
            output_digest: d,
            receipt_digest: None,
        });
    }
    l.append(|_| Ok::<_, Error>((bodies, ()))).unwrap();
    (dir, l)
}

fn bench(c: &mut Criterion) {
    let (_d, l) = filled(2000);
    let bytes = std::fs::read(l.journal_path()).unwrap();
    c.bench_function("ledger replay 6002 records", |b| {
        b.iter(|| {
            let r = replay(&bytes);
            assert!(r.problem.is_none());
        })
    });
    let (_d2, l2) = filled(10);
    let mut i = 0u64;
    c.bench_function(
        "ledger append to a short journal (lock, replay, write, fsync)",
        |b| {
            b.iter(|| {
                i += 1;
                l2.append(|_| {
                    Ok::<_, Error>((
                        vec![Body::RawCommitted {
                            digest: format!("{:064x}", u64::MAX - i),
                            bits: 8,
                            origin: "bench".into(),
                        }],
                        (),
                    ))
                })
                .unwrap();
            })
        },
    );
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(20).measurement_time(std::time::Duration::from_secs(3));
    targets = bench
}
criterion_main!(benches);
