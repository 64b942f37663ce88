//! The field polynomial P_l (`spec/conventions.md`, "Finite fields
//! GF(2^l)") and the carry-less product of word vectors.

use super::*;

/// The field polynomial P_l (see the module docs).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct FieldPoly {
    pub(super) degree: usize,
    pub(super) middle: [usize; 3],
    pub(super) count: usize,
}

impl FieldPoly {
    /// P_l from the table, or `None` outside 1 ..= [`MAX_FIELD_BITS`].
    pub fn for_degree(l: usize) -> Option<FieldPoly> {
        if l == 0 || l > MAX_FIELD_BITS {
            return None;
        }
        let row = table::MIDDLE_EXPONENTS[l];
        let middle = [row[0] as usize, row[1] as usize, row[2] as usize];
        let count = if l == 1 {
            0
        } else if middle[1] == 0 {
            1
        } else {
            3
        };
        Some(FieldPoly {
            degree: l,
            middle,
            count,
        })
    }

    /// The degree l.
    pub fn degree(&self) -> usize {
        self.degree
    }

    /// The exponents strictly between l and 0, highest first (one for a
    /// trinomial, three for a pentanomial, none for P_1 = z + 1).
    pub fn middle_exponents(&self) -> &[usize] {
        &self.middle[..self.count]
    }

    /// Every exponent with a non-zero coefficient, highest first.
    pub fn exponents(&self) -> Vec<usize> {
        let mut e = vec![self.degree];
        e.extend_from_slice(self.middle_exponents());
        e.push(0);
        e
    }
}

impl fmt::Display for FieldPoly {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for e in self.exponents() {
            match e {
                0 => write!(f, "1")?,
                1 => write!(f, "z + ")?,
                e => write!(f, "z^{e} + ")?,
            }
        }
        Ok(())
    }
}

/// Carry-less product `out = a * b` of word vectors (coefficient i at bit
/// i % 64 of word i / 64), schoolbook over 64 x 64 products of `backend`.
///
/// This is the one word-level multiply of the field code, kept behind this
/// function so that a faster multi-word product can replace it.
///
/// # Panics
/// If `out.len() != a.len() + b.len()`, or the backend is not supported.
pub fn clmul_words(backend: Backend, a: &[u64], b: &[u64], out: &mut [u64]) {
    assert_eq!(
        out.len(),
        a.len() + b.len(),
        "clmul_words: output needs {} words, got {}",
        a.len() + b.len(),
        out.len()
    );
    out.fill(0);
    // No skipping of zero words: the time must not depend on the operands.
    for (i, &x) in a.iter().enumerate() {
        for (j, &y) in b.iter().enumerate() {
            let (lo, hi) = backend.clmul64(x, y);
            out[i + j] ^= lo;
            out[i + j + 1] ^= hi;
        }
    }
}
