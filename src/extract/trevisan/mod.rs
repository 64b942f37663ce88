//! Trevisan-style extractor: a one-bit extractor applied under the sets of a
//! weak design (`spec/trevisan.md` sections 2 to 4).
//!
//! z_i = C(x, y|S_i) for i = 0 .. m-1, where y|S_i is the seed restricted to
//! the positions of set S_i in increasing order (section 2), C is PH
//! (Reed-Solomon then Hadamard over GF(2^l), 3.1) or IP (inner product, 3.2)
//! and S_0 .. S_{m-1} is the POLY (4.1) or BLOCK (4.2) weak design. The
//! construction is Trevisan's [Tre01] with weak designs [RRV02], in the form
//! analysed against quantum side information in [DPVR12] (sources listed in
//! section 0 of the spec).
//!
//! The function is fixed by the integers (n, m, one-bit, l, design, q);
//! [`TrevisanSpec`] holds them (q may be left to the default rule, the
//! smallest prime >= c t). [`Trevisan::new`] plans once: field, design
//! groups, block count; [`Extractor::extract`] then runs one block, with the
//! output bits split over all cores. [`reference`] is the slow twin, straight
//! from the definitions, that the tests and the vector generator use.
//!
//! Parameter *selection* from a min-entropy claim (section 6) is not here: it
//! belongs to the planning layer, which hands its result to this module as a
//! [`TrevisanSpec`].

pub mod design;
mod eval;
pub mod onebit;
#[doc(hidden)]
pub mod reference;

pub use design::{Design, DesignKind, Group};
pub use onebit::OneBit;

use crate::bits::Bits;
use crate::extract::{
    check_len, Extractor, NoProgress, Progress, ScratchPool, SeededExtractor, Unprepared,
};
use crate::gf2::field::{Field, FieldError, FieldPath, MAX_FIELD_BITS};
use crate::gf2::Backend;
use std::fmt;

/// An error in the parameters of a Trevisan extractor: which parameter
/// (`field`) and what is wrong with it, quoting the value.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("trevisan parameter {field}: {kind}")]
pub struct Error {
    field: &'static str,
    kind: ErrorKind,
}

impl Error {
    pub(crate) fn new(field: &'static str, kind: ErrorKind) -> Error {
        Error { field, kind }
    }

    /// The parameter at fault (`input-bits`, `output-bits`, `field-bits`,
    /// `prime`, `design-factor`, ...).
    pub fn field(&self) -> &'static str {
        self.field
    }

    /// What is wrong.
    pub fn kind(&self) -> &ErrorKind {
        &self.kind
    }
}

/// What is wrong with a parameter.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum ErrorKind {
    /// Below the smallest allowed value.
    #[error("{value} is too small: it must be at least {min}")]
    TooSmall {
        /// The value given.
        value: u64,
        /// The smallest allowed value.
        min: u64,
    },
    /// Above what the implementation supports.
    #[error("{value} is too large: {why}")]
    TooLarge {
        /// The value given.
        value: u64,
        /// Why.
        why: &'static str,
    },
    /// q is not a prime.
    #[error("{value} is not a prime")]
    NotPrime {
        /// The value given.
        value: u64,
    },
    /// A value that must be absent for this one-bit extractor.
    #[error("{value} was given, but {why}")]
    NotApplicable {
        /// The value given.
        value: u64,
        /// Why it does not apply.
        why: &'static str,
    },
    /// m > q^t: POLY would need degree D > t - 1 and two sets would coincide
    /// (section 4.1).
    #[error(
        "m = {m} sets need polynomials of degree D = {degree} over GF({q}), \
         but sets of t = {t} points allow at most D = t - 1 (m must be <= q^t)"
    )]
    TooManySets {
        /// m
        m: u64,
        /// t
        t: u64,
        /// q
        q: u64,
        /// The degree D that m needs.
        degree: u64,
    },
    /// An integer of the design does not fit the arithmetic used.
    #[error("{what} overflows")]
    Overflow {
        /// Which quantity.
        what: &'static str,
    },
    /// The field GF(2^l) cannot be built.
    #[error("{0}")]
    Field(FieldError),
}

/// The integers that define a Trevisan extractor (spec section 6, "What
/// defines the function"), plus the design factor c of the default prime.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct TrevisanSpec {
    /// Input length n in bits.
    pub n: usize,
    /// Output length m in bits.
    pub m: usize,
    /// One-bit extractor.
    pub one_bit: OneBit,
    /// Field size l for PH (1 ..= 2048); must be 0 for IP.
    pub field_bits: usize,
    /// Weak design.
    pub design: DesignKind,
    /// c >= 1: the default q is the smallest prime >= c t (section 4).
    pub design_factor: u64,
    /// q, if given explicitly (recorded outputs give it); must be a prime
    /// >= t. `None` takes the default rule.
    pub prime: Option<u64>,
}

impl TrevisanSpec {
    /// The one-bit seed length t: 2l for PH, n for IP.
    pub fn set_size(&self) -> usize {
        match self.one_bit {
            OneBit::Ph => 2 * self.field_bits,
            OneBit::Ip => self.n,
        }
    }

    /// Checks the parameters and returns (t, q).
    pub fn resolve(&self) -> Result<(u64, u64), Error> {
        if self.n == 0 {
            return Err(Error::new(
                "input-bits",
                ErrorKind::TooSmall { value: 0, min: 1 },
            ));
        }
        if self.m == 0 {
            return Err(Error::new(
                "output-bits",
                ErrorKind::TooSmall { value: 0, min: 1 },
            ));
        }
        match self.one_bit {
            OneBit::Ph => {
                if self.field_bits == 0 {
                    return Err(Error::new(
                        "field-bits",
                        ErrorKind::TooSmall { value: 0, min: 1 },
                    ));
                }
                if self.field_bits > MAX_FIELD_BITS {
                    return Err(Error::new(
                        "field-bits",
                        ErrorKind::TooLarge {
                            value: self.field_bits as u64,
                            why: "the field table stops at l = 2048",
                        },
                    ));
                }
            }
            OneBit::Ip => {
                if self.field_bits != 0 {
                    return Err(Error::new(
                        "field-bits",
                        ErrorKind::NotApplicable {
                            value: self.field_bits as u64,
                            why: "the inner-product extractor uses no field (give 0)",
                        },
                    ));
                }
            }
        }
        if self.design_factor == 0 {
            return Err(Error::new(
                "design-factor",
                ErrorKind::TooSmall { value: 0, min: 1 },
            ));
        }
        let t = self.set_size() as u64;
        let q = match self.prime {
            Some(q) => q,
            None => {
                let ct = t.checked_mul(self.design_factor).ok_or(Error::new(
                    "design-factor",
                    ErrorKind::TooLarge {
                        value: self.design_factor,
                        why: "c * t overflows",
                    },
                ))?;
                design::smallest_prime_at_least(ct).ok_or(Error::new(
                    "design-factor",
                    ErrorKind::TooLarge {
                        value: self.design_factor,
                        why: "the smallest prime >= c * t is not below 2^32",
                    },
                ))?
            }
        };
        Ok((t, q))
    }
}

/// Seed-dependent data cached by [`Extractor::with_seed`] only if it fits
/// this many bytes.
const SEED_CACHE_LIMIT: usize = 1 << 29;

/// A planned Trevisan extractor (see the module docs).
pub struct Trevisan {
    spec: TrevisanSpec,
    design: Design,
    t: usize,
    /// PH only.
    field: Option<Field>,
    /// ceil(n / l) for PH.
    nb: usize,
    /// Parsed input blocks (PH), reused across calls.
    blocks: ScratchPool<Vec<u64>>,
    /// Per-thread scratch of the evaluation (positions, alphas, betas...).
    tasks: ScratchPool<eval::TaskScratch>,
}

impl fmt::Debug for Trevisan {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("Trevisan")
            .field("spec", &self.spec)
            .field("t", &self.t)
            .field("q", &self.design.prime())
            .field("seed_bits", &self.design.seed_bits())
            .finish()
    }
}

impl Trevisan {
    /// Plans the extractor for `spec` with the fastest carry-less backend.
    pub fn new(spec: &TrevisanSpec) -> Result<Trevisan, Error> {
        Trevisan::with_backend(spec, Backend::detect())
    }

    /// Plans with a given carry-less backend (tests and benches).
    pub fn with_backend(spec: &TrevisanSpec, backend: Backend) -> Result<Trevisan, Error> {
        let (t, q) = spec.resolve()?;
        let design = Design::new(spec.design, spec.m as u64, t, q)?;
        if usize::try_from(design.seed_bits()).is_err() {
            return Err(Error::new(
                "design",
                ErrorKind::Overflow {
                    what: "seed length d",
                },
            ));
        }
        let (field, nb) = match spec.one_bit {
            OneBit::Ph => {
                let f = Field::with_backend(spec.field_bits, backend)
                    .map_err(|e| Error::new("field-bits", ErrorKind::Field(e)))?;
                (Some(f), spec.n.div_ceil(spec.field_bits))
            }
            OneBit::Ip => (None, 0),
        };
        Ok(Trevisan {
            spec: *spec,
            design,
            t: t as usize,
            field,
            nb,
            blocks: ScratchPool::new(),
            tasks: ScratchPool::new(),
        })
    }

    /// The parameters.
    pub fn spec(&self) -> &TrevisanSpec {
        &self.spec
    }

    /// The weak design (q, groups, seed length).
    pub fn design(&self) -> &Design {
        &self.design
    }

    /// The prime q in use.
    pub fn prime(&self) -> u64 {
        self.design.prime()
    }

    /// One-bit seed length t.
    pub fn set_size(&self) -> usize {
        self.t
    }

    /// Number of PH blocks nb = ceil(n / l) (0 for IP).
    pub fn blocks(&self) -> usize {
        self.nb
    }

    /// The field of PH (`None` for IP).
    pub fn field(&self) -> Option<&Field> {
        self.field.as_ref()
    }

    /// The same plan with its field on another product path
    /// ([`Field::with_path`]); for tests and benches that compare the
    /// paths. IP plans (no field) are returned unchanged.
    #[doc(hidden)]
    pub fn with_field_path(mut self, path: FieldPath) -> Result<Trevisan, FieldError> {
        self.field = self.field.map(|f| f.with_path(path)).transpose()?;
        Ok(self)
    }
}

impl Extractor for Trevisan {
    fn name(&self) -> &'static str {
        "trevisan"
    }

    fn input_bits(&self) -> usize {
        self.spec.n
    }

    fn output_bits(&self) -> usize {
        self.spec.m
    }

    fn seed_bits(&self) -> usize {
        self.design.seed_bits() as usize
    }

    fn extract(&self, input: &Bits, seed: &Bits, out: &mut Bits) {
        self.extract_with_progress(input, seed, out, &NoProgress);
    }

    /// Reports after every task of 64 output bits (from the rayon workers).
    fn extract_with_progress(
        &self,
        input: &Bits,
        seed: &Bits,
        out: &mut Bits,
        progress: &dyn Progress,
    ) {
        check_len("input", self.spec.n, input.len());
        check_len("seed", self.seed_bits(), seed.len());
        check_len("output", self.spec.m, out.len());
        eval::extract(self, input, &eval::SeedView::Raw(seed), out, progress);
    }

    fn with_seed<'a>(&'a self, seed: &'a Bits) -> Box<dyn SeededExtractor + 'a> {
        check_len("seed", self.seed_bits(), seed.len());
        match self.spec.one_bit {
            OneBit::Ph => {
                let w = self.field.as_ref().map_or(0, |f| f.words());
                let bytes = self.spec.m.saturating_mul(2 * w * 8);
                if bytes <= SEED_CACHE_LIMIT {
                    Box::new(eval::PreparedPh::new(self, seed))
                } else {
                    Box::new(Unprepared::new(self, seed))
                }
            }
            OneBit::Ip => Box::new(Unprepared::new(self, seed)),
        }
    }
}
