//! Repetition count test (SP 800-90B section 4.4.1) and adaptive proportion
//! test (section 4.4.2), with cutoffs from a claimed min-entropy per sample
//! H and the false-alarm probability α = 2^−20 (statistics.md 5.1).
//!
//! Each test has a word-level fast path for binary samples and a
//! sample-by-sample twin that follows the standard's wording; they are
//! compared on random inputs.

use crate::assess::Error;
use crate::bits::Bits;
use serde::Serialize;

/// False-alarm probability α = 2^−20 (SP 800-90B section 4.4;
/// statistics.md 5.1).
pub const ALPHA_LOG2: i32 = -20;

/// Window of the adaptive proportion test: 1024 for binary samples, 512
/// otherwise (SP 800-90B section 4.4.2, from memory; statistics.md 5.1).
pub const fn apt_window(binary: bool) -> usize {
    if binary {
        1024
    } else {
        512
    }
}

fn check_entropy(h: f64, max: f64) -> Result<(), Error> {
    if !(h > 0.0 && h <= max && h.is_finite()) {
        return Err(Error::out_of_range(
            "claimed entropy per sample",
            h,
            "must be in (0, bits per sample]",
        ));
    }
    Ok(())
}

/// Repetition count cutoff C = 1 + ⌈−log2(α)/H⌉ (SP 800-90B section
/// 4.4.1; statistics.md 5.1) for a claimed H bits per sample of
/// `bits_per_sample` bits.
pub fn rct_cutoff(h: f64, bits_per_sample: u32) -> Result<u64, Error> {
    check_entropy(h, bits_per_sample as f64)?;
    Ok(1 + (-(ALPHA_LOG2 as f64) / h).ceil() as u64)
}

/// ln of the binomial pmf P[Bin(n, p) = k].
fn ln_binom_pmf(n: u64, k: u64, p: f64) -> f64 {
    use statrs::function::gamma::ln_gamma;
    let (nf, kf) = (n as f64, k as f64);
    let ln_c = ln_gamma(nf + 1.0) - ln_gamma(kf + 1.0) - ln_gamma(nf - kf + 1.0);
    let a = if k == 0 { 0.0 } else { kf * p.ln() };
    let b = if k == n {
        0.0
    } else {
        (nf - kf) * (-p).ln_1p()
    };
    ln_c + a + b
}

/// CRITBINOM(n, p, 1 − α): the least k with P[Bin(n, p) ≤ k] ≥ 1 − α,
/// found from the upper tail P[Bin > k] ≤ α summed from the top so that
/// small tails keep their precision.
pub fn critbinom_upper(n: u64, p: f64, alpha: f64) -> u64 {
    let mut tail = 0.0; // P[Bin > k] for the current k
    let mut k = n;
    // tail(k) = Σ_{j > k} pmf(j); lower k while tail(k-1) <= alpha
    while k > 0 {
        let t = tail + ln_binom_pmf(n, k, p).exp();
        if t > alpha {
            break;
        }
        tail = t;
        k -= 1;
    }
    k
}

/// Adaptive proportion cutoff C = 1 + CRITBINOM(W, 2^−H, 1 − α)
/// (SP 800-90B section 4.4.2 as statistics.md 5.1 states it, implemented
/// exactly as stated: statistics.md 5.1 asks not to "correct" it for B
/// counting the first sample).
pub fn apt_cutoff(h: f64, bits_per_sample: u32, window: usize) -> Result<u64, Error> {
    check_entropy(h, bits_per_sample as f64)?;
    let alpha = 2f64.powi(ALPHA_LOG2);
    Ok(1 + critbinom_upper(window as u64, 2f64.powf(-h), alpha))
}

/// Outcome of one health test over a sample stream.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct HealthOutcome {
    /// The cutoff C.
    pub cutoff: u64,
    /// Samples examined.
    pub samples: u64,
    /// Number of failures (each time the counter reaches C).
    pub failures: u64,
    /// Index (0-based) of the sample at which the first failure occurred.
    pub first_failure: Option<u64>,
}

/// Repetition count test, sample by sample as SP 800-90B section 4.4.1
/// words it (the oracle for the fast path). A failure is counted each time
/// the run counter B reaches C.
pub fn rct_naive<T: PartialEq + Copy>(
    samples: impl IntoIterator<Item = T>,
    cutoff: u64,
) -> HealthOutcome {
    let mut it = samples.into_iter();
    let mut out = HealthOutcome {
        cutoff,
        samples: 0,
        failures: 0,
        first_failure: None,
    };
    let Some(mut a) = it.next() else {
        return out;
    };
    out.samples = 1;
    let mut b = 1u64;
    if b >= cutoff {
        out.failures += 1;
        out.first_failure = Some(0);
    }
    for (i, x) in it.enumerate() {
        let idx = i as u64 + 1;
        out.samples += 1;
        if x == a {
            b += 1;
            if b == cutoff {
                out.failures += 1;
                out.first_failure.get_or_insert(idx);
            }
        } else {
            a = x;
            b = 1;
        }
    }
    out
}

/// Whether a word holds a run of at least `c` equal-to-one bits inside it
/// (runs cut at the word's edges), for 1 ≤ c ≤ 64.
#[inline]
fn has_ones_run(x: u64, c: u32) -> bool {
    let mut y = x;
    let mut len = 1u32;
    while len * 2 <= c {
        y &= y >> len;
        len *= 2;
    }
    if len < c {
        y &= y >> (c - len);
    }
    y != 0
}

/// Repetition count test on binary samples (the bits of `bits`), word by
/// word; equals [`rct_naive`] on the same bits.
pub fn rct_bits(bits: &Bits, cutoff: u64) -> HealthOutcome {
    let n = bits.len();
    let words = bits.words();
    let mut out = HealthOutcome {
        cutoff,
        samples: n as u64,
        failures: 0,
        first_failure: None,
    };
    if n == 0 {
        return out;
    }
    // Run state before the current word: value and length (0 at start).
    let mut val = bits.get(0);
    let mut run = 0u64;
    for (wi, &w) in words.iter().enumerate() {
        let valid = (n - wi * 64).min(64) as u32;
        let full = wi * 64 + 64 <= n;
        let same = if val { w } else { !w };
        let prefix = if full {
            same.trailing_ones()
        } else {
            same.trailing_ones().min(valid)
        };
        let suspicious = run + prefix as u64 >= cutoff
            || (cutoff <= 64
                && full
                && (has_ones_run(w, cutoff as u32) || has_ones_run(!w, cutoff as u32)))
            || (!full && cutoff <= 64);
        if !suspicious {
            if prefix == valid {
                run += valid as u64;
            } else {
                // the last run of the word: length of the top segment
                let top = (w >> (valid - 1)) & 1 == 1;
                let seg = if top {
                    w.leading_ones()
                } else {
                    w.leading_zeros()
                };
                val = top;
                run = seg as u64;
            }
            continue;
        }
        // Slow scan of this word with the carried state.
        for j in 0..valid {
            let bit = (w >> j) & 1 == 1;
            if bit == val && run > 0 {
                run += 1;
            } else {
                val = bit;
                run = 1;
            }
            if run == cutoff {
                out.failures += 1;
                out.first_failure
                    .get_or_insert((wi * 64 + j as usize) as u64);
            }
        }
    }
    out
}

/// Adaptive proportion test, sample by sample as SP 800-90B section 4.4.2
/// words it (the oracle): windows of W samples; A = first sample of the
/// window, B = 1; for the next W − 1 samples, B += 1 when the sample equals
/// A; a failure when B reaches C. A last, partial window is tested the same
/// way.
pub fn apt_naive<T: PartialEq + Copy>(samples: &[T], cutoff: u64, window: usize) -> HealthOutcome {
    let mut out = HealthOutcome {
        cutoff,
        samples: samples.len() as u64,
        failures: 0,
        first_failure: None,
    };
    for (wi, win) in samples.chunks(window).enumerate() {
        let a = win[0];
        let mut b = 1u64;
        let check = |b: u64, j: usize, out: &mut HealthOutcome| {
            if b == cutoff {
                out.failures += 1;
                out.first_failure.get_or_insert((wi * window + j) as u64);
            }
        };
        check(b, 0, &mut out);
        for (j, &x) in win.iter().enumerate().skip(1) {
            if x == a {
                b += 1;
                check(b, j, &mut out);
            }
        }
    }
    out
}

/// Adaptive proportion test on binary samples with W = 1024, by popcounts
/// of 16-word windows; equals [`apt_naive`] on the same bits.
pub fn apt_bits(bits: &Bits, cutoff: u64) -> HealthOutcome {
    const W: usize = 1024;
    let n = bits.len();
    let words = bits.words();
    let mut out = HealthOutcome {
        cutoff,
        samples: n as u64,
        failures: 0,
        first_failure: None,
    };
    for (wi, chunk) in words.chunks(W / 64).enumerate() {
        let start = wi * W;
        let len = (n - start).min(W);
        let a = chunk[0] & 1 == 1;
        let ones: u64 = chunk.iter().map(|w| w.count_ones() as u64).sum();
        let b = if a { ones } else { len as u64 - ones };
        if b < cutoff {
            continue;
        }
        // find where B reaches C
        let mut cnt = 0u64;
        for j in 0..len {
            let bit = (chunk[j / 64] >> (j % 64)) & 1 == 1;
            if bit == a {
                cnt += 1;
                if cnt == cutoff {
                    out.failures += 1;
                    out.first_failure.get_or_insert((start + j) as u64);
                    break;
                }
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// statistics.md 5.1, RCT-1 … RCT-5 (RCT-1 is SP 800-90B's worked
    /// example, from memory; the others computed, status C).
    #[test]
    fn section_5_1_rct_cutoffs() {
        assert_eq!(rct_cutoff(2.0, 8).unwrap(), 11);
        assert_eq!(rct_cutoff(0.5, 1).unwrap(), 41);
        assert_eq!(rct_cutoff(0.8, 1).unwrap(), 26);
        assert_eq!(rct_cutoff(1.0, 1).unwrap(), 21);
        assert_eq!(rct_cutoff(4.0, 8).unwrap(), 6);
        assert_eq!(rct_cutoff(8.0, 8).unwrap(), 4);
        assert!(rct_cutoff(1.5, 1).is_err());
        assert!(rct_cutoff(0.0, 1).is_err());
    }

    /// statistics.md 5.1, APT-1 … APT-5 (exact binomial sums in mpmath,
    /// status C).
    #[test]
    fn section_5_1_apt_cutoffs() {
        let binary = [
            (0.5, 793),
            (0.8, 664),
            (1.0, 589),
            (0.1, 991),
            (0.2, 941),
            (0.3, 890),
            (0.4, 840),
            (0.6, 748),
            (0.7, 705),
            (0.9, 625),
        ];
        for (h, c) in binary {
            assert_eq!(apt_cutoff(h, 1, 1024).unwrap(), c, "H = {h}");
        }
        for (h, c) in [(0.5, 410), (1.0, 311), (2.0, 177), (4.0, 62), (8.0, 13)] {
            assert_eq!(apt_cutoff(h, 8, 512).unwrap(), c, "H = {h}");
        }
    }

    /// statistics.md 5.1: under H0, B = 1 + Bin(W − 1, p); the stated
    /// cutoff gives P[B ≥ C] = 9.64e-7 at H = 1.0 (slightly above α), and
    /// Bin(W, p) would give 8.35e-7. Recomputed here from the pmf.
    #[test]
    fn section_5_1_apt_false_alarm() {
        let c = apt_cutoff(1.0, 1, 1024).unwrap();
        let tail = |n: u64, from: u64| {
            (from..=n)
                .map(|k| ln_binom_pmf(n, k, 0.5).exp())
                .sum::<f64>()
        };
        let one_plus = tail(1023, c - 1);
        let plain = tail(1024, c);
        assert!((one_plus / 9.64e-7 - 1.0).abs() < 5e-3, "{one_plus:e}");
        assert!((plain / 8.35e-7 - 1.0).abs() < 5e-3, "{plain:e}");
    }

    #[test]
    fn rct_finds_first_run() {
        let mut b = Bits::zeros(300);
        for i in 0..300 {
            b.set(i, i % 2 == 0);
        }
        for i in 100..125 {
            b.set(i, true);
        }
        // the run of ones starts at 100 (bit 100 is 1, 99 is 0): 25 long,
        // reaching C = 21 at index 120.
        let r = rct_bits(&b, 21);
        assert_eq!(r.first_failure, Some(120));
        assert_eq!(r.failures, 1);
        assert_eq!(r, rct_naive(b.iter(), 21));
    }

    fn from_bias(seed: u64, n: usize, p_one: f64) -> Bits {
        let mut s = seed | 1;
        let mut b = Bits::zeros(n);
        for i in 0..n {
            s ^= s << 13;
            s ^= s >> 7;
            s ^= s << 17;
            b.set(i, (s >> 11) as f64 / (1u64 << 53) as f64 <= p_one);
        }
        b
    }

    proptest! {
        /// Fast RCT equals the sample-by-sample twin.
        #[test]
        fn rct_fast_matches_naive(seed in any::<u64>(), n in 1usize..5000, bias in 0.0f64..1.0, c in 2u64..80) {
            let b = from_bias(seed, n, bias);
            prop_assert_eq!(rct_bits(&b, c), rct_naive(b.iter(), c));
        }

        /// Fast APT equals the sample-by-sample twin.
        #[test]
        fn apt_fast_matches_naive(seed in any::<u64>(), n in 1usize..5000, bias in 0.0f64..1.0, c in 500u64..1025) {
            let b = from_bias(seed, n, bias);
            let v: Vec<bool> = b.iter().collect();
            prop_assert_eq!(apt_bits(&b, c), apt_naive(&v, c, 1024));
        }
    }
}
