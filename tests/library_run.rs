//! A ledgered extraction through the library's public API alone, without
//! the command line: commit the raw file, plan from a min-entropy figure,
//! create a registered seed, reserve, hash, write, receipt, commit.
//!
//! The output is recomputed with the slow matrix twin (`extract::reference`,
//! the definitions of the conventions), the input digest of the receipt
//! with the general-purpose BLAKE3 crate from the definition of the data
//! digest (BLAKE3 of the 8-byte little-endian bit length, then the packed
//! bytes), and a second use of the same raw data must be refused without
//! charging anything (hashing spec 4.6: one extraction per raw data).

use sluice::bits::pseudo::Pseudo;
use sluice::bits::{BitOrder, Format};
use sluice::extract::reference;
use sluice::extract::spec::Family;
use sluice::files::Replace;
use sluice::ledger::Ledger;
use sluice::pipeline::job::{
    self, Choice, Job, JobError, LedgerUse, Quiet, ReceiptOptions, SeedChoice,
};
use sluice::pipeline::receipt::Receipt;
use sluice::pipeline::security::Security;
use sluice::pipeline::BitFile;
use sluice::plan::select::Objective;
use sluice::seed::Store;

fn packed(path: &std::path::Path) -> BitFile {
    BitFile {
        path: path.to_path_buf(),
        format: Format::Packed,
        order: BitOrder::Msb,
    }
}

fn job(
    raw: &std::path::Path,
    out: &std::path::Path,
    ledger: &std::path::Path,
    seed: SeedChoice,
) -> Job {
    let mut receipt = out.as_os_str().to_owned();
    receipt.push(".receipt.json");
    Job {
        input: packed(raw),
        input_bits: None,
        block_bits: None,
        choice: Choice::Planned {
            security: Security {
                min_entropy: None,
                min_entropy_rate: Some(0.8),
                certificate: None,
                smoothing: Some(1e-12),
                cert_error: Some(0.0),
                trust_counts: false,
                own_seed_record: false,
                target_error: Some(1e-6),
                blocks: None,
                seed_deficiency: 0.0,
                objective: Objective::MostOutput,
            },
            construction: None,
        },
        engine: sluice::extract::Engine::Auto,
        seed,
        ledger: Some(LedgerUse {
            dir: ledger.to_path_buf(),
            repeat_reason: None,
            cross_run: false,
        }),
        output: packed(out),
        receipt: Some(ReceiptOptions {
            path: receipt.into(),
            output_digest: false,
        }),
        replace: Replace::SameKind,
    }
}

#[test]
fn ledgered_extraction_without_the_command_line() {
    let dir = tempfile::tempdir().unwrap();
    let raw = dir.path().join("raw.bin");
    let out = dir.path().join("out.bin");
    let ledger_dir = dir.path().join("ledger");
    // 4096 raw bits of a fictional device.
    let x = Pseudo::new(2026).bits(4096);
    std::fs::write(&raw, x.to_packed(BitOrder::Msb)).unwrap();
    let ledger = Ledger::new(ledger_dir.clone());
    let (_, committed) = job::commit_raw(&ledger, &packed(&raw), "test rig").unwrap();
    assert_eq!(committed, 4096);

    let done = job::execute(
        &job(&raw, &out, &ledger_dir, SeedChoice::New { budget: 1e-3 }),
        &mut Quiet,
    )
    .unwrap();
    let u = done.seed_use.as_ref().expect("a ledgered run");
    assert!(u.new_seed);
    assert!(u.charged > 0.0 && u.charged <= 1e-6, "{}", u.charged);
    assert_eq!(u.state.uses, 1);
    assert_eq!(done.report.blocks, 1);
    assert_eq!(done.spec.n, 4096);
    let m = done.spec.m;
    // The leftover hash lemma keeps m below k = 0.8 n.
    assert!(m > 0 && (m as f64) < 0.8 * 4096.0, "m = {m}");

    // The output against the matrix definition with the registered seed.
    let seed = Store::new(Ledger::new(ledger_dir.clone()))
        .load(&u.seed)
        .unwrap()
        .bits
        .slice(0, done.seed_bits);
    let want = match done.spec.family {
        Family::Toeplitz => reference::toeplitz(&x, &seed, m),
        Family::ModifiedToeplitz => reference::modified_toeplitz(&x, &seed, m),
        other => panic!("the planner chose {other:?} for 4096 bits"),
    };
    let got = std::fs::read(&out).unwrap();
    assert_eq!(got, want.to_packed(BitOrder::Msb));

    // The receipt's input digest from the definition, with the BLAKE3 crate.
    let receipt_path = done.receipt.clone().unwrap();
    let r = Receipt::from_json_str(&std::fs::read_to_string(&receipt_path).unwrap()).unwrap();
    let mut h = blake3::Hasher::new();
    h.update(&4096u64.to_le_bytes());
    h.update(&x.to_packed(BitOrder::Msb));
    assert_eq!(r.input.digest, h.finalize().to_hex().to_string());
    assert_eq!(r.seed.id.as_deref(), Some(u.seed.as_str()));
    assert_eq!(r.construction.output_bits, m as u64);

    // Again on the same raw data with the same seed: refused, nothing
    // charged, nothing written.
    let out2 = dir.path().join("out2.bin");
    let again = job::execute(
        &job(&raw, &out2, &ledger_dir, SeedChoice::Stored(u.seed.clone())),
        &mut Quiet,
    );
    match again {
        Err(JobError::Ledgered(e)) => {
            assert!(e.to_string().contains("already"), "{e}")
        }
        Err(e) => panic!("unexpected refusal: {e}"),
        Ok(_) => panic!("a second extraction from the same raw data was allowed"),
    }
    assert!(!out2.exists());
    let st = ledger.read().unwrap().state;
    let s = st.seed(&u.seed).unwrap();
    assert_eq!(s.uses, 1, "the refused run reserved nothing");
    assert_eq!(s.spent, u.state.spent);
}
