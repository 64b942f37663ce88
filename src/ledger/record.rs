//! Journal records and the no-I/O line parser.
//!
//! One record is one line of JSON: `seq` (1-based line number), `prev` (the
//! SHA3-256 digest, FIPS 202, of the previous line's bytes without its
//! newline, or [`GENESIS`] for the first line), `time` (seconds since the
//! Unix epoch, as the writer's clock saw it), `kind` and the kind's fields.

pub use super::error::Position;
use super::error::{Error, ErrorKind};
use serde::{Deserialize, Serialize};
use sha3::{Digest, Sha3_256};
use std::collections::BTreeMap;

/// The journal's format name, written in its first record.
pub const FORMAT: &str = "sluice-journal/1";

/// The `prev` value of the first record: 64 zeros (a fixed genesis value).
pub const GENESIS: &str = "0000000000000000000000000000000000000000000000000000000000000000";

/// Record kinds this version knows.
pub const KINDS: &[&str] = &[
    "journal-started",
    "seed-created",
    "budget-set",
    "raw-committed",
    "seed-disclosed",
    "use-reserved",
    "use-committed",
    "use-abandoned",
    "seed-retired",
    "repair",
];

/// One journal line.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Record {
    /// Line number, from 1.
    pub seq: u64,
    /// SHA3-256 hex of the previous line (or [`GENESIS`]).
    pub prev: String,
    /// Seconds since the Unix epoch when the record was written.
    pub time: u64,
    /// What the record says.
    #[serde(flatten)]
    pub body: Body,
}

/// The kinds of record and their fields.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum Body {
    /// First line of every journal.
    JournalStarted {
        /// Always [`FORMAT`].
        format: String,
    },
    /// A seed was registered in the store.
    SeedCreated {
        /// Random identifier, 32 lower-case hex digits (never derived from
        /// the seed).
        seed: String,
        /// Seed length in bits.
        bits: u64,
        /// `os`, `file` or `recycled`.
        source: String,
        /// Declared min-entropy deficiency s in bits
        /// (`spec/hashing-and-composition.md` 4.4).
        deficiency: f64,
        /// Distance from uniform, added once per seed (4.7).
        eps_seed: f64,
        /// Free text: where the seed came from.
        origin: String,
        /// The seed's error budget (4.3).
        budget: f64,
        /// Binds the seed's store file to this record: BLAKE3 keyed with
        /// the store file's random salt, of the identifier, the length and
        /// the bits (`seed::binding_digest`). Checked on every load; absent
        /// only in journals written before it existed.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        store_digest: Option<String>,
    },
    /// A seed's budget was lowered.
    BudgetSet {
        /// Seed identifier.
        seed: String,
        /// The new budget (never higher than the old one).
        budget: f64,
    },
    /// A raw file's data digest was fixed in the chain.
    RawCommitted {
        /// Data digest (`spec/conventions.md`).
        digest: String,
        /// Length in bits.
        bits: u64,
        /// Free text: where the data came from.
        origin: String,
    },
    /// A seed, or something computed from it, left the trusted step.
    SeedDisclosed {
        /// Seed identifier.
        seed: String,
        /// How (revealed, exported, declared public).
        how: String,
    },
    /// A use of a seed was reserved before any output existed.
    UseReserved {
        /// Identifier of this use (random, 32 hex digits).
        #[serde(rename = "use")]
        use_id: String,
        /// Seed identifier.
        seed: String,
        /// Construction name.
        construction: String,
        /// Its defining integers (n, m, d, ...).
        params: BTreeMap<String, u64>,
        /// Data digest of the raw input.
        input_digest: String,
        /// Blocks hashed with the seed.
        blocks: u64,
        /// Seed bits read (a prefix of the seed).
        seed_bits: u64,
        /// Error charged to the seed's account (4.3).
        error: f64,
        /// Whether the raw data carry a device-independent certificate.
        device_independent: bool,
        /// The user asserted the cross-run condition of 4.1 rule 3.
        cross_run_asserted: bool,
        /// Reason given to extract again from raw data already used (4.6).
        repeat_reason: Option<String>,
        /// Where the output will be written (absolute path), so an open
        /// reservation can be resolved once its output is known not to
        /// exist (`ledger abandon`). Absent in older journals.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        output: Option<String>,
    },
    /// A reserved use produced its output (durably renamed).
    UseCommitted {
        /// The use.
        #[serde(rename = "use")]
        use_id: String,
        /// Data digest of the output (private).
        output_digest: String,
        /// BLAKE3 of the receipt file, if one was written.
        receipt_digest: Option<String>,
    },
    /// A reserved use failed; its error stays charged.
    UseAbandoned {
        /// The use.
        #[serde(rename = "use")]
        use_id: String,
        /// Why.
        reason: String,
    },
    /// A seed may not be used any more.
    SeedRetired {
        /// Seed identifier.
        seed: String,
    },
    /// A torn last line was cut off.
    Repair {
        /// Bytes removed.
        dropped_bytes: u64,
        /// Where the journal was copied first.
        copy: String,
    },
}

impl Body {
    /// The record kind.
    pub fn kind(&self) -> &'static str {
        match self {
            Body::JournalStarted { .. } => "journal-started",
            Body::SeedCreated { .. } => "seed-created",
            Body::BudgetSet { .. } => "budget-set",
            Body::RawCommitted { .. } => "raw-committed",
            Body::SeedDisclosed { .. } => "seed-disclosed",
            Body::UseReserved { .. } => "use-reserved",
            Body::UseCommitted { .. } => "use-committed",
            Body::UseAbandoned { .. } => "use-abandoned",
            Body::SeedRetired { .. } => "seed-retired",
            Body::Repair { .. } => "repair",
        }
    }
}

/// SHA3-256 (FIPS 202) of a line's bytes, lower-case hex.
pub fn line_digest(line: &[u8]) -> String {
    hex::encode(Sha3_256::digest(line))
}

/// Parses one line (without its newline) into `rec`, checking that it is
/// JSON, that its kind is known and that `seq` and `prev` continue the
/// chain (`expected_prev` is the digest of the previous line). No I/O.
pub fn parse_line(
    line: &[u8],
    pos: Position,
    expected_prev: &str,
    rec: &mut Record,
) -> Result<(), Error> {
    let at = |k: ErrorKind| Error::new(k).at(pos);
    // Fast path: straight into the record. Only a line that fails is parsed
    // again, generically, to say why (not JSON, unknown kind, bad field).
    match serde_json::from_slice::<Record>(line) {
        Ok(r) => *rec = r,
        Err(_) => return Err(at(classify(line))),
    }
    // Every record is written in one form (serde_json, keys in field
    // order): anything else was edited, and this also refuses keys this
    // format does not have (item 8 of issue 15).
    if to_line(rec).as_bytes() != line {
        return Err(at(classify_noncanonical(line, rec)));
    }
    if rec.seq != pos.line {
        return Err(at(ErrorKind::Sequence {
            expected: pos.line,
            found: rec.seq,
        }));
    }
    if rec.prev != expected_prev {
        return Err(at(ErrorKind::ChainBroken {
            expected: expected_prev.to_string(),
            found: rec.prev.clone(),
        }));
    }
    Ok(())
}

/// Why a line is not a record: the slow, generic parse.
fn classify(line: &[u8]) -> ErrorKind {
    let v: serde_json::Value = match serde_json::from_slice(line) {
        Ok(v) => v,
        Err(e) => {
            return ErrorKind::NotJson {
                reason: e.to_string(),
            }
        }
    };
    let Some(kind) = v.get("kind").and_then(|k| k.as_str()) else {
        return ErrorKind::BadField {
            field: "kind",
            reason: "missing or not a string".into(),
        };
    };
    if !KINDS.contains(&kind) {
        return ErrorKind::UnknownKind {
            kind: kind.to_string(),
        };
    }
    match serde_json::from_value::<Record>(v) {
        Ok(_) => ErrorKind::BadField {
            field: "record",
            reason: "not a record of this format".into(),
        },
        Err(e) => ErrorKind::BadField {
            field: "record",
            reason: e.to_string(),
        },
    }
}

/// Why a line that parsed is not in the canonical form: an unknown key,
/// or some other edit.
fn classify_noncanonical(line: &[u8], rec: &Record) -> ErrorKind {
    let (Ok(serde_json::Value::Object(got)), Ok(serde_json::Value::Object(want))) = (
        serde_json::from_slice::<serde_json::Value>(line),
        serde_json::to_value(rec),
    ) else {
        return ErrorKind::NotCanonical;
    };
    match got.keys().find(|k| !want.contains_key(*k)) {
        Some(k) => ErrorKind::UnknownKey {
            kind: rec.body.kind().to_string(),
            key: k.clone(),
        },
        None => ErrorKind::NotCanonical,
    }
}

/// The slow twin of the parse in [`parse_line`]: generic JSON first, then
/// the record (tests compare the two on random lines).
#[doc(hidden)]
pub fn parse_record_slow(line: &[u8]) -> Result<Record, ErrorKind> {
    let v: serde_json::Value = serde_json::from_slice(line).map_err(|e| ErrorKind::NotJson {
        reason: e.to_string(),
    })?;
    match v.get("kind").and_then(|k| k.as_str()) {
        Some(k) if KINDS.contains(&k) => {}
        Some(k) => {
            return Err(ErrorKind::UnknownKind {
                kind: k.to_string(),
            })
        }
        None => {
            return Err(ErrorKind::BadField {
                field: "kind",
                reason: "missing or not a string".into(),
            })
        }
    }
    let rec: Record = serde_json::from_value(v).map_err(|e| ErrorKind::BadField {
        field: "record",
        reason: e.to_string(),
    })?;
    // Canonical form: the bytes this program writes for the record.
    if to_line(&rec).as_bytes() != line {
        return Err(classify_noncanonical(line, &rec));
    }
    Ok(rec)
}

/// Serializes a record as one line (no newline).
pub fn to_line(rec: &Record) -> String {
    serde_json::to_string(rec).expect("records serialize")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sha3_256_known_answer() {
        // FIPS 202 / NIST CSRC example values for SHA3-256: the empty
        // message and "abc" (from memory of the published examples).
        assert_eq!(
            line_digest(b""),
            "a7ffc6f8bf1ed76651c14756a061d662f580ff4de43b49fa82d80a4b80f8434a"
        );
        assert_eq!(
            line_digest(b"abc"),
            "3a985da74fe225b2045c172d6bd390bd855f086e3e9d525b46bfe24511431532"
        );
    }

    #[test]
    fn unknown_keys_and_edited_forms_are_refused() {
        let rec = Record {
            seq: 1,
            prev: GENESIS.into(),
            time: 5,
            body: Body::RawCommitted {
                digest: "ab".repeat(32),
                bits: 9,
                origin: "bench".into(),
            },
        };
        let line = to_line(&rec);
        let mut got = rec.clone();
        let pos = Position { line: 1, offset: 0 };
        parse_line(line.as_bytes(), pos, GENESIS, &mut got).unwrap();
        // An extra key (issue 15 item 8).
        let extra = line.replace("\"bits\":9", "\"bits\":9,\"budget\":0.9");
        let e = parse_line(extra.as_bytes(), pos, GENESIS, &mut got).unwrap_err();
        assert!(
            matches!(&e.kind, ErrorKind::UnknownKey { key, .. } if key == "budget"),
            "{e}"
        );
        assert!(matches!(
            parse_record_slow(extra.as_bytes()),
            Err(ErrorKind::UnknownKey { .. })
        ));
        // The same record spelt differently (a space, 9 as 9.0).
        for edited in [
            line.replace(",\"bits\"", ", \"bits\""),
            line.replace(":9,", ":9.0,"),
        ] {
            let e = parse_line(edited.as_bytes(), pos, GENESIS, &mut got);
            assert!(e.is_err(), "{edited}");
        }
    }

    #[test]
    fn round_trip_and_positions() {
        let rec = Record {
            seq: 1,
            prev: GENESIS.into(),
            time: 5,
            body: Body::JournalStarted {
                format: FORMAT.into(),
            },
        };
        let line = to_line(&rec);
        let mut got = rec.clone();
        got.seq = 99;
        parse_line(
            line.as_bytes(),
            Position { line: 1, offset: 0 },
            GENESIS,
            &mut got,
        )
        .unwrap();
        assert_eq!(got, rec);
        let e = parse_line(
            line.as_bytes(),
            Position {
                line: 2,
                offset: 10,
            },
            GENESIS,
            &mut got,
        )
        .unwrap_err();
        assert!(e.to_string().contains("line 2 (byte 10)"), "{e}");
        let bad = line.replace("journal-started", "seed-eaten");
        let e = parse_line(bad.as_bytes(), Position::default(), GENESIS, &mut got).unwrap_err();
        assert!(matches!(e.kind, ErrorKind::UnknownKind { .. }), "{e}");
    }

    proptest::proptest! {
        /// The fast parse and its slow twin agree on mutated record lines:
        /// both accept the same record, or both refuse.
        #[test]
        fn fast_parse_matches_slow_twin(pos in 0usize..400, byte in 0u8..128, which in 0usize..4) {
            let bodies = [
                Body::JournalStarted { format: FORMAT.into() },
                Body::RawCommitted { digest: "ab".repeat(32), bits: 9, origin: "bench \"7\"".into() },
                Body::UseCommitted { use_id: "0f".repeat(16), output_digest: "cd".repeat(32), receipt_digest: None },
                Body::SeedCreated { seed: "1e".repeat(16), bits: 77, source: "os".into(), deficiency: 0.0, eps_seed: 0.0, origin: "o".into(), budget: 1e-6, store_digest: Some("ef".repeat(32)) },
            ];
            let rec = Record { seq: 3, prev: GENESIS.into(), time: 11, body: bodies[which].clone() };
            let mut line = to_line(&rec).into_bytes();
            let at = pos % line.len();
            line[at] = byte;
            let slow = parse_record_slow(&line);
            let mut fast = rec.clone();
            let res = parse_line(&line, Position { line: 3, offset: 0 }, GENESIS, &mut fast);
            match (&slow, &res) {
                (Ok(r), Ok(())) => proptest::prop_assert_eq!(r, &fast),
                (Ok(r), Err(e)) => {
                    // Only the chain checks may refuse a parsed record.
                    let chain = matches!(e.kind, ErrorKind::Sequence { .. } | ErrorKind::ChainBroken { .. });
                    proptest::prop_assert!(chain, "slow parsed {:?}, fast: {}", r, e);
                }
                (Err(_), Ok(())) => proptest::prop_assert!(false, "fast accepted what slow refused"),
                (Err(a), Err(b)) => proptest::prop_assert_eq!(
                    std::mem::discriminant(a), std::mem::discriminant(&b.kind)
                ),
            }
        }
    }
}
