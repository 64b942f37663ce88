//! `sluice vectors check [DIR]` (and the hidden `vectors generate`).

use super::common;
use anyhow::{bail, Context};
use sluice::bits::digest::data_digest;
use sluice::bits::{BitOrder, Bits};
use sluice::extract::spec::Family;
use sluice::extract::{reference, Engine, Extractor, ExtractorSpec, Toeplitz};
use sluice::vectors::{self, shake_bits, Outcome};
use std::fmt::Write as _;
use std::io::Write as _;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// `sluice vectors`
#[derive(clap::Args, Debug)]
pub struct VectorsArgs {
    #[command(subcommand)]
    pub command: VectorsCommand,
}

/// What to do with vectors.
#[derive(clap::Subcommand, Debug)]
pub enum VectorsCommand {
    /// Recompute every vector in DIR (default: ./vectors) and print pass/fail
    Check {
        /// Folder of *.vec files
        #[arg(default_value = "vectors")]
        dir: PathBuf,
        /// Print the results as JSON
        #[arg(long)]
        json: bool,
        /// Skip cases whose input is longer than this many bits (the
        /// whole-run cases of 2^28 and 2^30 bits take seconds to minutes)
        #[arg(long = "max-input-bits", value_name = "N")]
        max_input_bits: Option<usize>,
    },
    /// Write the hashing vectors (toeplitz.vec, modified-toeplitz.vec) and
    /// two-source.vec into DIR
    #[command(hide = true)]
    Generate {
        /// Output folder
        #[arg(long = "out")]
        out: PathBuf,
        /// Write whole-run.vec instead (Toeplitz, n = 2^26, 2^28, 2^30; the
        /// additive FFT cross-checked against Karatsuba, minutes)
        #[arg(long = "whole-run")]
        whole_run: bool,
    },
}

/// Runs `sluice vectors`.
pub fn run(a: VectorsArgs) -> anyhow::Result<ExitCode> {
    match a.command {
        VectorsCommand::Check {
            dir,
            json,
            max_input_bits,
        } => check(&dir, json, max_input_bits),
        VectorsCommand::Generate { out, whole_run } => {
            if whole_run {
                generate_whole_run(&out)
            } else {
                generate(&out)
            }
        }
    }
}

fn check(dir: &Path, json: bool, max_input_bits: Option<usize>) -> anyhow::Result<ExitCode> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(dir)
        .with_context(|| {
            format!(
                "{}: cannot read the vector folder (the published vectors are the `vectors/` folder of sluice's source tree: run this there, or give the folder: `sluice vectors check PATH/TO/vectors`)",
                dir.display()
            )
        })?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "vec"))
        .collect();
    files.sort();
    if files.is_empty() {
        bail!("{}: no *.vec files", dir.display());
    }
    let mut all: Vec<(String, Outcome)> = Vec::new();
    let mut skipped = 0usize;
    let mut stdout = std::io::stdout().lock();
    for f in &files {
        let text =
            std::fs::read_to_string(f).with_context(|| format!("{}: cannot read", f.display()))?;
        let cases = vectors::parse(&text).with_context(|| format!("{}", f.display()))?;
        let fname = f
            .file_name()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default();
        for (i, c) in cases.iter().enumerate() {
            if max_input_bits.is_some_and(|mx| c.input_bits > mx) {
                skipped += 1;
                continue;
            }
            let outcomes = vectors::check_case(c);
            if !json {
                let pass = outcomes.iter().all(|o| o.pass) && !outcomes.is_empty();
                let engines: Vec<&str> = outcomes
                    .iter()
                    .filter(|o| o.mode == "bound")
                    .map(|o| o.engine.as_str())
                    .collect();
                writeln!(
                    stdout,
                    "{} {fname} #{} {} (n={}, m={}; engines {}; one-shot and bound)",
                    if pass { "pass" } else { "FAIL" },
                    i + 1,
                    c.name,
                    c.input_bits,
                    c.output_bits,
                    engines.join(",")
                )?;
                for o in outcomes.iter().filter(|o| !o.pass) {
                    writeln!(
                        stdout,
                        "     {} {}: {}",
                        o.engine,
                        o.mode,
                        o.detail.as_deref().unwrap_or("failed")
                    )?;
                }
            }
            all.extend(outcomes.into_iter().map(|o| (fname.clone(), o)));
        }
    }
    let failed = all.iter().filter(|(_, o)| !o.pass).count();
    let cases: std::collections::BTreeSet<(&str, &str)> = all
        .iter()
        .map(|(f, o)| (f.as_str(), o.case.as_str()))
        .collect();
    if json {
        let results: Vec<serde_json::Value> = all
            .iter()
            .map(|(f, o)| serde_json::json!({"file": f, "case": o.case, "engine": o.engine, "mode": o.mode, "pass": o.pass, "detail": o.detail}))
            .collect();
        common::print_json(&serde_json::json!({
            "cases": cases.len(),
            "skipped_cases": skipped,
            "checks": all.len(),
            "failed": failed,
            "results": results,
        }))?;
    } else {
        writeln!(
            stdout,
            "{} cases, {} checks: {} passed, {} failed{}",
            cases.len(),
            all.len(),
            all.len() - failed,
            failed,
            if skipped > 0 {
                format!(" ({skipped} cases above --max-input-bits skipped)")
            } else {
                String::new()
            }
        )?;
    }
    Ok(if failed == 0 {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    })
}

/// The sizes of the hashing vectors: edge cases, pseudo-random sizes up to
/// 2^16 bits (drawn from SHAKE256, so the list is reproducible), and large
/// cases given by recipe.
fn hashing_sizes(modified: bool) -> Vec<(String, usize, usize, bool)> {
    let mut v = Vec::new();
    let edges: &[(usize, usize)] = &[
        (1, 1),
        (2, 1),
        (2, 2),
        (3, 2),
        (7, 3),
        (8, 8),
        (9, 1),
        (9, 8),
        (63, 63),
        (64, 1),
        (64, 63),
        (64, 64),
        (65, 64),
        (65, 65),
        (127, 1),
        (128, 128),
        (129, 100),
        (200, 199),
        (513, 511),
        (1000, 1),
        (2049, 2048),
        (4096, 2048),
    ];
    for &(n, m) in edges {
        if modified && m >= n {
            continue;
        }
        v.push((format!("edge-n{n}-m{m}"), n, m, true));
    }
    let r = shake_bits(
        if modified {
            "sluice-vectors/1/sizes/modified"
        } else {
            "sluice-vectors/1/sizes/toeplitz"
        },
        64 * 20,
    );
    for i in 0..10 {
        let w = r.words()[2 * i];
        let f = r.words()[2 * i + 1];
        let n = 1024 + (w % (65536 - 1024 + 1) as u64) as usize;
        let top = if modified { n - 1 } else { n };
        let m = 1 + (f % top as u64) as usize;
        v.push((format!("random-{}-n{n}-m{m}", i + 1), n, m, true));
    }
    v.push(("full-n65536-m32768".to_string(), 65536, 32768, true));
    for log in [20usize, 24] {
        v.push((format!("large-2^{log}"), 1 << log, 1 << (log - 1), false));
    }
    v
}

fn generate(dir: &Path) -> anyhow::Result<ExitCode> {
    std::fs::create_dir_all(dir)?;
    for (family, modified) in [("toeplitz", false), ("modified-toeplitz", true)] {
        let mut text = String::new();
        writeln!(text, "{}", vectors::HEADER)?;
        writeln!(
            text,
            "# {family} hashing vectors, definitions of spec/conventions.md.\n\
             # Generated by `sluice vectors generate`; inputs and seeds are SHAKE256\n\
             # (FIPS 202) of the labels shown. Outputs of cases with n*m <= 2^28 come from\n\
             # the matrix definition (src/extract/reference.rs); larger ones from the\n\
             # carry-less engine, cross-checked against the FFT engine at generation.\n\
             # See vectors/README.md for the format."
        )?;
        for (name, n, m, full) in hashing_sizes(modified) {
            let label = format!("sluice-vectors/1/{family}/{name}");
            let x = shake_bits(&format!("{label}/input"), n);
            let d = if modified { n - 1 } else { n + m - 1 };
            let s = shake_bits(&format!("{label}/seed"), d);
            let y = compute(modified, &x, &s, m)?;
            writeln!(
                text,
                "\ncase {name}\nextractor {family}\ninput-bits {n}\noutput-bits {m}"
            )?;
            if full {
                writeln!(text, "input {}", x.to_hex(BitOrder::Msb))?;
                writeln!(text, "seed {}", s.to_hex(BitOrder::Msb))?;
                writeln!(text, "output {}", y.to_hex(BitOrder::Msb))?;
            } else {
                writeln!(text, "input-shake256 {label}/input")?;
                writeln!(text, "seed-shake256 {label}/seed")?;
                writeln!(text, "input-digest {}", data_digest(&x))?;
                writeln!(text, "seed-digest {}", data_digest(&s))?;
                writeln!(text, "output-digest {}", data_digest(&y))?;
            }
            writeln!(text, "end")?;
        }
        if !modified {
            // spec/hashing-and-composition.md 3.4, as printed there.
            writeln!(text, "\n# spec/hashing-and-composition.md 3.4\ncase spec-3.4\nextractor toeplitz\ninput-bits 16\noutput-bits 8\ninput 7b6f\nseed 2b5726\noutput 2a\nend")?;
        } else {
            writeln!(text, "\n# spec/hashing-and-composition.md 3.4\ncase spec-3.4\nextractor modified-toeplitz\ninput-bits 16\noutput-bits 8\ninput 7b6f\nseed 2b56\noutput 4e\nend")?;
        }
        let path = dir.join(format!("{family}.vec"));
        sluice::files::atomic::write_all(
            &path,
            sluice::files::Kind::Vectors,
            sluice::files::Replace::SameKind,
            text.as_bytes(),
        )?;
        eprintln!("wrote {}", path.display());
    }
    generate_two_source(dir)?;
    Ok(ExitCode::SUCCESS)
}

/// The sizes of the two-source vectors: small valid n with m = 1 and
/// m = n - 1, word edges, ten pseudo-random valid n up to 65371 (from
/// SHAKE256, so reproducible), and the largest valid n below 2^16 with
/// m = n - 1. Every valid n is an odd prime, so none is a multiple of 8.
fn two_source_sizes() -> Vec<(String, usize, usize)> {
    use sluice::plan::two_source::largest_n;
    let mut v = Vec::new();
    let edges: &[(usize, usize)] = &[
        (3, 1),
        (3, 2),
        (5, 4),
        (11, 1),
        (11, 10),
        (13, 7),
        (61, 60),
        (67, 1),
        (67, 66),
        (131, 64),
        (1019, 1),
        (1019, 1018),
    ];
    for &(n, m) in edges {
        v.push((format!("edge-n{n}-m{m}"), n, m));
    }
    let r = shake_bits("sluice-vectors/1/sizes/two-source", 64 * 20);
    for i in 0..10 {
        let w = r.words()[2 * i];
        let f = r.words()[2 * i + 1];
        let top = 1024 + (w % (65371 - 1024 + 1) as u64);
        let n = largest_n(top).expect("valid n below every top >= 1024") as usize;
        let m = 1 + (f % (n as u64 - 1)) as usize;
        v.push((format!("random-{}-n{n}-m{m}", i + 1), n, m));
    }
    v.push(("full-n65371-m65370".to_string(), 65371, 65370));
    v
}

/// Writes `two-source.vec`.
fn generate_two_source(dir: &Path) -> anyhow::Result<()> {
    let family = sluice::extract::two_source::NAME;
    let mut text = String::new();
    writeln!(text, "{}", vectors::HEADER)?;
    writeln!(
        text,
        "# two-source vectors: the cyclic-shift two-source extractor of\n\
         # spec/hashing-and-composition.md 6.2, z_i = XOR_j x_j y_((i+j) mod n).\n\
         # The `seed` line holds the SECOND RAW SOURCE y (n bits), not a seed.\n\
         # Generated by `sluice vectors generate`; inputs are SHAKE256 (FIPS 202)\n\
         # of the labels shown. Outputs of cases with n*m <= 2^28 come from the\n\
         # definition (src/extract/reference.rs); larger ones from the carry-less\n\
         # engine, cross-checked against the FFT engine at generation.\n\
         # See vectors/README.md for the format."
    )?;
    for (name, n, m) in two_source_sizes() {
        let label = format!("sluice-vectors/1/{family}/{name}");
        let x = shake_bits(&format!("{label}/input"), n);
        let y = shake_bits(&format!("{label}/second-source"), n);
        let z = compute_two_source(&x, &y, m)?;
        writeln!(
            text,
            "\ncase {name}\nextractor {family}\ninput-bits {n}\noutput-bits {m}"
        )?;
        writeln!(text, "input {}", x.to_hex(BitOrder::Msb))?;
        writeln!(text, "seed {}", y.to_hex(BitOrder::Msb))?;
        writeln!(text, "output {}", z.to_hex(BitOrder::Msb))?;
        writeln!(text, "end")?;
    }
    // spec/hashing-and-composition.md 6.2, the check rows as printed there
    // (e_1 = only x_1 set, and so on, written here as packed hex).
    for (i, (x, y, m, z)) in [
        ("ce50", "d700", 5, "10"),
        ("4000", "0800", 12, "1000"),
        ("0400", "2000", 12, "0020"),
    ]
    .into_iter()
    .enumerate()
    {
        writeln!(
            text,
            "\n# spec/hashing-and-composition.md 6.2, check row {}\ncase spec-6.2-row{}\n\
             extractor {family}\ninput-bits 13\noutput-bits {m}\ninput {x}\nseed {y}\noutput {z}\nend",
            i + 1,
            i + 1
        )?;
    }
    let path = dir.join(format!("{family}.vec"));
    sluice::files::atomic::write_all(
        &path,
        sluice::files::Kind::Vectors,
        sluice::files::Replace::SameKind,
        text.as_bytes(),
    )?;
    eprintln!("wrote {}", path.display());
    Ok(())
}

fn compute_two_source(x: &Bits, y: &Bits, m: usize) -> anyhow::Result<Bits> {
    let n = x.len();
    if (n as u128) * (m as u128) <= 1 << 28 {
        return Ok(reference::two_source(x, y, m));
    }
    let run = |e: Engine| -> anyhow::Result<Bits> {
        let plan = ExtractorSpec {
            family: Family::TwoSource,
            n,
            m,
        }
        .build(e)?;
        let mut z = Bits::zeros(m);
        plan.extract(x, y, &mut z);
        Ok(z)
    };
    let a = run(Engine::detect())?;
    let b = run(Engine::Fft)?;
    if a != b {
        bail!("engines disagree at n = {n}, m = {m}: not writing vectors");
    }
    Ok(a)
}

fn compute(modified: bool, x: &Bits, s: &Bits, m: usize) -> anyhow::Result<Bits> {
    let n = x.len();
    if (n as u128) * (m as u128) <= 1 << 28 {
        return Ok(if modified {
            reference::modified_toeplitz(x, s, m)
        } else {
            reference::toeplitz(x, s, m)
        });
    }
    let run = |e: Engine| -> anyhow::Result<Bits> {
        let family = if modified {
            Family::ModifiedToeplitz
        } else {
            Family::Toeplitz
        };
        let plan = ExtractorSpec { family, n, m }.build(e)?;
        let mut y = Bits::zeros(m);
        plan.extract(x, s, &mut y);
        Ok(y)
    };
    let a = run(Engine::detect())?;
    let b = run(Engine::Fft)?;
    if a != b {
        bail!("engines disagree at n = {n}, m = {m}: not writing vectors");
    }
    Ok(a)
}

/// Writes `whole-run.vec`: Toeplitz hashing of whole runs, n = 2^26, 2^28
/// and 2^30 bits, m = n/2, by recipe and digests. The additive FFT computes
/// them; Karatsuba must agree before anything is written.
fn generate_whole_run(dir: &Path) -> anyhow::Result<ExitCode> {
    use sluice::gf2::window::Engine as E;
    std::fs::create_dir_all(dir)?;
    let be = sluice::gf2::Backend::detect();
    let mut text = String::new();
    writeln!(text, "{}", vectors::HEADER)?;
    writeln!(
        text,
        "# Whole-run Toeplitz hashing (one block of a whole run), definitions of\n\
         # spec/conventions.md. Inputs and seeds are SHAKE256 (FIPS 202) of the labels\n\
         # shown; outputs are given by their data digests. Generated by\n\
         # `sluice vectors generate --whole-run`: computed with the additive FFT and\n\
         # cross-checked against the Karatsuba engine at generation.\n\
         # See vectors/README.md for the format."
    )?;
    for log_n in [26usize, 28, 30] {
        let (n, m) = (1usize << log_n, 1usize << (log_n - 1));
        let name = format!("whole-run-2^{log_n}");
        let label = format!("sluice-vectors/1/toeplitz/{name}");
        let x = shake_bits(&format!("{label}/input"), n);
        let s = shake_bits(&format!("{label}/seed"), n + m - 1);
        let run = |e: E| -> anyhow::Result<Bits> {
            let mut y = Bits::zeros(m);
            Toeplitz::with_engine(n, m, e)?.extract(&x, &s, &mut y);
            Ok(y)
        };
        eprintln!("2^{log_n}: additive FFT");
        let y = run(E::Additive(be))?;
        eprintln!("2^{log_n}: Karatsuba (the cross-check)");
        if run(E::Clmul(be))? != y {
            bail!("engines disagree at n = 2^{log_n}: not writing vectors");
        }
        writeln!(
            text,
            "\ncase {name}\nextractor toeplitz\ninput-bits {n}\noutput-bits {m}\n\
             input-shake256 {label}/input\nseed-shake256 {label}/seed\n\
             input-digest {}\nseed-digest {}\noutput-digest {}\nend",
            data_digest(&x),
            data_digest(&s),
            data_digest(&y)
        )?;
    }
    let path = dir.join("whole-run.vec");
    sluice::files::atomic::write_all(
        &path,
        sluice::files::Kind::Vectors,
        sluice::files::Replace::SameKind,
        text.as_bytes(),
    )?;
    eprintln!("wrote {}", path.display());
    Ok(ExitCode::SUCCESS)
}
