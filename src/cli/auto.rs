//! Automatic extraction: size the output from the security inputs with the
//! planner, check a certificate against the raw file, and write a receipt.

use super::extract::{Common, DesignArg, ExtractorArg, Layout, OneBitArg, TrevisanArgs};
use super::plan::{plan_error, speed_model, SecurityArgs};
use anyhow::{bail, Context};
use sluice::extract::Extractor;
use sluice::files::{AtomicFile, Kind, Replace};
use sluice::pipeline::receipt::{self, Receipt};
use sluice::pipeline::{self, Report};
use sluice::plan::compose;
use sluice::plan::lhl::Family;
use sluice::plan::round::up4;
use sluice::plan::select::{self, Construction, NoSpeeds, Objective, Planned, SelectorInput};
use sluice::plan::trevisan::{Design as PlanDesign, OneBit as PlanOneBit, TrevisanPlan};
use std::collections::BTreeMap;
use std::io::Write;
use std::path::{Path, PathBuf};

/// What the planner decided for a run.
pub struct AutoPlan {
    construction: Construction,
    reason: String,
    planned: Planned,
    input: SelectorInput,
    certificate: Option<(PathBuf, sluice::certify::certificate::Certificate, String)>,
    input_digest: String,
    total_bits: u64,
    labels: Vec<String>,
    seed_digest: Option<String>,
    own_seed_record: bool,
}

/// The constructions `sluice extract` can run.
fn runnable(c: &Construction) -> Option<ExtractorArg> {
    match c {
        Construction::Hash {
            family: Family::Toeplitz,
        } => Some(ExtractorArg::Toeplitz),
        Construction::Hash {
            family: Family::ModifiedToeplitz,
        } => Some(ExtractorArg::ModifiedToeplitz),
        Construction::Trevisan { .. } => Some(ExtractorArg::Trevisan),
    }
}

/// The extractor's parameters from the planner's Trevisan integers.
fn trevisan_args(p: &TrevisanPlan) -> TrevisanArgs {
    let f = &p.function;
    TrevisanArgs {
        one_bit: match f.one_bit {
            PlanOneBit::Ph => OneBitArg::Ph,
            PlanOneBit::Ip => OneBitArg::Ip,
        },
        design: match f.design {
            PlanDesign::Poly => DesignArg::Poly,
            PlanDesign::Block => DesignArg::Block,
        },
        field_bits: f.l.unwrap_or(0) as usize,
        design_factor: p.c,
        prime: Some(f.q),
    }
}

fn construction_of(e: ExtractorArg, c: &Common) -> anyhow::Result<Construction> {
    Ok(match e {
        ExtractorArg::Toeplitz => Construction::Hash {
            family: Family::Toeplitz,
        },
        ExtractorArg::ModifiedToeplitz => Construction::Hash {
            family: Family::ModifiedToeplitz,
        },
        ExtractorArg::TwoSource => {
            bail!("--extractor two-source needs --output-bits M: the planner does not size two-source runs")
        }
        ExtractorArg::Trevisan => {
            if c.field_bits.is_some() {
                bail!("--field-bits: with the security inputs the planner chooses the field; leave it out");
            }
            Construction::Trevisan {
                one_bit: match c.one_bit {
                    Some(OneBitArg::Ip) => PlanOneBit::Ip,
                    _ => PlanOneBit::Ph,
                },
                design: match c.design {
                    Some(DesignArg::Block) => PlanDesign::Block,
                    _ => PlanDesign::Poly,
                },
                c: c.design_factor.unwrap_or(1),
            }
        }
    })
}

/// Sizes a run: the block layout, then the planner's choice among the
/// constructions this command runs (or the one `--extractor` names).
pub fn plan_run(c: &Common, sec: &SecurityArgs) -> anyhow::Result<(Layout, AutoPlan)> {
    plan_run_seeded(c, sec, sec.seed_deficiency, 0.0)
}

/// As [`plan_run`], for a registered seed: its declared deficiency s and
/// its eps_seed (hashing spec 4.4, 4.7) enter the plan.
pub fn plan_run_seeded(
    c: &Common,
    sec: &SecurityArgs,
    deficiency: f64,
    eps_seed: f64,
) -> anyhow::Result<(Layout, AutoPlan)> {
    let mut sec = sec.clone();
    sec.seed_deficiency = deficiency;
    let sec = &sec;
    if c.output_bits.is_some() {
        bail!("--output-bits and the security inputs exclude each other: give one or the other");
    }
    let file = c.files.input(&c.input);
    if file.is_std() {
        bail!("automatic extraction digests the input before hashing it, so it needs a file, not standard input");
    }
    let available = pipeline::count_bits(&file)?;
    // The certificate fixes the string: its length, one block.
    let cert_n = match &sec.certificate {
        Some(p) => {
            let text = std::fs::read_to_string(p)
                .with_context(|| format!("{}: cannot read the certificate", p.display()))?;
            let cert = sluice::certify::certificate::Certificate::from_json_str(&text)
                .with_context(|| format!("{}", p.display()))?;
            Some(cert.string.length_bits)
        }
        None => None,
    };
    let total = match (cert_n, c.input_bits) {
        (Some(n), Some(t)) if t != n => {
            bail!("--input-bits {t}: the certificate covers exactly {n} bits")
        }
        (Some(n), _) => n,
        (None, Some(t)) => t,
        (None, None) => available,
    };
    if total > available {
        bail!(
            "{}: {total} bits asked for, but the input ends after {available} bits",
            c.input.display()
        );
    }
    let n = match (cert_n, c.block_bits) {
        (Some(n), Some(b)) if b as u64 != n => bail!(
            "--block-bits {b}: a certificate covers its string as one block of {n} bits; it gives no per-block bounds, so the string cannot be split"
        ),
        (_, Some(b)) => b as u64,
        (_, None) => total,
    };
    if n == 0 || total == 0 {
        bail!("{}: the input holds no bits", c.input.display());
    }
    let blocks = total / n;
    if blocks == 0 {
        bail!("--block-bits {n} is larger than the {total} input bits: no block would be hashed");
    }
    let resolved = sec.resolve(Some(n), blocks)?;
    let mut input = resolved.input;
    input.budget.eps_seed = eps_seed;
    let speeds;
    let model: &dyn select::ThroughputModel = if input.objective == Objective::Fastest {
        speeds = speed_model();
        &speeds
    } else {
        &NoSpeeds
    };
    let (construction, planned, reason) = match c.extractor {
        Some(e) => {
            let cons = construction_of(e, c)?;
            let p = select::plan_one(&cons, &input, model)
                .map_err(|e| plan_error(e, resolved.rate_given))?;
            if let Some(why) = &p.impractical {
                bail!(
                    "--extractor {}: {why}; choose another extractor or smaller blocks",
                    cons.name()
                );
            }
            (cons, p, "named with --extractor".to_string())
        }
        None => {
            let sel =
                select::select(&input, model).map_err(|e| plan_error(e, resolved.rate_given))?;
            pick(&sel, input.objective)?
        }
    };
    let extractor = runnable(&construction).expect("only runnable constructions are picked");
    // Digest the input first; with a certificate it must be the certified string.
    let input_digest = pipeline::digest_prefix(&file, total)?;
    if let Some((path, cert, _)) = &resolved.certificate {
        if cert.string.digest != input_digest {
            bail!(
                "{}: this is not the string {} certifies (the data digest of its first {total} bits differs); nothing was extracted",
                c.input.display(),
                path.display()
            );
        }
    }
    let layout = Layout {
        extractor,
        trevisan: planned.trevisan.as_ref().map(trevisan_args),
        m: usize::try_from(planned.m)?,
        block_bits: Some(usize::try_from(n)?),
        input_bits: Some(total),
    };
    Ok((
        layout,
        AutoPlan {
            construction,
            reason,
            planned,
            input,
            certificate: resolved.certificate,
            input_digest,
            total_bits: total,
            labels: resolved.labels,
            seed_digest: None,
            own_seed_record: false,
        },
    ))
}

/// The selector's choice if this command runs it, else the best runnable row
/// for the same objective.
fn pick(
    sel: &select::Selection,
    objective: Objective,
) -> anyhow::Result<(Construction, Planned, String)> {
    if let Some(i) = sel.chosen {
        let row = &sel.rows[i];
        if runnable(&row.construction).is_some() {
            let p = row.outcome.clone().expect("the chosen row is planned");
            return Ok((row.construction, p, sel.reason.clone()));
        }
    }
    let candidates = sel
        .rows
        .iter()
        .filter(|r| runnable(&r.construction).is_some())
        .filter_map(|r| r.outcome.as_ref().ok().map(|p| (r.construction, p.clone())))
        .filter(|(_, p)| p.impractical.is_none());
    let best = match objective {
        Objective::MostOutput => {
            candidates.max_by(|a, b| a.1.m.cmp(&b.1.m).then(b.1.d.cmp(&a.1.d)))
        }
        Objective::ShortestSeed => {
            candidates.min_by(|a, b| a.1.d.cmp(&b.1.d).then(b.1.m.cmp(&a.1.m)))
        }
        Objective::Fastest => candidates.min_by(|a, b| {
            a.1.seconds_per_block
                .unwrap_or(f64::INFINITY)
                .total_cmp(&b.1.seconds_per_block.unwrap_or(f64::INFINITY))
        }),
    };
    match best {
        Some((c, p)) => {
            let why = match sel.chosen {
                Some(i) => format!(
                    "the planner preferred {}, which this command does not run yet; this is the best of the hashing extractors for the same objective",
                    sel.rows[i].construction.name()
                ),
                None => sel.reason.clone(),
            };
            Ok((c, p, why))
        }
        None => bail!("no extractor meets the error target: {}", sel.reason),
    }
}

impl AutoPlan {
    /// The extractor-specific defining integers, as the vector files name them.
    fn params(&self) -> BTreeMap<String, String> {
        let mut p = BTreeMap::new();
        if let Some(t) = self.planned.trevisan.as_ref().map(trevisan_args) {
            p.insert("one-bit".into(), format!("{:?}", t.one_bit).to_lowercase());
            p.insert("design".into(), format!("{:?}", t.design).to_lowercase());
            if t.field_bits > 0 {
                p.insert("field-bits".into(), t.field_bits.to_string());
            }
            p.insert("design-factor".into(), t.design_factor.to_string());
            if let Some(q) = t.prime {
                p.insert("prime".into(), q.to_string());
            }
        }
        p
    }

    /// Records the explicit seed used (its data digest) and whether the
    /// operator keeps their own record of its uses.
    pub fn set_seed_file(&mut self, digest: String, own_record: bool) {
        self.seed_digest = Some(digest);
        self.own_seed_record = own_record;
    }

    /// Whether a certificate fixed the figures.
    pub fn has_certificate(&self) -> bool {
        self.certificate.is_some()
    }

    /// Whether the raw data carry a device-independent certificate.
    pub fn device_independent(&self) -> bool {
        self.certificate
            .as_ref()
            .is_some_and(|(_, c, _)| c.device_independent)
    }

    /// The error charged to the seed's account for this run's L blocks:
    /// `L (2 eps_s + 2^s eps_ext)` (hashing spec 4.1, 4.3, 4.4).
    pub fn seed_charge(&self) -> f64 {
        let b = &self.input.budget;
        compose::blocks_with_one_seed(b.blocks, b.eps_s, self.planned.eps_ext, b.seed_deficiency)
    }

    /// The raw input's data digest.
    pub fn input_digest(&self) -> &str {
        &self.input_digest
    }

    /// Seed bits d the chosen extractor needs.
    pub fn seed_bits(&self) -> u64 {
        self.planned.d
    }

    /// The run's eps_total.
    pub fn eps_total(&self) -> f64 {
        self.planned.eps_total
    }

    /// Prints the choice and the error terms on standard error.
    pub fn print_summary(&self, quiet: bool) {
        let b = &self.input.budget;
        let p = &self.planned;
        let mut e = std::io::stderr().lock();
        for l in &self.labels {
            let _ = writeln!(e, "label: {l}");
        }
        let _ = writeln!(e, "chosen: {}: {}", self.construction.name(), self.reason);
        let _ = writeln!(
            e,
            "  {} block(s) of {} bits -> {} bits each; seed {} bits",
            b.blocks, self.input.n, p.m, p.d
        );
        let _ = writeln!(
            e,
            "  eps_total = eps_cert + eps_seed + L (2 eps_s + 2^s eps_ext) = {:e} + {:e} + {} x (2 x {:e} + 2^{} x {}) = {} (target {:e})",
            b.eps_cert,
            b.eps_seed,
            b.blocks,
            b.eps_s,
            b.seed_deficiency,
            up4(p.eps_ext),
            up4(p.eps_total),
            b.eps_total
        );
        if let Some((path, cert, _)) = &self.certificate {
            let _ = writeln!(
                e,
                "  certificate {}: setup: {}",
                path.display(),
                cert.setup.label()
            );
            if !cert.device_independent {
                let _ = writeln!(e, "  NOT device-independent");
            }
        }
        if !quiet {
            let _ = writeln!(
                e,
                "  meaning: {}",
                compose::meaning(self.input.can_abort.unwrap_or(false))
            );
        }
    }

    /// Writes the receipt (owner-only, atomically).
    #[allow(clippy::too_many_arguments)]
    pub fn write_receipt(
        &self,
        path: &Path,
        plan: &dyn Extractor,
        report: &Report,
        c: &Common,
        output_digest: Option<String>,
        seed: Option<(&str, &str)>,
        force: bool,
    ) -> anyhow::Result<()> {
        let b = &self.input.budget;
        let mut notes = vec![
            "Private: this receipt holds a digest of the raw input; keep it with the ledger, not in public.".to_string(),
        ];
        if output_digest.is_some() {
            notes.push(
                "The output digest is included on request: once it is published, only a computational guarantee is left for the output."
                    .to_string(),
            );
        }
        let r = Receipt {
            schema: receipt::SCHEMA.to_string(),
            tool: format!("sluice {}", env!("CARGO_PKG_VERSION")),
            construction: receipt::Construction {
                extractor: plan.name().to_string(),
                input_bits: plan.input_bits() as u64,
                output_bits: plan.output_bits() as u64,
                seed_bits: plan.seed_bits() as u64,
                params: self.params(),
                reason: self.reason.clone(),
            },
            blocks: receipt::Blocks {
                count: report.blocks,
                input_bits_total: self.total_bits,
                trailing_bits_unused: report.trailing_bits_unused,
                order: "file order".to_string(),
            },
            input: receipt::InputRecord {
                digest: self.input_digest.clone(),
                format: format!("{:?}", c.files.format).to_lowercase(),
                bit_order: format!("{:?}", c.files.bit_order).to_lowercase(),
            },
            seed: receipt::SeedRecord {
                id: seed.map(|(id, _)| id.to_string()),
                bits: plan.seed_bits() as u64,
                source: match seed {
                    Some((_, src)) => {
                        format!("registered seed ({src}), use recorded in the ledger")
                    }
                    None if self.own_seed_record => "explicit seed file (not registered in a ledger; the operator declared they keep their own record of its uses)".to_string(),
                    None => "explicit seed file (not registered in a ledger)".to_string(),
                },
                deficiency: b.seed_deficiency,
                digest: self.seed_digest.clone(),
                own_record: self.own_seed_record,
            },
            certificate: self.certificate.as_ref().map(|(_, cert, digest)| {
                receipt::CertificateRecord {
                    file_digest: digest.clone(),
                    setup: cert.setup.label().to_string(),
                    device_independent: cert.device_independent,
                    mode: Some(
                        match cert.mode {
                            sluice::certify::Mode::EntropyAccumulation => "entropy-accumulation",
                            sluice::certify::Mode::IidEstimate => "iid-estimate",
                        }
                        .to_string(),
                    ),
                    bound: Some(cert.bound_name().to_string()),
                    record_form: Some(cert.record.form.clone()),
                    labels: cert.labels.clone(),
                }
            }),
            labels: self.labels.clone(),
            errors: receipt::Errors {
                formula: "eps_cert + eps_seed + L (2 eps_s + 2^s eps_ext)".to_string(),
                eps_cert: b.eps_cert,
                eps_seed: b.eps_seed,
                eps_s: b.eps_s,
                eps_ext: self.planned.eps_ext,
                seed_deficiency: b.seed_deficiency,
                blocks: b.blocks,
                eps_total: self.planned.eps_total,
                eps_total_rounded_up: up4(self.planned.eps_total),
                target: b.eps_total,
                form: "conservative".to_string(),
            },
            meaning: compose::meaning(self.input.can_abort.unwrap_or(false)).to_string(),
            assumed: select::assumed_conditions(&self.input)
                .into_iter()
                .map(String::from)
                .collect(),
            output_digest,
            notes,
        };
        let mut f = AtomicFile::create(path, Kind::Receipt, Replace::forced(force))?;
        serde_json::to_writer_pretty(&mut f, &r)?;
        f.write_all(b"\n")?;
        f.commit()
            .with_context(|| format!("{}: cannot write the receipt", path.display()))?;
        Ok(())
    }
}

/// The labels a receipt carries (its own and its certificate's).
pub fn labels_from_receipt(path: &Path) -> anyhow::Result<Vec<String>> {
    let text = std::fs::read_to_string(path)
        .with_context(|| format!("{}: cannot read the receipt", path.display()))?;
    let r =
        Receipt::from_json_str(&text).map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?;
    let mut l = r.labels.clone();
    if let Some(c) = &r.certificate {
        for x in &c.labels {
            if !l.contains(x) {
                l.push(x.clone());
            }
        }
        if !c.device_independent && !l.iter().any(|x| x.contains("not device-independent")) {
            l.push("not device-independent".into());
        }
    }
    Ok(l)
}

/// The layout a receipt records, and the input digest it names.
pub fn layout_from_receipt(path: &Path) -> anyhow::Result<(Layout, String)> {
    let text = std::fs::read_to_string(path)
        .with_context(|| format!("{}: cannot read the receipt", path.display()))?;
    let r =
        Receipt::from_json_str(&text).map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?;
    let extractor = match r.construction.extractor.as_str() {
        "toeplitz" => ExtractorArg::Toeplitz,
        "modified-toeplitz" => ExtractorArg::ModifiedToeplitz,
        "trevisan" => ExtractorArg::Trevisan,
        other => bail!(
            "{}: extractor {other:?} is not one this version runs",
            path.display()
        ),
    };
    let trevisan = if extractor == ExtractorArg::Trevisan {
        let p = &r.construction.params;
        let get = |k: &str| p.get(k).map(String::as_str);
        let num = |k: &str| -> anyhow::Result<Option<u64>> {
            get(k)
                .map(|v| {
                    v.parse::<u64>().with_context(|| {
                        format!(
                            "{}: params.{k}: {v:?} is not a whole number",
                            path.display()
                        )
                    })
                })
                .transpose()
        };
        Some(TrevisanArgs {
            one_bit: match get("one-bit") {
                Some("ph") => OneBitArg::Ph,
                Some("ip") => OneBitArg::Ip,
                other => bail!(
                    "{}: params.one-bit: {other:?}, expected ph or ip",
                    path.display()
                ),
            },
            design: match get("design") {
                Some("poly") => DesignArg::Poly,
                Some("block") => DesignArg::Block,
                other => bail!(
                    "{}: params.design: {other:?}, expected poly or block",
                    path.display()
                ),
            },
            field_bits: num("field-bits")?.unwrap_or(0) as usize,
            design_factor: num("design-factor")?.unwrap_or(1),
            prime: num("prime")?,
        })
    } else {
        None
    };
    Ok((
        Layout {
            extractor,
            trevisan,
            m: usize::try_from(r.construction.output_bits)?,
            block_bits: Some(usize::try_from(r.construction.input_bits)?),
            input_bits: Some(r.blocks.input_bits_total),
        },
        r.input.digest,
    ))
}
