//! `sluice demo`: the main job on a simulated source, start to finish.
//!
//! The scenario is our own and fictional: the Fenwick Hollow photonics lab
//! runs "Millrace-2", a prototype photon-arrival source whose raw bits come out
//! biased (a one with probability 0.3). The demo simulates one run of it,
//! takes a seed from the operating system, sizes the output from the
//! source's min-entropy, extracts with Toeplitz hashing and reports.

use super::common;
use anyhow::Context;
use sluice::bits::{BitOrder, Bits, Format};
use sluice::extract::{Extractor, Toeplitz};
use sluice::files::{AtomicFile, Kind, Replace};
use sluice::pipeline::{BitFile, Run, Source};
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;
use std::time::Instant;

/// `sluice demo`
#[derive(clap::Args, Debug)]
pub struct DemoArgs {
    /// Folder for the demo's files (created if missing)
    #[arg(long, default_value = "sluice-demo")]
    pub dir: PathBuf,
    /// Raw bits to simulate
    #[arg(long = "raw-bits", default_value_t = 1 << 20)]
    pub raw_bits: usize,
    /// Print a JSON report
    #[arg(long)]
    pub json: bool,
    /// Replace files in the folder even if they are not earlier demo files
    #[arg(long)]
    pub force: bool,
}

/// Probability of a one in the simulated raw bits.
const P_ONE: f64 = 0.3;
/// Extractor error target of the demo.
const EPS_EXT: f64 = 1e-12;

/// The simulated device: independent bits, a one with probability 0.3
/// (a seeded generator: the demo's raw data are the same on every run; they
/// are demo data, not a source of randomness).
fn simulate(n: usize) -> Bits {
    let mut state = 0x4d69_6c6c_7261_6365u64; // "Millrace"
    let threshold = (P_ONE * (1u64 << 53) as f64) as u64;
    let mut b = Bits::zeros(n);
    for i in 0..n {
        // splitmix64
        state = state.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = state;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^= z >> 31;
        if (z >> 11) < threshold {
            b.set(i, true);
        }
    }
    b
}

/// Runs the demo.
pub fn run(a: DemoArgs) -> anyhow::Result<ExitCode> {
    let n = a.raw_bits;
    anyhow::ensure!(
        n >= 1024,
        "--raw-bits {n}: the demo needs at least 1024 bits"
    );
    std::fs::create_dir_all(&a.dir)
        .with_context(|| format!("{}: cannot create the demo folder", a.dir.display()))?;
    let raw_path = a.dir.join("raw.bin");
    let seed_path = a.dir.join("seed.bin");
    let out_path = a.dir.join("output.bin");

    // 1. One run of the simulated device.
    let raw = simulate(n);
    let mut f = AtomicFile::create(&raw_path, Kind::DemoRaw, Replace::forced(a.force))?;
    f.write_all(&raw.to_packed(BitOrder::Msb))?;
    f.commit()?;

    // 2. The entropy claim. For this simulated source the per-bit min-entropy
    //    is known exactly: -log2 max(p, 1 - p) (spec/hashing 1.2, no side
    //    information). A real source needs a certificate instead.
    let h = -(P_ONE.max(1.0 - P_ONE)).log2();
    let k = h * n as f64;
    // Leftover hash lemma, conservative form (spec/hashing 2.3):
    // m = floor(k - 2 log2(1/eps)), error 2^(-(k - m)/2).
    let mut m = (k - 2.0 * (1.0 / EPS_EXT).log2()).floor() as usize;
    while m > 0 && 2f64.powf(-(k - m as f64) / 2.0) > EPS_EXT {
        m -= 1;
    }
    anyhow::ensure!(
        m >= 1,
        "the simulated block is too short for any output at error {EPS_EXT:e}"
    );
    let eps = 2f64.powf(-(k - m as f64) / 2.0);

    // 3. A fresh seed from the operating system (owner-only file).
    let plan = Toeplitz::new(n, m)?;
    let d = plan.seed_bits();
    let mut seed_bytes = vec![0u8; d.div_ceil(8)];
    {
        use rand_core::{OsRng, RngCore};
        OsRng
            .try_fill_bytes(&mut seed_bytes)
            .map_err(|e| anyhow::anyhow!("operating-system random source: {e}"))?;
    }
    let seed = Bits::from_packed(&seed_bytes, d, BitOrder::Msb)?;
    let mut f = AtomicFile::create(&seed_path, Kind::SeedFile, Replace::forced(a.force))?;
    f.write_all(&seed.to_packed(BitOrder::Msb))?;
    f.commit()?;

    // 4. Extract.
    let t0 = Instant::now();
    let run = Run {
        input: Source::Memory {
            bits: raw.clone(),
            name: raw_path.clone(),
        },
        input_bits: None,
        extractor: &plan,
        seed: (&seed).into(),
        output: BitFile {
            path: out_path.clone(),
            format: Format::Packed,
            order: BitOrder::Msb,
        },
    };
    let report = run.execute_replacing(Replace::forced(a.force), |_| {})?;
    let secs = t0.elapsed().as_secs_f64();
    let out = sluice::bits::io::read_bits(&out_path, Format::Packed, BitOrder::Msb, Some(m))?;

    let raw_ones = raw.count_ones() as f64 / n as f64;
    let out_ones = out.count_ones() as f64 / m as f64;
    if a.json {
        common::print_json(&serde_json::json!({
            "scenario": "Fenwick Hollow photonics lab, simulated source Millrace-2 (fictional)",
            "raw_bits": n,
            "raw_fraction_of_ones": raw_ones,
            "min_entropy_bits": k,
            "extractor": plan.name(),
            "engine": plan.engine().name(),
            "output_bits": m,
            "seed_bits": d,
            "extractor_error": eps,
            "seconds": secs,
            "output_fraction_of_ones": out_ones,
            "files": {"raw": raw_path, "seed": seed_path, "output": out_path},
            "blocks": report.blocks,
        }))?;
        return Ok(ExitCode::SUCCESS);
    }
    println!(
        "sluice demo: Fenwick Hollow photonics lab, simulated source \"Millrace-2\" (fictional)"
    );
    println!();
    println!("  raw run        {n} bits, fraction of ones {raw_ones:.4} (simulated bias 0.3)");
    println!("  min-entropy    {k:.1} bits ({h:.4} per bit; known exactly for this simulation)");
    println!(
        "  seed           {d} bits from the operating system -> {}",
        seed_path.display()
    );
    println!(
        "  extractor      Toeplitz hashing, engine {}",
        plan.engine().name()
    );
    println!(
        "  output         {m} bits ({:.2}% of the min-entropy) -> {}",
        100.0 * m as f64 / k,
        out_path.display()
    );
    println!("  error          {eps:.3e} (leftover hash lemma, conservative form)");
    println!(
        "  time           {:.2} ms for hashing and writing the output",
        secs * 1e3
    );
    println!("  output check   fraction of ones {out_ones:.4} (a sanity check, not a certificate)");
    println!();
    println!("Check the output against the inputs with:");
    println!(
        "  sluice verify {} --extractor toeplitz --seed-file {} --output-bits {m} --claimed {}",
        raw_path.display(),
        seed_path.display(),
        out_path.display()
    );
    println!();
    common::print_cautions(false);
    Ok(ExitCode::SUCCESS)
}
