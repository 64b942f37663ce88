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
        for limit in [None, Some("24M"), Some("3M")] {
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
            if limit == Some("3M") {
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
