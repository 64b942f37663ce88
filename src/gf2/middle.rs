//! The Toeplitz window of a carry-less product, by word-level middle products.
//!
//! For a seed polynomial `S` of `n + m - 1` bits and an input `X` of `n` bits,
//! Toeplitz hashing outputs the coefficients `n - 1 .. n + m - 2` of `S * X`
//! (`spec/conventions.md`). [`ToeplitzWindow`] computes exactly that window and
//! nothing else:
//!
//! 1. The seed is shifted left by `p` bits (`S' = S z^p`, done once per seed in
//!    [`ToeplitzWindow::prepare`]) so that the window starts on a word boundary,
//!    at word `K0 = (n - 1 + p) / 64`.
//! 2. Output word k is `lo(D[K0 + k]) ^ hi(D[K0 + k - 1])`, where
//!    `D[d] = XOR_j clmul(S'[d - j], X[j])` is the 128-bit sum on word diagonal
//!    d. The diagonals `K0 .. K0 + ceil(m/64)` form a word-level Toeplitz
//!    matrix-vector product, cut into square tiles, each one middle product of
//!    [`MiddleKernel`] (Karatsuba, then a register-accumulating base case).
//!    Diagonal `K0 - 1` is needed only for its high half and is summed
//!    directly.
//!
//! Nothing here allocates after planning: the prepared seed is built once and
//! the caller passes scratch of [`ToeplitzWindow::scratch_len`] words.

use super::clmul::Backend;
use super::karatsuba::{supports_base, MiddleKernel};
use crate::bits::words_for;

/// A plan for the window `[n-1, n+m-1)` of `S * X`, for fixed n, m, backend.
#[derive(Clone, Debug)]
pub struct ToeplitzWindow {
    n: usize,
    m: usize,
    /// Left shift of the seed that aligns the window start.
    p: usize,
    /// Word index of the first output word in `S' * X`.
    k0: usize,
    /// Input words.
    b: usize,
    /// Output words.
    mw: usize,
    tile: usize,
    rows_pad: usize,
    cols_pad: usize,
    kernel: MiddleKernel,
}

/// A seed laid out for one [`ToeplitzWindow`] (see
/// [`ToeplitzWindow::prepare`]).
#[derive(Clone, Default)]
pub struct PreparedSeed {
    /// The zero-padded diagonal sequence the tiles read.
    a: Vec<u64>,
    /// `S' = S z^p`, for the extra diagonal.
    shifted: Vec<u64>,
}

impl ToeplitzWindow {
    /// Plans the window for an `n`-bit input and `m` output bits.
    ///
    /// # Panics
    /// If `n == 0`, `m == 0` or the backend is not supported.
    pub fn new(n: usize, m: usize, backend: Backend) -> Self {
        let max_base = match backend {
            // Measured: base 32 for AVX-512; for AVX2 (Zen 3) base 16 was
            // ~6% faster than 32 at n = 2^18 and equal at 2^16 and 2^20,
            // before its base case did one Karatsuba level in registers
            // (another 8-12%).
            Backend::Vpclmul => 32,
            _ => 16,
        };
        Self::with_max_base(n, m, backend, max_base)
    }

    /// As [`new`](Self::new), with the largest base-case size given (for
    /// tuning and tests).
    pub fn with_max_base(n: usize, m: usize, backend: Backend, max_base: usize) -> Self {
        assert!(n >= 1 && m >= 1, "toeplitz window needs n >= 1 and m >= 1");
        let p = (64 - (n - 1) % 64) % 64;
        let k0 = (n - 1 + p) / 64;
        let b = words_for(n);
        let mw = words_for(m);
        let (tile, base) = choose_tile(mw, b, backend, max_base);
        let rows_pad = mw.div_ceil(tile) * tile;
        let cols_pad = b.div_ceil(tile) * tile;
        ToeplitzWindow {
            n,
            m,
            p,
            k0,
            b,
            mw,
            tile,
            rows_pad,
            cols_pad,
            kernel: MiddleKernel::new(backend, base),
        }
    }

    /// Input bits n.
    pub fn input_bits(&self) -> usize {
        self.n
    }

    /// Output bits m.
    pub fn output_bits(&self) -> usize {
        self.m
    }

    /// Seed bits `n + m - 1`.
    pub fn seed_bits(&self) -> usize {
        self.n + self.m - 1
    }

    /// The backend.
    pub fn backend(&self) -> Backend {
        self.kernel.backend()
    }

    /// Tile size and base-case size in words (for benches and diagnostics).
    pub fn tiling(&self) -> (usize, usize) {
        (self.tile, self.kernel.base())
    }

    /// Scratch words [`compute`](Self::compute) needs.
    pub fn scratch_len(&self) -> usize {
        self.cols_pad + 2 * self.rows_pad + self.kernel.scratch_len(self.tile)
    }

    /// Lays out a seed (`n + m - 1` bits in words, bits beyond zero) for this
    /// plan. Done once per seed.
    ///
    /// # Panics
    /// If `seed` has fewer words than `n + m - 1` bits need.
    pub fn prepare(&self, seed: &[u64]) -> PreparedSeed {
        let mut p = PreparedSeed {
            a: Vec::new(),
            shifted: Vec::new(),
        };
        self.prepare_into(seed, &mut p);
        p
    }

    /// As [`prepare`](Self::prepare), reusing the buffers of `into` (no
    /// allocation once they have the plan's sizes).
    pub fn prepare_into(&self, seed: &[u64], into: &mut PreparedSeed) {
        let seed_bits = self.seed_bits();
        assert!(
            seed.len() >= words_for(seed_bits),
            "seed: want {} words",
            words_for(seed_bits)
        );
        let sw = words_for(seed_bits + self.p);
        let shifted = &mut into.shifted;
        shifted.clear();
        shifted.resize(sw, 0);
        for (i, &w) in seed[..words_for(seed_bits)].iter().enumerate() {
            let w = if i == words_for(seed_bits) - 1 {
                w & tail_mask(seed_bits)
            } else {
                w
            };
            if self.p == 0 {
                shifted[i] = w;
            } else {
                shifted[i] |= w << self.p;
                if i + 1 < sw {
                    shifted[i + 1] |= w >> (64 - self.p);
                }
            }
        }
        // a[t] = S'[t + shift] with shift = (K0 + 1 - B) - (cols_pad - B).
        let shift = (self.k0 + 1) as isize - self.cols_pad as isize;
        let alen = self.rows_pad + self.cols_pad - 1;
        into.a.clear();
        into.a.extend((0..alen).map(|t| {
            let idx = t as isize + shift;
            if idx >= 0 && (idx as usize) < sw {
                shifted[idx as usize]
            } else {
                0
            }
        }));
    }

    /// Computes the window for input words `x` (n bits, bits beyond zero)
    /// into `out` (`ceil(m/64)` words; bits beyond m are cleared).
    ///
    /// # Panics
    /// On wrong lengths or too little scratch.
    pub fn compute(&self, seed: &PreparedSeed, x: &[u64], out: &mut [u64], scratch: &mut [u64]) {
        assert!(
            x.len() == self.b,
            "input: want {} words, got {}",
            self.b,
            x.len()
        );
        assert!(
            out.len() == self.mw,
            "output: want {} words, got {}",
            self.mw,
            out.len()
        );
        assert!(scratch.len() >= self.scratch_len(), "scratch too small");
        let n_tile = self.tile;
        let (xp, rest) = scratch.split_at_mut(self.cols_pad);
        let (op, ks) = rest.split_at_mut(2 * self.rows_pad);
        xp[..self.b].copy_from_slice(x);
        xp[self.b..].fill(0);
        op.fill(0);
        for i in 0..self.rows_pad / n_tile {
            for j in 0..self.cols_pad / n_tile {
                let start = i * n_tile + self.cols_pad - j * n_tile - n_tile;
                let a = &seed.a[start..start + 2 * n_tile - 1];
                let xs = &xp[j * n_tile..(j + 1) * n_tile];
                let o = &mut op[2 * i * n_tile..2 * (i + 1) * n_tile];
                self.kernel.mp(a, xs, o, ks);
            }
        }
        // High half of diagonal K0 - 1.
        let mut extra = 0u64;
        if self.k0 >= 1 {
            let be = self.kernel.backend();
            for (j, &xj) in x.iter().enumerate().take(self.k0) {
                extra ^= be.clmul64(seed.shifted[self.k0 - 1 - j], xj).1;
            }
        }
        out[0] = op[0] ^ extra;
        for k in 1..self.mw {
            out[k] = op[2 * k] ^ op[2 * k - 1];
        }
        out[self.mw - 1] &= tail_mask(self.m);
    }
}

#[inline]
fn tail_mask(len: usize) -> u64 {
    match len % 64 {
        0 => u64::MAX,
        r => (1u64 << r) - 1,
    }
}

/// Picks the tile size `N = base * 2^k` minimising a cost model for an
/// `rows x cols` word-level Toeplitz product: tiles times `3^k` base products
/// of `base^2` word products, plus a linear term per Karatsuba level.
fn choose_tile(rows: usize, cols: usize, backend: Backend, max_base: usize) -> (usize, usize) {
    let bases: Vec<usize> = (1..=max_base.max(1))
        .filter(|&b| supports_base(backend, b))
        .collect();
    let mut best: Option<(f64, usize, usize)> = None;
    for &base in &bases {
        let mut size = base;
        let mut level = 0u32;
        loop {
            let tiles = rows.div_ceil(size) as f64 * cols.div_ceil(size) as f64;
            let muls = 3f64.powi(level as i32) * (base * base) as f64;
            // Additions: about 10 h words per split at each of the levels.
            let adds = 5.0 * size as f64 * level as f64 * 1.5f64.powi(level as i32);
            let cost = tiles * (muls + adds);
            if best.is_none_or(|(c, _, _)| cost < c) {
                best = Some((cost, size, base));
            }
            if size >= rows.max(cols) {
                break;
            }
            size *= 2;
            level += 1;
        }
    }
    let (_, tile, base) = best.expect("at least one candidate");
    (tile, base)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::gf2::reference;

    fn rand_words(seed: u64, bits: usize) -> Vec<u64> {
        let mut s = seed.wrapping_mul(0x2545_f491_4f6c_dd1d) | 1;
        let mut v: Vec<u64> = (0..words_for(bits))
            .map(|_| {
                s ^= s << 13;
                s ^= s >> 7;
                s ^= s << 17;
                s
            })
            .collect();
        if let Some(l) = v.last_mut() {
            *l &= tail_mask(bits);
        }
        v
    }

    fn window_oracle(s: &[u64], x: &[u64], n: usize, m: usize) -> Vec<u64> {
        let full = reference::mul_bitwise(s, x);
        let mut out = vec![0u64; words_for(m)];
        for i in 0..m {
            let k = n - 1 + i;
            if (full[k / 64] >> (k % 64)) & 1 == 1 {
                out[i / 64] |= 1 << (i % 64);
            }
        }
        out
    }

    #[test]
    fn window_matches_full_product_for_every_backend() {
        let sizes = [
            (1, 1),
            (2, 1),
            (64, 64),
            (65, 1),
            (65, 65),
            (100, 37),
            (127, 128 - 1),
            (129, 64),
            (700, 350),
            (1000, 999),
            (2048, 1024),
            (3001, 17),
            (64 * 40 + 3, 64 * 20 + 5),
        ];
        for be in Backend::all_supported() {
            for &(n, m) in &sizes {
                let m = m.min(n);
                for max_base in [1, 4, 8, 16, 32, 64] {
                    if !(1..=max_base).any(|b| supports_base(be, b)) {
                        continue;
                    }
                    let plan = ToeplitzWindow::with_max_base(n, m, be, max_base);
                    let s = rand_words((n * 31 + m) as u64, n + m - 1);
                    let x = rand_words((n * 7 + m * 3) as u64, n);
                    let prep = plan.prepare(&s);
                    let mut out = vec![0u64; words_for(m)];
                    let mut scratch = vec![0xdead_beefu64; plan.scratch_len()];
                    plan.compute(&prep, &x, &mut out, &mut scratch);
                    assert_eq!(
                        out,
                        window_oracle(&s, &x, n, m),
                        "{be:?} n={n} m={m} base<={max_base}"
                    );
                }
            }
        }
    }
}
