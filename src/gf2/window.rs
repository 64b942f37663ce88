//! The Toeplitz window `[n-1, n+m-1)` of `S * X` behind one type, whatever
//! computes it: the word-level Karatsuba middle product ([`super::middle`]),
//! the floating-point FFT ([`super::fft`]) or the additive FFT over GF(2^64)
//! ([`super::afft`]). All give the same bits.
//!
//! [`Engine::Auto`] picks by size: Karatsuba below the thresholds of
//! [`Thresholds`], the additive FFT above. The built-in thresholds were
//! measured on the machines this project is developed on; `sluice bench
//! --tune` measures them on the machine at hand and the program installs
//! them for the process with [`Thresholds::install`].

use super::afft::{AfftSeed, AfftWindow};
use super::clmul::Backend;
use super::fft::{FftScratch, FftSeed, FftWindow};
use super::middle::{PreparedSeed, ToeplitzWindow};
use std::fmt;
use std::sync::OnceLock;

/// How the product is computed.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Engine {
    /// Word-level Karatsuba middle product on a carry-less backend.
    Clmul(Backend),
    /// Floating-point FFT convolution (sizes covered by its rounding bound).
    Fft,
    /// Additive FFT over GF(2^64) on a carry-less backend.
    Additive(Backend),
    /// Chosen by size when planned ([`Engine::resolve`]).
    Auto,
}

impl Engine {
    /// Size-dependent choice on this CPU's fastest backend.
    pub fn detect() -> Engine {
        Engine::Auto
    }

    /// Every concrete engine this CPU can run, slowest first within a kind.
    pub fn all_supported() -> Vec<Engine> {
        let backends = Backend::all_supported();
        let mut v: Vec<Engine> = backends.iter().map(|&b| Engine::Clmul(b)).collect();
        v.push(Engine::Fft);
        v.extend(backends.iter().map(|&b| Engine::Additive(b)));
        v
    }

    /// The concrete engine for an n-bit input and m output bits: `Auto`
    /// follows the installed [`Thresholds`], on the fastest backend.
    pub fn resolve(self, n: usize, m: usize) -> Engine {
        match self {
            Engine::Auto => {
                let be = Backend::detect();
                if Thresholds::current().additive(n, m) {
                    Engine::Additive(be)
                } else {
                    Engine::Clmul(be)
                }
            }
            e => e,
        }
    }

    /// Name as used on the command line.
    pub fn name(self) -> &'static str {
        match self {
            Engine::Clmul(b) => b.name(),
            Engine::Fft => "fft",
            Engine::Additive(Backend::Portable) => "additive-fft-portable",
            Engine::Additive(Backend::Pclmul) => "additive-fft-pclmul",
            Engine::Additive(Backend::Vpclmul256) => "additive-fft-vpclmul256",
            Engine::Additive(Backend::Vpclmul) => "additive-fft-vpclmul",
            Engine::Auto => "auto",
        }
    }

    /// Parses a name given by [`name`](Self::name), `auto`, or
    /// `additive-fft` (the additive FFT on the fastest backend).
    pub fn from_name(s: &str) -> Option<Engine> {
        Some(match s {
            "auto" => Engine::Auto,
            "additive-fft" => Engine::Additive(Backend::detect()),
            "fft" => Engine::Fft,
            _ => {
                let be = |t: &str| {
                    [
                        Backend::Portable,
                        Backend::Pclmul,
                        Backend::Vpclmul256,
                        Backend::Vpclmul,
                    ]
                    .into_iter()
                    .find(|b| b.name() == t)
                };
                match s.strip_prefix("additive-fft-") {
                    Some(t) => Engine::Additive(be(t)?),
                    None => Engine::Clmul(be(s)?),
                }
            }
        })
    }

    /// Whether this CPU runs it.
    pub fn is_supported(self) -> bool {
        match self {
            Engine::Clmul(b) | Engine::Additive(b) => b.is_supported(),
            Engine::Fft | Engine::Auto => true,
        }
    }
}

impl fmt::Display for Engine {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// Sizes from which [`Engine::Auto`] takes the additive FFT: both
/// `n >= input_bits` and `m >= output_bits`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct Thresholds {
    /// Smallest input length n for the additive FFT.
    pub input_bits: usize,
    /// Smallest output length m for the additive FFT.
    pub output_bits: usize,
}

static INSTALLED: OnceLock<Thresholds> = OnceLock::new();

impl Thresholds {
    /// The built-in thresholds (measured with `sluice bench --tune` on the
    /// development machines: AMD Zen 4 with AVX-512, m = n/2 and m = n/20).
    pub const BUILTIN: Thresholds = Thresholds {
        input_bits: 1 << 21,
        output_bits: 1 << 16,
    };

    /// The thresholds in force: installed ones, else the built-in ones.
    pub fn current() -> Thresholds {
        INSTALLED.get().copied().unwrap_or(Thresholds::BUILTIN)
    }

    /// Installs thresholds for the rest of the process (the first call
    /// wins; returns whether this one did).
    pub fn install(t: Thresholds) -> bool {
        INSTALLED.set(t).is_ok()
    }

    /// Whether an (n, m) product goes to the additive FFT.
    pub fn additive(&self, n: usize, m: usize) -> bool {
        n >= self.input_bits && m >= self.output_bits
    }
}

/// Why a window cannot be planned.
#[derive(Clone, Copy, Debug, PartialEq, Eq, thiserror::Error)]
pub enum WindowError {
    /// The engine does not run on this CPU.
    #[error("engine {0} is not supported on this CPU")]
    Unsupported(Engine),
    /// The floating-point FFT's rounding bound does not cover the size.
    #[error("the FFT engine does not cover n = {n}, m = {m} (its rounding bound would not rule out a flipped bit); use a carry-less engine")]
    FftTooLarge {
        /// Input bits.
        n: usize,
        /// Output bits.
        m: usize,
    },
    /// Beyond the additive FFT's 2^32 points in one block.
    #[error("n = {n}, m = {m} needs more than 2^32 transform points in one block")]
    TooLarge {
        /// Input bits.
        n: usize,
        /// Output bits.
        m: usize,
    },
}

/// A planned window.
#[derive(Debug)]
pub struct Window {
    inner: Inner,
    engine: Engine,
}

#[derive(Debug)]
enum Inner {
    Clmul(ToeplitzWindow),
    Fft(FftWindow),
    Additive(AfftWindow),
}

/// A seed prepared for one [`Window`].
#[derive(Clone, Default)]
pub enum WindowSeed {
    /// Not prepared yet.
    #[default]
    Empty,
    /// For the Karatsuba engine.
    Clmul(PreparedSeed),
    /// For the floating-point FFT.
    Fft(FftSeed),
    /// For the additive FFT.
    Additive(AfftSeed),
}

/// Working space of one [`Window::compute`] call.
pub enum WindowScratch {
    /// Words for the Karatsuba engine.
    Words(Vec<u64>),
    /// For the floating-point FFT.
    Fft(FftScratch),
}

impl Window {
    /// Plans the window of an n-bit input and m output bits (any m >= 1).
    pub fn new(n: usize, m: usize, engine: Engine) -> Result<Window, WindowError> {
        assert!(n >= 1 && m >= 1, "toeplitz window needs n >= 1 and m >= 1");
        let engine = engine.resolve(n, m);
        if !engine.is_supported() {
            return Err(WindowError::Unsupported(engine));
        }
        let inner = match engine {
            Engine::Clmul(be) => Inner::Clmul(ToeplitzWindow::new(n, m, be)),
            Engine::Fft => {
                Inner::Fft(FftWindow::new(n, m).ok_or(WindowError::FftTooLarge { n, m })?)
            }
            Engine::Additive(be) => {
                if !AfftWindow::fits(n, m) {
                    return Err(WindowError::TooLarge { n, m });
                }
                Inner::Additive(AfftWindow::new(n, m, be))
            }
            Engine::Auto => unreachable!("resolved above"),
        };
        Ok(Window { inner, engine })
    }

    /// The concrete engine.
    pub fn engine(&self) -> Engine {
        self.engine
    }

    /// Working space for [`compute`](Self::compute).
    pub fn make_scratch(&self) -> WindowScratch {
        match &self.inner {
            Inner::Clmul(w) => WindowScratch::Words(vec![0; w.scratch_len()]),
            Inner::Fft(f) => WindowScratch::Fft(f.make_scratch()),
            Inner::Additive(a) => {
                WindowScratch::Words(super::afft::memory::zeroed(a.scratch_len()))
            }
        }
    }

    /// Seed bits `n + m - 1`.
    pub fn seed_bits_needed(&self) -> usize {
        match &self.inner {
            Inner::Clmul(w) => w.seed_bits(),
            Inner::Fft(f) => f.input_bits() + f.output_bits() - 1,
            Inner::Additive(a) => a.seed_bits(),
        }
    }

    /// Transform length in points (additive FFT) or complex points (float
    /// FFT); 0 for Karatsuba.
    pub fn transform_points(&self) -> usize {
        match &self.inner {
            Inner::Clmul(_) => 0,
            Inner::Fft(f) => f.len(),
            Inner::Additive(a) => a.transform_len(),
        }
    }

    /// Bytes of working memory beyond input, seed and output: the prepared
    /// seed and the scratch of one [`compute`](Self::compute).
    pub fn working_bytes(&self) -> usize {
        match &self.inner {
            // The padded diagonal sequence and its shifted copy.
            Inner::Clmul(w) => 8 * (w.scratch_len() + 2 * (w.seed_bits() / 64 + 2)),
            // Real buffer, spectrum and the seed's spectrum (complex
            // halves), plus the FFT's own scratch (at most as long).
            Inner::Fft(f) => 40 * f.len(),
            Inner::Additive(a) => a.working_bytes(),
        }
    }

    /// Prepares a seed of `n + m - 1` bits (in words).
    pub fn prepare(&self, seed: &[u64]) -> WindowSeed {
        let mut s = WindowSeed::Empty;
        match &self.inner {
            // Only the float FFT prepares in a scratch.
            Inner::Fft(_) => {
                let mut sc = self.make_scratch();
                self.prepare_into(seed, &mut s, &mut sc);
            }
            _ => self.prepare_into(seed, &mut s, &mut WindowScratch::Words(Vec::new())),
        }
        s
    }

    /// As [`prepare`](Self::prepare), reusing buffers.
    pub fn prepare_into(&self, seed: &[u64], into: &mut WindowSeed, scratch: &mut WindowScratch) {
        match (&self.inner, scratch) {
            (Inner::Clmul(w), _) => {
                if !matches!(into, WindowSeed::Clmul(_)) {
                    *into = WindowSeed::Clmul(PreparedSeed::default());
                }
                if let WindowSeed::Clmul(p) = into {
                    w.prepare_into(seed, p);
                }
            }
            (Inner::Fft(f), WindowScratch::Fft(s)) => {
                if !matches!(into, WindowSeed::Fft(_)) {
                    *into = WindowSeed::Fft(FftSeed::default());
                }
                if let WindowSeed::Fft(p) = into {
                    f.prepare_into(seed, p, s);
                }
            }
            (Inner::Additive(a), _) => {
                if !matches!(into, WindowSeed::Additive(_)) {
                    *into = WindowSeed::Additive(AfftSeed::default());
                }
                if let WindowSeed::Additive(p) = into {
                    a.prepare_into(seed, p);
                }
            }
            _ => unreachable!("scratch made by this window"),
        }
    }

    /// Computes the window for input words `x` (n bits, bits beyond zero)
    /// into `out` (`ceil(m/64)` words; bits beyond m cleared).
    ///
    /// # Panics
    /// On wrong lengths, or a seed or scratch made for another window.
    pub fn compute(
        &self,
        seed: &WindowSeed,
        x: &[u64],
        out: &mut [u64],
        scratch: &mut WindowScratch,
    ) {
        match (&self.inner, seed, scratch) {
            (Inner::Clmul(w), WindowSeed::Clmul(p), WindowScratch::Words(s)) => {
                w.compute(p, x, out, s)
            }
            (Inner::Fft(f), WindowSeed::Fft(p), WindowScratch::Fft(s)) => f.compute(p, x, out, s),
            (Inner::Additive(a), WindowSeed::Additive(p), WindowScratch::Words(s)) => {
                a.compute(p, x, out, s)
            }
            _ => panic!("seed or scratch prepared for another window"),
        }
    }
}
