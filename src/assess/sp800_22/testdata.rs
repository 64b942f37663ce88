//! Short inputs of statistics.md (for unit tests only).

/// First 100 bits of π (statistics.md, named inputs, PI100).
pub const PI100: &str = "1100100100001111110110101010001000100001011010001100001000110100110001001100011001100010100010111000";

/// The 128-bit longest-run example (statistics.md, named inputs, LR128).
pub const LR128: &str = "11001100000101010110110001001100111000000000001001001101010100010001001111010110100000001101011111001100111001101101100010110010";

/// Bit values of an ASCII '0'/'1' string.
pub fn bits(s: &str) -> Vec<u8> {
    s.bytes().map(|c| c - b'0').collect()
}
