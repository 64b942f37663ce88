//! Receipts: what an extraction did, enough to reproduce it.
//!
//! A receipt (`OUT.receipt.json`, schema `sluice-receipt/1`) names the
//! construction and every integer that defines it, the block layout, the
//! seed (length and identifier: a random identifier, never a hash of the
//! seed), the input's data digest, the certificate it relied on, and every
//! error term with the total. With the input and the seed it is enough for
//! `sluice verify --receipt` to recompute the output.
//!
//! It holds a digest of the raw input, which `spec/hashing-and-composition.md`
//! 4.6 keeps private; it is written owner-only and says so. The output's own
//! digest is included only on request, since a published digest of a secret
//! output leaves only a computational guarantee for it (`spec/conventions.md`).

use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// The schema name of version 1.
pub const SCHEMA: &str = "sluice-receipt/1";

/// A receipt.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Receipt {
    /// Always [`SCHEMA`].
    pub schema: String,
    /// The program and version that wrote it.
    pub tool: String,
    /// The construction.
    pub construction: Construction,
    /// The block layout.
    pub blocks: Blocks,
    /// The raw input.
    pub input: InputRecord,
    /// The seed (never its bits or a hash of them).
    pub seed: SeedRecord,
    /// The certificate the entropy figures came from, if any.
    pub certificate: Option<CertificateRecord>,
    /// Labels that must be shown with this output's figures (weaker
    /// models, unchecked counts, operator claims, warnings); empty in
    /// receipts written before labels existed.
    #[serde(default)]
    pub labels: Vec<String>,
    /// Every error term and the total.
    pub errors: Errors,
    /// What the total means.
    pub meaning: String,
    /// Conditions the figure assumes.
    pub assumed: Vec<String>,
    /// The output's data digest, only when asked for.
    pub output_digest: Option<String>,
    /// Notes on privacy and on the output digest.
    pub notes: Vec<String>,
}

/// The construction and its defining integers.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Construction {
    /// `toeplitz`, `modified-toeplitz`, ...
    pub extractor: String,
    /// Input bits n per block.
    pub input_bits: u64,
    /// Output bits m per block.
    pub output_bits: u64,
    /// Seed bits d.
    pub seed_bits: u64,
    /// Further defining integers (Trevisan: one-bit, design, field bits...).
    pub params: BTreeMap<String, String>,
    /// Why it was chosen.
    pub reason: String,
}

/// How the input was cut.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Blocks {
    /// Number of blocks L hashed with the one seed, in file order.
    pub count: u64,
    /// Bits of the input considered (`--input-bits`, or the whole file).
    pub input_bits_total: u64,
    /// Bits after the last block, not hashed.
    pub trailing_bits_unused: u64,
    /// The block order the entropy condition refers to.
    pub order: String,
}

/// The raw input.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InputRecord {
    /// Data digest of the first `input_bits_total` bits (private).
    pub digest: String,
    /// File format and bit order it was read with.
    pub format: String,
    /// Bit order inside bytes.
    pub bit_order: String,
}

/// The seed.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SeedRecord {
    /// Random identifier (32 hex digits) when the seed is registered;
    /// `None` for an explicit seed file.
    pub id: Option<String>,
    /// Seed bits used.
    pub bits: u64,
    /// Where it came from.
    pub source: String,
    /// Declared deficiency s in bits.
    pub deficiency: f64,
    /// Data digest of the seed bits used (explicit seed files): a random
    /// seed's digest reveals nothing useful about the output and lets
    /// receipts be compared for a reused seed.
    #[serde(default)]
    pub digest: Option<String>,
    /// The operator declared that they keep their own record of this
    /// seed's uses (explicit seed file with a certificate).
    #[serde(default)]
    pub own_record: bool,
}

/// The certificate.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CertificateRecord {
    /// BLAKE3 of the certificate file's bytes.
    pub file_digest: String,
    /// The setup label (e.g. "not device-independent").
    pub setup: String,
    /// Whether the certificate may be called device-independent.
    pub device_independent: bool,
    /// `entropy-accumulation` or `iid-estimate` (the weaker model).
    #[serde(default)]
    pub mode: Option<String>,
    /// The bound the figure was computed with.
    #[serde(default)]
    pub bound: Option<String>,
    /// `round-file`, or `counts` (unchecked: typed in by the operator).
    #[serde(default)]
    pub record_form: Option<String>,
    /// Every label of the certificate, warnings included.
    #[serde(default)]
    pub labels: Vec<String>,
}

/// Error terms (`spec/hashing-and-composition.md` 5).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Errors {
    /// The formula.
    pub formula: String,
    /// Certification failure term (once).
    pub eps_cert: f64,
    /// eps_seed (once per seed).
    pub eps_seed: f64,
    /// Smoothing per block.
    pub eps_s: f64,
    /// Extractor error per block with a uniform seed.
    pub eps_ext: f64,
    /// Seed deficiency s.
    pub seed_deficiency: f64,
    /// Blocks L.
    pub blocks: u64,
    /// The total.
    pub eps_total: f64,
    /// The total rounded up to four digits, as printed.
    pub eps_total_rounded_up: String,
    /// Target it meets.
    pub target: f64,
    /// Leftover hash lemma form used.
    pub form: String,
}

impl Receipt {
    /// Parses and checks the schema and the sizes.
    pub fn from_json_str(text: &str) -> Result<Receipt, String> {
        let r: Receipt =
            serde_json::from_str(text).map_err(|e| format!("not a sluice receipt: {e}"))?;
        if r.schema != SCHEMA {
            return Err(format!(
                "schema {:?}: this version reads {SCHEMA:?}",
                r.schema
            ));
        }
        r.check_sizes()?;
        Ok(r)
    }

    /// Checks that the sizes agree with each other, before anything is
    /// allocated from them (issue 15 item 9): 1 <= m <= n (every planned
    /// construction outputs at most its input), blocks * n plus the
    /// trailing bits make the input total, the seed and error figures in
    /// range.
    pub fn check_sizes(&self) -> Result<(), String> {
        let c = &self.construction;
        let b = &self.blocks;
        let (n, m) = (c.input_bits, c.output_bits);
        if n == 0 || m == 0 || m > n {
            return Err(format!(
                "construction.output_bits = {m}, input_bits = {n}: a planned run has 1 <= output_bits <= input_bits"
            ));
        }
        let used = b.count.checked_mul(n);
        let total = used.and_then(|u| u.checked_add(b.trailing_bits_unused));
        if b.count == 0 || total != Some(b.input_bits_total) || b.trailing_bits_unused >= n {
            return Err(format!(
                "blocks: {} block(s) of {n} bits and {} trailing bits do not make input_bits_total = {}",
                b.count, b.trailing_bits_unused, b.input_bits_total
            ));
        }
        if self.errors.blocks != b.count {
            return Err(format!(
                "errors.blocks = {} but blocks.count = {}",
                self.errors.blocks, b.count
            ));
        }
        if c.seed_bits == 0 || self.seed.bits != c.seed_bits {
            return Err(format!(
                "seed.bits = {}, construction.seed_bits = {}: they must agree and be positive",
                self.seed.bits, c.seed_bits
            ));
        }
        let digest_ok = |d: &str| {
            d.len() == 64
                && d.bytes()
                    .all(|x| x.is_ascii_digit() || (b'a'..=b'f').contains(&x))
        };
        if !digest_ok(&self.input.digest) {
            return Err(format!(
                "input.digest {:?}: expected 64 lower-case hex digits",
                self.input.digest
            ));
        }
        if let Some(d) = &self.output_digest {
            if !digest_ok(d) {
                return Err(format!(
                    "output_digest {d:?}: expected 64 lower-case hex digits"
                ));
            }
        }
        Ok(())
    }
}
