//! Progress inside one block: the Trevisan extractor reports output bits
//! done from its workers while a block runs, the reports add up to the
//! output length, the bits do not change, and the pipeline passes reports
//! made during a block on to its caller before the block ends.

use sluice::bits::{BitOrder, Bits, Format};
use sluice::extract::trevisan::{DesignKind, OneBit, Trevisan, TrevisanSpec};
use sluice::extract::{Extractor, Progress, SeededExtractor, Unprepared};
use sluice::pipeline::{BitFile, Run, Source};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Mutex;
use std::time::{Duration, Instant};

/// Deterministic bits from a 64-bit seed (the crate's one test generator).
fn random_bits(len: usize, s: u64) -> Bits {
    sluice::bits::pseudo::bits(s | 1, len)
}

/// Records every report.
#[derive(Default)]
struct Recorder(Mutex<Vec<u64>>);

impl Progress for Recorder {
    fn add(&self, output_bits: u64) {
        self.0.lock().unwrap().push(output_bits);
    }
}

impl Recorder {
    fn reports(&self) -> Vec<u64> {
        self.0.lock().unwrap().clone()
    }
}

fn spec(one_bit: OneBit, n: usize, m: usize, l: usize, design: DesignKind) -> TrevisanSpec {
    TrevisanSpec {
        n,
        m,
        one_bit,
        field_bits: l,
        design,
        design_factor: 1,
        prime: None,
    }
}

/// Checks one plan: reports through every entry point, more than one per
/// block, each positive, adding up to m; bits equal to `extract`.
fn check_reports(spec: TrevisanSpec) {
    let tr = Trevisan::new(&spec).unwrap();
    let x = random_bits(spec.n, 11);
    let y = random_bits(tr.seed_bits(), 12);
    let mut want = Bits::zeros(spec.m);
    tr.extract(&x, &y, &mut want);

    let bound = tr.with_seed(&y);
    let unprepared = Unprepared::new(&tr, &y);
    type Entry<'a> = Box<dyn Fn(&mut Bits, &Recorder) + 'a>;
    let entries: Vec<(&str, Entry<'_>)> = vec![
        (
            "Extractor",
            Box::new(|z: &mut Bits, r: &Recorder| tr.extract_with_progress(&x, &y, z, r)),
        ),
        (
            "with_seed",
            Box::new(|z: &mut Bits, r: &Recorder| bound.extract_with_progress(&x, z, r)),
        ),
        (
            "Unprepared",
            Box::new(|z: &mut Bits, r: &Recorder| unprepared.extract_with_progress(&x, z, r)),
        ),
    ];
    for (name, run) in entries {
        let rec = Recorder::default();
        let mut z = Bits::zeros(spec.m);
        run(&mut z, &rec);
        let reports = rec.reports();
        // one report per task of 64 output bits
        assert_eq!(reports.len(), spec.m.div_ceil(64), "{name}: {spec:?}");
        assert!(reports.len() > 1, "{name}: a single report");
        assert!(reports.iter().all(|&k| k > 0 && k <= 64), "{name}");
        assert_eq!(reports.iter().sum::<u64>(), spec.m as u64, "{name}");
        assert_eq!(z, want, "{name}: bits changed with progress reporting");
    }
}

#[test]
fn trevisan_reports_progress_during_one_block() {
    // PH over GF(2^16) with nb = 300 blocks (more than one chunk of the
    // Horner loop) and m = 1000 (16 tasks, the last one short)
    check_reports(spec(OneBit::Ph, 16 * 300, 1000, 16, DesignKind::Poly));
    check_reports(spec(OneBit::Ph, 16 * 300 - 5, 1000, 16, DesignKind::Block));
    // wider field (5 words), padded last block
    check_reports(spec(OneBit::Ph, 2000, 130, 261, DesignKind::Poly));
    // IP
    check_reports(spec(OneBit::Ip, 64, 200, 0, DesignKind::Poly));
}

#[test]
fn default_progress_reports_once_at_the_end() {
    let tp = sluice::extract::Toeplitz::new(200, 50).unwrap();
    let x = random_bits(200, 1);
    let y = random_bits(tp.seed_bits(), 2);
    let mut want = Bits::zeros(50);
    tp.extract(&x, &y, &mut want);
    let rec = Recorder::default();
    let mut z = Bits::zeros(50);
    tp.extract_with_progress(&x, &y, &mut z, &rec);
    assert_eq!(rec.reports(), vec![50]);
    assert_eq!(z, want);
}

/// An extractor (the identity on 64 bits) that reports half of its output,
/// then waits until the pipeline's caller has seen a report from inside the
/// block before finishing: a pipeline that reported only after the block
/// would never set the flag, and the extractor gives up after 20 s.
struct Halfway<'a> {
    seen_partial: &'a AtomicBool,
    waited_out: &'a AtomicBool,
}

impl Extractor for Halfway<'_> {
    fn name(&self) -> &'static str {
        "halfway"
    }
    fn input_bits(&self) -> usize {
        64
    }
    fn output_bits(&self) -> usize {
        64
    }
    fn seed_bits(&self) -> usize {
        1
    }
    fn extract(&self, input: &Bits, _seed: &Bits, out: &mut Bits) {
        out.words_mut().copy_from_slice(input.words());
    }
    fn with_seed<'a>(&'a self, seed: &'a Bits) -> Box<dyn SeededExtractor + 'a> {
        Box::new(Unprepared::new(self, seed))
    }
    fn extract_with_progress(&self, input: &Bits, seed: &Bits, out: &mut Bits, p: &dyn Progress) {
        p.add(32);
        let t0 = Instant::now();
        while !self.seen_partial.load(Ordering::Acquire) {
            if t0.elapsed() > Duration::from_secs(20) {
                self.waited_out.store(true, Ordering::Release);
                break;
            }
            std::thread::sleep(Duration::from_millis(5));
        }
        self.extract(input, seed, out);
        p.add(32);
    }
}

#[test]
fn pipeline_passes_on_reports_from_inside_a_block() {
    let seen_partial = AtomicBool::new(false);
    let waited_out = AtomicBool::new(false);
    let ext = Halfway {
        seen_partial: &seen_partial,
        waited_out: &waited_out,
    };
    let dir = tempfile::tempdir().unwrap();
    let x = random_bits(64, 5);
    let seed = Bits::zeros(1);
    let run = Run {
        input: Source::Memory {
            bits: x.clone(),
            name: "x".into(),
        },
        input_bits: None,
        extractor: &ext,
        seed: (&seed).into(),
        output: BitFile {
            path: dir.path().join("out"),
            format: Format::Packed,
            order: BitOrder::Msb,
        },
    };
    let calls = AtomicU64::new(0);
    let mut values = Vec::new();
    let report = run
        .execute(|done| {
            calls.fetch_add(1, Ordering::Relaxed);
            values.push(done);
            if done > 0 && done < 64 {
                seen_partial.store(true, Ordering::Release);
            }
        })
        .unwrap();
    assert!(
        !waited_out.load(Ordering::Acquire),
        "no report during the block"
    );
    assert_eq!(report.blocks, 1);
    // half the output is half the input block; then the exact total
    assert_eq!(values.first(), Some(&32), "{values:?}");
    assert_eq!(values.last(), Some(&64), "{values:?}");
    assert!(values.windows(2).all(|w| w[0] <= w[1]), "{values:?}");
    let written = std::fs::read(dir.path().join("out")).unwrap();
    assert_eq!(written, x.to_packed(BitOrder::Msb));
}
