//! `sluice extract` and `sluice verify` on one block as long as a whole run
//! (from 2^24 bits the block goes through the whole-run path: input read
//! piece by piece, tiles within `--memory-limit`), against the library's
//! in-memory Karatsuba engine, a general-purpose method of its own (the
//! word-level carry-less product) that shares no code with the additive FFT.

mod cli_common;

use cli_common::{pseudo, sluice};
use sluice::bits::{BitOrder, Bits};
use sluice::extract::{Engine, Extractor, ModifiedToeplitz, Toeplitz};
use sluice::gf2::Backend;

fn write(path: &std::path::Path, b: &Bits) {
    std::fs::write(path, b.to_packed(BitOrder::Msb)).unwrap();
}

fn read(path: &std::path::Path, n: usize) -> Bits {
    Bits::from_packed(&std::fs::read(path).unwrap(), n, BitOrder::Msb).unwrap()
}

#[test]
fn whole_run_blocks_match_the_karatsuba_engine_in_every_layout() {
    let d = tempfile::tempdir().unwrap();
    let be = Backend::detect();
    // n a little over 2^24 and not a multiple of 64; m not a power of two.
    let (n, m) = ((1usize << 24) + 4_099, 3_000_017usize);
    let x = pseudo(11, n);
    write(&d.path().join("x.bin"), &x);
    for family in ["toeplitz", "modified-toeplitz"] {
        let seed_bits = if family == "toeplitz" {
            n + m - 1
        } else {
            n - 1
        };
        let s = pseudo(12, seed_bits);
        write(&d.path().join("s.bin"), &s);
        let mut want = Bits::zeros(m);
        let kara = Engine::Clmul(be);
        if family == "toeplitz" {
            Toeplitz::with_engine(n, m, kara)
                .unwrap()
                .extract(&x, &s, &mut want);
        } else {
            ModifiedToeplitz::with_engine(n, m, kara)
                .unwrap()
                .extract(&x, &s, &mut want);
        }
        let (nt, mt) = (n.to_string(), m.to_string());
        // Default (in memory or one pass), then limits that force tiles
        // and several passes over the input.
        for limit in [None, Some("24M"), Some("7M")] {
            let mut args = vec![
                "extract",
                "x.bin",
                "-o",
                "y.bin",
                "--force",
                "--extractor",
                family,
                "--output-bits",
                &mt,
                "--input-bits",
                &nt,
                "--seed-file",
                "s.bin",
            ];
            if let Some(l) = limit {
                args.extend(["--memory-limit", l]);
            }
            let o = sluice(d.path(), &args);
            let err = String::from_utf8_lossy(&o.stderr);
            assert!(o.status.success(), "{family} {limit:?}: {err}");
            assert!(err.contains("as a whole run on engine"), "{err}");
            if limit == Some("7M") {
                assert!(err.contains("pass(es) over the input"), "{err}");
                assert!(!err.contains(" 1 pass(es)"), "several passes: {err}");
            }
            let got = read(&d.path().join("y.bin"), m);
            assert_eq!(
                got.first_difference(&want),
                None,
                "{family} limit {limit:?}"
            );
            // verify recomputes through the same path, chunk by chunk.
            let mut v = args.clone();
            v[0] = "verify";
            v[2] = "--claimed";
            v.retain(|a| *a != "--force");
            let o = sluice(d.path(), &v);
            assert!(
                o.status.success(),
                "verify {family} {limit:?}: {}",
                String::from_utf8_lossy(&o.stderr)
            );
        }
        // A limit below the smallest tile is refused before anything is
        // written, saying what is needed.
        let _ = std::fs::remove_file(d.path().join("y.bin"));
        let o = sluice(
            d.path(),
            &[
                "extract",
                "x.bin",
                "-o",
                "y.bin",
                "--extractor",
                family,
                "--output-bits",
                &mt,
                "--input-bits",
                &nt,
                "--seed-file",
                "s.bin",
                "--memory-limit",
                "20K",
            ],
        );
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{err}");
        assert!(
            err.contains("needs at least") && err.contains("is allowed"),
            "{err}"
        );
        assert!(!d.path().join("y.bin").exists());
    }
}

/// A whole-run block with its seed streamed from a packed file gives the
/// same bits as with the seed in memory (and as the Karatsuba engine), in
/// memory, in tiles and in several passes; the streamed seed's data digest
/// is the one of the bits; a seed in memory counts against the limit.
#[test]
fn a_streamed_seed_gives_the_bits_and_digest_of_the_seed_in_memory() {
    use sluice::bits::digest::data_digest;
    use sluice::bits::Format;
    use sluice::extract::whole_run::Error as WholeError;
    use sluice::pipeline::{set_memory_limit, BitFile, Error, RunSeed};
    let d = tempfile::tempdir().unwrap();
    let be = Backend::detect();
    let (n, m) = ((1usize << 24) + 12_345, 3_000_017usize);
    let x = pseudo(21, n);
    let xp = d.path().join("x.bin");
    write(&xp, &x);
    let file = |name: &str| BitFile {
        path: d.path().join(name),
        format: Format::Packed,
        order: BitOrder::Msb,
    };
    for family in ["toeplitz", "modified-toeplitz"] {
        let make = |e: Engine| -> Box<dyn Extractor> {
            if family == "toeplitz" {
                Box::new(Toeplitz::with_engine(n, m, e).unwrap())
            } else {
                Box::new(ModifiedToeplitz::with_engine(n, m, e).unwrap())
            }
        };
        // The Karatsuba engine: the reference, and a whole run in memory.
        let (ext, kara) = (make(Engine::Auto), make(Engine::Clmul(be)));
        let s = pseudo(22, ext.seed_bits());
        let sp = d.path().join("s.bin");
        write(&sp, &s);
        let mut want = Bits::zeros(m);
        kara.extract(&x, &s, &mut want);
        let (ext, kara) = (ext.as_ref(), kara.as_ref());
        let streamed = RunSeed::Packed {
            path: &sp,
            bits: s.len() as u64,
        };
        // In memory (Karatsuba), one pass (1 GiB; tiles or in memory),
        // tiles in one pass, tiles in several passes.
        let mut passes = Vec::new();
        for (e, limit) in [
            (kara, 1u64 << 30),
            (ext, 1 << 30),
            (ext, 24 << 20),
            (ext, 7 << 20),
        ] {
            let run = |seed, out: &str| run_of(e, file("x.bin"), n, seed, file(out));
            set_memory_limit(limit);
            let plan = run(streamed, "y.bin").whole_run_plan().unwrap().unwrap();
            let est = plan.estimate();
            assert_eq!(est.beside.seed_bytes, 0, "a streamed seed is not held");
            assert!(est.memory_bytes <= limit);
            passes.push((est.in_memory, est.input_passes));
            let r = run(streamed, "y_streamed.bin").execute(|_| {}).unwrap();
            let got = read(&d.path().join("y_streamed.bin"), m);
            assert_eq!(
                got.first_difference(&want),
                None,
                "{family} {limit} {est:?}"
            );
            assert_eq!(
                r.seed_digest.as_deref(),
                Some(data_digest(&s).as_str()),
                "{family} {limit}: the streamed seed's digest"
            );
            assert_eq!(r.input_digest.as_deref(), Some(data_digest(&x).as_str()));
            // The seed in memory where it fits beside the layout.
            match run(RunSeed::Memory(&s), "y_memory.bin").execute(|_| {}) {
                Ok(r) => {
                    assert_eq!(r.seed_digest, None);
                    let got = read(&d.path().join("y_memory.bin"), m);
                    assert_eq!(got.first_difference(&want), None, "{family} {limit}");
                }
                Err(Error::WholeRun(e)) if limit == 7 << 20 => {
                    assert!(matches!(*e, WholeError::Memory { .. }), "{e}");
                    let t = e.to_string();
                    assert!(
                        t.contains("of seed held in memory")
                            && t.contains("packed file")
                            && t.contains("--memory-limit"),
                        "{t}"
                    );
                }
                Err(e) => panic!("{family} {limit}: {e}"),
            }
        }
        set_memory_limit(0);
        assert_eq!(passes[0], (true, 1), "{passes:?}");
        assert_eq!(passes[1].1, 1, "{passes:?}");
        assert_eq!(passes[2], (false, 1), "{passes:?}");
        assert!(
            !passes[3].0 && passes[3].1 > 1,
            "several passes: {passes:?}"
        );
    }
}

/// A planned run (receipt) whose packed seed file is streamed records the
/// same seed digest, and writes the same output, as one whose seed file is
/// read whole (hex); the digest is the data digest of the seed's first d
/// bits. A seed file too short or too long is refused as before.
#[test]
fn receipts_record_the_same_seed_digest_streamed_or_loaded() {
    let d = tempfile::tempdir().unwrap();
    let n = (1usize << 24) + 12_345;
    write(&d.path().join("x.bin"), &pseudo(31, n));
    let seed = pseudo(32, 2 * n + 1_000);
    write(&d.path().join("s.bin"), &seed);
    std::fs::write(
        d.path().join("s.hex"),
        hex_of(&seed.to_packed(BitOrder::Msb)),
    )
    .unwrap();
    let nt = n.to_string();
    let run = |seed_args: &[&str], out: &str, receipt: &str, limit: &str| {
        let mut args = vec![
            "extract",
            "x.bin",
            "--extractor",
            "toeplitz",
            "--min-entropy-rate",
            "0.9",
            "--smoothing",
            "0",
            "--cert-error",
            "0",
            "--target-error",
            "1e-6",
            "--blocks",
            "1",
            "--input-bits",
            &nt,
            "--allow-longer-seed",
            "-o",
            out,
            "--receipt",
            receipt,
            "--memory-limit",
            limit,
        ];
        args.extend_from_slice(seed_args);
        sluice(d.path(), &args)
    };
    let o = run(&["--seed-file", "s.bin"], "y1.bin", "r1.json", "7M");
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{err}");
    assert!(err.contains("pass(es) over the input"), "{err}");
    let o = run(
        &["--seed-file", "s.hex", "--seed-format", "hex"],
        "y2.bin",
        "r2.json",
        "64M",
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let r1: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.path().join("r1.json")).unwrap()).unwrap();
    let r2: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.path().join("r2.json")).unwrap()).unwrap();
    let bits = r1["seed"]["bits"].as_u64().unwrap() as usize;
    let m = r1["construction"]["output_bits"].as_u64().unwrap() as usize;
    assert_eq!(bits, n + m - 1);
    let digest = sluice::bits::digest::data_digest(&seed.slice(0, bits));
    assert_eq!(r1["seed"]["digest"].as_str(), Some(digest.as_str()));
    assert_eq!(r2["seed"]["digest"], r1["seed"]["digest"]);
    assert_eq!(
        std::fs::read(d.path().join("y1.bin")).unwrap(),
        std::fs::read(d.path().join("y2.bin")).unwrap()
    );
    // The hex seed held whole does not fit beside 7M: refused before
    // anything is written, naming the packed form.
    let o = run(
        &["--seed-file", "s.hex", "--seed-format", "hex"],
        "y3.bin",
        "r3.json",
        "7M",
    );
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("needs at least") && err.contains("packed file"),
        "{err}"
    );
    assert!(!d.path().join("y3.bin").exists());

    // Length checks as for a seed read whole: the same messages.
    let explicit = |seed_file: &str, longer: bool| {
        let mut args = vec![
            "extract",
            "x.bin",
            "-o",
            "y4.bin",
            "--extractor",
            "toeplitz",
            "--output-bits",
            "1000",
            "--input-bits",
            &nt,
            "--seed-file",
            seed_file,
        ];
        if longer {
            args.push("--allow-longer-seed");
        }
        sluice(d.path(), &args)
    };
    let need = n + 999;
    write(&d.path().join("short.bin"), &seed.slice(0, need - 8));
    let o = explicit("short.bin", false);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains(&format!(
            "the seed file holds {} bits but this extractor needs {need} seed bits",
            need - 8
        )),
        "{err}"
    );
    let o = explicit("s.bin", false);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains(&format!(
            "more than the {need} this extractor needs; pass --allow-longer-seed"
        )),
        "{err}"
    );
    let o = explicit("s.bin", true);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

fn run_of<'a>(
    extractor: &'a dyn Extractor,
    input: sluice::pipeline::BitFile,
    n: usize,
    seed: sluice::pipeline::RunSeed<'a>,
    output: sluice::pipeline::BitFile,
) -> sluice::pipeline::Run<'a> {
    sluice::pipeline::Run {
        input: sluice::pipeline::Source::File(input),
        input_bits: Some(n as u64),
        extractor,
        seed,
        output,
    }
}

fn hex_of(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}
