//! `sluice bench`: throughput of every extractor and engine on this machine.

use super::common;
use sluice::bits::Bits;
use sluice::extract::{Engine, Extractor, ModifiedToeplitz, Toeplitz, TwoSource};
use sluice::plan::two_source::largest_n;
use std::process::ExitCode;
use std::time::{Duration, Instant};

/// `sluice bench`
#[derive(clap::Args, Debug)]
pub struct BenchArgs {
    /// Largest input size, as a power of two (sizes 2^14, 2^16, ... up to it)
    #[arg(long = "max-log2", default_value_t = 20)]
    pub max_log2: u32,
    /// Time spent on each measurement, in milliseconds
    #[arg(long = "millis", default_value_t = 300)]
    pub millis: u64,
    /// Print the results as JSON
    #[arg(long)]
    pub json: bool,
}

#[derive(serde::Serialize)]
struct Row {
    extractor: &'static str,
    engine: &'static str,
    input_bits: usize,
    output_bits: usize,
    median_seconds: f64,
    input_mbit_per_s: f64,
}

fn pseudo_bits(seed: u64, n: usize) -> Bits {
    let mut s = seed | 1;
    Bits::from_words(
        (0..n.div_ceil(64))
            .map(|_| {
                s ^= s << 13;
                s ^= s >> 7;
                s ^= s << 17;
                s
            })
            .collect(),
        n,
    )
}

/// Median time of one extraction, from batches filling `budget`.
fn measure(plan: &dyn Extractor, budget: Duration) -> f64 {
    let x = pseudo_bits(1, plan.input_bits());
    let s = pseudo_bits(2, plan.seed_bits());
    let bound = plan.with_seed(&s);
    let mut y = Bits::zeros(plan.output_bits());
    bound.extract(&x, &mut y); // warm-up (allocates scratch once)
    let mut times = Vec::new();
    let start = Instant::now();
    while start.elapsed() < budget || times.len() < 5 {
        let t = Instant::now();
        bound.extract(&x, &mut y);
        times.push(t.elapsed().as_secs_f64());
        if times.len() >= 10_000 {
            break;
        }
    }
    times.sort_by(f64::total_cmp);
    times[times.len() / 2]
}

/// Runs the benchmark.
pub fn run(a: BenchArgs) -> anyhow::Result<ExitCode> {
    anyhow::ensure!(
        (14..=26).contains(&a.max_log2),
        "--max-log2 {}: choose 14..=26",
        a.max_log2
    );
    let budget = Duration::from_millis(a.millis);
    let mut rows = Vec::new();
    let pb = common::progress(0, "measuring");
    for log_n in (14..=a.max_log2).step_by(2) {
        let n = 1usize << log_n;
        let m = n / 2;
        for engine in Engine::all_supported() {
            if engine.name() == "portable" && log_n > 18 {
                continue;
            }
            for family in ["toeplitz", "modified-toeplitz", "two-source"] {
                let plan: Box<dyn Extractor> = match family {
                    "toeplitz" => Box::new(Toeplitz::with_engine(n, m, engine)?),
                    "modified-toeplitz" => Box::new(ModifiedToeplitz::with_engine(n, m, engine)?),
                    _ => {
                        // The largest valid two-source length not above 2^k
                        // (hashing spec 6.1), the second source bound once.
                        let n2 = largest_n(n as u64).expect("a valid n below 2^14") as usize;
                        Box::new(TwoSource::with_engine(n2, n2 / 2, engine)?)
                    }
                };
                pb.set_message(format!("{family} {} 2^{log_n}", engine.name()));
                let t = measure(plan.as_ref(), budget);
                let (n, m) = (plan.input_bits(), plan.output_bits());
                rows.push(Row {
                    extractor: plan.name(),
                    engine: engine.name(),
                    input_bits: n,
                    output_bits: m,
                    median_seconds: t,
                    input_mbit_per_s: n as f64 / t / 1e6,
                });
            }
        }
    }
    pb.finish_and_clear();
    if a.json {
        common::print_json(&serde_json::json!({ "single_thread": true, "rows": rows }))?;
    } else {
        println!(
            "one block, one thread, m = n/2, seed (two-source: second source) bound once; \
             median of repeated runs"
        );
        println!(
            "{:<18} {:<10} {:>9} {:>12} {:>10}",
            "extractor", "engine", "n", "median", "Mbit/s"
        );
        for r in &rows {
            let n = if r.input_bits.is_power_of_two() {
                format!("2^{}", r.input_bits.trailing_zeros())
            } else {
                r.input_bits.to_string()
            };
            println!(
                "{:<18} {:<10} {:>9} {:>12} {:>10.0}",
                r.extractor,
                r.engine,
                n,
                fmt_time(r.median_seconds),
                r.input_mbit_per_s
            );
        }
    }
    Ok(ExitCode::SUCCESS)
}

fn fmt_time(s: f64) -> String {
    if s < 1e-3 {
        format!("{:.1} us", s * 1e6)
    } else if s < 1.0 {
        format!("{:.2} ms", s * 1e3)
    } else {
        format!("{s:.2} s")
    }
}
