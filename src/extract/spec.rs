//! One vocabulary for "which extractor": a plain-data [`ExtractorSpec`]
//! (the family and the integers that define the function) with one
//! [`ExtractorSpec::build`].
//!
//! The planner returns a spec (`plan::select::Planned::spec`), receipts and
//! vector files store its [`params`](ExtractorSpec::params) and read them
//! back with [`ExtractorSpec::from_params`], and the pipeline, `sluice
//! bench`, the vector checker and the command line build their extractor
//! from it. Adding an extractor means one more [`Family`] arm here (see
//! DEVELOPERS.md, "Adding an extractor").

use super::trevisan::{self, DesignKind, OneBit, Trevisan, TrevisanSpec};
use super::{Engine, Extractor, ModifiedToeplitz, Toeplitz, TwoSource, TwoSourceError};
use std::collections::BTreeMap;

/// The family of an extractor and its own defining integers (beyond n, m).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Family {
    /// Toeplitz hashing, seed n + m - 1 bits.
    Toeplitz,
    /// Modified Toeplitz hashing `[I | T']`, seed n - 1 bits.
    ModifiedToeplitz,
    /// Trevisan's construction with a one-bit extractor and a weak design.
    Trevisan {
        /// The one-bit extractor.
        one_bit: OneBit,
        /// The weak design.
        design: DesignKind,
        /// The field size l of PH (0 for IP).
        field_bits: usize,
        /// The design factor c (q = smallest prime >= c t unless `prime`).
        design_factor: u64,
        /// The design's prime q, when fixed (planned runs and receipts).
        prime: Option<u64>,
    },
    /// The seedless cyclic-shift two-source extractor (the second source
    /// takes the seed's place).
    TwoSource,
}

/// An extractor named to the bit: family, input length n, output length m.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct ExtractorSpec {
    /// The family and its integers.
    pub family: Family,
    /// Input bits per block.
    pub n: usize,
    /// Output bits per block.
    pub m: usize,
}

/// Why a spec cannot be built or read.
#[derive(Debug, thiserror::Error)]
pub enum SpecError {
    /// A Toeplitz-family size.
    #[error(transparent)]
    Plan(#[from] super::Error),
    /// A Trevisan parameter.
    #[error(transparent)]
    Trevisan(#[from] trevisan::Error),
    /// A two-source size.
    #[error(transparent)]
    TwoSource(#[from] TwoSourceError),
    /// Trevisan runs on the carry-less backends only.
    #[error("engine {0} applies to the Toeplitz families only; Trevisan runs on the carry-less backends")]
    NoFftEngine(Engine),
    /// A stored parameter that cannot be read.
    #[error("{0}")]
    Param(String),
    /// A family name this version does not know.
    #[error("unknown extractor {0:?}")]
    Unknown(String),
}

impl Family {
    /// The family's name, as on the command line, in receipts and vectors.
    pub fn name(&self) -> &'static str {
        match self {
            Family::Toeplitz => "toeplitz",
            Family::ModifiedToeplitz => "modified-toeplitz",
            Family::Trevisan { .. } => "trevisan",
            Family::TwoSource => "two-source",
        }
    }
}

impl ExtractorSpec {
    /// The family's name.
    pub fn name(&self) -> &'static str {
        self.family.name()
    }

    /// The Trevisan integers as the extractor takes them.
    pub fn trevisan(&self) -> Option<TrevisanSpec> {
        match self.family {
            Family::Trevisan {
                one_bit,
                design,
                field_bits,
                design_factor,
                prime,
            } => Some(TrevisanSpec {
                n: self.n,
                m: self.m,
                one_bit,
                field_bits,
                design,
                design_factor,
                prime,
            }),
            _ => None,
        }
    }

    /// Plans the extractor on `engine` (Trevisan: the carry-less backend it
    /// names, or the fastest one here for [`Engine::Auto`]).
    pub fn build(&self, engine: Engine) -> Result<Box<dyn Extractor>, SpecError> {
        let (n, m) = (self.n, self.m);
        Ok(match self.family {
            Family::Toeplitz => Box::new(Toeplitz::with_engine(n, m, engine)?),
            Family::ModifiedToeplitz => Box::new(ModifiedToeplitz::with_engine(n, m, engine)?),
            Family::TwoSource => Box::new(TwoSource::with_engine(n, m, engine)?),
            Family::Trevisan { .. } => {
                let backend = match engine {
                    Engine::Clmul(b) => b,
                    Engine::Auto => crate::gf2::Backend::detect(),
                    Engine::Fft | Engine::Additive(_) => {
                        return Err(SpecError::NoFftEngine(engine))
                    }
                };
                let spec = self.trevisan().expect("a Trevisan family");
                Box::new(Trevisan::with_backend(&spec, backend)?)
            }
        })
    }

    /// The family-specific integers under the names the vector files and
    /// receipts use (`one-bit`, `design`, `field-bits`, `design-factor`,
    /// `prime`); empty for the Toeplitz families and two-source.
    pub fn params(&self) -> BTreeMap<String, String> {
        let mut p = BTreeMap::new();
        if let Family::Trevisan {
            one_bit,
            design,
            field_bits,
            design_factor,
            prime,
        } = self.family
        {
            p.insert("one-bit".into(), one_bit.name().to_string());
            p.insert("design".into(), design.name().to_string());
            if field_bits > 0 {
                p.insert("field-bits".into(), field_bits.to_string());
            }
            p.insert("design-factor".into(), design_factor.to_string());
            if let Some(q) = prime {
                p.insert("prime".into(), q.to_string());
            }
        }
        p
    }

    /// Reads a spec back from a family name, n, m and [`params`](Self::params).
    /// Messages name the parameter (`params.design: ...` is the caller's
    /// prefix to add).
    pub fn from_params(
        name: &str,
        n: usize,
        m: usize,
        params: &BTreeMap<String, String>,
    ) -> Result<ExtractorSpec, SpecError> {
        let family = match name {
            "toeplitz" => Family::Toeplitz,
            "modified-toeplitz" => Family::ModifiedToeplitz,
            "two-source" => Family::TwoSource,
            "trevisan" => trevisan_family(params)?,
            other => return Err(SpecError::Unknown(other.to_string())),
        };
        Ok(ExtractorSpec { family, n, m })
    }
}

/// The Trevisan family from stored parameters.
fn trevisan_family(params: &BTreeMap<String, String>) -> Result<Family, SpecError> {
    let get = |k: &str| params.get(k).map(String::as_str);
    let num = |k: &str| -> Result<Option<u64>, SpecError> {
        get(k)
            .map(|v| {
                v.parse::<u64>()
                    .map_err(|_| SpecError::Param(format!("{k}: {v:?} is not a whole number")))
            })
            .transpose()
    };
    let one_bit = match get("one-bit") {
        Some("ph") => OneBit::Ph,
        Some("ip") => OneBit::Ip,
        other => {
            return Err(SpecError::Param(format!(
                "one-bit: {other:?}, expected ph or ip"
            )))
        }
    };
    let design = match get("design") {
        Some("poly") => DesignKind::Poly,
        Some("block") => DesignKind::Block,
        other => {
            return Err(SpecError::Param(format!(
                "design: {other:?}, expected poly or block"
            )))
        }
    };
    Ok(Family::Trevisan {
        one_bit,
        design,
        field_bits: num("field-bits")?.unwrap_or(0) as usize,
        design_factor: num("design-factor")?.unwrap_or(1),
        prime: num("prime")?,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn params_round_trip() {
        let s = ExtractorSpec {
            family: Family::Trevisan {
                one_bit: OneBit::Ph,
                design: DesignKind::Block,
                field_bits: 12,
                design_factor: 2,
                prime: Some(29),
            },
            n: 1000,
            m: 40,
        };
        let back = ExtractorSpec::from_params(s.name(), s.n, s.m, &s.params()).unwrap();
        assert_eq!(back, s);
        let t = ExtractorSpec {
            family: Family::ModifiedToeplitz,
            n: 64,
            m: 32,
        };
        assert!(t.params().is_empty());
        assert_eq!(
            ExtractorSpec::from_params("modified-toeplitz", 64, 32, &BTreeMap::new()).unwrap(),
            t
        );
        assert!(matches!(
            ExtractorSpec::from_params("sponge", 1, 1, &BTreeMap::new()),
            Err(SpecError::Unknown(_))
        ));
    }

    #[test]
    fn build_gives_the_family_and_sizes() {
        for family in [Family::Toeplitz, Family::ModifiedToeplitz] {
            let e = ExtractorSpec {
                family,
                n: 100,
                m: 30,
            }
            .build(Engine::Auto)
            .unwrap();
            assert_eq!(
                (e.name(), e.input_bits(), e.output_bits()),
                (family.name(), 100, 30)
            );
        }
        let fam = Family::Trevisan {
            one_bit: OneBit::Ip,
            design: DesignKind::Poly,
            field_bits: 0,
            design_factor: 1,
            prime: None,
        };
        let s = ExtractorSpec {
            family: fam,
            n: 16,
            m: 4,
        };
        assert!(matches!(
            s.build(Engine::Fft),
            Err(SpecError::NoFftEngine(_))
        ));
        assert_eq!(s.build(Engine::Auto).unwrap().name(), "trevisan");
    }
}
