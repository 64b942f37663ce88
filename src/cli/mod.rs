//! Command-line front end: one module per command.
//!
//! Conventions every command keeps: errors go to standard error as
//! `error: ...` with the whole cause chain and exit status 2; a broken pipe
//! counts as success; `--json` prints one JSON document on standard output
//! for scripts; progress bars appear only on a terminal.

mod args;
mod assess;
mod assess_report;
mod bench;
mod certify;
mod common;
mod demo;
mod extract;
mod ledger;
mod plan;
mod plot;
mod seed;
mod two_source;
mod vectors;

use clap::{Parser, Subcommand};
use std::process::ExitCode;

/// Turn partly random bits from a certified source into near-uniform bits.
#[derive(Parser)]
#[command(name = "sluice", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

// Option structs differ a lot in size; the value is parsed once, so the
// size difference costs nothing.
#[allow(clippy::large_enum_variant)]
#[derive(Subcommand)]
enum Command {
    /// Hash raw bits into near-uniform bits with a seeded extractor
    Extract(args::ExtractArgs),
    /// Recompute an output and check a claimed one against it
    Verify(args::VerifyArgs),
    /// Compare the extractors for your security inputs and pick one
    Plan(plan::PlanArgs),
    /// Certify the record of a CHSH Bell test (or plan a run)
    Certify(certify::CertifyArgs),
    /// Statistical checks of raw input (SP 800-90B) and output (SP 800-22)
    Assess(assess::AssessArgs),
    /// Run the main job on a built-in simulated source, start to finish
    Demo(demo::DemoArgs),
    /// Check the published test vectors
    Vectors(vectors::VectorsArgs),
    /// Measure extraction throughput on this machine
    Bench(bench::BenchArgs),
    /// Manage seeds: create, import, list, show, reveal, retire
    Seed(seed::SeedArgs),
    /// The ledger of seed use: commit raw data, verify, log, export, repair
    Ledger(ledger::LedgerArgs),
}

/// Runs the command line and maps the outcome to an exit status.
pub fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            // Help and version go to stdout with status 0; usage errors exit 2.
            let _ = e.print();
            return if e.use_stderr() {
                ExitCode::from(2)
            } else {
                ExitCode::SUCCESS
            };
        }
    };
    bench::install_thresholds();
    // SIGINT / SIGTERM: remove partial outputs, abandon an open use (it
    // stays charged), say so, exit 130 / 143.
    if let Err(e) = sluice::files::interrupt::install() {
        let _ = std::io::Write::write_fmt(
            &mut std::io::stderr(),
            format_args!("warning: cannot handle interruptions cleanly: {e}\n"),
        );
    }
    let result: anyhow::Result<ExitCode> = match cli.command {
        Command::Extract(a) => extract::run_extract(a),
        Command::Verify(a) => extract::run_verify(a),
        Command::Plan(a) => plan::run(a),
        Command::Certify(a) => certify::run(a),
        Command::Assess(a) => assess::run(a),
        Command::Vectors(a) => vectors::run(a),
        Command::Demo(a) => demo::run(a),
        Command::Bench(a) => bench::run(a),
        Command::Seed(a) => seed::run(a),
        Command::Ledger(a) => ledger::run(a),
    };
    if sluice::files::interrupt::interrupted() {
        // The signal thread is cleaning up and ends the process with 130 /
        // 143 and its own report; an error this thread met because of the
        // interruption (a refused rename) must not pre-empt it.
        loop {
            std::thread::park();
        }
    }
    match result {
        Ok(code) => code,
        Err(e) => common::report_error(&e),
    }
}
