//! The parameters file and the counts file: `key = value` lines, read from
//! any `BufRead` (the command line opens the files and digests them).
//!
//! ```text
//! # fixed before the run ('#' starts a comment; blank lines are ignored)
//! rounds = 1e10
//! test-probability = 0.01
//! expected-win = 0.76
//! completeness = 1e-10
//! smoothing = 1e-10
//! acceptance = 1e-10
//! test = score
//! score-offset = 0.5
//! ```
//!
//! Keys: [`PARAM_KEYS`]; a counts file may also hold [`COUNT_KEYS`] and
//! `rounds` as the count. Every key at most once; each parameter is given
//! either in the file or as an option, never both.

use super::record::Summary;
use super::{Error, ErrorKind};
use std::io::BufRead;

/// Keys of the parameters file.
pub const PARAM_KEYS: [&str; 13] = [
    "rounds",
    "test-probability",
    "expected-win",
    "tolerance",
    "smoothing",
    "acceptance",
    "estimation-error",
    "completeness",
    "bound",
    "keep",
    "test",
    "score-offset",
    "tail",
];

/// Keys of the counts file besides the parameters it may carry.
pub const COUNT_KEYS: [&str; 2] = ["test-rounds", "wins"];

/// One `key = value` line.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct KeyValue {
    /// The key.
    pub key: String,
    /// The value, trimmed.
    pub value: String,
    /// Line number (1-based).
    pub line: u64,
}

fn params_error(line: u64, what: String) -> Error {
    Error::new(ErrorKind::Parameters { what }).at_line(line)
}

/// The largest parameters or counts file read (a few lines in practice).
pub const MAX_FILE_BYTES: u64 = 1 << 20;

/// Reads `key = value` lines (the one parser of `files::keyvalue`); errors
/// name the line. Refuses more than [`MAX_FILE_BYTES`].
pub fn read_key_values(r: impl BufRead, allowed: &[&str]) -> Result<Vec<KeyValue>, Error> {
    use crate::files::keyvalue::{self, Error as KvError};
    use std::io::Read;
    let mut bytes = Vec::new();
    r.take(MAX_FILE_BYTES + 1).read_to_end(&mut bytes)?;
    if bytes.len() as u64 > MAX_FILE_BYTES {
        return Err(Error::new(ErrorKind::Parameters {
            what: format!("more than {MAX_FILE_BYTES} bytes: not a parameters or counts file"),
        }));
    }
    let kv = keyvalue::parse(&bytes, allowed).map_err(|e| match &e {
        KvError::NotText { .. } => Error::new(ErrorKind::Parameters {
            what: e.to_string(),
        }),
        KvError::NotKeyValue { line, .. }
        | KvError::UnknownKey { line, .. }
        | KvError::Twice { line, .. } => {
            // The message without its "line N: " prefix: the error adds it.
            let text = e.to_string();
            let what = text
                .split_once(": ")
                .map_or(text.clone(), |(_, rest)| rest.to_string());
            params_error(*line as u64, what)
        }
    })?;
    Ok(kv
        .into_iter()
        .map(|(key, value, line)| KeyValue {
            key,
            value,
            line: line as u64,
        })
        .collect())
}

/// A count written as an integer or as an exact power form such as `1e8`
/// (underscores allowed).
pub fn parse_count(s: &str) -> Option<u64> {
    crate::files::keyvalue::parse_number::<u64>(s)
}

fn number<T: std::str::FromStr>(kv: &KeyValue) -> Result<T, Error> {
    crate::files::keyvalue::parse_number::<T>(&kv.value).ok_or_else(|| {
        params_error(
            kv.line,
            format!(
                "{} = {:?} is not a number of the right kind",
                kv.key, kv.value
            ),
        )
    })
}

/// The protocol parameters as declared (options first, then a file).
#[derive(Debug, Default, Clone, PartialEq)]
pub struct Declared {
    /// N_rounds.
    pub rounds: Option<u64>,
    /// gamma.
    pub gamma: Option<f64>,
    /// w_exp.
    pub w_exp: Option<f64>,
    /// delta.
    pub delta: Option<f64>,
    /// eps_s.
    pub eps_s: Option<f64>,
    /// eps_EA.
    pub eps_ea: Option<f64>,
    /// eps_est.
    pub eps_est: Option<f64>,
    /// eps_c (completeness target).
    pub eps_c: Option<f64>,
    /// Bound name.
    pub bound: Option<String>,
    /// String kept.
    pub keep: Option<String>,
    /// Acceptance test kind.
    pub test: Option<String>,
    /// Score offset nu.
    pub nu: Option<f64>,
    /// Tail method.
    pub tail: Option<String>,
}

impl Declared {
    /// Adds the parameters of a file's lines. In a counts file
    /// (`counts_file`), `rounds` is the count: it only fills N_rounds when
    /// not given, and the count keys are skipped. Returns whether any
    /// parameter came from the file. A parameter given twice (file and
    /// option) is an error naming it.
    pub fn merge(&mut self, kv: &[KeyValue], counts_file: bool) -> Result<bool, Error> {
        let mut any = false;
        for e in kv {
            let k = e.key.as_str();
            if COUNT_KEYS.contains(&k) {
                continue;
            }
            if counts_file && k == "rounds" {
                if self.rounds.is_none() {
                    self.rounds = Some(number(e)?);
                }
                continue;
            }
            any = true;
            let clash = |given: bool| -> Result<(), Error> {
                if given {
                    Err(params_error(
                        e.line,
                        format!("{k} is given both here and as --{k}; give each parameter once"),
                    ))
                } else {
                    Ok(())
                }
            };
            match k {
                "rounds" => {
                    clash(self.rounds.is_some())?;
                    self.rounds = Some(number(e)?);
                }
                "test-probability" => {
                    clash(self.gamma.is_some())?;
                    self.gamma = Some(number(e)?);
                }
                "expected-win" => {
                    clash(self.w_exp.is_some())?;
                    self.w_exp = Some(number(e)?);
                }
                "tolerance" => {
                    clash(self.delta.is_some() || self.eps_c.is_some())?;
                    self.delta = Some(number(e)?);
                }
                "smoothing" => {
                    clash(self.eps_s.is_some())?;
                    self.eps_s = Some(number(e)?);
                }
                "acceptance" => {
                    clash(self.eps_ea.is_some())?;
                    self.eps_ea = Some(number(e)?);
                }
                "estimation-error" => {
                    clash(self.eps_est.is_some())?;
                    self.eps_est = Some(number(e)?);
                }
                "completeness" => {
                    clash(self.eps_c.is_some() || self.delta.is_some())?;
                    self.eps_c = Some(number(e)?);
                }
                "score-offset" => {
                    clash(self.nu.is_some())?;
                    self.nu = Some(number(e)?);
                }
                _ => {
                    let values: &[&str] = match k {
                        "bound" => &["improved-2019", "first-2016"],
                        "keep" => &["pairs", "alice"],
                        "test" => &["wins", "score"],
                        _ => &["binomial", "chernoff", "bernstein", "hoeffding"],
                    };
                    if !values.contains(&e.value.as_str()) {
                        return Err(params_error(
                            e.line,
                            format!("{k} = {:?}; the values are {}", e.value, values.join(", ")),
                        ));
                    }
                    let slot = match k {
                        "bound" => &mut self.bound,
                        "keep" => &mut self.keep,
                        "test" => &mut self.test,
                        _ => &mut self.tail,
                    };
                    clash(slot.is_some())?;
                    *slot = Some(e.value.clone());
                }
            }
        }
        Ok(any)
    }
}

/// Reads the counts of a counts file (`rounds`, `test-rounds`, `wins`);
/// the parameters it may carry are allowed and ignored here.
pub fn read_counts(r: impl BufRead) -> Result<Summary, Error> {
    let allowed = [&PARAM_KEYS[..], &COUNT_KEYS[..]].concat();
    let kv = read_key_values(r, &allowed)?;
    let mut vals = [None; 3];
    for e in &kv {
        if let Some(i) = ["rounds", "test-rounds", "wins"]
            .iter()
            .position(|&x| x == e.key)
        {
            vals[i] = Some(number::<u64>(e)?);
        }
    }
    let get = |i: usize, name: &str| {
        vals[i].ok_or_else(|| {
            Error::new(ErrorKind::Parameters {
                what: format!("the line {name} = ... is missing"),
            })
        })
    };
    let s = Summary::from_counts(get(0, "rounds")?, get(1, "test-rounds")?, get(2, "wins")?);
    s.check_counts()?;
    Ok(s)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_and_merges() {
        let text = b"# comment\nrounds = 1e8\ntest-probability = 0.1 # trailing\n\nsmoothing = 1e-6\ntest = score\n";
        let kv = read_key_values(&text[..], &PARAM_KEYS).unwrap();
        assert_eq!(kv.len(), 4);
        assert_eq!(kv[1].line, 3);
        let mut d = Declared::default();
        assert!(d.merge(&kv, false).unwrap());
        assert_eq!(d.rounds, Some(100_000_000));
        assert_eq!(d.gamma, Some(0.1));
        assert_eq!(d.test.as_deref(), Some("score"));
        let mut d = Declared {
            eps_s: Some(1e-9),
            ..Default::default()
        };
        let e = d.merge(&kv, false).unwrap_err();
        assert!(
            e.to_string().starts_with("line 5: smoothing is given both"),
            "{e}"
        );
    }

    #[test]
    fn errors_name_the_line() {
        let e = read_key_values(&b"rounds = 10\ngama = 0.5\n"[..], &PARAM_KEYS).unwrap_err();
        assert!(
            e.to_string().starts_with("line 2: unknown key \"gama\""),
            "{e}"
        );
        let e = read_key_values(&b"rounds 10\n"[..], &PARAM_KEYS).unwrap_err();
        assert!(e.to_string().contains("not of the form"), "{e}");
        let e = read_key_values(&b"rounds = 1\nrounds = 2\n"[..], &PARAM_KEYS).unwrap_err();
        assert!(e.to_string().contains("given twice"), "{e}");
        let kv = read_key_values(&b"test = maybe\n"[..], &PARAM_KEYS).unwrap();
        let e = Declared::default().merge(&kv, false).unwrap_err();
        assert!(e.to_string().contains("the values are wins, score"), "{e}");
        let e = read_counts(&b"rounds = 10\ntest-rounds = 5\n"[..]).unwrap_err();
        assert!(e.to_string().contains("wins = ... is missing"), "{e}");
        let s = read_counts(&b"rounds = 1e3\ntest-rounds = 500\nwins = 400\n"[..]).unwrap();
        assert_eq!((s.n_rounds, s.n_test, s.wins), (1000, 500, 400));
        assert_eq!(parse_count("1_000"), Some(1000));
        assert_eq!(parse_count("1.5"), None);
    }
}
