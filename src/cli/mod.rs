//! Command-line front end: one module per command.
//!
//! Conventions every command keeps: errors go to standard error as
//! `error: ...` with the whole cause chain and exit status 2; a broken pipe
//! counts as success; `--json` prints one JSON document on standard output
//! for scripts; progress bars appear only on a terminal.

mod assess;
mod common;

use clap::{Parser, Subcommand};
use std::process::ExitCode;

/// Turn partly random bits from a certified source into near-uniform bits.
#[derive(Parser)]
#[command(name = "sluice", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    // Each command is one variant; its options live in its own module.
    /// Statistical checks of raw input (SP 800-90B) or extracted output (SP 800-22).
    Assess(assess::AssessArgs),
}

/// Runs the command line and maps the outcome to an exit status.
pub fn main() -> ExitCode {
    let cli = Cli::parse();
    let result: anyhow::Result<ExitCode> = match cli.command {
        Command::Assess(args) => assess::run(args),
    };
    match result {
        Ok(code) => code,
        Err(e) => common::report_error(&e),
    }
}
