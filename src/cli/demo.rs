//! `sluice demo`: the main job, device-independent, start to finish, on a
//! simulated Bell test.
//!
//! The scenario is our own and fictional: bench "QM-7" of the Quillmere test
//! lab runs a CHSH spot-checking protocol. The demo fixes the protocol's
//! parameters, simulates the run (`certify::simulate`), certifies the
//! record, plans the extraction, commits the raw string to a ledger before a
//! seed exists, creates the seed, extracts the whole string as one block
//! with it, checks the output against its receipt (from the stored seed,
//! without recording a disclosure), assesses raw data and output briefly,
//! and verifies the ledger. Every step goes through the same library calls
//! as the command it prints; no file is given and nothing leaves the
//! machine.

use super::common;
use anyhow::{bail, Context};
use sluice::assess::sp800_22::{self, Outcome};
use sluice::assess::sp800_90b::{estimators, health};
use sluice::bits::{io, BitOrder, Format};
use sluice::certify::planning::{plan_improved, protocol};
use sluice::certify::record::format_round;
use sluice::certify::simulate::SimulatedDevice;
use sluice::extract::whole_run::WholeRun;
use sluice::extract::Engine;
use sluice::files::{AtomicFile, Kind, Replace};
use sluice::ledger::Ledger;
use sluice::pipeline::job::{
    self, Checked, Choice, Job, LedgerUse, Observer, ReceiptOptions, SeedChoice, VerifyJob,
};
use sluice::pipeline::security::Security;
use sluice::pipeline::BitFile;
use sluice::plan::select::Objective;
use sluice::seed::{Origin, Store};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::time::Instant;

/// `sluice demo`
#[derive(clap::Args, Debug)]
pub struct DemoArgs {
    /// Keep every file (parameters, record, certificate, raw string, ledger
    /// and seed store, output, receipt) in this folder, created if missing;
    /// secret files are owner-only. Without it the demo works in a private
    /// temporary folder and removes it at the end
    #[arg(long, value_name = "DIR", visible_alias = "dir")]
    pub keep: Option<PathBuf>,
    /// Print one JSON document with each step's result, for scripts
    #[arg(long)]
    pub json: bool,
    /// Replace files in the folder even if they are not earlier demo files
    #[arg(long)]
    pub force: bool,
}

/// Rounds of the simulated run.
const ROUNDS: u64 = 4_000_000;
/// Test probability gamma.
const GAMMA: f64 = 0.1;
/// Win probability of the simulated device (and the expected one).
const WIN: f64 = 0.8;
/// Completeness target: honest devices abort with at most this probability.
const COMPLETENESS: f64 = 1e-6;
/// Smoothing parameter eps_s.
const SMOOTHING: f64 = 1e-10;
/// Acceptance parameter eps_EA.
const ACCEPTANCE: f64 = 1e-10;
/// Total error allowed for the output.
const TARGET_ERROR: f64 = 1e-8;
/// The simulator's seed: the demo's record is the same on every run (demo
/// data, not a source of randomness).
const SIM_SEED: u64 = 0x514d_2d37_2d51_7569; // "QM-7-Qui"
/// The fictional scenario.
const SCENARIO: &str = "bench QM-7 of the Quillmere test lab (fictional), simulated";

/// A private temporary folder, removed when dropped.
struct TempDir(PathBuf);

impl TempDir {
    fn new() -> anyhow::Result<TempDir> {
        let mut r = [0u8; 8];
        sluice::files::random::fill(&mut r)
            .map_err(|e| anyhow::anyhow!("operating-system random source: {e}"))?;
        let path = std::env::temp_dir().join(format!(
            "sluice-demo-{}-{:016x}",
            std::process::id(),
            u64::from_le_bytes(r)
        ));
        let mut b = std::fs::DirBuilder::new();
        #[cfg(unix)]
        {
            use std::os::unix::fs::DirBuilderExt;
            b.mode(0o700);
        }
        b.create(&path)
            .with_context(|| format!("{}: cannot create a temporary folder", path.display()))?;
        Ok(TempDir(path))
    }
}

impl Drop for TempDir {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// A progress bar for hashing (terminal only), nothing else.
struct Bar(Option<indicatif::ProgressBar>, &'static str);

impl Observer for Bar {
    fn whole_run(&mut self, _plan: &WholeRun) {}
    fn ready(&mut self, _auto: Option<&job::AutoPlan>, bar_total: u64) {
        self.0 = Some(common::progress_bits(bar_total, self.1));
    }
    fn progress(&mut self, done: u64) {
        if let Some(b) = &self.0 {
            b.set_position(done);
        }
    }
    fn finished(&mut self) {
        if let Some(b) = &self.0 {
            b.finish_and_clear();
        }
    }
}

/// One step: its name, what it gave, and the command that does it.
struct Step {
    name: &'static str,
    line: String,
    command: String,
    result: serde_json::Value,
}

fn path_arg(p: &Path) -> String {
    let s = p.display().to_string();
    if s.contains([' ', '"', '\'', '$', '\\']) {
        format!("{s:?}")
    } else {
        s
    }
}

/// Runs the demo.
pub fn run(a: DemoArgs) -> anyhow::Result<ExitCode> {
    let t_start = Instant::now();
    let replace = Replace::forced(a.force);
    let (_temp, dir) = match &a.keep {
        Some(d) => {
            std::fs::create_dir_all(d)
                .with_context(|| format!("{}: cannot create the demo folder", d.display()))?;
            (None, d.clone())
        }
        None => {
            let t = TempDir::new()?;
            let d = t.0.clone();
            (Some(t), d)
        }
    };
    // Short names in the commands when the folder goes away; real paths
    // when it is kept.
    let shown = |name: &str| -> String {
        if a.keep.is_some() {
            path_arg(&dir.join(name))
        } else {
            name.to_string()
        }
    };
    let params_path = dir.join("params.txt");
    let record_path = dir.join("record.txt");
    let cert_path = dir.join("cert.json");
    let raw_path = dir.join("raw.bin");
    let out_path = dir.join("output.bin");
    let receipt_path = dir.join("output.bin.receipt.json");
    let ledger_dir = dir.join("ledger");
    let ledger = Ledger::new(ledger_dir.clone());
    if ledger.exists() {
        bail!(
            "{}: holds the ledger of an earlier demo run; the demo's raw data are the same on \
             every run, so that ledger would refuse a second extraction from them: give another \
             --keep folder or remove this one",
            ledger_dir.display()
        );
    }
    let mut steps: Vec<Step> = Vec::new();

    // 1. The parameters, fixed before the run, as `certify --plan` writes them.
    let d = sluice::certify::params::Declared {
        rounds: Some(ROUNDS),
        gamma: Some(GAMMA),
        w_exp: Some(WIN),
        eps_c: Some(COMPLETENESS),
        eps_s: Some(SMOOTHING),
        eps_ea: Some(ACCEPTANCE),
        ..Default::default()
    };
    let plan_cert = plan_improved(&d, protocol(&d, true)?)?;
    let row = &plan_cert.rows[plan_cert.chosen];
    sluice::files::atomic::write_all(
        &params_path,
        Kind::DemoRaw,
        replace,
        plan_cert.parameters_file.as_bytes(),
    )
    .with_context(|| format!("cannot write {}", params_path.display()))?;
    steps.push(Step {
        name: "parameters",
        line: format!(
            "parameters fixed before the run: N = {ROUNDS}, gamma = {GAMMA}, w_exp = {WIN}, \
             test {} ({} tail); a passing run certifies about {} bits (it uses about {:.0} \
             trusted input bits: no net gain at this size)",
            row.test, row.tail, row.bits, plan_cert.input_randomness_bits
        ),
        command: format!(
            "sluice certify --plan --rounds {ROUNDS} --test-probability {GAMMA} --expected-win {WIN} \
             --completeness {COMPLETENESS:e} --smoothing {SMOOTHING:e} --acceptance {ACCEPTANCE:e}   \
             (copy its parameters into {})",
            shown("params.txt")
        ),
        result: serde_json::json!({
            "file": params_path,
            "rounds": ROUNDS,
            "test_probability": GAMMA,
            "expected_win": WIN,
            "test": row.test,
            "tail": row.tail,
            "planned_bits": row.bits,
            "input_randomness_bits": plan_cert.input_randomness_bits,
            "net_gain_bits": plan_cert.net_gain_bits,
        }),
    });

    // 2. The run: the simulated bench plays N rounds.
    let t0 = Instant::now();
    let mut dev = SimulatedDevice::new(WIN, GAMMA, SIM_SEED);
    {
        let mut f = AtomicFile::create(&record_path, Kind::DemoRaw, replace)
            .with_context(|| format!("cannot create {}", record_path.display()))?;
        let mut buf = Vec::with_capacity(1 << 20);
        buf.extend_from_slice(
            format!(
                "# simulated record: fictional bench QM-7, Quillmere test lab\n\
                 # win probability {WIN}, gamma {GAMMA}; demo data, not a certificate source\n"
            )
            .as_bytes(),
        );
        let pb = common::progress(ROUNDS, "simulating rounds");
        let mut done = 0u64;
        while done < ROUNDS {
            let k = (ROUNDS - done).min(1 << 16);
            for _ in 0..k {
                format_round(&dev.next_round(), &mut buf);
            }
            f.write_all(&buf)
                .with_context(|| format!("cannot write {}", record_path.display()))?;
            buf.clear();
            done += k;
            pb.set_position(done);
        }
        pb.finish_and_clear();
        f.commit()
            .with_context(|| format!("cannot move {} into place", record_path.display()))?;
    }
    steps.push(Step {
        name: "run",
        line: format!(
            "simulated run of {ROUNDS} rounds (win probability {WIN}, inputs and test flags from \
             the simulator: demo data only) in {:.1} s",
            t0.elapsed().as_secs_f64()
        ),
        command: "(your apparatus writes the round file: one line T X Y A B per round)".into(),
        result: serde_json::json!({"file": record_path, "rounds": ROUNDS, "seed": SIM_SEED}),
    });

    // 3. Certify the record: certificate and raw string a1 b1 .. aN bN.
    let t0 = Instant::now();
    let mut argv: Vec<String> = vec![
        record_path.display().to_string(),
        "--params".into(),
        params_path.display().to_string(),
        "--setup".into(),
        "separated".into(),
        "-o".into(),
        cert_path.display().to_string(),
        "--raw-out".into(),
        raw_path.display().to_string(),
    ];
    if a.force {
        argv.push("--force".into());
    }
    let (_, cert) = super::certify::certify_record(&super::certify::parse_args(&argv)?, false)?;
    let accepted = cert["accepted"].as_bool().unwrap_or(false);
    let k = cert["min_entropy_bits"].as_u64().unwrap_or(0);
    if !accepted || k == 0 {
        bail!(
            "the simulated run was not certified (accepted: {accepted}, {k} bits): {}",
            cert["zero_reason"]
        );
    }
    steps.push(Step {
        name: "certify",
        line: format!(
            "certificate: accepted, {k} bits of smooth min-entropy in the {}-bit string a1 b1 .. aN bN \
             ({} test rounds; setup declared separated) in {:.1} s",
            cert["string_bits"],
            cert["test_rounds"],
            t0.elapsed().as_secs_f64()
        ),
        command: format!(
            "sluice certify {} --params {} --setup separated -o {} --raw-out {}",
            shown("record.txt"),
            shown("params.txt"),
            shown("cert.json"),
            shown("raw.bin")
        ),
        result: serde_json::json!({
            "accepted": accepted,
            "min_entropy_bits": k,
            "string_bits": cert["string_bits"],
            "test_rounds": cert["test_rounds"],
            "labels": cert["labels"],
            "certificate": cert_path,
            "raw": raw_path,
        }),
    });

    // 4. Plan the extraction as `extract` will (the planner, no seed yet).
    let raw_file = BitFile {
        path: raw_path.clone(),
        format: Format::Packed,
        order: BitOrder::Msb,
    };
    let out_file = BitFile {
        path: out_path.clone(),
        format: Format::Packed,
        order: BitOrder::Msb,
    };
    let mut job = Job {
        input: raw_file.clone(),
        input_bits: None,
        block_bits: None,
        choice: Choice::Planned {
            security: Security {
                min_entropy: None,
                min_entropy_rate: None,
                certificate: Some(cert_path.clone()),
                smoothing: None,
                cert_error: None,
                trust_counts: false,
                own_seed_record: false,
                target_error: Some(TARGET_ERROR),
                blocks: None,
                seed_deficiency: 0.0,
                objective: Objective::MostOutput,
            },
            construction: None,
        },
        engine: Engine::from_name("auto").expect("auto is an engine"),
        seed: SeedChoice::None,
        ledger: Some(LedgerUse {
            dir: ledger_dir.clone(),
            repeat_reason: None,
            cross_run: false,
        }),
        output: out_file.clone(),
        receipt: Some(ReceiptOptions {
            path: receipt_path.clone(),
            output_digest: false,
        }),
        replace,
    };
    let auto = job::plan(&job)?;
    let spec = auto.spec();
    let (n, m, d_bits) = (spec.n, spec.m, auto.seed_bits());
    steps.push(Step {
        name: "plan",
        line: format!(
            "plan: {} on the whole string as one block, {n} -> {m} bits, seed {d_bits} bits, \
             total error {:.3e} (target {TARGET_ERROR:e})",
            spec.name(),
            auto.eps_total()
        ),
        command: format!(
            "sluice plan --certificate {} --target-error {TARGET_ERROR:e}",
            shown("cert.json")
        ),
        result: serde_json::json!({
            "extractor": spec.name(),
            "input_bits": n,
            "output_bits": m,
            "seed_bits": d_bits,
            "eps_total": auto.eps_total(),
            "target_error": TARGET_ERROR,
        }),
    });

    // 5. Commit the raw string to the ledger before any seed exists.
    let origin = "simulated run of the fictional bench QM-7, Quillmere test lab (demo data)";
    let (commit_line, commit_bits) = job::commit_raw(&ledger, &raw_file, origin)?;
    steps.push(Step {
        name: "commit_raw",
        line: format!(
            "ledger: raw string committed ({commit_bits} bits, line {commit_line}) before any seed exists"
        ),
        command: format!(
            "sluice ledger commit-raw {} --origin \"bench QM-7 run\" --ledger {}",
            shown("raw.bin"),
            shown("ledger")
        ),
        result: serde_json::json!({"line": commit_line, "bits": commit_bits, "ledger": ledger_dir}),
    });

    // 6. A seed from the operating system, registered (its bits stay in the
    //    owner-only store).
    let store = Store::new(ledger.clone());
    let seed_id = {
        let bits = Store::os_bits(
            usize::try_from(d_bits).context("the seed length is too large for this machine")?,
        )?;
        store.register(&bits, Origin::Os, sluice::seed::DEFAULT_BUDGET)?
    };
    steps.push(Step {
        name: "seed",
        line: format!(
            "seed {seed_id}: {d_bits} bits from the operating system, budget {:e}, in the private store only",
            sluice::seed::DEFAULT_BUDGET
        ),
        command: format!(
            "sluice seed new --bits {d_bits} --ledger {}",
            shown("ledger")
        ),
        result: serde_json::json!({"id": seed_id, "bits": d_bits, "budget": sluice::seed::DEFAULT_BUDGET}),
    });

    // 7. Extract the whole string with the registered seed, as
    //    `extract --certificate ... --seed ID` does.
    let t0 = Instant::now();
    job.seed = SeedChoice::Stored(seed_id.clone());
    let done = job::execute(&job, &mut Bar(None, "extracting"))?;
    let secs = t0.elapsed().as_secs_f64();
    let u = done
        .seed_use
        .as_ref()
        .context("internal error: the ledgered run recorded no seed use")?;
    steps.push(Step {
        name: "extract",
        line: format!(
            "extracted {} bits with {} in {secs:.1} s; use {} charged {:.3e} to the seed",
            done.report.output_bits,
            done.spec.name(),
            u.use_id,
            u.charged
        ),
        command: format!(
            "sluice extract {} --certificate {} --target-error {TARGET_ERROR:e} --seed {seed_id} --ledger {} -o {}",
            shown("raw.bin"),
            shown("cert.json"),
            shown("ledger"),
            shown("output.bin")
        ),
        result: serde_json::json!({
            "extractor": done.spec.name(),
            "output_bits": done.report.output_bits,
            "blocks": done.report.blocks,
            "use": u.use_id,
            "charged": u.charged,
            "eps_total": done.eps_total,
            "output": out_path,
            "receipt": done.receipt,
            "seconds": secs,
        }),
    });

    // 8. Recompute the output from the receipt with the stored seed (no
    //    disclosure is recorded: the bits never leave this process).
    let t0 = Instant::now();
    let rl = job::read_receipt(&receipt_path)?;
    let vj = VerifyJob {
        input: raw_file.clone(),
        layout: rl.layout,
        input_digest: Some(rl.input_digest),
        engine: job.engine,
        seed_file: None,
        stored_seed: Some((ledger_dir.clone(), seed_id.clone())),
        claimed: out_file.clone(),
    };
    let verdict = match job::verify(&vj, &mut Bar(None, "verifying"))? {
        Checked::WrongInput => bail!(
            "{}: not the input {} was made from",
            raw_path.display(),
            receipt_path.display()
        ),
        Checked::Verdict(v) => v,
    };
    if !verdict.matches {
        bail!(
            "{}: does not match its recomputation ({} differing bits)",
            out_path.display(),
            verdict.differing_bits
        );
    }
    steps.push(Step {
        name: "verify",
        line: format!(
            "verify: the output matches its recomputation from the receipt ({} bits) in {:.1} s",
            verdict.computed_bits,
            t0.elapsed().as_secs_f64()
        ),
        command: format!(
            "sluice verify {} --receipt {} --claimed {} --seed {seed_id} --ledger {}   (reads the \
             stored seed where it lives: no disclosure is recorded)",
            shown("raw.bin"),
            shown("output.bin.receipt.json"),
            shown("output.bin"),
            shown("ledger")
        ),
        result: serde_json::json!({
            "matches": verdict.matches,
            "computed_bits": verdict.computed_bits,
            "claimed_bits": verdict.claimed_bits,
        }),
    });

    // 9. Brief statistical checks (they can find defects, not certify).
    let t0 = Instant::now();
    let raw = io::read_bits(&raw_path, Format::Packed, BitOrder::Msb, None)
        .with_context(|| format!("reading {}", raw_path.display()))?;
    let samples = raw.len().min(1_000_000);
    let assessment = estimators::assess_binary(&sp800_22::bit_values(&raw.slice(0, samples)));
    let claimed_rate = k as f64 / raw.len() as f64;
    let rct = health::rct_bits(&raw, health::rct_cutoff(claimed_rate, 1)?);
    let apt = health::apt_bits(
        &raw,
        health::apt_cutoff(claimed_rate, 1, health::apt_window(true))?,
    );
    drop(raw);
    let health_passed = rct.failures == 0 && apt.failures == 0;
    let out = io::read_bits(&out_path, Format::Packed, BitOrder::Msb, Some(m))
        .with_context(|| format!("reading {}", out_path.display()))?;
    let seq = out.len().min(1_000_000);
    let reports = sp800_22::run_battery(&out.slice(0, seq), &sp800_22::Config::default());
    drop(out);
    let (mut tests_run, mut p_values, mut below) = (0usize, 0usize, 0usize);
    for r in &reports {
        if let Outcome::Done { p_values: ps } = &r.outcome {
            tests_run += 1;
            p_values += ps.len();
            below += ps.iter().filter(|p| p.p_value < sp800_22::ALPHA).count();
        }
    }
    let estimate = assessment.min_entropy;
    steps.push(Step {
        name: "assess",
        line: format!(
            "assess: raw health tests {} (cutoffs from the certified {claimed_rate:.4} bits/bit), \
             estimate {} bits/bit on {samples} bits; output SP 800-22: {tests_run} tests on {seq} \
             bits, {below} of {p_values} P-values below {} (about {:.1} expected by chance)",
            if health_passed { "pass" } else { "FAIL" },
            estimate.map_or("n/a".into(), |h| format!("{h:.4}")),
            sp800_22::ALPHA,
            p_values as f64 * sp800_22::ALPHA
        ),
        command: format!(
            "sluice assess raw {} --claimed-entropy {claimed_rate:.4}; sluice assess output {}",
            shown("raw.bin"),
            shown("output.bin")
        ),
        result: serde_json::json!({
            "raw": {
                "health_passed": health_passed,
                "repetition_count_failures": rct.failures,
                "adaptive_proportion_failures": apt.failures,
                "claimed_entropy": claimed_rate,
                "estimator_samples": samples,
                "min_entropy_estimate": estimate,
            },
            "output": {
                "sequence_bits": seq,
                "tests_run": tests_run,
                "p_values": p_values,
                "below_alpha": below,
                "alpha": sp800_22::ALPHA,
            },
            "seconds": t0.elapsed().as_secs_f64(),
        }),
    });

    // 10. The ledger: chain and rules, and the records in order.
    let replay = ledger.read()?;
    let problem = replay.problem.as_ref().map(|p| p.to_string());
    let kinds: Vec<&str> = replay.records.iter().map(|r| r.body.kind()).collect();
    steps.push(Step {
        name: "ledger",
        line: match &problem {
            None => format!(
                "ledger verifies: {} records ({}), head {}",
                replay.state.lines,
                kinds.join(", "),
                replay.state.head
            ),
            Some(p) => format!("ledger FAILED: {p}"),
        },
        command: format!("sluice ledger verify --ledger {}", shown("ledger")),
        result: serde_json::json!({
            "ok": problem.is_none(),
            "problem": problem,
            "records": replay.state.lines,
            "kinds": kinds,
            "head": replay.state.head,
        }),
    });
    let ok = problem.is_none();
    let seconds = t_start.elapsed().as_secs_f64();
    let kept = a.keep.as_ref().map(|_| dir.clone());

    if a.json {
        let mut s = serde_json::Map::new();
        for st in &steps {
            let mut r = st.result.clone();
            r["command"] = serde_json::Value::String(st.command.clone());
            s.insert(st.name.to_string(), r);
        }
        common::print_json(&serde_json::json!({
            "scenario": SCENARIO,
            "ok": ok,
            "order": steps.iter().map(|s| s.name).collect::<Vec<_>>(),
            "steps": s,
            "kept": kept,
            "seconds": seconds,
            "cautions": CAUTIONS,
        }))?;
    } else {
        let mut o = std::io::stdout().lock();
        writeln!(o, "sluice demo: {SCENARIO}")?;
        for (i, st) in steps.iter().enumerate() {
            writeln!(o, "{:>2}. {}", i + 1, st.line)?;
            writeln!(o, "      $ {}", st.command)?;
        }
        match &kept {
            Some(d) => writeln!(o, "files kept in {} (secret ones owner-only)", d.display())?,
            None => writeln!(
                o,
                "files were in a temporary folder, now removed (--keep DIR keeps them)"
            )?,
        }
        writeln!(o, "done in {seconds:.1} s")?;
        for c in CAUTIONS {
            writeln!(o, "caution: {c}")?;
        }
    }
    Ok(if ok {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    })
}

/// The demo's cautions, briefly.
const CAUTIONS: [&str; 3] = [
    "the certificate assumes the devices cannot signal to each other (declared here: separated), \
     trusted uniform inputs and test flags (here from the simulator: demo data only), and quantum theory",
    "the output is only as good as that entropy claim; statistical tests can find defects but certify nothing",
    "whether the error figure suffices is for the standards and evaluators that apply to your application to decide",
];
