//! A run of the seedless cyclic-shift two-source extractor
//! (`spec/hashing-and-composition.md` 6): both raw sources read, checked
//! (a valid length n, 6.1; the two not the same file or the same bits) and
//! cut to n bits, then one block hashed. There is no seed and so no ledger:
//! the second source takes the seed's place in the extractor.

use super::job::JobError;
use super::{BitFile, Report, Run, Source, Verdict};
use crate::bits::Bits;
use crate::extract::two_source::{largest_n, valid_n};
use crate::extract::{Engine, TwoSource};
use crate::files::Replace;
use std::path::{Path, PathBuf};

/// A two-source run.
#[derive(Clone, Debug)]
pub struct TwoSourceJob {
    /// The first raw source X (its format is the second's too).
    pub input: BitFile,
    /// The second raw source Y, independent of X.
    pub second: PathBuf,
    /// Use the first this many bits of each.
    pub input_bits: Option<u64>,
    /// Output bits.
    pub m: usize,
    /// The product engine.
    pub engine: Engine,
}

/// The planned extractor and both sources, cut to n bits.
pub struct Resolved {
    /// The extractor.
    pub plan: TwoSource,
    /// The first source.
    pub x: Bits,
    /// The second source.
    pub y: Bits,
}

fn refuse<T>(s: impl Into<String>) -> Result<T, JobError> {
    Err(JobError::Refused(s.into()))
}

fn suggestion(limit: u64) -> String {
    match largest_n(limit) {
        Some(v) => format!("the largest valid n not above {limit} is {v}"),
        None => format!("no valid n is at most {limit} (the smallest is 3)"),
    }
}

#[cfg(unix)]
fn same_file(a: &Path, b: &Path) -> bool {
    use std::os::unix::fs::MetadataExt;
    match (std::fs::metadata(a), std::fs::metadata(b)) {
        (Ok(x), Ok(y)) => x.dev() == y.dev() && x.ino() == y.ino(),
        _ => false,
    }
}

#[cfg(not(unix))]
fn same_file(a: &Path, b: &Path) -> bool {
    match (std::fs::canonicalize(a), std::fs::canonicalize(b)) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    }
}

/// Reads both sources, checks them and plans.
pub fn resolve(job: &TwoSourceJob) -> Result<Resolved, JobError> {
    let (input, ypath, m) = (&job.input.path, job.second.as_path(), job.m);
    if ypath.as_os_str() == "-" {
        return refuse("--second-source -: the second source must be a file, not standard input");
    }
    if input.as_os_str() != "-" && same_file(input, ypath) {
        return refuse(format!(
            "{} and {} are the same file: the two sources must be independent",
            input.display(),
            ypath.display()
        ));
    }
    if job.input_bits == Some(0) {
        return refuse("--input-bits 0: the input length must be at least 1 bit");
    }
    let xf = &job.input;
    let read = |p: &Path| -> Result<Bits, JobError> {
        let b = crate::bits::io::read_bits(p, xf.format, xf.order, None)?;
        if b.is_empty() {
            return refuse(format!("{}: the file holds no bits", p.display()));
        }
        Ok(b)
    };
    let x = read(input)?;
    let y = read(ypath)?;
    let have = x.len().min(y.len()) as u64;
    let n = match job.input_bits {
        Some(n) => {
            for (p, b) in [(input.as_path(), &x), (ypath, &y)] {
                if (b.len() as u64) < n {
                    return refuse(format!(
                        "{}: {n} bits asked for (--input-bits), but it ends after {} bits",
                        p.display(),
                        b.len()
                    ));
                }
            }
            n
        }
        None => {
            if x.len() != y.len() {
                return refuse(format!(
                    "{} holds {} bits and {} holds {}: give --input-bits N to use the first N bits of both ({})",
                    input.display(),
                    x.len(),
                    ypath.display(),
                    y.len(),
                    suggestion(have)
                ));
            }
            have
        }
    };
    if !valid_n(n) {
        let mut msg = format!(
            "n = {n} bits is not a valid two-source length (it must be a prime with 2 as a \
             primitive root modulo n); {}",
            suggestion(have)
        );
        if n < have {
            msg.push_str(&format!(" ({})", suggestion(n)));
        }
        msg.push_str(": pass it as --input-bits");
        return refuse(msg);
    }
    let n = usize::try_from(n)
        .map_err(|_| JobError::Refused("--input-bits too large for this machine".into()))?;
    if m == 0 || m >= n {
        return refuse(format!(
            "--output-bits {m} must be in 1..={} for two sources of {n} bits (Dodis, Elbaz, Oliveira, Raz 2004)",
            n - 1
        ));
    }
    let (x, y) = (x.slice(0, n), y.slice(0, n));
    if x == y {
        return refuse(format!(
            "the first {n} bits of {} and {} are identical: the two sources must be independent",
            input.display(),
            ypath.display()
        ));
    }
    let plan =
        TwoSource::with_engine(n, m, job.engine).map_err(|e| JobError::Refused(e.to_string()))?;
    Ok(Resolved { plan, x, y })
}

impl Resolved {
    fn run<'a>(&'a self, name: &Path, output: BitFile) -> Run<'a> {
        Run {
            input: Source::Memory {
                bits: self.x.clone(),
                name: name.to_path_buf(),
            },
            input_bits: Some(self.x.len() as u64),
            extractor: &self.plan,
            seed: (&self.y).into(),
            output,
        }
    }

    /// Hashes the block and writes the output atomically.
    pub fn execute(
        &self,
        job: &TwoSourceJob,
        output: &BitFile,
        replace: Replace,
    ) -> Result<Report, JobError> {
        Ok(self
            .run(&job.input.path, output.clone())
            .execute_replacing(replace, |_| {})?)
    }

    /// Recomputes the output and compares a claimed one with it.
    pub fn verify(&self, job: &TwoSourceJob, claimed: &BitFile) -> Result<Verdict, JobError> {
        Ok(self
            .run(&job.input.path, claimed.clone())
            .verify(claimed, |_| {})?)
    }
}
