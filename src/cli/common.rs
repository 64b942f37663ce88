//! Helpers shared by the commands: error reporting, JSON output, progress.

use std::io::{IsTerminal, Write};
use std::process::ExitCode;

/// Prints an error with its cause chain and returns exit status 2; a broken
/// pipe (the reader went away) is not an error.
pub fn report_error(e: &anyhow::Error) -> ExitCode {
    for cause in e.chain() {
        let broken = cause
            .downcast_ref::<std::io::Error>()
            .map(|io| io.kind())
            .or_else(|| {
                cause
                    .downcast_ref::<serde_json::Error>()
                    .and_then(|j| j.io_error_kind())
            })
            == Some(std::io::ErrorKind::BrokenPipe);
        if broken {
            return ExitCode::SUCCESS;
        }
    }
    let mut msg = format!("error: {e}");
    for cause in e.chain().skip(1) {
        let text = cause.to_string();
        // Errors that already quote their cause are not repeated.
        if !msg.contains(&text) {
            msg.push_str(&format!("\n  caused by: {text}"));
        }
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

/// A progress bar counted in input bits (extraction and verification),
/// shown only when standard error is a terminal.
#[allow(dead_code)]
pub fn progress_bits(total: u64, what: &str) -> indicatif::ProgressBar {
    let pb = progress(total, what);
    pb.set_style(
        indicatif::ProgressStyle::with_template(
            "{msg} [{bar:40}] {percent:>3}% {human_pos}/{human_len} input bits, {per_sec}, eta {eta}",
        )
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar())
        .progress_chars("=> "),
    );
    pb
}

/// File format names on the command line.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum FormatArg {
    /// Packed bytes, eight bits per byte.
    Packed,
    /// One character '0' or '1' per bit; white space ignored.
    Ascii,
    /// Hexadecimal digits of the packed bytes.
    Hex,
}

impl From<FormatArg> for sluice::bits::Format {
    fn from(f: FormatArg) -> Self {
        match f {
            FormatArg::Packed => sluice::bits::Format::Packed,
            FormatArg::Ascii => sluice::bits::Format::Ascii,
            FormatArg::Hex => sluice::bits::Format::Hex,
        }
    }
}

/// Bit order names on the command line.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum OrderArg {
    /// First bit in the most significant position of each byte (default).
    Msb,
    /// First bit in the least significant position.
    Lsb,
}

impl From<OrderArg> for sluice::bits::BitOrder {
    fn from(o: OrderArg) -> Self {
        match o {
            OrderArg::Msb => sluice::bits::BitOrder::Msb,
            OrderArg::Lsb => sluice::bits::BitOrder::Lsb,
        }
    }
}

/// How bit files are read and written.
#[derive(clap::Args, Clone, Debug)]
pub struct FileFormatArgs {
    /// Format of the input (and of the output unless --output-format is given)
    #[arg(long, value_enum, default_value = "packed")]
    pub format: FormatArg,
    /// Bit order inside bytes of the input (and output unless
    /// --output-bit-order is given)
    #[arg(long = "bit-order", value_enum, default_value = "msb")]
    pub bit_order: OrderArg,
    /// Format of the output, if different from the input's
    #[arg(long = "output-format", value_enum)]
    pub output_format: Option<FormatArg>,
    /// Bit order of the output, if different from the input's
    #[arg(long = "output-bit-order", value_enum)]
    pub output_bit_order: Option<OrderArg>,
}

impl FileFormatArgs {
    /// The input file description.
    pub fn input(&self, path: &std::path::Path) -> sluice::pipeline::BitFile {
        sluice::pipeline::BitFile {
            path: path.to_path_buf(),
            format: self.format.into(),
            order: self.bit_order.into(),
        }
    }

    /// The output file description.
    pub fn output(&self, path: &std::path::Path) -> sluice::pipeline::BitFile {
        sluice::pipeline::BitFile {
            path: path.to_path_buf(),
            format: self.output_format.unwrap_or(self.format).into(),
            order: self.output_bit_order.unwrap_or(self.bit_order).into(),
        }
    }
}

/// The cautions printed once by commands whose output protects something
/// (`plan`, `extract`, `demo`), in plain words.
pub const CAUTIONS: [&str; 4] = [
    "The output is only as good as the min-entropy claim and the assumptions of the \
     certification behind it; sluice cannot check either.",
    "Seeds must be independent of the source and of any adversary, and must not be \
     disclosed before the raw data they are used on exist.",
    "Reusing a seed adds its error each time: every block hashed with it counts in the total.",
    "Whether the error figure suffices for keys, lotteries or audits is for the standards and \
     evaluators that apply to your application to decide.",
];

/// Prints [`CAUTIONS`] on standard error unless `quiet`.
pub fn print_cautions(quiet: bool) {
    if !quiet {
        let mut err = std::io::stderr().lock();
        for c in CAUTIONS {
            let _ = writeln!(err, "caution: {c}");
        }
    }
}

/// The caution every two-source use carries (hashing spec 6.3, 6.4 policy
/// item 1).
pub const TWO_SOURCE_CAUTION: &str =
    "classical side information only; the two sources must be independent";

/// The cautions of a two-source run: [`CAUTIONS`] without the two about
/// seeds (there is none), then [`TWO_SOURCE_CAUTION`].
pub fn two_source_cautions() -> [&'static str; 3] {
    [CAUTIONS[0], CAUTIONS[3], TWO_SOURCE_CAUTION]
}

/// Refuses an output that is one of `others` (the command's inputs and
/// other outputs, with their roles) or an existing file that is not an
/// earlier output of the same kind (unless `force`). Called before any
/// work, so a refusal costs nothing (and charges no seed).
pub fn check_output(
    output: &std::path::Path,
    kind: sluice::files::Kind,
    others: &[(Option<&std::path::Path>, &str)],
    force: bool,
) -> anyhow::Result<()> {
    let others: Vec<(&std::path::Path, &str)> = others
        .iter()
        .filter_map(|(p, role)| p.map(|p| (p, *role)))
        .collect();
    sluice::files::guard::check_output(
        output,
        kind,
        &others,
        sluice::files::Replace::forced(force),
    )?;
    Ok(())
}

/// Draws an SVG into memory with `draw`, then writes it through the atomic
/// writer (a plot never appears half drawn, and never replaces a file that
/// is not an earlier plot without `force`).
pub fn write_svg(
    path: &std::path::Path,
    force: bool,
    draw: impl FnOnce(&mut String) -> anyhow::Result<()>,
) -> anyhow::Result<()> {
    let mut svg = String::new();
    draw(&mut svg)?;
    sluice::files::atomic::write_all(
        path,
        sluice::files::Kind::Plot,
        sluice::files::Replace::forced(force),
        svg.as_bytes(),
    )?;
    Ok(())
}

/// A journal time (Unix seconds) as UTC, `YYYY-MM-DDTHH:MM:SSZ`.
pub fn utc(secs: u64) -> String {
    let days = (secs / 86_400) as i64;
    let rem = secs % 86_400;
    // Days since 1970-01-01 to a proleptic Gregorian date (the usual
    // era-based conversion: 400-year eras of 146,097 days, years starting
    // on 1 March so the leap day falls last).
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1_460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    format!(
        "{year:04}-{month:02}-{day:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        rem / 60 % 60,
        rem % 60
    )
}

#[cfg(test)]
mod tests {
    use super::utc;

    #[test]
    fn utc_matches_the_system_date_command() {
        // Expected strings from GNU coreutils `date -u -d @N +%Y-%m-%dT%H:%M:%SZ`
        // (epoch, a leap day, a non-leap century end, a date after a leap day).
        for (t, want) in [
            (0, "1970-01-01T00:00:00Z"),
            (951_782_400, "2000-02-29T00:00:00Z"),
            (1_796_509_538, "2026-12-05T22:25:38Z"),
            (4_107_542_399, "2100-02-28T23:59:59Z"),
            (68_256_000, "1972-03-01T00:00:00Z"),
        ] {
            assert_eq!(utc(t), want, "{t}");
        }
    }
}
