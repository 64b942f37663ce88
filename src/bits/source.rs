//! Random access to a long bit string that need not be in memory: the
//! input and the seed of a whole-run hash are read piece by piece through
//! [`BitSource`] (from memory with [`WordsSource`], from a packed file with
//! [`super::io::PackedFileSource`]).

use super::{copy_bits, words_for};

/// A bit string read by ranges.
pub trait BitSource: Send {
    /// Length in bits.
    fn bits(&self) -> u64;

    /// Reads the 64-bit words `first .. first + out.len()` of the string
    /// (bit `64 * first + i` at bit `i mod 64` of `out[i / 64]`); bits at or
    /// beyond [`bits`](Self::bits) read as zero.
    fn read_words(&mut self, first: u64, out: &mut [u64]) -> std::io::Result<()>;
}

/// A string already in memory.
pub struct WordsSource<'a> {
    words: &'a [u64],
    bits: u64,
}

impl<'a> WordsSource<'a> {
    /// The first `bits` bits of `words` (the bits beyond must be zero).
    ///
    /// # Panics
    /// If `words` is too short.
    pub fn new(words: &'a [u64], bits: u64) -> Self {
        assert!(words.len() as u64 >= (bits).div_ceil(64), "too few words");
        WordsSource { words, bits }
    }
}

impl BitSource for WordsSource<'_> {
    fn bits(&self) -> u64 {
        self.bits
    }

    fn read_words(&mut self, first: u64, out: &mut [u64]) -> std::io::Result<()> {
        out.fill(0);
        let have = self.bits.div_ceil(64);
        if first < have {
            let f = first as usize;
            let k = out.len().min((have - first) as usize);
            out[..k].copy_from_slice(&self.words[f..f + k]);
        }
        Ok(())
    }
}

/// Words [`read_virtual`] reads at once through its `tmp` buffer when the
/// read is not word-aligned (the buffer holds at most one more).
pub const READ_PIECE_WORDS: usize = 1 << 15;

/// Reads bits `start .. start + len` of a *virtual* string into `out`
/// (`words_for(len)` words, bits beyond `len` cleared): the source's bit
/// `j` sits at virtual position `j + shift`, and every virtual position
/// outside `[shift, shift + src.bits())` reads as zero. `start` may be
/// negative. `tmp` is reused between calls.
pub fn read_virtual(
    src: &mut dyn BitSource,
    shift: i64,
    start: i64,
    len: usize,
    out: &mut [u64],
    tmp: &mut Vec<u64>,
) -> std::io::Result<()> {
    assert!(out.len() >= words_for(len), "output too short");
    out.fill(0);
    let lo = start.max(shift);
    let hi = (start + len as i64).min(shift + src.bits() as i64);
    if lo >= hi {
        return Ok(());
    }
    // Source bits [a, a + k) go to out bits [d, d + k).
    let a = (lo - shift) as u64;
    let k = (hi - lo) as usize;
    let d = (lo - start) as usize;
    if a.is_multiple_of(64) && d.is_multiple_of(64) {
        // Aligned: straight into place (the source zeroes bits past its
        // end; a partial last word is masked here).
        let ow = &mut out[d / 64..d / 64 + words_for(k)];
        src.read_words(a / 64, ow)?;
        if !k.is_multiple_of(64) {
            *ow.last_mut().expect("k > 0") &= (1u64 << (k % 64)) - 1;
        }
        return Ok(());
    }
    // Unaligned: through `tmp`, at most PIECE words at a time.
    const PIECE: usize = READ_PIECE_WORDS;
    let mut done = 0usize;
    while done < k {
        let take = (k - done).min(64 * (PIECE - 1));
        let sa = a + done as u64;
        let off = (sa % 64) as usize;
        tmp.clear();
        tmp.resize(words_for(off + take), 0);
        src.read_words(sa / 64, tmp)?;
        copy_bits(tmp, off, out, d + done, take);
        done += take;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::bits::Bits;
    use proptest::prelude::*;

    proptest! {
        // The slow twin: bit by bit from a Bits value.
        #[test]
        fn virtual_reads_match_bit_by_bit(
            bits in proptest::collection::vec(any::<bool>(), 0..600),
            shift in -300i64..300,
            start in -400i64..700,
            len in 0usize..500,
        ) {
            let b = Bits::from_bools(&bits);
            let mut src = WordsSource::new(b.words(), b.len() as u64);
            let mut out = vec![u64::MAX; words_for(len).max(1)];
            let mut tmp = Vec::new();
            read_virtual(&mut src, shift, start, len, &mut out, &mut tmp).unwrap();
            for i in 0..len {
                let v = start + i as i64 - shift;
                let want = v >= 0 && (v as usize) < bits.len() && bits[v as usize];
                prop_assert_eq!((out[i / 64] >> (i % 64)) & 1 == 1, want, "bit {}", i);
            }
            for i in len..64 * out.len() {
                prop_assert_eq!((out[i / 64] >> (i % 64)) & 1, 0, "bit {} beyond len", i);
            }
        }
    }
}
