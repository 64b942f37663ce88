//! Reading the inputs of a certification from caller-supplied streams: the
//! round file (plain or gzip), the parameters and counts files, and a raw
//! output file given back with counts.
//!
//! Nothing here opens a file: the caller opens it (or standard input) and
//! names it, and every error carries that name, with the line or field
//! where the parser knows one.

use super::certificate::RecordInfo;
use super::improved::Keep;
use super::params::{self, KeyValue, MAX_FILE_BYTES};
use super::record::{read_record, Summary};
use super::{Error, ErrorKind};
use crate::bits::digest::DataDigest;
use std::cell::{Cell, RefCell};
use std::io::{BufRead, BufReader, Read, Write};

/// The lines of a `key = value` file with the BLAKE3 hex digest of its bytes.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct KeyValueFile {
    /// The lines, in file order.
    pub entries: Vec<KeyValue>,
    /// BLAKE3 of the bytes read (hex).
    pub digest: String,
    /// Bytes read.
    pub bytes: u64,
}

/// Reads at most [`MAX_FILE_BYTES`] of a small file, refusing more.
fn read_small(mut r: impl Read, name: &str) -> Result<Vec<u8>, Error> {
    let mut bytes = Vec::new();
    (&mut r)
        .take(MAX_FILE_BYTES + 1)
        .read_to_end(&mut bytes)
        .map_err(|e| Error::from(e).in_file(name))?;
    if bytes.len() as u64 > MAX_FILE_BYTES {
        return Err(Error::new(ErrorKind::Parameters {
            what: format!("more than {MAX_FILE_BYTES} bytes: not a parameters or counts file"),
        })
        .in_file(name));
    }
    Ok(bytes)
}

/// Reads a parameters (or counts) file named `name` from `r`: its lines
/// with keys among `allowed`, and the digest the certificate records.
/// Errors name the file and the line.
pub fn read_key_value_file(
    r: impl BufRead,
    allowed: &[&str],
    name: &str,
) -> Result<KeyValueFile, Error> {
    let bytes = read_small(r, name)?;
    let entries = params::read_key_values(&bytes[..], allowed).map_err(|e| e.in_file(name))?;
    Ok(KeyValueFile {
        entries,
        digest: blake3::hash(&bytes).to_hex().to_string(),
        bytes: bytes.len() as u64,
    })
}

/// A counts file: the counts, with the warnings for the declared gamma,
/// and the digest and size of the file.
#[derive(Debug, Clone)]
pub struct CountsFile {
    /// The counts (no per-round data).
    pub summary: Summary,
    /// BLAKE3 of the file (hex).
    pub digest: String,
    /// Bytes in the file.
    pub bytes: u64,
}

/// Reads a counts file named `name` (`rounds`, `test-rounds`, `wins`, and
/// parameters that are ignored here). Errors name the file and the line.
pub fn read_counts_file(r: impl BufRead, gamma: f64, name: &str) -> Result<CountsFile, Error> {
    let bytes = read_small(r, name)?;
    let mut summary = params::read_counts(&bytes[..]).map_err(|e| e.in_file(name))?;
    summary.add_warnings(gamma);
    Ok(CountsFile {
        summary,
        digest: blake3::hash(&bytes).to_hex().to_string(),
        bytes: bytes.len() as u64,
    })
}

/// The data digest of a packed raw string of `nbits` bits read from `r`,
/// a file named `name` of `len` bytes (checked before reading: it must be
/// exactly `ceil(nbits / 8)`).
pub fn digest_raw_string(
    mut r: impl BufRead,
    len: u64,
    nbits: u64,
    name: &str,
) -> Result<String, Error> {
    let want = nbits.div_ceil(8);
    if len != want {
        return Err(Error::new(ErrorKind::InconsistentCounts {
            what: format!(
                "{len} bytes, but the {nbits}-bit string a1 b1 .. aN bN of the counts needs {want} bytes"
            ),
        })
        .in_file(name));
    }
    let mut d = DataDigest::new(nbits);
    loop {
        let buf = r.fill_buf().map_err(|e| Error::from(e).in_file(name))?;
        if buf.is_empty() {
            break;
        }
        d.update(buf);
        let n = buf.len();
        r.consume(n);
    }
    Ok(d.finish_hex())
}

/// A reader that hashes and counts the bytes passing through it.
struct Tee<'a, R> {
    inner: R,
    hasher: &'a RefCell<blake3::Hasher>,
    count: &'a Cell<u64>,
}

impl<R: Read> Read for Tee<'_, R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.hasher.borrow_mut().update(&buf[..n]);
        self.count.set(self.count.get() + n as u64);
        Ok(n)
    }
}

/// The raw output being written, or nothing but the digest.
enum Sink<W> {
    To(W),
    Discard,
}

impl<W: Write> Write for Sink<W> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        match self {
            Sink::To(w) => w.write(buf),
            Sink::Discard => Ok(buf.len()),
        }
    }
    fn flush(&mut self) -> std::io::Result<()> {
        match self {
            Sink::To(w) => w.flush(),
            Sink::Discard => Ok(()),
        }
    }
}

/// What [`read_round_file`] found.
pub struct RoundFile<W> {
    /// The summary of the rounds, with the warnings for gamma.
    pub summary: Summary,
    /// The record as the certificate describes it (digest and size of the
    /// bytes read, compressed or not, rounds; the test counts are left for
    /// the caller to fill from the summary).
    pub info: RecordInfo,
    /// Data digest (hex) of the raw string kept.
    pub raw_digest: String,
    /// The sink given, flushed (`None` when none was given).
    pub sink: Option<W>,
}

/// The buffer size of the round file reader (1 MiB).
const BUFFER: usize = 1 << 20;

/// Reads a round file named `name` from `source` in one pass: detects
/// gzip by its magic bytes, digests and counts the bytes as stored, parses
/// and tallies the rounds, and writes the raw string kept (see
/// [`read_record`]) to `sink` when one is given. `progress` is called with
/// the bytes read so far after every step of about a million rounds.
///
/// Errors name the file, and the line for a round that does not parse. A
/// record whose number of rounds is not `n_expected` is an error. On an
/// error the sink is dropped unflushed.
pub fn read_round_file<R: Read, W: Write>(
    source: R,
    name: &str,
    n_expected: u64,
    gamma: f64,
    keep: Keep,
    sink: Option<W>,
    mut progress: impl FnMut(u64),
) -> Result<RoundFile<W>, Error> {
    let hasher = RefCell::new(blake3::Hasher::new());
    let count = Cell::new(0u64);
    let tee = Tee {
        inner: source,
        hasher: &hasher,
        count: &count,
    };
    let mut raw_in = BufReader::with_capacity(BUFFER, tee);
    let compressed = raw_in
        .fill_buf()
        .map(|b| b.starts_with(&[0x1f, 0x8b]))
        .unwrap_or(false);
    let text: Box<dyn BufRead + '_> = if compressed {
        Box::new(BufReader::with_capacity(
            BUFFER,
            flate2::bufread::MultiGzDecoder::new(raw_in),
        ))
    } else {
        Box::new(raw_in)
    };
    let sink = match sink {
        Some(w) => Sink::To(w),
        None => Sink::Discard,
    };
    let read = read_record(text, n_expected, keep, sink, || progress(count.get()))
        .map_err(|e| e.in_file(name))?;
    let rounds = read.rounds;
    if rounds != n_expected {
        return Err(Error::new(ErrorKind::InconsistentCounts {
            what: format!(
                "the record holds {rounds} rounds, but N_rounds = {n_expected} was fixed before the run"
            ),
        })
        .in_file(name));
    }
    let sink = match read.sink {
        Sink::To(w) => Some(w),
        Sink::Discard => None,
    };
    let summary = read.tally.summary(gamma)?;
    let file_digest = hasher.borrow().finalize().to_hex().to_string();
    Ok(RoundFile {
        summary,
        info: RecordInfo {
            form: "round-file".into(),
            file_digest: Some(file_digest),
            file_bytes: Some(count.get()),
            compressed,
            rounds,
            test_rounds: 0,
            wins: None,
            pair_counts: None,
        },
        raw_digest: read.raw_digest,
        sink,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::certify::params::{COUNT_KEYS, PARAM_KEYS};

    /// The data digest as the conventions define it: BLAKE3 of the bit
    /// length (8 bytes, little-endian) followed by the packed bytes.
    fn spec_digest(nbits: u64, packed: &[u8]) -> String {
        let mut h = blake3::Hasher::new();
        h.update(&nbits.to_le_bytes());
        h.update(packed);
        h.finalize().to_hex().to_string()
    }

    const ROUNDS: &str = "0 0 0 1 0\n1 0 1 1 1\n0 0 0 0 1\n1 1 1 0 1\n";

    #[test]
    fn reads_a_small_record() {
        let mut seen = 0;
        let r = read_round_file(
            ROUNDS.as_bytes(),
            "rec.txt",
            4,
            0.5,
            Keep::Pairs,
            Some(Vec::new()),
            |b| seen = b,
        )
        .unwrap();
        assert_eq!(r.info.rounds, 4);
        assert_eq!(r.info.file_bytes, Some(ROUNDS.len() as u64));
        assert_eq!(
            r.info.file_digest.as_deref(),
            Some(blake3::hash(ROUNDS.as_bytes()).to_hex().as_str())
        );
        assert!(!r.info.compressed);
        assert_eq!(seen, ROUNDS.len() as u64);
        // Rounds 2 and 4 are test rounds: (x, y) = (0, 1), a = b = 1, a win;
        // (1, 1), a != b, a win (a xor b = x and y).
        assert_eq!((r.summary.n_test, r.summary.wins), (2, 2));
        // a1 b1 .. a4 b4 = 10 11 01 01, MSB first.
        assert_eq!(r.sink.as_deref(), Some(&[0b1011_0101u8][..]));
        assert_eq!(r.raw_digest, spec_digest(8, &[0b1011_0101]));
        // Alice's bits only: 1 1 0 0, and no sink.
        let r = read_round_file(
            ROUNDS.as_bytes(),
            "rec.txt",
            4,
            0.5,
            Keep::Alice,
            None::<Vec<u8>>,
            |_| {},
        )
        .unwrap();
        assert!(r.sink.is_none());
        assert_eq!(r.raw_digest, spec_digest(4, &[0b1100_0000]));
    }

    #[test]
    fn reads_gzip_and_digests_the_stored_bytes() {
        let mut gz = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
        gz.write_all(ROUNDS.as_bytes()).unwrap();
        let gz = gz.finish().unwrap();
        let r = read_round_file(
            &gz[..],
            "r.gz",
            4,
            0.5,
            Keep::Pairs,
            None::<Vec<u8>>,
            |_| {},
        )
        .unwrap();
        assert!(r.info.compressed);
        assert_eq!(r.info.file_bytes, Some(gz.len() as u64));
        assert_eq!(
            r.info.file_digest.as_deref(),
            Some(blake3::hash(&gz).to_hex().as_str())
        );
        assert_eq!((r.summary.n_test, r.summary.wins), (2, 2));
    }

    #[test]
    fn errors_name_the_file_and_line() {
        let bad = "0 0 0 1 0\n1 0 1 1 1\n0 0 0 2 1\n";
        let e = read_round_file(
            bad.as_bytes(),
            "rec.txt",
            3,
            0.5,
            Keep::Pairs,
            None::<Vec<u8>>,
            |_| {},
        )
        .err()
        .unwrap();
        assert_eq!(e.position().file.as_deref(), Some("rec.txt"));
        assert_eq!(e.position().line, Some(3));
        assert!(e.to_string().starts_with("rec.txt: line 3"), "{e}");
        let e = read_round_file(
            ROUNDS.as_bytes(),
            "rec.txt",
            5,
            0.5,
            Keep::Pairs,
            None::<Vec<u8>>,
            |_| {},
        )
        .err()
        .unwrap();
        assert_eq!(
            e.to_string(),
            "rec.txt: the record holds 4 rounds, but N_rounds = 5 was fixed before the run"
        );
        let e = read_round_file(
            ROUNDS.as_bytes(),
            "rec.txt",
            3,
            0.5,
            Keep::Pairs,
            None::<Vec<u8>>,
            |_| {},
        )
        .err()
        .unwrap();
        assert_eq!(
            e.to_string(),
            "rec.txt: the record holds 4 rounds, but N_rounds = 3 was fixed before the run"
        );
    }

    #[test]
    fn reads_parameters_and_counts_files() {
        let text = "rounds = 1e3\n# note\ntest-probability = 0.5\n";
        let f = read_key_value_file(text.as_bytes(), &PARAM_KEYS, "p.txt").unwrap();
        assert_eq!(f.entries.len(), 2);
        assert_eq!(f.entries[1].line, 3);
        assert_eq!(f.bytes, text.len() as u64);
        assert_eq!(f.digest, blake3::hash(text.as_bytes()).to_hex().to_string());
        let e = read_key_value_file("rounds = 1\nwins = 3\n".as_bytes(), &PARAM_KEYS, "p.txt")
            .unwrap_err();
        assert!(
            e.to_string().starts_with("p.txt: line 2: unknown key"),
            "{e}"
        );
        let allowed = [&PARAM_KEYS[..], &COUNT_KEYS[..]].concat();
        assert!(read_key_value_file("wins = 3\n".as_bytes(), &allowed, "c").is_ok());
        let big = vec![b'#'; MAX_FILE_BYTES as usize + 1];
        let e = read_key_value_file(&big[..], &PARAM_KEYS, "big").unwrap_err();
        assert!(e.to_string().starts_with("big: more than"), "{e}");

        let c = read_counts_file(
            "rounds = 100\ntest-rounds = 50\nwins = 40\n".as_bytes(),
            0.5,
            "c.txt",
        )
        .unwrap();
        assert_eq!(
            (c.summary.n_rounds, c.summary.n_test, c.summary.wins),
            (100, 50, 40)
        );
        let e = read_counts_file("rounds = 100\ntest-rounds = x\n".as_bytes(), 0.5, "c.txt")
            .unwrap_err();
        assert_eq!(e.position().line, Some(2));
        assert!(
            e.to_string().starts_with("c.txt: line 2: test-rounds"),
            "{e}"
        );
    }

    #[test]
    fn raw_string_length_is_checked() {
        let data = [0xa5u8, 0x0f];
        let d = digest_raw_string(&data[..], 2, 12, "raw.bin").unwrap();
        assert_eq!(d, spec_digest(12, &data));
        let e = digest_raw_string(&data[..], 2, 20, "raw.bin").unwrap_err();
        assert_eq!(
            e.to_string(),
            "raw.bin: 2 bytes, but the 20-bit string a1 b1 .. aN bN of the counts needs 3 bytes"
        );
    }
}
