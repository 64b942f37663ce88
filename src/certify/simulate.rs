//! A simulated CHSH device, for demos and tests only.
//!
//! The device is fictional: "bench QM-7 of the Quillmere test lab". In each
//! round it wins the CHSH game with a fixed probability `w`, independently
//! of everything else (an i.i.d. device; real devices need not be), and its
//! outputs are uniform bits. Test flags and inputs come from the same seeded
//! generator, which a real protocol must never do (inputs need a trusted,
//! independent source: spec 6, caution 3). Nothing certified by sluice may
//! come from this module.

use super::record::{format_round, Round};

/// xoshiro256** (Blackman and Vigna, "Scrambled linear pseudorandom number
/// generators", 2018), seeded through splitmix64: a small, reproducible
/// generator for simulations; not for secrets.
#[derive(Debug, Clone)]
pub struct SimRng {
    s: [u64; 4],
}

impl SimRng {
    /// A generator from a 64-bit seed.
    pub fn new(seed: u64) -> SimRng {
        let mut z = seed;
        let mut next = || {
            z = z.wrapping_add(0x9e37_79b9_7f4a_7c15);
            let mut x = z;
            x = (x ^ (x >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
            x = (x ^ (x >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
            x ^ (x >> 31)
        };
        SimRng {
            s: [next(), next(), next(), next()],
        }
    }

    /// The next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        let result = self.s[1].wrapping_mul(5).rotate_left(7).wrapping_mul(9);
        let t = self.s[1] << 17;
        self.s[2] ^= self.s[0];
        self.s[3] ^= self.s[1];
        self.s[1] ^= self.s[2];
        self.s[0] ^= self.s[3];
        self.s[2] ^= t;
        self.s[3] = self.s[3].rotate_left(45);
        result
    }

    /// A uniform number in [0, 1) with 53 random bits.
    pub fn next_f64(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }
}

/// The simulated device and the protocol's choices of tests and inputs.
#[derive(Debug, Clone)]
pub struct SimulatedDevice {
    /// Probability of winning each round (0.75 classical .. 0.8536 quantum).
    pub win_probability: f64,
    /// Probability gamma that a round is a test round.
    pub gamma: f64,
    rng: SimRng,
}

impl SimulatedDevice {
    /// A device winning with probability `win_probability`, tested with
    /// probability `gamma`, driven by the generator seeded with `seed`.
    pub fn new(win_probability: f64, gamma: f64, seed: u64) -> SimulatedDevice {
        SimulatedDevice {
            win_probability,
            gamma,
            rng: SimRng::new(seed),
        }
    }

    /// The next round.
    pub fn next_round(&mut self) -> Round {
        let t = self.rng.next_f64() < self.gamma;
        let (x, y) = if t {
            let r = self.rng.next_u64();
            ((r & 1) as u8, ((r >> 1) & 1) as u8)
        } else {
            (0, 0)
        };
        let a = (self.rng.next_u64() >> 63) as u8;
        let win = self.rng.next_f64() < self.win_probability;
        // a XOR b = x AND y when the round is won
        let b = a ^ (x & y) ^ (!win as u8);
        Round { t, x, y, a, b }
    }

    /// Appends `n` rounds as a round file, with a header comment.
    pub fn write_record(&mut self, n: u64, out: &mut Vec<u8>) {
        out.extend_from_slice(
            format!(
                "# simulated record: fictional bench QM-7, Quillmere test lab\n# win probability {}, gamma {}; demo data, not a certificate source\n",
                self.win_probability, self.gamma
            )
            .as_bytes(),
        );
        for _ in 0..n {
            let r = self.next_round();
            format_round(&r, out);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::certify::chsh::wins;

    #[test]
    fn xoshiro_reference_output() {
        // xoshiro256** with state {1, 2, 3, 4}: the first outputs of the
        // authors' reference C code are 11520, 0, 1509978240, 1215971899390074240
        // (values from memory of the reference implementation; the first two
        // follow by hand from the definition).
        let mut r = SimRng { s: [1, 2, 3, 4] };
        assert_eq!(r.next_u64(), 11520);
        assert_eq!(r.next_u64(), 0);
        assert_eq!(r.next_u64(), 1_509_978_240);
        assert_eq!(r.next_u64(), 1_215_971_899_390_074_240);
    }

    #[test]
    fn device_wins_at_its_rate() {
        let mut d = SimulatedDevice::new(0.84, 0.5, 7);
        let (mut tests, mut won) = (0u64, 0u64);
        let mut pairs = [[0u64; 2]; 2];
        for _ in 0..200_000 {
            let r = d.next_round();
            if r.t {
                tests += 1;
                won += wins(r.x, r.y, r.a, r.b) as u64;
                pairs[r.x as usize][r.y as usize] += 1;
            } else {
                assert_eq!((r.x, r.y), (0, 0));
            }
        }
        let f = tests as f64 / 200_000.0;
        assert!((f - 0.5).abs() < 5.0 * (0.25f64 / 200_000.0).sqrt());
        let w = won as f64 / tests as f64;
        assert!(
            (w - 0.84).abs() < 5.0 * (0.84 * 0.16 / tests as f64).sqrt(),
            "{w}"
        );
        for c in pairs.iter().flatten() {
            assert!((*c as f64 - tests as f64 / 4.0).abs() < 5.0 * (tests as f64 * 0.1875).sqrt());
        }
    }
}
