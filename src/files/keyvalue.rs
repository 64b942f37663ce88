//! Plain `key = value` text files (the certification's parameters and
//! counts): `#` starts a comment, blank lines are ignored, every key is
//! known and given once. No I/O here except [`read_limited`].

use std::fmt;
use std::io::Read;
use std::path::Path;

/// One `key = value` line: key, value, line number (from 1).
pub type Entry = (String, String, usize);

/// Why a file is not a `key = value` file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Error {
    /// Not UTF-8 from this byte on.
    NotText {
        /// Byte offset.
        byte: usize,
    },
    /// A line without `=`.
    NotKeyValue {
        /// Line number.
        line: usize,
        /// The line.
        text: String,
    },
    /// A key not in the list.
    UnknownKey {
        /// Line number.
        line: usize,
        /// The key.
        key: String,
        /// The known keys.
        known: String,
    },
    /// A key given twice.
    Twice {
        /// Line number.
        line: usize,
        /// The key.
        key: String,
    },
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::NotText { byte } => write!(f, "byte {byte}: not UTF-8 text"),
            Error::NotKeyValue { line, text } => {
                write!(f, "line {line}: {text:?} is not of the form key = value")
            }
            Error::UnknownKey { line, key, known } => {
                write!(f, "line {line}: unknown key {key:?}; the keys are {known}")
            }
            Error::Twice { line, key } => write!(f, "line {line}: {key:?} is given twice"),
        }
    }
}

impl std::error::Error for Error {}

/// Parses the bytes of a `key = value` file with the keys `allowed`.
pub fn parse(bytes: &[u8], allowed: &[&str]) -> Result<Vec<Entry>, Error> {
    let text = std::str::from_utf8(bytes).map_err(|e| Error::NotText {
        byte: e.valid_up_to(),
    })?;
    let mut out: Vec<Entry> = Vec::new();
    for (i, raw) in text.lines().enumerate() {
        let line = raw.split('#').next().unwrap_or("").trim();
        if line.is_empty() {
            continue;
        }
        let Some((k, v)) = line.split_once('=') else {
            return Err(Error::NotKeyValue {
                line: i + 1,
                text: raw.to_string(),
            });
        };
        let (k, v) = (k.trim().to_string(), v.trim().to_string());
        if !allowed.contains(&k.as_str()) {
            return Err(Error::UnknownKey {
                line: i + 1,
                key: k,
                known: allowed.join(", "),
            });
        }
        if out.iter().any(|(o, _, _)| *o == k) {
            return Err(Error::Twice {
                line: i + 1,
                key: k,
            });
        }
        out.push((k, v, i + 1));
    }
    Ok(out)
}

/// A number written plainly, with `_` separators, or (for whole numbers)
/// in exponent form such as `1e8`.
pub fn parse_number<T: std::str::FromStr>(v: &str) -> Option<T> {
    let v2 = v.replace('_', "");
    if let Ok(x) = v2.parse::<T>() {
        return Some(x);
    }
    if let Ok(f) = v2.parse::<f64>() {
        if f.fract() == 0.0 && (0.0..1.8e19).contains(&f) {
            if let Ok(x) = format!("{}", f as u64).parse::<T>() {
                return Some(x);
            }
        }
    }
    None
}

/// Reads a whole small file, refusing one larger than `limit` bytes before
/// reading it (`what` names the file's role in the message).
pub fn read_limited(path: &Path, limit: u64, what: &str) -> std::io::Result<Vec<u8>> {
    let f = std::fs::File::open(path)?;
    let len = f.metadata()?.len();
    if len > limit {
        return Err(std::io::Error::new(
            std::io::ErrorKind::InvalidData,
            format!(
                "{}: {len} bytes; a {what} is at most {limit} bytes, so this is not one",
                path.display()
            ),
        ));
    }
    let mut out = Vec::with_capacity(len as usize);
    f.take(limit + 1).read_to_end(&mut out)?;
    if out.len() as u64 > limit {
        return Err(std::io::Error::new(
            std::io::ErrorKind::InvalidData,
            format!(
                "{}: more than {limit} bytes; a {what} is at most {limit} bytes",
                path.display()
            ),
        ));
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_and_refuses() {
        let kv = parse(b"# c\nrounds = 1e8\n\n wins=3 # x\n", &["rounds", "wins"]).unwrap();
        assert_eq!(kv[0], ("rounds".into(), "1e8".into(), 2));
        assert_eq!(kv[1], ("wins".into(), "3".into(), 4));
        assert_eq!(parse_number::<u64>("1e8"), Some(100_000_000));
        assert_eq!(parse_number::<u64>("1_000"), Some(1000));
        assert_eq!(parse_number::<u64>("1.5"), None);
        assert!(matches!(
            parse(b"a = 1\na = 2", &["a"]),
            Err(Error::Twice { line: 2, .. })
        ));
        assert!(matches!(
            parse(b"b = 1", &["a"]),
            Err(Error::UnknownKey { .. })
        ));
        assert!(matches!(
            parse(b"a 1", &["a"]),
            Err(Error::NotKeyValue { .. })
        ));
        assert!(matches!(
            parse(b"a = \xff", &["a"]),
            Err(Error::NotText { byte: 4 })
        ));
    }

    proptest::proptest! {
        /// Error path: any bytes give entries or an error, never a panic,
        /// and every entry's key is allowed and unique.
        #[test]
        fn any_bytes_parse_or_fail_cleanly(b in proptest::collection::vec(proptest::num::u8::ANY, 0..200)) {
            if let Ok(kv) = parse(&b, &["a", "b"]) {
                let mut keys: Vec<_> = kv.iter().map(|e| e.0.clone()).collect();
                proptest::prop_assert!(keys.iter().all(|k| k == "a" || k == "b"));
                keys.dedup();
                proptest::prop_assert_eq!(keys.len(), kv.len());
            }
        }
    }
}
