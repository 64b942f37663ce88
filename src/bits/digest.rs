//! Data digests of bit strings (`spec/conventions.md`, "Data digests"):
//! BLAKE3 of the bit length as an 8-byte little-endian integer followed by
//! the packed bytes (MSB-first), written as lower-case hex.
//!
//! Digests of raw inputs identify them in the private ledger; a digest of a
//! secret output pins the output down, so it is kept private unless the user
//! asks for it (the guarantee for that output is then only computational).

use super::{BitOrder, Bits};

/// Streaming data digest; the bit length must be known up front.
pub struct DataDigest {
    hasher: blake3::Hasher,
    expected_bytes: u64,
    seen_bytes: u64,
}

impl DataDigest {
    /// Starts a digest of a string of `nbits` bits.
    pub fn new(nbits: u64) -> Self {
        let mut hasher = blake3::Hasher::new();
        hasher.update(&nbits.to_le_bytes());
        DataDigest {
            hasher,
            expected_bytes: nbits.div_ceil(8),
            seen_bytes: 0,
        }
    }

    /// Feeds packed MSB-first bytes (pad bits of the last byte must be zero).
    pub fn update(&mut self, packed: &[u8]) {
        self.seen_bytes += packed.len() as u64;
        self.hasher.update(packed);
    }

    /// The digest as lower-case hex.
    ///
    /// # Panics
    /// If the bytes fed do not match the announced length (a caller bug).
    pub fn finish_hex(self) -> String {
        assert_eq!(
            self.seen_bytes, self.expected_bytes,
            "data digest: fed {} bytes for a length of {} bytes",
            self.seen_bytes, self.expected_bytes
        );
        self.hasher.finalize().to_hex().to_string()
    }
}

/// Data digest of a whole bit string.
pub fn data_digest(bits: &Bits) -> String {
    let mut d = DataDigest::new(bits.len() as u64);
    d.update(&bits.to_packed(BitOrder::Msb));
    d.finish_hex()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn digest_covers_length_then_bytes() {
        // The empty string hashes as its 8-byte zero length (conventions.md).
        let mut h = blake3::Hasher::new();
        h.update(&[0u8; 8]);
        assert_eq!(data_digest(&Bits::new()), h.finalize().to_hex().to_string());
        // 9 bits and 16 bits with the same packed bytes digest differently.
        let a = Bits::from_hex("ff80", Some(9), BitOrder::Msb).unwrap();
        let b = Bits::from_hex("ff80", Some(16), BitOrder::Msb).unwrap();
        assert_ne!(data_digest(&a), data_digest(&b));
        let mut s = DataDigest::new(9);
        s.update(&[0xff]);
        s.update(&[0x80]);
        assert_eq!(s.finish_hex(), data_digest(&a));
    }
}
