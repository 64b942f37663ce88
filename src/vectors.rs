//! Published test vectors: the plain text format of `vectors/` and a checker.
//!
//! A vector file (`*.vec`) starts with the line `sluice-vectors 1`; `#` starts
//! a comment line; every case is a block
//!
//! ```text
//! case <name>
//! extractor <toeplitz | modified-toeplitz | trevisan | two-source>
//! input-bits <n>
//! output-bits <m>
//! param <key> <value>           (extractor-specific integers, any number)
//! input <hex>   | input-shake256 <label>
//! seed <hex>    | seed-shake256 <label>
//! output <hex>
//! input-digest <hex>            (optional)
//! seed-digest <hex>             (optional)
//! output-digest <hex>           (required when `output` is absent)
//! end
//! ```
//!
//! Hex is the packed MSB-first bytes of the bit string (`spec/conventions.md`),
//! pad bits of the last byte zero. A `*-shake256 <label>` line stands for the
//! first `ceil(bits / 8)` bytes of SHAKE256 (NIST FIPS 202) of the label's
//! UTF-8 bytes, read the same way with the pad bits cleared. Digests are data
//! digests (BLAKE3 of the 8-byte little-endian bit length, then the packed
//! bytes; `spec/conventions.md`).
//!
//! For `two-source` the `seed` line holds the **second raw source** Y (n
//! bits), not a seed: the extractor is seedless and takes Y in the seed slot
//! of [`Extractor`].
//!
//! Parsing is pure ([`parse`]); [`check_case`] recomputes one case with the
//! library's extractors.

#![forbid(unsafe_code)]

use crate::bits::digest::data_digest;
use crate::bits::{BitOrder, Bits};
use crate::extract::spec::SpecError;
use crate::extract::trevisan::TrevisanSpec;
use crate::extract::{Engine, Extractor, ExtractorSpec};
use sha3::digest::{ExtendableOutput, Update, XofReader};
use std::collections::BTreeMap;
use std::fmt;

/// The first line of every vector file.
pub const HEADER: &str = "sluice-vectors 1";

/// Bits given in full or by a recipe.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Data {
    /// Hex of the packed bytes.
    Hex(String),
    /// SHAKE256 of a label.
    Shake256(String),
}

/// One test vector.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Case {
    /// Unique name.
    pub name: String,
    /// Line of the `case` line.
    pub line: usize,
    /// Extractor name.
    pub extractor: String,
    /// n.
    pub input_bits: usize,
    /// m.
    pub output_bits: usize,
    /// Extractor-specific parameters.
    pub params: BTreeMap<String, String>,
    /// The input.
    pub input: Data,
    /// The seed.
    pub seed: Data,
    /// Expected output in full, if given.
    pub output: Option<String>,
    /// Expected data digest of the input, if given.
    pub input_digest: Option<String>,
    /// Expected data digest of the seed, if given.
    pub seed_digest: Option<String>,
    /// Expected data digest of the output, if given.
    pub output_digest: Option<String>,
}

/// A malformed vector file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ParseError {
    /// 1-based line.
    pub line: usize,
    /// What is wrong.
    pub message: String,
}

impl fmt::Display for ParseError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "line {}: {}", self.line, self.message)
    }
}

impl std::error::Error for ParseError {}

fn perr(line: usize, message: impl Into<String>) -> ParseError {
    ParseError {
        line,
        message: message.into(),
    }
}

/// A case being read: its first line, its fields (with their lines) and its
/// parameters.
type OpenCase = (
    usize,
    BTreeMap<String, (usize, String)>,
    BTreeMap<String, String>,
);

/// Parses a vector file.
pub fn parse(text: &str) -> Result<Vec<Case>, ParseError> {
    let mut lines = text.lines().enumerate().map(|(i, l)| (i + 1, l.trim()));
    match lines.find(|(_, l)| !l.is_empty() && !l.starts_with('#')) {
        Some((_, l)) if l == HEADER => {}
        Some((i, l)) => {
            return Err(perr(
                i,
                format!("expected the header {HEADER:?}, found {l:?}"),
            ))
        }
        None => return Err(perr(1, "empty file")),
    }
    let mut cases: Vec<Case> = Vec::new();
    let mut cur: Option<OpenCase> = None;
    for (i, l) in lines {
        if l.is_empty() || l.starts_with('#') {
            continue;
        }
        let (key, value) = match l.split_once(char::is_whitespace) {
            Some((k, v)) => (k, v.trim()),
            None => (l, ""),
        };
        match (key, cur.as_mut()) {
            ("case", None) => {
                if value.is_empty() {
                    return Err(perr(i, "case without a name"));
                }
                let mut f = BTreeMap::new();
                f.insert("name".to_string(), (i, value.to_string()));
                cur = Some((i, f, BTreeMap::new()));
            }
            ("case", Some(_)) => return Err(perr(i, "new case before the previous one's `end`")),
            ("end", Some(_)) => {
                let (start, fields, params) = cur.take().expect("inside a case");
                let c = build_case(start, fields, params)?;
                if cases.iter().any(|o| o.name == c.name) {
                    return Err(perr(start, format!("duplicate case name {:?}", c.name)));
                }
                cases.push(c);
            }
            ("param", Some((_, _, params))) => {
                let (k, v) = value
                    .split_once(char::is_whitespace)
                    .ok_or_else(|| perr(i, "param needs a key and a value"))?;
                params.insert(k.to_string(), v.trim().to_string());
            }
            (_, Some((_, fields, _))) => {
                if fields
                    .insert(key.to_string(), (i, value.to_string()))
                    .is_some()
                {
                    return Err(perr(i, format!("field {key:?} given twice")));
                }
            }
            (_, None) => return Err(perr(i, format!("{key:?} outside a case"))),
        }
    }
    if let Some((start, _, _)) = cur {
        return Err(perr(start, "case without `end`"));
    }
    Ok(cases)
}

fn build_case(
    line: usize,
    mut f: BTreeMap<String, (usize, String)>,
    params: BTreeMap<String, String>,
) -> Result<Case, ParseError> {
    let mut take = |k: &str| f.remove(k);
    let name = take("name").expect("set at case").1;
    let need = |v: Option<(usize, String)>, k: &str| {
        v.ok_or_else(|| perr(line, format!("case {name}: missing {k:?}")))
    };
    let extractor = need(take("extractor"), "extractor")?.1;
    let num = |v: (usize, String), k: &str| -> Result<usize, ParseError> {
        v.1.parse()
            .map_err(|_| perr(v.0, format!("{k}: {:?} is not a whole number", v.1)))
    };
    let input_bits = num(need(take("input-bits"), "input-bits")?, "input-bits")?;
    let output_bits = num(need(take("output-bits"), "output-bits")?, "output-bits")?;
    let data = |hex: Option<(usize, String)>, shake: Option<(usize, String)>, what: &str| match (
        hex, shake,
    ) {
        (Some(h), None) => Ok(Data::Hex(h.1)),
        (None, Some(s)) => Ok(Data::Shake256(s.1)),
        _ => Err(perr(
            line,
            format!("case {name}: give exactly one of {what:?} and \"{what}-shake256\""),
        )),
    };
    let input = data(take("input"), take("input-shake256"), "input")?;
    let seed = data(take("seed"), take("seed-shake256"), "seed")?;
    let output = take("output").map(|v| v.1);
    let input_digest = take("input-digest").map(|v| v.1);
    let seed_digest = take("seed-digest").map(|v| v.1);
    let output_digest = take("output-digest").map(|v| v.1);
    if output.is_none() && output_digest.is_none() {
        return Err(perr(
            line,
            format!("case {name}: needs \"output\" or \"output-digest\""),
        ));
    }
    if let Some((k, (l, _))) = f.into_iter().next() {
        return Err(perr(l, format!("case {name}: unknown field {k:?}")));
    }
    Ok(Case {
        name,
        line,
        extractor,
        input_bits,
        output_bits,
        params,
        input,
        seed,
        output,
        input_digest,
        seed_digest,
        output_digest,
    })
}

/// The first `nbits` bits of SHAKE256(label), packed MSB-first.
pub fn shake_bits(label: &str, nbits: usize) -> Bits {
    let mut h = sha3::Shake256::default();
    h.update(label.as_bytes());
    let mut bytes = vec![0u8; nbits.div_ceil(8)];
    h.finalize_xof().read(&mut bytes);
    Bits::from_packed(&bytes, nbits, BitOrder::Msb).expect("exact length")
}

impl Data {
    /// The bits, `nbits` long.
    pub fn bits(&self, nbits: usize) -> Result<Bits, String> {
        match self {
            Data::Hex(h) => {
                let b = Bits::from_hex(h, None, BitOrder::Msb).map_err(|e| e.to_string())?;
                if b.len() != nbits.div_ceil(8) * 8 {
                    return Err(format!(
                        "hex holds {} bits, expected {} rounded up to whole bytes",
                        b.len(),
                        nbits
                    ));
                }
                let s = b.slice(0, nbits);
                if b.slice(nbits, b.len() - nbits).count_ones() != 0 {
                    return Err("pad bits of the last byte are not zero".into());
                }
                Ok(s)
            }
            Data::Shake256(label) => {
                // A recipe's length comes from the file: checked against
                // the memory available before it is allocated.
                crate::files::space::check_bits(nbits as u128, "a SHAKE256 recipe")
                    .map_err(|e| e.to_string())?;
                Ok(shake_bits(label, nbits))
            }
        }
    }
}

/// Builds the extractor a case names, on `engine`.
pub fn build_extractor(case: &Case, engine: Engine) -> Result<Box<dyn Extractor>, String> {
    let spec = case_spec(case)?;
    spec.build(engine).map_err(|e| match e {
        SpecError::NoFftEngine(_) => "trevisan has no FFT engine".to_string(),
        e => e.to_string(),
    })
}

/// The extractor a case names.
pub fn case_spec(case: &Case) -> Result<ExtractorSpec, String> {
    ExtractorSpec::from_params(
        &case.extractor,
        case.input_bits,
        case.output_bits,
        &case.params,
    )
    .map_err(|e| match e {
        SpecError::Param(p) => format!("param {p}"),
        e => e.to_string(),
    })
}

/// The Trevisan parameters of a case (`param one-bit`, `design`,
/// `field-bits`, `design-factor`, `prime`).
pub fn trevisan_spec(case: &Case) -> Result<TrevisanSpec, String> {
    let spec = case_spec(case)?;
    spec.trevisan()
        .ok_or_else(|| format!("{}: not a Trevisan case", case.extractor))
}

/// The engines a case is checked on: every supported one, except the
/// portable kernel above 2^18 input bits (minutes per case).
pub fn engines_for(case: &Case) -> Vec<Engine> {
    Engine::all_supported()
        .into_iter()
        .filter(|e| !(e.name() == "portable" && case.input_bits > 1 << 18))
        .filter(|e| !(e.name() == "additive-fft-portable" && case.input_bits > 1 << 22))
        // Karatsuba takes minutes on whole-run sizes; the additive FFT and
        // the generator's cross-check cover them.
        .filter(|e| !(matches!(e, Engine::Clmul(_)) && case.input_bits > 1 << 26))
        .filter(|e| {
            !(case.extractor == "trevisan" && matches!(e, Engine::Fft | Engine::Additive(_)))
        })
        .filter(|e| {
            *e != Engine::Fft
                || crate::gf2::fft::FftWindow::accepts(
                    case.input_bits.max(1),
                    case.output_bits.max(1),
                )
        })
        .collect()
}

/// The result of checking one case on one engine.
#[derive(Clone, Debug, serde::Serialize)]
pub struct Outcome {
    /// Case name.
    pub case: String,
    /// Engine.
    pub engine: String,
    /// `one-shot` (seed passed per call) or `bound` (seed bound once).
    pub mode: &'static str,
    /// Whether everything matched.
    pub pass: bool,
    /// What did not match.
    pub detail: Option<String>,
}

/// Recomputes a case on every engine of [`engines_for`], in both modes.
pub fn check_case(case: &Case) -> Vec<Outcome> {
    let mut out = Vec::new();
    let fail = |engine: &str, mode, msg: String| Outcome {
        case: case.name.clone(),
        engine: engine.to_string(),
        mode,
        pass: false,
        detail: Some(msg),
    };
    let x = match case.input.bits(case.input_bits) {
        Ok(x) => x,
        Err(e) => return vec![fail("-", "one-shot", format!("input: {e}"))],
    };
    let probe = match build_extractor(case, Engine::detect()) {
        Ok(p) => p,
        Err(e) => return vec![fail("-", "one-shot", e)],
    };
    let s = match case.seed.bits(probe.seed_bits()) {
        Ok(s) => s,
        Err(e) => return vec![fail("-", "one-shot", format!("seed: {e}"))],
    };
    for (what, want, bits) in [
        ("input", &case.input_digest, &x),
        ("seed", &case.seed_digest, &s),
    ] {
        if let Some(d) = want {
            if &data_digest(bits) != d {
                return vec![fail(
                    "-",
                    "one-shot",
                    format!("{what} digest differs from the recipe's bits"),
                )];
            }
        }
    }
    for engine in engines_for(case) {
        let plan = match build_extractor(case, engine) {
            Ok(p) => p,
            Err(e) => {
                out.push(fail(engine.name(), "one-shot", e));
                continue;
            }
        };
        for mode in ["one-shot", "bound"] {
            let mut y = Bits::zeros(case.output_bits);
            if mode == "one-shot" {
                plan.extract(&x, &s, &mut y);
            } else {
                plan.with_seed(&s).extract(&x, &mut y);
            }
            let mut problems = Vec::new();
            if let Some(h) = &case.output {
                let got = y.to_hex(BitOrder::Msb);
                if &got != h {
                    let want = Bits::from_hex(h, None, BitOrder::Msb)
                        .map(|w| w.slice(0, case.output_bits.min(w.len())));
                    match want {
                        Ok(w) => problems.push(format!(
                            "output differs from bit {} on",
                            y.first_difference(&w).unwrap_or(0)
                        )),
                        Err(e) => problems.push(format!("expected output: {e}")),
                    }
                }
            }
            if let Some(d) = &case.output_digest {
                if &data_digest(&y) != d {
                    problems.push("output digest differs".to_string());
                }
            }
            out.push(Outcome {
                case: case.name.clone(),
                engine: engine.name().to_string(),
                mode,
                pass: problems.is_empty(),
                detail: (!problems.is_empty()).then(|| problems.join("; ")),
            });
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shake256_matches_fips_202_example() {
        // SHAKE256 of the empty message, first 32 bytes: 46b9dd2b0ba88d13
        // 233b3feb743eeb243fcd52ea62b81b82b50c27646ed5762f (NIST FIPS 202
        // example values for SHAKE256 with an empty input; from memory, and
        // the same as the sha3 crate's known-answer tests).
        let b = shake_bits("", 256);
        assert_eq!(
            b.to_hex(BitOrder::Msb),
            "46b9dd2b0ba88d13233b3feb743eeb243fcd52ea62b81b82b50c27646ed5762f"
        );
    }

    #[test]
    fn parse_reports_lines() {
        let e = parse("sluice-vectors 1\ncase a\nextractor toeplitz\nend\n").unwrap_err();
        assert_eq!(e.line, 2);
        assert!(e.message.contains("input-bits"), "{e}");
        let e = parse("nope\n").unwrap_err();
        assert_eq!(e.line, 1);
        let e = parse("sluice-vectors 1\ninput 00\n").unwrap_err();
        assert_eq!(e.line, 2);
        let ok = parse(
            "sluice-vectors 1\n# c\ncase a\nextractor toeplitz\ninput-bits 16\noutput-bits 8\n\
             input 7b6f\nseed 2b5726\noutput 2a\nend\n",
        )
        .unwrap();
        assert_eq!(ok.len(), 1);
        assert!(check_case(&ok[0]).iter().all(|o| o.pass));
    }
}
