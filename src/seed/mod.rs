//! Seed sources and the private seed store
//! (`spec/hashing-and-composition.md` 4.2-4.4, 4.7; `spec/conventions.md`,
//! seed identifiers).
//!
//! Three sources: the operating system (deficiency 0), a file with a
//! declared deficiency and origin, and bits cut from an earlier sluice
//! output (only with the recycling assertion of 4.2; those bits are never
//! delivered, and the seed carries that output's error as eps_seed, 4.7).
//! The store is the folder `seeds/` beside the journal (owner-only, 0700):
//! one owner-only file per seed, named by the seed's random identifier,
//! holding the bits, their BLAKE3 digest and a random salt. Seed bits are
//! never printed or logged; `Debug` of [`StoredSeed`] shows no bits.
//!
//! Budget bypasses closed here (issue 15 item 6):
//! - each store file is bound to its seed-created record: the record holds
//!   BLAKE3 keyed with the file's salt of the identifier, length and bits
//!   ([`binding_digest`]), checked on every load, so copying one seed's
//!   file over another's (and changing the identifier) is refused;
//! - a file or recycled seed whose bits are already registered (equal, or
//!   one a prefix of the other of at least [`PREFIX_MIN_BITS`] bits) is
//!   refused, under the journal lock;
//! - a new seed's file is moved into the store under the journal lock,
//!   right after its record is written, so the store never holds a seed the
//!   journal does not know (the ledger refuses to start a new journal
//!   beside a non-empty store).

#![forbid(unsafe_code)]

use crate::bits::{BitOrder, Bits};
use crate::files::{self, AtomicFile, Kind, Replace};
use crate::ledger::{self, Body, Ledger, State};
use serde::{Deserialize, Serialize};
use std::io::Write;
use std::path::{Path, PathBuf};

/// Default budget of a new seed (issue 5: "e.g. 1e-6").
pub const DEFAULT_BUDGET: f64 = 1e-6;

/// Store file format name.
pub const STORE_FORMAT: &str = "sluice-seed/1";

/// Two seeds overlap when one is a prefix of the other and the shorter
/// holds at least this many bits (uses read a prefix of a seed, so such a
/// pair would share its first bits); equal seeds always overlap.
pub const PREFIX_MIN_BITS: usize = 32;

/// The largest seed this version stores (2^32 bits, 512 MiB).
pub const MAX_SEED_BITS: u64 = 1 << 32;

/// Errors of the seed layer.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A ledger error (rules, I/O, position).
    #[error(transparent)]
    Ledger(#[from] ledger::Error),
    /// A store file problem.
    #[error("{}: {reason}", path.display())]
    Store {
        /// The store file.
        path: PathBuf,
        /// Why.
        reason: String,
    },
    /// A bad argument, quoting the value.
    #[error("{field} = {value}: {expected}")]
    Bad {
        /// The argument.
        field: &'static str,
        /// Its value.
        value: String,
        /// What is allowed.
        expected: &'static str,
    },
    /// Recycling without the assertion of 4.2.
    /// (The condition's text is `plan::compose::RECYCLING_CONDITION`; the
    /// caller shows it where the assertion is asked for.)
    #[error("a seed cut from an earlier output needs the recycling assertion (see README, \"Seeds and the ledger\")")]
    NotAsserted,
    /// The bits are already registered (or overlap a registered seed).
    #[error("these seed bits are already registered as seed {seed} (created at line {line}){how}; registering them again would let their uses escape that seed's budget (see README, \"Seeds and the ledger\"); refused")]
    AlreadyRegistered {
        /// The registered seed.
        seed: String,
        /// Its seed-created line.
        line: u64,
        /// "" or ", as a prefix" etc.
        how: &'static str,
    },
    /// A size that cannot be held.
    #[error(transparent)]
    TooLarge(#[from] files::space::TooLarge),
}

/// The private store file of one seed.
#[derive(Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct StoreFile {
    format: String,
    id: String,
    bits: u64,
    /// BLAKE3 data digest of the seed (`spec/conventions.md`): private.
    blake3: String,
    /// Random 256-bit key of the binding digest, hex (absent in files
    /// written before the binding existed).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    salt: Option<String>,
    /// Packed MSB-first bytes, hex.
    data: String,
}

/// A seed read from the store, checked against its digest.
pub struct StoredSeed {
    /// Random identifier.
    pub id: String,
    /// The bits (secret).
    pub bits: Bits,
}

impl std::fmt::Debug for StoredSeed {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "StoredSeed({}, {} bits)", self.id, self.bits.len())
    }
}

/// Where a new seed comes from.
pub enum Origin {
    /// The operating system's random source (deficiency 0).
    Os,
    /// A file: the user's declared deficiency and origin text.
    File {
        /// Declared min-entropy deficiency s in bits (4.4).
        deficiency: f64,
        /// Origin text.
        origin: String,
    },
    /// Cut from an earlier sluice output (4.2, 4.7).
    Recycled {
        /// The earlier output's total error, carried as eps_seed.
        eps_seed: f64,
        /// Origin text (which output).
        origin: String,
        /// The user asserted the recycling condition.
        asserted: bool,
    },
}

/// The seed store beside a ledger.
pub struct Store {
    ledger: Ledger,
}

fn store_err(path: &Path, reason: impl Into<String>) -> Error {
    Error::Store {
        path: path.to_path_buf(),
        reason: reason.into(),
    }
}

/// Checks a budget: a number in (0, 1).
pub fn check_budget(b: f64) -> Result<f64, Error> {
    if b.is_finite() && b > 0.0 && b < 1.0 {
        Ok(b)
    } else {
        Err(Error::Bad {
            field: "budget",
            value: b.to_string(),
            expected: "a number in (0, 1)",
        })
    }
}

/// The digest that binds a store file to its seed-created record: BLAKE3
/// keyed with the file's 256-bit random salt, of a fixed label, the
/// identifier, the length (8 bytes, little-endian) and the packed
/// MSB-first bits. Without the salt (kept only in the owner-only store) the
/// journal's copy tells nothing about the seed.
pub fn binding_digest(salt: &[u8; 32], id: &str, bits: &Bits) -> String {
    let mut h = blake3::Hasher::new_keyed(salt);
    h.update(b"sluice-seed-binding/1\n");
    h.update(id.as_bytes());
    h.update(b"\n");
    h.update(&(bits.len() as u64).to_le_bytes());
    h.update(&bits.to_packed(BitOrder::Msb));
    h.finalize().to_hex().to_string()
}

/// Whether two seeds overlap: equal, or one a prefix of the other with the
/// shorter at least [`PREFIX_MIN_BITS`] long.
pub fn overlaps(a: &Bits, b: &Bits) -> Option<&'static str> {
    let (short, long) = if a.len() <= b.len() { (a, b) } else { (b, a) };
    if a == b {
        return Some("");
    }
    if short.len() >= PREFIX_MIN_BITS && long.slice(0, short.len()) == *short {
        return Some(if a.len() < b.len() {
            ", as a prefix of it"
        } else {
            ", which is a prefix of these bits"
        });
    }
    None
}

/// A parsed store file: the bits and the salt (no I/O; the fuzz target and
/// [`Store::load`] use it). Checks the format, the identifier, the sizes
/// (before allocating), the hex and the BLAKE3 digest.
pub fn parse_store_file(bytes: &[u8], id: &str) -> Result<(Bits, Option<[u8; 32]>), String> {
    let sf: StoreFile =
        serde_json::from_slice(bytes).map_err(|e| format!("not a seed store file: {e}"))?;
    if sf.format != STORE_FORMAT {
        return Err(format!(
            "format {:?}: this version reads {STORE_FORMAT:?}",
            sf.format
        ));
    }
    if sf.id != id {
        return Err(format!(
            "the file names seed {:?}, not {id}: store files are never renamed or copied",
            sf.id
        ));
    }
    if sf.bits == 0 || sf.bits > MAX_SEED_BITS {
        return Err(format!(
            "field bits = {}: a stored seed holds 1 to {MAX_SEED_BITS} bits",
            sf.bits
        ));
    }
    let need = sf.bits.div_ceil(8);
    if sf.data.len() as u64 != 2 * need {
        return Err(format!(
            "field data holds {} hex digits, but {} bits need {}",
            sf.data.len(),
            sf.bits,
            2 * need
        ));
    }
    let bytes = hex::decode(&sf.data).map_err(|e| format!("field data: not hex: {e}"))?;
    let n = sf.bits as usize;
    let bits =
        Bits::from_packed(&bytes, n, BitOrder::Msb).map_err(|e| format!("field data: {e}"))?;
    if crate::bits::digest::data_digest(&bits) != sf.blake3 {
        return Err(
            "the stored seed does not match its BLAKE3 digest (the store file changed)".into(),
        );
    }
    let salt = match &sf.salt {
        None => None,
        Some(h) => {
            let mut s = [0u8; 32];
            hex::decode_to_slice(h, &mut s)
                .map_err(|_| "field salt: not 64 hex digits".to_string())?;
            Some(s)
        }
    };
    Ok((bits, salt))
}

/// A new seed whose store file is written under a temporary name and
/// whose record is not yet in the journal. [`Store::register`] (or the
/// ledgered run, with a use) appends the record and moves the file into
/// place under the journal lock ([`PendingSeed::finish`]); dropped before
/// that, the temporary file is removed.
pub struct PendingSeed {
    /// The new random identifier.
    pub id: String,
    body: Body,
    bits: Bits,
    file: Option<AtomicFile>,
    check_unique: bool,
}

impl std::fmt::Debug for PendingSeed {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "PendingSeed({}, {} bits)", self.id, self.bits.len())
    }
}

impl PendingSeed {
    /// The seed-created record.
    pub fn body(&self) -> &Body {
        &self.body
    }

    /// Under the journal lock, before the append: refuses bits already
    /// registered (file and recycled seeds; a seed from the operating
    /// system is fresh).
    pub fn check(&self, store: &Store, state: &State) -> Result<(), Error> {
        check_unique(store, &self.bits, self.check_unique, state)
    }

    /// Under the journal lock, after the append: moves the store file into
    /// place (never over an existing file).
    pub fn finish(&mut self) -> Result<(), Error> {
        finish_file(&mut self.file)
    }

    /// Splits into the parts the two steps of an append need: the check
    /// before (see [`PendingSeed::check`]) and the move after.
    pub fn parts(&mut self) -> (PendingCheck<'_>, &mut Option<AtomicFile>) {
        (
            PendingCheck {
                bits: &self.bits,
                unique: self.check_unique,
            },
            &mut self.file,
        )
    }
}

/// The check half of a [`PendingSeed`].
pub struct PendingCheck<'a> {
    bits: &'a Bits,
    unique: bool,
}

impl PendingCheck<'_> {
    /// See [`PendingSeed::check`].
    pub fn check(&self, store: &Store, state: &State) -> Result<(), Error> {
        check_unique(store, self.bits, self.unique, state)
    }
}

fn check_unique(store: &Store, bits: &Bits, wanted: bool, state: &State) -> Result<(), Error> {
    if !wanted {
        return Ok(());
    }
    for (id, s) in &state.seeds {
        let Ok(other) = store.load_with(id, state) else {
            continue;
        };
        if let Some(how) = overlaps(bits, &other.bits) {
            return Err(Error::AlreadyRegistered {
                seed: id.clone(),
                line: s.created_line,
                how,
            });
        }
    }
    Ok(())
}

/// Moves a pending store file into place (see [`PendingSeed::finish`]).
pub fn finish_file(file: &mut Option<AtomicFile>) -> Result<(), Error> {
    files::fault::point("seed-store-rename");
    match file.take() {
        Some(f) => {
            let path = f.dest().to_path_buf();
            f.commit()
                .map_err(|e| store_err(&path, format!("cannot write: {e}")))
        }
        None => Ok(()),
    }
}

impl Store {
    /// The store of `ledger`.
    pub fn new(ledger: Ledger) -> Self {
        Store { ledger }
    }

    /// The ledger.
    pub fn ledger(&self) -> &Ledger {
        &self.ledger
    }

    /// The store folder.
    pub fn dir(&self) -> PathBuf {
        self.ledger.seeds_dir()
    }

    fn path_of(&self, id: &str) -> PathBuf {
        self.dir().join(format!("{id}.seed.json"))
    }

    /// Fresh bits from the operating system (the size checked against the
    /// memory available first).
    pub fn os_bits(nbits: usize) -> Result<Bits, Error> {
        if nbits as u64 > MAX_SEED_BITS {
            return Err(Error::Bad {
                field: "bits",
                value: nbits.to_string(),
                expected: "at most 2^32 bits (512 MiB) per seed",
            });
        }
        files::space::check_bits(nbits as u128, "the seed")?;
        let mut bytes = vec![0u8; nbits.div_ceil(8)];
        files::random::fill(&mut bytes).map_err(ledger::Error::from)?;
        // The last byte's pad bits are dropped by taking exactly nbits.
        Ok(Bits::from_packed_all(&bytes, BitOrder::Msb).slice(0, nbits))
    }

    /// Registers `bits` as a new seed: under the journal lock, refuses bits
    /// already registered (file and recycled seeds), appends the
    /// seed-created record and moves the owner-only store file into place.
    /// Returns the new random identifier.
    pub fn register(&self, bits: &Bits, origin: Origin, budget: f64) -> Result<String, Error> {
        let mut p = self.prepare(bits, origin, budget)?;
        let id = p.id.clone();
        let body = p.body.clone();
        let (check, file) = p.parts();
        self.ledger.append_with(
            |st| {
                check.check(self, st)?;
                Ok::<_, Error>((vec![body], ()))
            },
            |_| finish_file(file),
        )?;
        Ok(id)
    }

    /// Writes the store file of a new seed under a temporary name and
    /// returns it with its identifier and record, for the caller to append
    /// (see [`PendingSeed`]).
    pub fn prepare(&self, bits: &Bits, origin: Origin, budget: f64) -> Result<PendingSeed, Error> {
        check_budget(budget)?;
        if bits.is_empty() {
            return Err(Error::Bad {
                field: "bits",
                value: "0".into(),
                expected: "a seed of at least 1 bit",
            });
        }
        if bits.len() as u64 > MAX_SEED_BITS {
            return Err(Error::Bad {
                field: "bits",
                value: bits.len().to_string(),
                expected: "at most 2^32 bits (512 MiB) per seed",
            });
        }
        let check_unique = !matches!(origin, Origin::Os);
        let (source, deficiency, eps_seed, origin_text) = match origin {
            Origin::Os => ("os", 0.0, 0.0, "operating-system random source".to_string()),
            Origin::File { deficiency, origin } => {
                if !deficiency.is_finite() || deficiency < 0.0 || deficiency > bits.len() as f64 {
                    return Err(Error::Bad {
                        field: "deficiency",
                        value: deficiency.to_string(),
                        expected: "a number of bits between 0 and the seed length",
                    });
                }
                ("file", deficiency, 0.0, origin)
            }
            Origin::Recycled {
                eps_seed,
                origin,
                asserted,
            } => {
                if !asserted {
                    return Err(Error::NotAsserted);
                }
                if !(eps_seed.is_finite() && (0.0..1.0).contains(&eps_seed)) {
                    return Err(Error::Bad {
                        field: "eps_seed",
                        value: eps_seed.to_string(),
                        expected: "the earlier output's total error, in [0, 1)",
                    });
                }
                ("recycled", 0.0, eps_seed, origin)
            }
        };
        // The identifier is drawn independently of the seed (conventions.md).
        let id = ledger::random_id()?;
        let mut salt = [0u8; 32];
        files::random::fill(&mut salt).map_err(ledger::Error::from)?;
        files::create_private_dir(self.ledger.dir())
            .and_then(|()| files::create_private_dir(&self.dir()))
            .map_err(|e| store_err(&self.dir(), format!("cannot create: {e}")))?;
        let path = self.path_of(&id);
        let packed = bits.to_packed(BitOrder::Msb);
        let sf = StoreFile {
            format: STORE_FORMAT.into(),
            id: id.clone(),
            bits: bits.len() as u64,
            blake3: crate::bits::digest::data_digest(bits),
            salt: Some(hex::encode(salt)),
            data: hex::encode(&packed),
        };
        let write = || -> std::io::Result<AtomicFile> {
            let mut f = AtomicFile::create(&path, Kind::SeedStore, Replace::Never)?;
            serde_json::to_writer(&mut f, &sf)?;
            f.write_all(b"\n")?;
            f.flush()?;
            Ok(f)
        };
        let file = write().map_err(|e| store_err(&path, format!("cannot write: {e}")))?;
        let body = Body::SeedCreated {
            seed: id.clone(),
            bits: bits.len() as u64,
            source: source.into(),
            deficiency,
            eps_seed,
            origin: origin_text,
            budget,
            store_digest: Some(binding_digest(&salt, &id, bits)),
        };
        Ok(PendingSeed {
            id,
            body,
            bits: bits.clone(),
            file: Some(file),
            check_unique,
        })
    }

    /// Reads a stored seed, checked against its digest and bound to its
    /// seed-created record in the journal (read here).
    pub fn load(&self, id: &str) -> Result<StoredSeed, Error> {
        let r = self.ledger.read()?;
        if let Some(p) = r.problem {
            return Err(p.into());
        }
        self.load_with(id, &r.state)
    }

    /// As [`Store::load`], with the journal's state already replayed.
    pub fn load_with(&self, id: &str, state: &State) -> Result<StoredSeed, Error> {
        let path = self.path_of(id);
        let s = state.seed(id).map_err(ledger::Error::from)?;
        let bytes =
            files::keyvalue::read_limited(&path, 2 * MAX_SEED_BITS / 8 + 4096, "seed store file")
                .map_err(|e| store_err(&path, format!("cannot read seed {id}: {e}")))?;
        let (bits, salt) = parse_store_file(&bytes, id).map_err(|e| store_err(&path, e))?;
        if bits.len() as u64 != s.bits {
            return Err(store_err(
                &path,
                format!(
                    "the file holds {} bits, but the journal registered {} (line {})",
                    bits.len(),
                    s.bits,
                    s.created_line
                ),
            ));
        }
        match (&s.store_digest, salt) {
            (Some(want), Some(salt)) if binding_digest(&salt, id, &bits) == *want => {}
            (Some(_), _) => {
                return Err(store_err(
                    &path,
                    format!(
                        "this file is not the one registered for seed {id} at line {} (its binding digest differs: the file was replaced or copied from another seed); refused",
                        s.created_line
                    ),
                ))
            }
            (None, _) => {
                return Err(store_err(
                    &path,
                    format!(
                        "seed {id} was registered (line {}) by an older version, without the digest that binds its store file to the journal; it cannot be checked, so it is not used (register the seed again)",
                        s.created_line
                    ),
                ))
            }
        }
        Ok(StoredSeed {
            id: id.to_string(),
            bits,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn register_load_and_integrity() {
        let dir = tempfile::tempdir().unwrap();
        let store = Store::new(Ledger::new(dir.path()));
        let bits = Store::os_bits(77).unwrap();
        let id = store.register(&bits, Origin::Os, 1e-6).unwrap();
        // conventions.md: 32 lower-case hex digits, not a hash of the seed.
        assert_eq!(id.len(), 32);
        assert!(id.bytes().all(|b| b"0123456789abcdef".contains(&b)));
        assert!(!crate::bits::digest::data_digest(&bits).contains(&id));
        let got = store.load(&id).unwrap();
        assert_eq!(got.bits, bits);
        assert!(!format!("{got:?}").contains(&bits.to_ascii()));
        let st = store.ledger().read().unwrap();
        assert!(st.problem.is_none());
        assert_eq!(st.state.seed(&id).unwrap().bits, 77);
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            let mode = std::fs::metadata(store.path_of(&id))
                .unwrap()
                .permissions()
                .mode();
            assert_eq!(mode & 0o777, 0o600);
        }
        // Flip one data digit: the digest check catches it.
        let p = store.path_of(&id);
        let text = std::fs::read_to_string(&p).unwrap();
        let i = text.find("\"data\":\"").unwrap() + 8;
        let mut b = text.into_bytes();
        b[i] = if b[i] == b'0' { b'1' } else { b'0' };
        std::fs::write(&p, b).unwrap();
        let e = store.load(&id).unwrap_err().to_string();
        assert!(e.contains("BLAKE3"), "{e}");
    }

    #[test]
    fn recycling_needs_the_assertion_and_budget_range() {
        let dir = tempfile::tempdir().unwrap();
        let store = Store::new(Ledger::new(dir.path()));
        let bits = Store::os_bits(8).unwrap();
        let e = store
            .register(
                &bits,
                Origin::Recycled {
                    eps_seed: 1e-9,
                    origin: "out.bin".into(),
                    asserted: false,
                },
                1e-6,
            )
            .unwrap_err();
        assert!(
            e.to_string().contains("recycling assertion")
                && e.to_string().contains("Seeds and the ledger"),
            "{e}"
        );
        for b in [0.0, 1.0, -1e-3, f64::NAN] {
            assert!(store.register(&bits, Origin::Os, b).is_err());
        }
        // Nothing was written for the refused registrations.
        assert!(!store.ledger().exists());
        let id = store
            .register(
                &bits,
                Origin::Recycled {
                    eps_seed: 1e-9,
                    origin: "out.bin".into(),
                    asserted: true,
                },
                1e-6,
            )
            .unwrap();
        let st = store.ledger().read().unwrap().state;
        assert_eq!(st.seed(&id).unwrap().eps_seed, 1e-9);
    }
}
