//! `sluice bench`: throughput of every extractor and engine on this machine.

use super::common;
use sluice::bits::Bits;
use sluice::extract::spec::Family;
use sluice::extract::two_source::largest_n;
use sluice::extract::{Engine, Extractor, ExtractorSpec, Toeplitz};
use std::process::ExitCode;
use std::time::{Duration, Instant};

/// `sluice bench`
#[derive(clap::Args, Debug)]
pub struct BenchArgs {
    /// Largest input size, as a power of two (sizes 2^14, 2^16, ... up to it;
    /// default 20, and 26 with --whole-run)
    #[arg(long = "max-log2")]
    pub max_log2: Option<u32>,
    /// Time spent on each measurement, in milliseconds
    #[arg(long = "millis", default_value_t = 300)]
    pub millis: u64,
    /// Print the results as JSON
    #[arg(long)]
    pub json: bool,
    /// Measure whole-run blocks instead: one Toeplitz hash of n = 2^20 .. 2^K
    /// bits (K from --max-log2, up to 34), m = n/2 and n/20, one and two
    /// threads, with the time to prepare the seed and the peak memory
    #[arg(long = "whole-run", conflicts_with = "tune")]
    pub whole_run: bool,
    /// With --whole-run: time the full product of this gf2x shared library
    /// (built for this machine) in the same run, and give every time as a
    /// ratio to it
    #[arg(long = "gf2x", value_name = "LIBGF2X_SO", requires = "whole_run")]
    pub gf2x: Option<std::path::PathBuf>,
    /// With --whole-run: thread counts to measure (comma separated)
    #[arg(
        long,
        value_delimiter = ',',
        default_value = "1,2",
        requires = "whole_run"
    )]
    pub threads: Vec<usize>,
    /// Measure where the additive FFT overtakes Karatsuba on this machine and
    /// write the thresholds file that `auto` then uses
    #[arg(long)]
    pub tune: bool,
    /// With --tune: where to write the thresholds (default: the user's data
    /// folder, sluice/thresholds.json; $SLUICE_THRESHOLDS overrides both)
    #[arg(long = "write", value_name = "PATH", requires = "tune")]
    pub write: Option<std::path::PathBuf>,
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
    sluice::bits::pseudo::bits(seed | 1, n)
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
    if a.whole_run {
        return whole_run(&a);
    }
    if a.tune {
        return tune(&a);
    }
    let max_log2 = a.max_log2.unwrap_or(20);
    anyhow::ensure!(
        (14..=26).contains(&max_log2),
        "--max-log2 {max_log2}: choose 14..=26"
    );
    let budget = Duration::from_millis(a.millis);
    let mut rows = Vec::new();
    let pb = common::progress(0, "measuring");
    for log_n in (14..=max_log2).step_by(2) {
        let n = 1usize << log_n;
        let m = n / 2;
        for engine in Engine::all_supported() {
            if engine.name() == "portable" && log_n > 18 {
                continue;
            }
            for family in [
                Family::Toeplitz,
                Family::ModifiedToeplitz,
                Family::TwoSource,
            ] {
                let spec = match family {
                    // The largest valid two-source length not above 2^k
                    // (hashing spec 6.1), the second source bound once.
                    Family::TwoSource => {
                        let n2 = largest_n(n as u64).expect("a valid n below 2^14") as usize;
                        ExtractorSpec {
                            family,
                            n: n2,
                            m: n2 / 2,
                        }
                    }
                    _ => ExtractorSpec { family, n, m },
                };
                let plan = spec.build(engine)?;
                let family = family.name();
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

#[derive(serde::Serialize)]
struct WholeRow {
    input_bits: usize,
    output_bits: usize,
    threads: usize,
    engine: String,
    /// Best of the runs: seed preparation and hashing of one block.
    seconds: f64,
    input_mbit_per_s: f64,
    /// Time relative to gf2x's full product in the same run.
    ratio_to_gf2x: Option<f64>,
    /// Peak resident memory of the process during the row.
    peak_mib: Option<f64>,
}

/// Peak resident set since the last reset, from /proc (Linux).
fn peak_rss_mib() -> Option<f64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = s.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb / 1024.0)
}

/// Resets the peak resident set (Linux: writing 5 to clear_refs).
fn reset_peak() {
    let _ = std::fs::write("/proc/self/clear_refs", "5");
}

/// `sluice bench --whole-run`.
fn whole_run(a: &BenchArgs) -> anyhow::Result<ExitCode> {
    use sluice::bits::source::WordsSource;
    use sluice::extract::whole_run::{Family, WholeRun};
    use sluice::gf2::outside::Gf2x;
    use sluice::gf2::window::Engine as E;
    let top = a.max_log2.unwrap_or(26);
    anyhow::ensure!(
        (20..=34).contains(&top),
        "--max-log2 {top}: choose 20..=34 with --whole-run"
    );
    let gf2x = match &a.gf2x {
        Some(p) => Some(Gf2x::load(p).map_err(anyhow::Error::msg)?),
        None => None,
    };
    let best = sluice::gf2::Backend::detect();
    let mut rows: Vec<WholeRow> = Vec::new();
    let pb = common::progress(0, "measuring");
    for log_n in (20..=top).step_by(2) {
        let n = 1usize << log_n;
        for m in [n / 2, n / 20] {
            let x = pseudo_bits(1, n);
            let s = pseudo_bits(2, n + m - 1);
            let runs = if log_n >= 28 { 2 } else { 3 };
            let mut reference = None;
            if let Some(g) = &gf2x {
                pb.set_message(format!("gf2x 2^{log_n}"));
                reset_peak();
                let mut c = vec![0u64; s.words().len() + x.words().len()];
                let mut best_t = f64::MAX;
                for _ in 0..runs {
                    let t = Instant::now();
                    g.mul(&mut c, s.words(), x.words());
                    best_t = best_t.min(t.elapsed().as_secs_f64());
                }
                // The window of gf2x's product must be our output.
                let mut ours = Bits::zeros(m);
                Toeplitz::with_engine(n, m, E::Additive(best))?.extract(&x, &s, &mut ours);
                let full = Bits::from_words(c, 64 * (s.words().len() + x.words().len()));
                anyhow::ensure!(
                    full.slice(n - 1, m) == ours,
                    "gf2x and sluice disagree at n = 2^{log_n}, m = {m}: check the gf2x build"
                );
                reference = Some(best_t);
                rows.push(WholeRow {
                    input_bits: n,
                    output_bits: m,
                    threads: 1,
                    engine: "gf2x full product".into(),
                    seconds: best_t,
                    input_mbit_per_s: n as f64 / best_t / 1e6,
                    ratio_to_gf2x: Some(1.0),
                    peak_mib: peak_rss_mib(),
                });
            }
            // The whole-run path as `extract` takes it (from 2^24 bits):
            // tiles when they need less work than one product in memory.
            let whole = (n >= sluice::pipeline::WHOLE_RUN_MIN_BITS)
                .then(|| {
                    WholeRun::new(
                        Family::Toeplitz,
                        n as u64,
                        m as u64,
                        E::Additive(best),
                        u64::MAX,
                    )
                })
                .transpose()?
                .filter(|w| !w.estimate().in_memory);
            let mut engines = Vec::new();
            if log_n <= 30 || whole.is_none() {
                engines.push(E::Additive(best));
            }
            if log_n <= 26 {
                engines.push(E::Clmul(best));
            }
            for &threads in &a.threads {
                let pool = rayon::ThreadPoolBuilder::new()
                    .num_threads(threads)
                    .build()?;
                if let Some(w) = &whole {
                    pb.set_message(format!("whole run 2^{log_n} m={m} {threads} thread(s)"));
                    reset_peak();
                    let t = pool.install(|| -> anyhow::Result<f64> {
                        let mut y = Bits::zeros(m);
                        let mut best_t = f64::MAX;
                        for _ in 0..runs {
                            let t = Instant::now();
                            let mut at = 0usize;
                            w.run(
                                &mut WordsSource::new(x.words(), n as u64),
                                &mut WordsSource::new(s.words(), (n + m - 1) as u64),
                                &mut |c: &Bits| {
                                    // Chunks end on word boundaries but the last.
                                    if at.is_multiple_of(64) {
                                        let w = c.words();
                                        y.words_mut()[at / 64..at / 64 + w.len()]
                                            .copy_from_slice(w);
                                    } else {
                                        for i in 0..c.len() {
                                            y.set(at + i, c.get(i));
                                        }
                                    }
                                    at += c.len();
                                    Ok(())
                                },
                                &mut |_| {},
                            )?;
                            best_t = best_t.min(t.elapsed().as_secs_f64());
                        }
                        Ok(best_t)
                    })?;
                    let e = w.estimate();
                    rows.push(WholeRow {
                        input_bits: n,
                        output_bits: m,
                        threads,
                        engine: format!("{} ({} tiles)", w.engine().name(), e.tiles),
                        seconds: t,
                        input_mbit_per_s: n as f64 / t / 1e6,
                        ratio_to_gf2x: reference.map(|r| t / r),
                        peak_mib: peak_rss_mib(),
                    });
                }
                for &engine in &engines {
                    pb.set_message(format!("{engine} 2^{log_n} m={m} {threads} thread(s)"));
                    reset_peak();
                    let t = pool.install(|| -> anyhow::Result<f64> {
                        let plan = Toeplitz::with_engine(n, m, engine)?;
                        let mut y = Bits::zeros(m);
                        let mut best_t = f64::MAX;
                        for _ in 0..runs {
                            let t = Instant::now();
                            plan.extract(&x, &s, &mut y);
                            best_t = best_t.min(t.elapsed().as_secs_f64());
                        }
                        Ok(best_t)
                    })?;
                    rows.push(WholeRow {
                        input_bits: n,
                        output_bits: m,
                        threads,
                        engine: engine.name().to_string(),
                        seconds: t,
                        input_mbit_per_s: n as f64 / t / 1e6,
                        ratio_to_gf2x: reference.map(|r| t / r),
                        peak_mib: peak_rss_mib(),
                    });
                }
            }
        }
    }
    pb.finish_and_clear();
    if a.json {
        common::print_json(&serde_json::json!({
            "what": "one Toeplitz hash of one block, seed preparation included; best of 2-3 runs",
            "reference": a.gf2x.as_ref().map(|p| p.display().to_string()),
            "rows": rows,
        }))?;
        return Ok(ExitCode::SUCCESS);
    }
    println!("one Toeplitz hash of one block (seed preparation included), best of 2-3 runs;");
    println!(
        "ratio: time / gf2x full product (seed x input) timed in this run; peak: resident memory"
    );
    println!(
        "{:>5} {:>9} {:>3} {:<24} {:>10} {:>9} {:>7} {:>9}",
        "n", "m", "thr", "engine", "time", "Mbit/s", "ratio", "peak MiB"
    );
    for r in &rows {
        let m = if r.output_bits * 2 == r.input_bits {
            "n/2".to_string()
        } else {
            "n/20".to_string()
        };
        println!(
            "{:>5} {:>9} {:>3} {:<24} {:>10} {:>9.0} {:>7} {:>9}",
            format!("2^{}", r.input_bits.trailing_zeros()),
            m,
            r.threads,
            r.engine,
            fmt_time(r.seconds),
            r.input_mbit_per_s,
            r.ratio_to_gf2x
                .map(|x| format!("{x:.3}"))
                .unwrap_or_else(|| "-".into()),
            r.peak_mib
                .map(|x| format!("{x:.0}"))
                .unwrap_or_else(|| "-".into()),
        );
    }
    Ok(ExitCode::SUCCESS)
}

/// Where `--tune` writes and the program reads the thresholds:
/// $SLUICE_THRESHOLDS, else the user's data folder.
pub fn thresholds_path() -> Option<std::path::PathBuf> {
    if let Some(p) = std::env::var_os("SLUICE_THRESHOLDS") {
        return Some(p.into());
    }
    dirs::data_dir().map(|d| d.join("sluice").join("thresholds.json"))
}

/// The thresholds file: the values and where they were measured.
#[derive(serde::Serialize, serde::Deserialize)]
struct ThresholdsFile {
    format: String,
    thresholds: sluice::extract::Thresholds,
    cpu: String,
    backend: String,
}

const THRESHOLDS_FORMAT: &str = "sluice-thresholds/1";

/// Installs the thresholds of the file, if there is one; a file that does
/// not parse is reported and ignored (the built-in values stay).
pub fn install_thresholds() {
    let Some(p) = thresholds_path() else { return };
    let Ok(text) = std::fs::read_to_string(&p) else {
        return;
    };
    match serde_json::from_str::<ThresholdsFile>(&text) {
        Ok(f) if f.format == THRESHOLDS_FORMAT => {
            sluice::extract::Thresholds::install(f.thresholds);
        }
        _ => eprintln!(
            "warning: {}: not a {THRESHOLDS_FORMAT} file; using the built-in engine thresholds",
            p.display()
        ),
    }
}

fn cpu_name() -> String {
    std::fs::read_to_string("/proc/cpuinfo")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("model name"))
                .and_then(|l| l.split(':').nth(1))
                .map(|v| v.trim().to_string())
        })
        .unwrap_or_else(|| std::env::consts::ARCH.to_string())
}

/// `sluice bench --tune`: the smallest n (m = n/2) and the smallest m (at
/// n = 2^24) where the additive FFT beats Karatsuba with the seed bound
/// once, as the pipeline runs many blocks.
fn tune(a: &BenchArgs) -> anyhow::Result<ExitCode> {
    use sluice::gf2::window::Engine as E;
    let be = sluice::gf2::Backend::detect();
    let budget = Duration::from_millis(a.millis);
    let faster = |n: usize, m: usize| -> anyhow::Result<(bool, f64, f64)> {
        let k = measure(&Toeplitz::with_engine(n, m, E::Clmul(be))?, budget);
        let f = measure(&Toeplitz::with_engine(n, m, E::Additive(be))?, budget);
        Ok((f < k, k, f))
    };
    let pb = common::progress(0, "tuning");
    let mut log = Vec::new();
    let mut input_bits = 1usize << 26;
    for log_n in 16..=26 {
        let n = 1usize << log_n;
        pb.set_message(format!("n = 2^{log_n}"));
        let (win, k, f) = faster(n, n / 2)?;
        log.push((n, n / 2, k, f));
        if win {
            input_bits = n;
            break;
        }
    }
    let mut output_bits = 1usize << 23;
    let n = input_bits.max(1 << 22);
    for log_m in 8..=23 {
        let m = 1usize << log_m;
        pb.set_message(format!("m = 2^{log_m}"));
        let (win, k, f) = faster(n, m)?;
        log.push((n, m, k, f));
        if win {
            output_bits = m;
            break;
        }
    }
    pb.finish_and_clear();
    let t = sluice::extract::Thresholds {
        input_bits,
        output_bits,
    };
    let file = ThresholdsFile {
        format: THRESHOLDS_FORMAT.into(),
        thresholds: t,
        cpu: cpu_name(),
        backend: be.name().into(),
    };
    let path = a
        .write
        .clone()
        .or_else(thresholds_path)
        .ok_or_else(|| anyhow::anyhow!("no data folder known here: give --write PATH"))?;
    if let Some(dir) = path.parent() {
        std::fs::create_dir_all(dir)?;
    }
    sluice::files::atomic::write_all(
        &path,
        sluice::files::Kind::Thresholds,
        sluice::files::Replace::SameKind,
        (serde_json::to_string_pretty(&file)? + "\n").as_bytes(),
    )?;
    if a.json {
        common::print_json(&serde_json::json!({
            "thresholds": t,
            "written": path.display().to_string(),
            "measured": log.iter().map(|&(n, m, k, f)| serde_json::json!({
                "input_bits": n, "output_bits": m, "karatsuba_seconds": k, "additive_seconds": f
            })).collect::<Vec<_>>(),
        }))?;
    } else {
        for (n, m, k, f) in &log {
            println!(
                "n = {n:>9}  m = {m:>9}  karatsuba {:>10}  additive FFT {:>10}",
                fmt_time(*k),
                fmt_time(*f)
            );
        }
        println!(
            "auto takes the additive FFT from n >= {input_bits} and m >= {output_bits}; wrote {}",
            path.display()
        );
    }
    Ok(ExitCode::SUCCESS)
}
