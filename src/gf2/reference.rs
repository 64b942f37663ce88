//! Slow, obviously correct oracles for the fast products (tests and the
//! vector generator use them; nothing on a hot path does).

/// Carry-less product of two words, bit by bit from the definition.
pub fn clmul_bitwise(a: u64, b: u64) -> u128 {
    let mut r = 0u128;
    for i in 0..64 {
        if (b >> i) & 1 == 1 {
            r ^= (a as u128) << i;
        }
    }
    r
}

/// Full product of word-packed polynomials, coefficient by coefficient:
/// `c_k = XOR_{i + j = k} a_i b_j` over single bits.
pub fn mul_bitwise(a: &[u64], b: &[u64]) -> Vec<u64> {
    let mut c = vec![0u64; a.len() + b.len()];
    for i in 0..a.len() * 64 {
        if (a[i / 64] >> (i % 64)) & 1 == 0 {
            continue;
        }
        for j in 0..b.len() * 64 {
            if (b[j / 64] >> (j % 64)) & 1 == 1 {
                c[(i + j) / 64] ^= 1 << ((i + j) % 64);
            }
        }
    }
    c
}
