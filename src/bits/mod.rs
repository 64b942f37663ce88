//! Bit strings and their file formats.
//!
//! A [`Bits`] value is the bit string `x = (x_0, ..., x_{n-1})` of
//! `spec/conventions.md`. It is stored in `u64` words with bit `i` at weight
//! `2^(i mod 64)` of word `i / 64`, which is also the coefficient order of the
//! polynomial `X(z) = x_0 + x_1 z + ...` that the carry-less kernels multiply.
//! Bits of the last word beyond the length are always zero (an invariant every
//! method keeps), so word-level arithmetic never sees stray bits.
//!
//! Files use one of three formats ([`Format`]): packed bytes (default;
//! MSB-first inside each byte unless [`BitOrder::Lsb`] is asked for), ASCII
//! `'0'`/`'1'` with white space ignored, and hexadecimal digits of the packed
//! bytes. See [`io`] for readers that stream blocks from files.

#![forbid(unsafe_code)]

pub mod digest;
mod error;
pub mod io;
pub mod pseudo;
pub mod source;

pub use error::{Error, ErrorKind};

use std::fmt;

/// Order of the bits inside a packed byte.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum BitOrder {
    /// The first bit of the string is bit 7 (the most significant) of byte 0:
    /// the default, and the order of the NIST SP 800-22 reference material.
    #[default]
    Msb,
    /// The first bit of the string is bit 0 of byte 0 (only on request).
    Lsb,
}

/// A file format for bit strings.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum Format {
    /// Packed bytes, eight bits per byte.
    #[default]
    Packed,
    /// One character `'0'` or `'1'` per bit; white space is ignored.
    Ascii,
    /// Two hexadecimal digits per packed byte; white space is ignored.
    Hex,
}

/// A bit string stored in little-endian `u64` words (see the module docs).
#[derive(Clone, PartialEq, Eq, Default, Hash)]
pub struct Bits {
    words: Vec<u64>,
    len: usize,
}

/// Number of `u64` words needed for `bits` bits.
#[inline]
pub const fn words_for(bits: usize) -> usize {
    bits.div_ceil(64)
}

/// Mask of the valid bits in the last word of a `len`-bit string.
#[inline]
const fn tail_mask(len: usize) -> u64 {
    match len % 64 {
        0 => u64::MAX,
        r => (1u64 << r) - 1,
    }
}

impl Bits {
    /// The all-zero string of `len` bits.
    pub fn zeros(len: usize) -> Self {
        Bits {
            words: vec![0; words_for(len)],
            len,
        }
    }

    /// The empty string.
    pub fn new() -> Self {
        Bits::default()
    }

    /// Builds a string from words; bits beyond `len` are cleared.
    ///
    /// # Panics
    /// If `words` holds fewer than `len` bits.
    pub fn from_words(mut words: Vec<u64>, len: usize) -> Self {
        let need = words_for(len);
        if words.len() < need {
            length_panic("Bits::from_words", need, words.len());
        }
        words.truncate(need);
        let mut b = Bits { words, len };
        b.clear_tail();
        b
    }

    /// Builds a string from booleans (`bools[i]` is bit i).
    pub fn from_bools(bools: &[bool]) -> Self {
        let mut b = Bits::zeros(bools.len());
        for (i, &v) in bools.iter().enumerate() {
            if v {
                b.words[i / 64] |= 1 << (i % 64);
            }
        }
        b
    }

    /// Length in bits.
    #[inline]
    pub fn len(&self) -> usize {
        self.len
    }

    /// Whether the string is empty.
    #[inline]
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// The storage words (bits beyond the length are zero).
    #[inline]
    pub fn words(&self) -> &[u64] {
        &self.words
    }

    /// Mutable storage words. Callers that may set bits beyond the length
    /// must call [`Bits::clear_tail`] afterwards.
    #[inline]
    pub fn words_mut(&mut self) -> &mut [u64] {
        &mut self.words
    }

    /// Clears the bits of the last word beyond the length (restores the
    /// invariant after raw word writes).
    #[inline]
    pub fn clear_tail(&mut self) {
        if let Some(last) = self.words.last_mut() {
            *last &= tail_mask(self.len);
        }
    }

    /// Bit `i`.
    ///
    /// # Panics
    /// If `i >= len`.
    #[inline]
    pub fn get(&self, i: usize) -> bool {
        assert!(
            i < self.len,
            "bit index {i} out of range for {} bits",
            self.len
        );
        (self.words[i / 64] >> (i % 64)) & 1 == 1
    }

    /// Sets bit `i` to `v`.
    ///
    /// # Panics
    /// If `i >= len`.
    #[inline]
    pub fn set(&mut self, i: usize, v: bool) {
        assert!(
            i < self.len,
            "bit index {i} out of range for {} bits",
            self.len
        );
        let w = &mut self.words[i / 64];
        let m = 1u64 << (i % 64);
        if v {
            *w |= m
        } else {
            *w &= !m
        }
    }

    /// Iterates over the bits in string order.
    pub fn iter(&self) -> impl Iterator<Item = bool> + '_ {
        (0..self.len).map(move |i| (self.words[i / 64] >> (i % 64)) & 1 == 1)
    }

    /// Changes the length, dropping bits or appending zeros.
    pub fn resize(&mut self, len: usize) {
        self.words.resize(words_for(len), 0);
        self.len = len;
        self.clear_tail();
    }

    /// Shortens the string to `len` bits (no-op if already shorter).
    pub fn truncate(&mut self, len: usize) {
        if len < self.len {
            self.resize(len);
        }
    }

    /// Appends one bit.
    pub fn push(&mut self, v: bool) {
        if self.len.is_multiple_of(64) {
            self.words.push(0);
        }
        if v {
            self.words[self.len / 64] |= 1 << (self.len % 64);
        }
        self.len += 1;
    }

    /// Appends all bits of `other`.
    pub fn extend_from(&mut self, other: &Bits) {
        let start = self.len;
        self.resize(start + other.len);
        copy_bits(&other.words, 0, &mut self.words, start, other.len);
    }

    /// Bits `start .. start + len` as a new string.
    ///
    /// # Panics
    /// If the range is out of bounds.
    pub fn slice(&self, start: usize, len: usize) -> Bits {
        let mut out = Bits::zeros(len);
        self.copy_range_into(start, &mut out);
        out
    }

    /// Copies bits `start .. start + out.len()` into `out` (no allocation).
    ///
    /// # Panics
    /// If the range is out of bounds.
    pub fn copy_range_into(&self, start: usize, out: &mut Bits) {
        let len = out.len;
        assert!(
            start.checked_add(len).is_some_and(|e| e <= self.len),
            "bit range {start}..{} out of range for {} bits",
            start.saturating_add(len),
            self.len
        );
        out.words.fill(0);
        copy_bits(&self.words, start, &mut out.words, 0, len);
        out.clear_tail();
    }

    /// `self ^= other` on the common length `min(self.len, other.len)`.
    pub fn xor_prefix(&mut self, other: &Bits) {
        let n = self.len.min(other.len);
        let full = n / 64;
        for (a, b) in self.words[..full].iter_mut().zip(&other.words[..full]) {
            *a ^= b;
        }
        if !n.is_multiple_of(64) {
            self.words[full] ^= other.words[full] & tail_mask(n);
        }
    }

    /// Number of one bits.
    pub fn count_ones(&self) -> u64 {
        self.words.iter().map(|w| w.count_ones() as u64).sum()
    }

    /// Index of the first bit where `self` and `other` differ, comparing the
    /// common prefix; if the prefix agrees but the lengths differ, the shorter
    /// length.
    pub fn first_difference(&self, other: &Bits) -> Option<usize> {
        let n = self.len.min(other.len);
        for (i, (a, b)) in self.words.iter().zip(&other.words).enumerate() {
            let d = a ^ b;
            if d != 0 {
                let pos = i * 64 + d.trailing_zeros() as usize;
                return Some(pos.min(n));
            }
        }
        (self.len != other.len).then_some(n)
    }

    /// Number of positions where the common prefixes differ.
    pub fn hamming_distance(&self, other: &Bits) -> u64 {
        let n = self.len.min(other.len);
        let mut d = 0u64;
        for (i, (a, b)) in self.words.iter().zip(&other.words).enumerate() {
            let mut x = a ^ b;
            if (i + 1) * 64 > n {
                x &= tail_mask(n);
            }
            d += x.count_ones() as u64;
        }
        d
    }

    // ---- packed bytes -------------------------------------------------

    /// Reads the first `nbits` bits of packed bytes.
    ///
    /// Fails with [`ErrorKind::TooShort`] if `bytes` holds fewer bits.
    pub fn from_packed(bytes: &[u8], nbits: usize, order: BitOrder) -> Result<Bits, Error> {
        let have = bytes.len() as u64 * 8;
        if (nbits as u64) > have {
            return Err(Error::new(ErrorKind::TooShort {
                wanted: nbits as u64,
                available: have,
            })
            .at_offset(bytes.len() as u64));
        }
        let mut b = Bits::zeros(nbits);
        let nbytes = nbits.div_ceil(8);
        pack_bytes_into_words(&bytes[..nbytes], order, &mut b.words);
        b.clear_tail();
        Ok(b)
    }

    /// Reads all bits of packed bytes (`8 * bytes.len()` bits).
    pub fn from_packed_all(bytes: &[u8], order: BitOrder) -> Bits {
        Bits::from_packed(bytes, bytes.len() * 8, order).expect("length is exact")
    }

    /// Packed bytes; pad bits of the last byte are zero.
    pub fn to_packed(&self, order: BitOrder) -> Vec<u8> {
        let mut out = vec![0u8; self.len.div_ceil(8)];
        words_into_packed_bytes(&self.words, order, &mut out);
        out
    }

    // ---- ASCII ----------------------------------------------------------

    /// Parses `'0'`/`'1'` characters, ignoring ASCII white space.
    pub fn from_ascii(text: &str) -> Result<Bits, Error> {
        let mut b = Bits::new();
        for (off, c) in text.bytes().enumerate() {
            match c {
                b'0' => b.push(false),
                b'1' => b.push(true),
                c if c.is_ascii_whitespace() => {}
                c => {
                    return Err(Error::new(ErrorKind::BadChar {
                        found: c,
                        expected: "'0' or '1'",
                    })
                    .at_offset(off as u64))
                }
            }
        }
        Ok(b)
    }

    /// The string as `'0'`/`'1'` characters, bit 0 first.
    pub fn to_ascii(&self) -> String {
        self.iter().map(|v| if v { '1' } else { '0' }).collect()
    }

    // ---- hex --------------------------------------------------------------

    /// Parses hexadecimal digits of packed bytes (white space ignored) and
    /// keeps the first `nbits` bits, or all of them when `nbits` is `None`.
    pub fn from_hex(text: &str, nbits: Option<usize>, order: BitOrder) -> Result<Bits, Error> {
        let mut bytes = Vec::with_capacity(text.len() / 2);
        let mut pending: Option<(u8, usize)> = None;
        for (off, c) in text.bytes().enumerate() {
            if c.is_ascii_whitespace() {
                continue;
            }
            let v = hex_value(c).ok_or_else(|| {
                Error::new(ErrorKind::BadChar {
                    found: c,
                    expected: "a hexadecimal digit",
                })
                .at_offset(off as u64)
            })?;
            pending = match pending {
                None => Some((v, off)),
                Some((hi, _)) => {
                    bytes.push(hi << 4 | v);
                    None
                }
            };
        }
        if let Some((_, off)) = pending {
            return Err(Error::new(ErrorKind::OddHexDigits).at_offset(off as u64));
        }
        let n = nbits.unwrap_or(bytes.len() * 8);
        Bits::from_packed(&bytes, n, order)
    }

    /// Lower-case hex of the packed bytes.
    pub fn to_hex(&self, order: BitOrder) -> String {
        hex::encode(self.to_packed(order))
    }
}

impl fmt::Debug for Bits {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        // Short strings in full; long ones by length only. Bits may be secret,
        // so `Debug` never prints more than 64 of them.
        if self.len <= 64 {
            write!(f, "Bits({})", self.to_ascii())
        } else {
            write!(f, "Bits(<{} bits>)", self.len)
        }
    }
}

/// Panics with expected and actual lengths when they differ (caller bug).
#[inline]
pub fn check_len(what: &str, expected: usize, actual: usize) {
    if expected != actual {
        length_mismatch(what, expected, actual)
    }
}

#[cold]
#[inline(never)]
fn length_mismatch(what: &str, expected: usize, actual: usize) -> ! {
    panic!("{what}: expected {expected} bits, got {actual}")
}

#[inline]
pub(crate) fn hex_value(c: u8) -> Option<u8> {
    match c {
        b'0'..=b'9' => Some(c - b'0'),
        b'a'..=b'f' => Some(c - b'a' + 10),
        b'A'..=b'F' => Some(c - b'A' + 10),
        _ => None,
    }
}

/// Converts packed bytes to little-endian words (bit i of the string at bit
/// i mod 64 of word i/64). `words` must hold `bytes.len()` bytes; the words
/// touched are overwritten.
pub(crate) fn pack_bytes_into_words(bytes: &[u8], order: BitOrder, words: &mut [u64]) {
    let mut chunks = bytes.chunks_exact(8);
    let mut wi = 0;
    for c in &mut chunks {
        let arr: [u8; 8] = c.try_into().expect("chunk of 8");
        words[wi] = match order {
            // Big-endian load puts bit 7 of byte 0 at bit 63; reversing all 64
            // bits puts it at bit 0 and keeps bytes in ascending order.
            BitOrder::Msb => u64::from_be_bytes(arr).reverse_bits(),
            BitOrder::Lsb => u64::from_le_bytes(arr),
        };
        wi += 1;
    }
    let rest = chunks.remainder();
    if !rest.is_empty() {
        let mut w = 0u64;
        for (j, &b) in rest.iter().enumerate() {
            let b = match order {
                BitOrder::Msb => b.reverse_bits(),
                BitOrder::Lsb => b,
            };
            w |= (b as u64) << (8 * j);
        }
        words[wi] = w;
    }
}

/// Inverse of [`pack_bytes_into_words`]: fills `out` (whole bytes).
pub(crate) fn words_into_packed_bytes(words: &[u64], order: BitOrder, out: &mut [u8]) {
    let mut chunks = out.chunks_exact_mut(8);
    let mut wi = 0;
    for c in &mut chunks {
        let w = words[wi];
        let bytes = match order {
            BitOrder::Msb => w.reverse_bits().to_be_bytes(),
            BitOrder::Lsb => w.to_le_bytes(),
        };
        c.copy_from_slice(&bytes);
        wi += 1;
    }
    let rest = chunks.into_remainder();
    if !rest.is_empty() {
        let w = words[wi];
        for (j, b) in rest.iter_mut().enumerate() {
            let v = (w >> (8 * j)) as u8;
            *b = match order {
                BitOrder::Msb => v.reverse_bits(),
                BitOrder::Lsb => v,
            };
        }
    }
}

/// Copies `len` bits from `src` starting at bit `s` into `dst` starting at bit
/// `d` (XOR-free copy: destination bits in the range are overwritten, others
/// kept).
pub(crate) fn copy_bits(src: &[u64], s: usize, dst: &mut [u64], d: usize, len: usize) {
    let mut done = 0;
    while done < len {
        let sp = s + done;
        let dp = d + done;
        let sw = sp / 64;
        let so = sp % 64;
        let dw = dp / 64;
        let doff = dp % 64;
        // take as many bits as fit in the rest of the destination word
        let take = (64 - doff).min(len - done);
        let mut v = src[sw] >> so;
        if so != 0 && so + take > 64 {
            v |= src[sw + 1] << (64 - so);
        }
        let mask = if take == 64 {
            u64::MAX
        } else {
            (1u64 << take) - 1
        };
        dst[dw] = (dst[dw] & !(mask << doff)) | ((v & mask) << doff);
        done += take;
    }
}

#[cold]
#[inline(never)]
fn length_panic(what: &str, expected: usize, actual: usize) -> ! {
    panic!("{what}: expected at least {expected} words, got {actual}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn packed_msb_first_matches_conventions() {
        // conventions.md: x_0 is bit 7 of byte 0. Spec hashing 3.4 lists
        // 0111101101101111 as hex 7b6f.
        let b = Bits::from_hex("7b6f", None, BitOrder::Msb).unwrap();
        assert_eq!(b.to_ascii(), "0111101101101111");
        let l = Bits::from_hex("de", None, BitOrder::Lsb).unwrap();
        // 0xde = 1101_1110, LSB first: 0,1,1,1,1,0,1,1
        assert_eq!(l.to_ascii(), "01111011");
    }

    #[test]
    fn roundtrips_at_word_edges() {
        for n in [0usize, 1, 7, 8, 9, 63, 64, 65, 127, 128, 129, 200] {
            let bools: Vec<bool> = (0..n).map(|i| (i * 7 + 3) % 5 < 2).collect();
            let b = Bits::from_bools(&bools);
            for order in [BitOrder::Msb, BitOrder::Lsb] {
                let p = b.to_packed(order);
                assert_eq!(Bits::from_packed(&p, n, order).unwrap(), b, "n={n}");
                let h = b.to_hex(order);
                assert_eq!(Bits::from_hex(&h, Some(n), order).unwrap(), b);
            }
            assert_eq!(Bits::from_ascii(&b.to_ascii()).unwrap(), b);
        }
    }

    #[test]
    fn errors_name_offsets() {
        let e = Bits::from_ascii("01 1\n0x1").unwrap_err();
        assert_eq!(e.offset(), Some(6));
        let e = Bits::from_hex("ab c", None, BitOrder::Msb).unwrap_err();
        assert!(matches!(e.kind(), ErrorKind::OddHexDigits));
        assert_eq!(e.offset(), Some(3));
        let e = Bits::from_packed(&[1, 2], 17, BitOrder::Msb).unwrap_err();
        assert!(matches!(e.kind(), ErrorKind::TooShort { .. }));
    }

    #[test]
    fn slices_and_differences() {
        let b = Bits::from_ascii(&"0110".repeat(50)).unwrap();
        for start in [0, 1, 63, 64, 65, 130] {
            for len in [0, 1, 5, 64, 65] {
                let s = b.slice(start, len);
                let expect: String = b.to_ascii()[start..start + len].to_string();
                assert_eq!(s.to_ascii(), expect);
            }
        }
        let mut c = b.clone();
        c.set(77, !c.get(77));
        c.set(150, !c.get(150));
        assert_eq!(b.first_difference(&c), Some(77));
        assert_eq!(b.hamming_distance(&c), 2);
        assert_eq!(b.first_difference(&b), None);
        let mut e = Bits::from_ascii("1011").unwrap();
        e.extend_from(&Bits::from_ascii(&"1".repeat(70)).unwrap());
        assert_eq!(e.len(), 74);
        assert_eq!(e.count_ones(), 73);
    }
}
