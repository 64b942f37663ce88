//! One-bit extractors PH and IP (`spec/trevisan.md` section 3).
//!
//! - PH (3.1): the input is cut into nb = ceil(n/l) blocks of l bits, the last
//!   one padded with zeros; block k is the element B_k of GF(2^l) with
//!   coefficient j equal to x_{kl+j}. The seed u of t = 2l bits gives
//!   alpha = (u_0 .. u_{l-1}) as a field element and beta = (u_l .. u_{2l-1})
//!   as a bit vector; the output is <beta, p_x(alpha)> with
//!   p_x(alpha) = sum of B_k alpha^k. Reed-Solomon then Hadamard, the one-bit
//!   extractor of [Tre01].
//! - IP (3.2): t = n and C(x, u) = XOR of x_j AND u_j (two-universal, common
//!   practice).
//!
//! Bit order: [`Bits`] already stores x_i at weight 2^(i mod 64) of word
//! i/64, so a block is a plain bit-range copy. The in-byte bit reversal of
//! the packing remark of 3.1 (bytes 30 a5 give B_0 = 0xa50c) is done once,
//! when packed bytes are read into [`Bits`] (MSB-first).

use crate::bits::{copy_bits, Bits};
use crate::gf2::field::Field;

/// Which one-bit extractor.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum OneBit {
    /// Polynomial hashing: Reed-Solomon over GF(2^l), then Hadamard (3.1).
    Ph,
    /// Inner product (3.2).
    Ip,
}

impl OneBit {
    /// Lower-case name (`ph`, `ip`), as in the vector files.
    pub fn name(self) -> &'static str {
        match self {
            OneBit::Ph => "ph",
            OneBit::Ip => "ip",
        }
    }
}

/// Writes the nb = ceil(n/l) blocks B_0 .. B_{nb-1} of `input` into `out`,
/// `w = ceil(l/64)` words each, the last block padded with zeros (3.1 step 1).
///
/// # Panics
/// If `out.len() != nb * w`.
pub fn parse_blocks(input: &Bits, l: usize, out: &mut [u64]) {
    let n = input.len();
    let nb = n.div_ceil(l);
    let w = l.div_ceil(64);
    crate::extract::check_len("PH block buffer (words)", nb * w, out.len());
    out.fill(0);
    for k in 0..nb {
        let start = k * l;
        let len = l.min(n - start);
        copy_bits(input.words(), start, &mut out[k * w..(k + 1) * w], 0, len);
    }
}

/// PH output for one seed (3.1 steps 3 and 4), Horner from the highest
/// block: v := B_{nb-1}; v := v alpha + B_k for k = nb-2 .. 0; then the
/// parity of beta AND v. `blocks` holds nb elements of `field.words()` words.
pub fn ph_bit(field: &Field, blocks: &[u64], alpha: &[u64], beta: &[u64]) -> bool {
    let w = field.words();
    let nb = blocks.len() / w;
    let mut v = vec![0u64; w];
    let mut t = vec![0u64; w];
    if nb > 0 {
        v.copy_from_slice(&blocks[(nb - 1) * w..nb * w]);
    }
    for k in (0..nb.saturating_sub(1)).rev() {
        field.mul(&v, alpha, &mut t);
        for (x, (y, b)) in v.iter_mut().zip(t.iter().zip(&blocks[k * w..(k + 1) * w])) {
            *x = y ^ b;
        }
    }
    parity_and(&v, beta)
}

/// IP output (3.2): parity of x AND u (equal lengths).
pub fn ip_bit(x: &Bits, u: &Bits) -> bool {
    crate::extract::check_len("IP one-bit seed", x.len(), u.len());
    parity_and(x.words(), u.words())
}

/// Parity of the bitwise AND of two word vectors.
#[inline]
pub fn parity_and(a: &[u64], b: &[u64]) -> bool {
    let mut acc = 0u64;
    for (x, y) in a.iter().zip(b) {
        acc ^= x & y;
    }
    acc.count_ones() & 1 == 1
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::bits::BitOrder;

    #[test]
    fn blocks_of_packed_input_follow_the_packing_remark() {
        // spec/trevisan.md 3.1 packing remark and section 9: x starts with
        // bytes 30 a5 21 6d ...; with l = 16, B_0 = 0xa50c.
        let x = Bits::from_hex("30a5216d5d81739d02bc36e729cad3e9", None, BitOrder::Msb).unwrap();
        let mut b = vec![0u64; 8];
        parse_blocks(&x, 16, &mut b);
        assert_eq!(b[0], 0xa50c);
        // the next bytes 21 6d reverse to 84 b6: B_1 = 0xb684 (section 9).
        assert_eq!(b[1], 0xb684);
    }

    #[test]
    fn last_block_is_zero_padded() {
        // n = 10, l = 4: blocks x0..x3, x4..x7, x8 x9 0 0 (3.1 step 1).
        let x = Bits::from_ascii("1011001111").unwrap();
        let mut b = vec![0u64; 3];
        parse_blocks(&x, 4, &mut b);
        assert_eq!(b, vec![0b1101, 0b1100, 0b11]);
    }

    #[test]
    fn ph_on_a_hand_example() {
        // GF(2^2) with P_2 = z^2 + z + 1: blocks B_0 = z, B_1 = 1 (x = 01 10),
        // alpha = z: p(alpha) = B_0 + B_1 alpha = z + z = 0 -> output 0 for
        // any beta; alpha = 1: p = z + 1, beta = (1, 0) -> coefficient of z^0
        // of z + 1 is 1 -> output 1. Worked by hand from 3.1.
        let f = Field::new(2).unwrap();
        let x = Bits::from_ascii("0110").unwrap();
        let mut b = vec![0u64; 2];
        parse_blocks(&x, 2, &mut b);
        assert_eq!(b, vec![0b10, 0b01]);
        assert!(!ph_bit(&f, &b, &[0b10], &[0b11]));
        assert!(ph_bit(&f, &b, &[0b01], &[0b01]));
        assert!(!ph_bit(&f, &b, &[0b01], &[0b00]));
    }
}
