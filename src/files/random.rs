//! The operating system's random source: seeds, identifiers and the random
//! part of temporary names all come from here.

use std::io;

/// Fills `buf` from the operating system's random source.
pub fn fill(buf: &mut [u8]) -> io::Result<()> {
    use rand_core::{OsRng, RngCore};
    OsRng
        .try_fill_bytes(buf)
        .map_err(|e| io::Error::other(format!("operating-system random source failed: {e}")))
}

/// A fresh random identifier: 128 bits from the operating system, 32
/// lower-case hex digits (`spec/conventions.md`, seed identifiers). Never
/// derived from any data.
pub fn random_id() -> io::Result<String> {
    let mut b = [0u8; 16];
    fill(&mut b)?;
    Ok(hex::encode(b))
}

#[cfg(test)]
mod tests {
    #[test]
    fn ids_are_32_hex_digits_and_differ() {
        let a = super::random_id().unwrap();
        let b = super::random_id().unwrap();
        assert_eq!(a.len(), 32);
        assert!(a
            .bytes()
            .all(|c| c.is_ascii_hexdigit() && !c.is_ascii_uppercase()));
        assert_ne!(a, b);
    }
}
