//! Large transforms as a few passes over memory.
//!
//! A length `N = R tau` array (`tau = 2^16` columns, `R <= tau` rows, row
//! major) is converted and transformed in three kinds of passes, each one
//! read and one write of the array, all the rest in the core's cache:
//!
//! * the **Taylor pass** ([`taylor_pass`]): the Taylor expansion at
//!   `l = y^tau + y` of [`super::convert`], done without the recursion over
//!   halves. With the rows `F_q` (`f = sum_q F_q y^(tau q)`) and
//!   `y^(tau q) = (l + y)^q = sum_(p subset of q) l^p y^(q - p)` (Lucas),
//!   `f = sum_p l^p G_p` with `G_p = y^-p sum_(q superset of p) y^q F_q`:
//!   shift row q right by q places ("skew"), sum over supersets of the row
//!   index (a zeta transform: only whole rows are added, so it runs on
//!   column stripes), shift row p back left by p. `G_p` has degree
//!   `< tau + R`; its part `H_p` from `y^tau` on is folded back with
//!   `y^tau = l + y`: `h_p = L_p + y H_p + H_(p-1)`. The inverse
//!   (`f = sum_q y^(tau q) F'_q`, `F'_q = y^-q sum_(p superset of q) y^p h_p`,
//!   then `F_q = A_q + B_(q-1)`) has the same shape, and the transposes run
//!   the transposed steps backwards: the fold becomes a spread before the
//!   skew, the superset sum a subset sum. Each (row, skewed column) is read
//!   and written once, so stripes are independent.
//! * the **column pass** ([`col_pass`]): work that treats every column alike
//!   (the conversion of size R whose coefficients are whole rows, and the
//!   transform levels `>= 16`, whose butterflies pair whole rows) on a stripe
//!   of columns gathered into a contiguous buffer;
//! * the **row pass**: the conversion of size `tau` on each row and the
//!   transform levels `< 16`, a row at a time.
//!
//! The conversion on whole rows and the one inside rows commute (they act on
//! different digits of the index), and the one inside rows commutes with
//! everything that treats all rows alike, which is what lets
//! [`super::AfftWindow`] order them to need one column pass and one row pass
//! per transform.

use super::convert::Conv;
use super::kernel::{twiddle, Bfly, Kern};
use rayon::prelude::*;

/// log2 of the row length.
pub const TAU_LOG: u32 = 16;
/// The row length `tau = 2^16`: `tau^2 = 2^32` covers every transform.
pub const TAU: usize = 1 << TAU_LOG;

/// A raw view of the array for passes whose threads touch disjoint
/// (row, column) positions that do not form contiguous slices.
#[derive(Clone, Copy)]
struct Shared {
    ptr: *mut u64,
    len: usize,
}

// SAFETY: every pass that shares a `Shared` between threads gives each
// thread a disjoint set of positions (documented at each use).
unsafe impl Send for Shared {}
unsafe impl Sync for Shared {}

impl Shared {
    fn new(f: &mut [u64]) -> Shared {
        Shared {
            ptr: f.as_mut_ptr(),
            len: f.len(),
        }
    }
    /// Copies `dst.len()` elements from position `i`.
    ///
    /// # Safety
    /// No other thread may write the positions read meanwhile.
    #[inline]
    unsafe fn read(self, i: usize, dst: &mut [u64]) {
        assert!(i + dst.len() <= self.len);
        // SAFETY: in bounds; exclusivity by the caller.
        unsafe { std::ptr::copy_nonoverlapping(self.ptr.add(i), dst.as_mut_ptr(), dst.len()) }
    }
    /// Copies `src` to position `i`.
    ///
    /// # Safety
    /// No other thread may read or write the positions written meanwhile.
    #[inline]
    unsafe fn write(self, i: usize, src: &[u64]) {
        assert!(i + src.len() <= self.len);
        // SAFETY: in bounds; exclusivity by the caller.
        unsafe { std::ptr::copy_nonoverlapping(src.as_ptr(), self.ptr.add(i), src.len()) }
    }
}

/// Stripe width (elements) for `rows` rows: the stripe buffer stays near
/// 512 KiB, between 8 and 64 columns.
pub fn stripe_width(rows: usize) -> usize {
    ((1usize << 16) / rows.max(1)).clamp(8, 64)
}

/// Gathers column stripes of the first `in_rows` rows of an `x tau` array
/// into a buffer of `in_rows x w`, lets `op(buf, w)` turn it into
/// `out_rows x w` (resizing it if the counts differ), and scatters that over
/// the first `out_rows` rows. Stripes run in parallel.
pub fn col_pass<F>(f: &mut [u64], in_rows: usize, out_rows: usize, op: F)
where
    F: Fn(&mut Vec<u64>, usize) + Sync,
{
    let cols = TAU;
    assert!(f.len() >= out_rows.max(in_rows) * cols);
    let w = stripe_width(out_rows.max(in_rows));
    let sh = Shared::new(f);
    (0..cols / w).into_par_iter().for_each(|s| {
        with_stripe(|buf| {
            let c0 = s * w;
            buf.clear();
            buf.resize(in_rows * w, 0);
            for r in 0..in_rows {
                // SAFETY: stripe s alone touches columns [c0, c0 + w).
                unsafe { sh.read(r * cols + c0, &mut buf[r * w..(r + 1) * w]) };
            }
            op(buf, w);
            assert_eq!(
                buf.len(),
                out_rows * w,
                "column pass: op left the wrong size"
            );
            for r in 0..out_rows {
                // SAFETY: as above.
                unsafe { sh.write(r * cols + c0, &buf[r * w..(r + 1) * w]) };
            }
        })
    });
}

thread_local! {
    static STRIPE: std::cell::Cell<Vec<u64>> = const { std::cell::Cell::new(Vec::new()) };
}

/// Runs `body` with this thread's stripe buffer (kept between passes, so a
/// pass allocates nothing after the first).
fn with_stripe<R>(body: impl FnOnce(&mut Vec<u64>) -> R) -> R {
    STRIPE.with(|cell| {
        let mut buf = cell.take();
        let r = body(&mut buf);
        cell.set(buf);
        r
    })
}

/// Transform levels `top ..= TAU_LOG` of kind `kind` on a stripe buffer of
/// `rows` rows (`w` wide) whose first row is global row `row0`: the
/// butterflies pair whole rows, the twiddle of a block comes from its global
/// position. Top-down for `Fft`/`IfftT`, bottom-up otherwise.
pub fn row_levels<K: Kern>(k: K, kind: Bfly, buf: &mut [u64], w: usize, row0: usize, top: u32) {
    let rows = buf.len() / w;
    let levels: Vec<u32> = (TAU_LOG..=top).collect();
    let mut one = |level: u32| {
        let h = 1usize << (level - TAU_LOG); // rows per half block
        for (j, blk) in buf.chunks_exact_mut(2 * h * w).enumerate() {
            let pos = (row0 + 2 * h * j) << TAU_LOG;
            let l = twiddle(pos, level);
            let (a, b) = blk.split_at_mut(h * w);
            k.bfly(kind, a, b, l);
        }
    };
    debug_assert!(rows.is_power_of_two() && rows >= 1 << (top + 1 - TAU_LOG));
    if matches!(kind, Bfly::Fft | Bfly::IfftT) {
        levels.iter().rev().for_each(|&l| one(l));
    } else {
        levels.iter().for_each(|&l| one(l));
    }
}

/// The Taylor expansion at `y^tau + y` (or the inverse / a transpose, as
/// `mode` says) of the first `rows` rows, in one pass (module docs).
pub fn taylor_pass<K: Kern>(k: K, f: &mut [u64], rows: usize, mode: Conv) {
    let tau = TAU;
    let n = rows * tau;
    assert!(rows >= 2 && rows <= tau && rows.is_power_of_two() && f.len() >= n);
    let transposed = matches!(mode, Conv::ToNovelT | Conv::ToMonoT);
    // The part of each row from y^tau on: rows x rows.
    let mut ext = vec![0u64; rows * rows];
    if transposed {
        spread(f, &mut ext, rows, mode);
    }
    // Stripes over the skewed columns [0, tau + 2 rows): row r's column c
    // sits at skewed column c + r.
    let w = stripe_width(rows);
    let width = tau + 2 * rows;
    let stripes = width.div_ceil(w);
    let sh = Shared::new(&mut f[..n]);
    let se = Shared::new(&mut ext);
    let superset = !transposed;
    // Row r's skewed columns [c0, c0 + w) are its columns [c0 - r, c0 - r +
    // w): the part in [0, tau) is in the array, the part in [tau, tau + rows)
    // in `ext`, the rest is zero.
    let parts = move |c0: usize, r: usize| {
        let lo = c0 as isize - r as isize;
        let hi = lo + w as isize;
        let clip = |a: isize, b: isize| (lo.max(a), hi.min(b));
        (
            lo,
            clip(0, tau as isize),
            clip(tau as isize, (tau + rows) as isize),
        )
    };
    (0..stripes).into_par_iter().for_each(|s| {
        with_stripe(|buf| {
            let c0 = s * w;
            buf.clear();
            buf.resize(rows * w, 0);
            for r in 0..rows {
                let row = &mut buf[r * w..(r + 1) * w];
                let (lo, (a0, a1), (e0, e1)) = parts(c0, r);
                // SAFETY: (row r, skewed columns of stripe s) belong to
                // stripe s alone, and so do their array and `ext` positions.
                unsafe {
                    if a0 < a1 {
                        let d = (a0 - lo) as usize;
                        sh.read(r * tau + a0 as usize, &mut row[d..d + (a1 - a0) as usize]);
                    }
                    if e0 < e1 {
                        let d = (e0 - lo) as usize;
                        let src = r * rows + (e0 as usize - tau);
                        se.read(src, &mut row[d..d + (e1 - e0) as usize]);
                    }
                }
            }
            zeta(k, buf, w, rows, superset);
            for r in 0..rows {
                let row = &buf[r * w..(r + 1) * w];
                let (lo, (a0, a1), (e0, e1)) = parts(c0, r);
                // SAFETY: as for the gather.
                unsafe {
                    if a0 < a1 {
                        let d = (a0 - lo) as usize;
                        sh.write(r * tau + a0 as usize, &row[d..d + (a1 - a0) as usize]);
                    }
                    if !transposed && e0 < e1 {
                        let d = (e0 - lo) as usize;
                        let dst = r * rows + (e0 as usize - tau);
                        se.write(dst, &row[d..d + (e1 - e0) as usize]);
                    }
                }
            }
        })
    });
    if !transposed {
        fold(f, &ext, rows, mode);
    }
}

/// Sums over supersets (`superset`) or subsets of the row index.
fn zeta<K: Kern>(k: K, buf: &mut [u64], w: usize, rows: usize, superset: bool) {
    let mut bit = 1;
    while bit < rows {
        for q in 0..rows {
            if q & bit != 0 {
                let p = q ^ bit;
                let (lo, hi) = buf.split_at_mut(q * w);
                let (a, b) = (&mut lo[p * w..(p + 1) * w], &mut hi[..w]);
                if superset {
                    k.xor_into(a, b);
                } else {
                    k.xor_into(b, a);
                }
            }
        }
        bit <<= 1;
    }
}

/// After the skew-zeta-unskew of the forward maps: folds the parts from
/// `y^tau` on (`ext`) back into the rows.
fn fold(f: &mut [u64], ext: &[u64], rows: usize, mode: Conv) {
    let tau = TAU;
    for p in 0..rows {
        let row = &mut f[p * tau..p * tau + tau];
        match mode {
            // h_p = L_p + y H_p + H_(p-1)
            Conv::ToNovel => {
                for c in 1..=rows.min(tau - 1) {
                    row[c] ^= ext[p * rows + c - 1];
                }
                if p >= 1 {
                    for c in 0..rows {
                        row[c] ^= ext[(p - 1) * rows + c];
                    }
                }
            }
            // F_q = A_q + B_(q-1)
            Conv::ToMono => {
                if p >= 1 {
                    for c in 0..rows {
                        row[c] ^= ext[(p - 1) * rows + c];
                    }
                }
            }
            _ => unreachable!("fold is for the forward maps"),
        }
    }
}

/// Before the transposed skew-zeta-unskew: the transpose of [`fold`],
/// spreading the rows into the parts from `y^tau` on (`ext`).
fn spread(f: &[u64], ext: &mut [u64], rows: usize, mode: Conv) {
    let tau = TAU;
    for p in 0..rows {
        let e = &mut ext[p * rows..(p + 1) * rows];
        match mode {
            // H_p[c] = h_p[c + 1] + h_(p+1)[c]
            Conv::ToNovelT => {
                for (c, v) in e.iter_mut().enumerate() {
                    let mut x = if c + 1 < tau { f[p * tau + c + 1] } else { 0 };
                    if p + 1 < rows {
                        x ^= f[(p + 1) * tau + c];
                    }
                    *v = x;
                }
            }
            // B_q = F_(q+1)
            Conv::ToMonoT => {
                if p + 1 < rows {
                    e.copy_from_slice(&f[(p + 1) * tau..(p + 1) * tau + rows]);
                } else {
                    e.fill(0);
                }
            }
            _ => unreachable!("spread is for the transposed maps"),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::super::convert::{taylor_for_tests, Conv};
    use super::super::kernel::Portable;
    use super::*;

    fn rand_vec(seed: u64, len: usize) -> Vec<u64> {
        let mut s = seed | 1;
        (0..len)
            .map(|_| {
                s ^= s << 13;
                s ^= s >> 7;
                s ^= s << 17;
                s
            })
            .collect()
    }

    #[test]
    fn taylor_pass_matches_the_recursive_expansion() {
        for rows in [2usize, 4, 16] {
            for mode in [Conv::ToNovel, Conv::ToMono, Conv::ToNovelT, Conv::ToMonoT] {
                let f = rand_vec(rows as u64 * 13 + mode as u64, rows * TAU);
                let mut a = f.clone();
                let mut b = f.clone();
                taylor_pass(Portable, &mut a, rows, mode);
                taylor_for_tests(Portable, &mut b, TAU, mode);
                assert!(a == b, "rows {rows} {mode:?}");
            }
        }
    }
}
