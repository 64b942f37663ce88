//! Reduction modulo P_l: the constants of a field, the word-level fold
//! and the fixed-width (1 ..= 9 words) product and reduction with a
//! 64 x 64 kernel chosen once.

// Fixed-width loops index several arrays by the same constant-bounded
// counter on purpose (they unroll to fixed word positions).
#![allow(clippy::needless_range_loop)]

use super::*;

/// Reduction constants of P_l shared by every multiplication.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) struct Reducer {
    /// l
    pub(super) l: usize,
    /// Words of an element.
    pub(super) w: usize,
    /// Exponents of P_l below l (including 0).
    pub(super) low: [usize; 4],
    pub(super) nlow: usize,
    /// Middle exponents as shift amounts, when all are below 64.
    pub(super) mid: [u32; 3],
    /// Number of middle exponents if all are below 64 (1 or 3), else 0.
    pub(super) small: usize,
}

impl Reducer {
    pub(super) fn new(poly: &FieldPoly) -> Reducer {
        let mut low = [0usize; 4];
        let mid = poly.middle_exponents();
        low[..mid.len()].copy_from_slice(mid);
        low[mid.len()] = 0;
        let mut shifts = [0u32; 3];
        for (s, &e) in shifts.iter_mut().zip(mid) {
            *s = e as u32;
        }
        let small = if !mid.is_empty() && mid.iter().all(|&e| e < 64) {
            mid.len()
        } else {
            0
        };
        Reducer {
            l: poly.degree(),
            w: poly.degree().div_ceil(64),
            low,
            nlow: mid.len() + 1,
            mid: shifts,
            small,
        }
    }

    /// Whether two folds reduce any product (every low exponent e has
    /// 2e - 2 < l); the fixed-width fast path needs this.
    pub(crate) fn two_folds(&self) -> bool {
        let top = self.low[..self.nlow].iter().copied().max().unwrap_or(0);
        2 * top < self.l + 2
    }

    /// Reduces a product of `2w` words in place (generic, any l): the result
    /// is in `p[..w]` and `p[w..]` is zero.
    ///
    /// The number of folds depends only on l, P_l and the length (each fold
    /// lowers the largest possible degree from `deg` to `deg - l + e`, e the
    /// largest low exponent), never on the data: no early exit, no skipped
    /// zero words.
    pub(super) fn reduce_slice(&self, p: &mut [u64]) {
        let l = self.l;
        let (lw, ls) = (l / 64, l % 64);
        let total = p.len();
        let e_max = self.low[..self.nlow].iter().copied().max().unwrap_or(0);
        let mut deg = 64 * total - 1;
        let mut h = [0u64; MAX_WORDS + 1];
        while deg >= l {
            deg = deg - l + e_max;
            // h = p >> l
            let hw = total - lw;
            for j in 0..hw {
                let lo = p[lw + j] >> ls;
                let hi = if ls != 0 && lw + j + 1 < total {
                    p[lw + j + 1] << (64 - ls)
                } else {
                    0
                };
                h[j] = lo | hi;
            }
            // clear bits >= l
            if ls != 0 {
                p[lw] &= (1u64 << ls) - 1;
                p[lw + 1..].fill(0);
            } else {
                p[lw..].fill(0);
            }
            for &e in &self.low[..self.nlow] {
                let (ew, es) = (e / 64, e % 64);
                for j in 0..hw {
                    if j + ew < total {
                        p[j + ew] ^= h[j] << es;
                    }
                    if es != 0 && j + ew + 1 < total {
                        p[j + ew + 1] ^= h[j] >> (64 - es);
                    }
                }
            }
        }
    }
}

// ---- fixed-width fast path ------------------------------------------------

/// A 64 x 64 carry-less kernel, chosen once.
pub(crate) trait Kernel: Copy + Send + Sync {
    fn clmul(self, a: u64, b: u64) -> (u64, u64);
}

/// Portable kernel.
#[derive(Clone, Copy)]
pub(crate) struct PortableKernel;

impl Kernel for PortableKernel {
    #[inline(always)]
    fn clmul(self, a: u64, b: u64) -> (u64, u64) {
        crate::gf2::clmul::portable::clmul64(a, b)
    }
}

/// PCLMULQDQ kernel; a value exists only after run-time detection.
#[cfg(target_arch = "x86_64")]
#[derive(Clone, Copy)]
pub(crate) struct PclmulKernel(());

#[cfg(target_arch = "x86_64")]
impl PclmulKernel {
    pub(crate) fn new(backend: Backend) -> Option<PclmulKernel> {
        (backend != Backend::Portable && Backend::Pclmul.is_supported()).then_some(PclmulKernel(()))
    }
}

/// Fixed-width product and reduction: `W` words per element, `W2 = 2W`.
/// Requires `Reducer::two_folds` (checked by the caller).
#[inline(always)]
pub(crate) fn mul_fixed<const W: usize, const W2: usize, K: Kernel>(
    k: K,
    red: &Reducer,
    a: &[u64; W],
    b: &[u64; W],
) -> [u64; W] {
    let mut p = [0u64; W2];
    for i in 0..W {
        for j in 0..W {
            let (lo, hi) = k.clmul(a[i], b[j]);
            p[i + j] ^= lo;
            p[i + j + 1] ^= hi;
        }
    }
    reduce_fixed::<W, W2>(red, p)
}

/// `acc ^= h * z^e` (bits pushed past `W2` words are dropped; callers keep
/// degrees below that).
#[inline(always)]
pub(super) fn xor_shifted<const W: usize, const W2: usize>(
    acc: &mut [u64; W2],
    h: &[u64; W],
    e: usize,
) {
    let (ew, es) = (e / 64, (e % 64) as u32);
    if es == 0 {
        for j in 0..W {
            if j + ew < W2 {
                acc[j + ew] ^= h[j];
            }
        }
    } else {
        for j in 0..W {
            if j + ew < W2 {
                acc[j + ew] ^= h[j] << es;
            }
            if j + ew + 1 < W2 {
                acc[j + ew + 1] ^= h[j] >> (64 - es);
            }
        }
    }
}

/// Splits `p` at z^l: returns the part at and above z^l shifted down (W
/// words suffice for the degrees that occur) and clears it in `p`.
#[inline(always)]
pub(super) fn split_high<const W: usize, const W2: usize>(p: &mut [u64; W2], l: usize) -> [u64; W] {
    let (lw, ls) = (l / 64, (l % 64) as u32);
    let mut h = [0u64; W];
    for j in 0..W {
        let idx = lw + j;
        let lo = if idx < W2 { p[idx] >> ls } else { 0 };
        let hi = if ls != 0 && idx + 1 < W2 {
            p[idx + 1] << (64 - ls)
        } else {
            0
        };
        h[j] = lo | hi;
    }
    for (i, word) in p.iter_mut().enumerate() {
        if i > lw || (i == lw && ls == 0) {
            *word = 0;
        } else if i == lw {
            *word &= (1u64 << ls) - 1;
        }
    }
    h
}

/// Reduction when every middle exponent is below 64 (`NM` of them): the
/// first fold moves W words, the second at most 62 bits, all at fixed word
/// positions.
#[inline(always)]
pub(super) fn reduce_small<const W: usize, const W2: usize, const NM: usize>(
    red: &Reducer,
    p: [u64; W2],
) -> [u64; W] {
    let ls = (red.l % 64) as u32;
    let mut h = [0u64; W];
    let mut r = [0u64; W];
    r.copy_from_slice(&p[..W]);
    let mask = if ls == 0 { u64::MAX } else { (1u64 << ls) - 1 };
    if ls == 0 {
        // l = 64 W
        h.copy_from_slice(&p[W..]);
    } else {
        // l = 64 (W - 1) + ls
        for j in 0..W {
            h[j] = (p[W - 1 + j] >> ls) | (p[W + j] << (64 - ls));
        }
        r[W - 1] &= mask;
    }
    let mut over = 0u64;
    for j in 0..W {
        r[j] ^= h[j];
    }
    for &e in &red.mid[..NM] {
        for j in 0..W {
            r[j] ^= h[j] << e;
            if j + 1 < W {
                r[j + 1] ^= h[j] >> (64 - e);
            } else {
                over ^= h[j] >> (64 - e);
            }
        }
    }
    let h2 = if ls == 0 {
        over
    } else {
        let v = (r[W - 1] >> ls) | (over << (64 - ls));
        r[W - 1] &= mask;
        v
    };
    r[0] ^= h2;
    for &e in &red.mid[..NM] {
        r[0] ^= h2 << e;
        if W > 1 {
            r[1] ^= h2 >> (64 - e);
        }
    }
    r
}

/// Reduction of a `W2`-word product (degree <= 2l - 2) by P_l with two
/// folds: z^l = (low terms of P_l), applied to the part above z^l, then once
/// more to what the first fold pushed over z^l. Two folds suffice when every
/// low exponent e has 2e - 2 < l (`Reducer::two_folds`).
#[inline(always)]
pub(crate) fn reduce_fixed<const W: usize, const W2: usize>(
    red: &Reducer,
    mut p: [u64; W2],
) -> [u64; W] {
    match red.small {
        1 => return reduce_small::<W, W2, 1>(red, p),
        3 => return reduce_small::<W, W2, 3>(red, p),
        _ => {}
    }
    for _ in 0..2 {
        let h = split_high::<W, W2>(&mut p, red.l);
        for &e in &red.low[..red.nlow] {
            xor_shifted::<W, W2>(&mut p, &h, e);
        }
    }
    let mut r = [0u64; W];
    r.copy_from_slice(&p[..W]);
    r
}
