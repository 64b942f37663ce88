//! The `sluice` command line. All maths lives in the library; this binary
//! parses options, runs the library and reports.

#![forbid(unsafe_code)]

mod cli;

fn main() -> std::process::ExitCode {
    cli::main()
}
