//! Helpers shared by the commands: error reporting, JSON output, progress.

use std::io::{IsTerminal, Write};
use std::process::ExitCode;

/// Prints an error with its cause chain and returns exit status 2; a broken
/// pipe (the reader went away) is not an error.
pub fn report_error(e: &anyhow::Error) -> ExitCode {
    for cause in e.chain() {
        if let Some(io) = cause.downcast_ref::<std::io::Error>() {
            if io.kind() == std::io::ErrorKind::BrokenPipe {
                return ExitCode::SUCCESS;
            }
        }
    }
    let mut msg = format!("error: {e}");
    for cause in e.chain().skip(1) {
        msg.push_str(&format!("\n  caused by: {cause}"));
    }
    let _ = writeln!(std::io::stderr(), "{msg}");
    ExitCode::from(2)
}

/// Prints `value` as pretty JSON on standard output.
#[allow(dead_code)]
pub fn print_json<T: serde::Serialize>(value: &T) -> anyhow::Result<()> {
    let mut out = std::io::stdout().lock();
    serde_json::to_writer_pretty(&mut out, value)?;
    writeln!(out)?;
    Ok(())
}

/// A progress bar on standard error, shown only when it is a terminal.
#[allow(dead_code)]
pub fn progress(total: u64, what: &str) -> indicatif::ProgressBar {
    if !std::io::stderr().is_terminal() {
        return indicatif::ProgressBar::hidden();
    }
    let pb = indicatif::ProgressBar::new(total);
    pb.set_style(
        indicatif::ProgressStyle::with_template(
            "{msg} [{bar:40}] {percent:>3}% {binary_bytes_per_sec} eta {eta}",
        )
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar())
        .progress_chars("=> "),
    );
    pb.set_message(what.to_string());
    pb
}
