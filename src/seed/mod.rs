//! Seed sources and the private seed store
//! (`spec/hashing-and-composition.md` 4.2-4.4, 4.7; `spec/conventions.md`,
//! seed identifiers).
//!
//! Three sources: the operating system (deficiency 0), a file with a
//! declared deficiency and origin, and bits cut from an earlier sluice
//! output (only with the recycling assertion of 4.2; those bits are never
//! delivered, and the seed carries that output's error as eps_seed, 4.7).
//! The store is the folder `seeds/` beside the journal: one owner-only file
//! per seed, named by the seed's random identifier, holding the bits and
//! their BLAKE3 digest for integrity checks. Seed bits are never printed or
//! logged; `Debug` of [`StoredSeed`] shows no bits.

use crate::bits::{BitOrder, Bits};
use crate::ledger::{self, Body, Ledger};
use crate::pipeline::atomic::{getrandom_fill, AtomicFile};
use serde::{Deserialize, Serialize};
use std::io::Write;
use std::path::{Path, PathBuf};

/// Default budget of a new seed (issue 5: "e.g. 1e-6").
pub const DEFAULT_BUDGET: f64 = 1e-6;

/// Store file format name.
pub const STORE_FORMAT: &str = "sluice-seed/1";

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
    #[error("a seed cut from an earlier output needs the recycling assertion (hashing spec 4.2): {condition}")]
    NotAsserted {
        /// The condition.
        condition: &'static str,
    },
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
        self.ledger.dir().join("seeds")
    }

    fn path_of(&self, id: &str) -> PathBuf {
        self.dir().join(format!("{id}.seed.json"))
    }

    /// Fresh bits from the operating system.
    pub fn os_bits(nbits: usize) -> Result<Bits, Error> {
        let mut bytes = vec![0u8; nbits.div_ceil(8)];
        getrandom_fill(&mut bytes).map_err(ledger::Error::from)?;
        // The last byte's pad bits are dropped by taking exactly nbits.
        Ok(Bits::from_packed_all(&bytes, BitOrder::Msb).slice(0, nbits))
    }

    /// Registers `bits` as a new seed: writes the store file (owner-only)
    /// and then, under the journal lock, the seed-created record. Returns
    /// the new random identifier.
    pub fn register(&self, bits: &Bits, origin: Origin, budget: f64) -> Result<String, Error> {
        let (id, body) = self.prepare(bits, origin, budget)?;
        let res = self
            .ledger
            .append(|_| Ok::<_, ledger::Error>((vec![body], ())));
        if let Err(e) = res {
            self.discard(&id);
            return Err(e.into());
        }
        Ok(id)
    }

    /// Removes the store file of a seed whose registration failed.
    pub fn discard(&self, id: &str) {
        let _ = std::fs::remove_file(self.path_of(id));
    }

    /// Writes the store file of a new seed and returns its identifier and
    /// the seed-created record, for the caller to append (with
    /// [`Store::discard`] if the append fails).
    pub fn prepare(
        &self,
        bits: &Bits,
        origin: Origin,
        budget: f64,
    ) -> Result<(String, Body), Error> {
        check_budget(budget)?;
        if bits.is_empty() {
            return Err(Error::Bad {
                field: "bits",
                value: "0".into(),
                expected: "a seed of at least 1 bit",
            });
        }
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
                    return Err(Error::NotAsserted {
                        condition: crate::plan::compose::RECYCLING_CONDITION,
                    });
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
        std::fs::create_dir_all(self.dir())
            .map_err(|e| store_err(&self.dir(), format!("cannot create: {e}")))?;
        let path = self.path_of(&id);
        let packed = bits.to_packed(BitOrder::Msb);
        let sf = StoreFile {
            format: STORE_FORMAT.into(),
            id: id.clone(),
            bits: bits.len() as u64,
            blake3: crate::bits::digest::data_digest(bits),
            data: hex::encode(&packed),
        };
        let write = || -> std::io::Result<()> {
            let mut f = AtomicFile::create(&path, true)?;
            serde_json::to_writer(&mut f, &sf)?;
            f.write_all(b"\n")?;
            f.commit()
        };
        write().map_err(|e| store_err(&path, format!("cannot write: {e}")))?;
        let body = Body::SeedCreated {
            seed: id.clone(),
            bits: bits.len() as u64,
            source: source.into(),
            deficiency,
            eps_seed,
            origin: origin_text,
            budget,
        };
        Ok((id, body))
    }

    /// Reads a stored seed and checks its digest and length.
    pub fn load(&self, id: &str) -> Result<StoredSeed, Error> {
        let path = self.path_of(id);
        let text = std::fs::read_to_string(&path)
            .map_err(|e| store_err(&path, format!("cannot read seed {id}: {e}")))?;
        let sf: StoreFile = serde_json::from_str(&text)
            .map_err(|e| store_err(&path, format!("not a seed store file: {e}")))?;
        if sf.format != STORE_FORMAT || sf.id != id {
            return Err(store_err(&path, "format or identifier does not match"));
        }
        let bytes = hex::decode(&sf.data)
            .map_err(|e| store_err(&path, format!("field data: not hex: {e}")))?;
        let n = usize::try_from(sf.bits).map_err(|_| store_err(&path, "field bits too large"))?;
        if bytes.len() != n.div_ceil(8) {
            return Err(store_err(
                &path,
                format!(
                    "field data holds {} bytes, but {} bits need {}",
                    bytes.len(),
                    n,
                    n.div_ceil(8)
                ),
            ));
        }
        let bits = Bits::from_packed(&bytes, n, BitOrder::Msb)
            .map_err(|e| store_err(&path, format!("field data: {e}")))?;
        if crate::bits::digest::data_digest(&bits) != sf.blake3 {
            return Err(store_err(
                &path,
                "the stored seed does not match its BLAKE3 digest (the store file changed)",
            ));
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
        assert!(e.to_string().contains("4.2"), "{e}");
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
