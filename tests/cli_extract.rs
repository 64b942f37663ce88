//! `sluice extract` and `sluice verify` as a lab script would call them.

use sluice::bits::{BitOrder, Bits};
use sluice::extract::reference;
use std::path::Path;

mod cli_common;
use cli_common::{pseudo, sluice};

#[test]
fn blocks_match_the_matrix_definition_and_verify_agrees() {
    let d = tempfile::tempdir().unwrap();
    let (n, m, blocks) = (1000usize, 333usize, 5usize);
    let raw = pseudo(7, n * blocks + 77);
    std::fs::write(d.path().join("raw.bin"), raw.to_packed(BitOrder::Msb)).unwrap();
    let seed = pseudo(9, n + m - 1);
    std::fs::write(d.path().join("seed.bin"), seed.to_packed(BitOrder::Msb)).unwrap();
    let o = sluice(
        d.path(),
        &[
            "extract",
            "raw.bin",
            "--extractor",
            "toeplitz",
            "--seed-file",
            "seed.bin",
            "--output-bits",
            "333",
            "--block-bits",
            "1000",
            "-o",
            "out.bin",
            "--quiet",
        ],
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let err = String::from_utf8_lossy(&o.stderr);
    // 5077 bits rounded up to bytes = 5080; 80 bits do not fill a block.
    assert!(err.contains("last 80 input bits"), "{err}");
    let mut want = Bits::new();
    for b in 0..blocks {
        want.extend_from(&reference::toeplitz(&raw.slice(b * n, n), &seed, m));
    }
    let got = std::fs::read(d.path().join("out.bin")).unwrap();
    assert_eq!(got, want.to_packed(BitOrder::Msb));
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let mode = std::fs::metadata(d.path().join("out.bin"))
            .unwrap()
            .permissions()
            .mode();
        assert_eq!(mode & 0o077, 0, "output must be owner-only");
    }
    let v = sluice(
        d.path(),
        &[
            "verify",
            "raw.bin",
            "--extractor",
            "toeplitz",
            "--seed-file",
            "seed.bin",
            "--output-bits",
            "333",
            "--block-bits",
            "1000",
            "--claimed",
            "out.bin",
        ],
    );
    assert_eq!(
        v.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&v.stdout)
    );
    // Flip bit 700 of the claimed output: mismatch at 700, one differing bit.
    let mut bad = want.clone();
    bad.set(700, !bad.get(700));
    std::fs::write(d.path().join("bad.bin"), bad.to_packed(BitOrder::Msb)).unwrap();
    let v = sluice(
        d.path(),
        &[
            "verify",
            "raw.bin",
            "--extractor",
            "toeplitz",
            "--seed-file",
            "seed.bin",
            "--output-bits",
            "333",
            "--block-bits",
            "1000",
            "--claimed",
            "bad.bin",
            "--json",
        ],
    );
    assert_eq!(v.status.code(), Some(1));
    let j: serde_json::Value = serde_json::from_slice(&v.stdout).unwrap();
    assert_eq!(j["first_difference"], 700);
    assert_eq!(j["differing_bits"], 1);
    // A claimed output that is too short.
    std::fs::write(
        d.path().join("short.bin"),
        &want.to_packed(BitOrder::Msb)[..100],
    )
    .unwrap();
    let v = sluice(
        d.path(),
        &[
            "verify",
            "raw.bin",
            "--extractor",
            "toeplitz",
            "--seed-file",
            "seed.bin",
            "--output-bits",
            "333",
            "--block-bits",
            "1000",
            "--claimed",
            "short.bin",
            "--json",
        ],
    );
    assert_eq!(v.status.code(), Some(1));
    let j: serde_json::Value = serde_json::from_slice(&v.stdout).unwrap();
    assert_eq!(j["first_difference"], 800);
}

#[test]
fn formats_and_input_bits() {
    let d = tempfile::tempdir().unwrap();
    let raw = pseudo(3, 300);
    std::fs::write(d.path().join("raw.txt"), raw.to_ascii()).unwrap();
    let seed = pseudo(4, 199);
    std::fs::write(d.path().join("seed.hex"), seed.to_hex(BitOrder::Msb)).unwrap();
    let o = sluice(
        d.path(),
        &[
            "extract",
            "raw.txt",
            "--format",
            "ascii",
            "--input-bits",
            "150",
            "--extractor",
            "modified-toeplitz",
            "--seed-file",
            "seed.hex",
            "--seed-format",
            "hex",
            "--allow-longer-seed",
            "--output-bits",
            "50",
            "--output-format",
            "hex",
            "-o",
            "out.hex",
            "--quiet",
        ],
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let want = reference::modified_toeplitz(&raw.slice(0, 150), &seed.slice(0, 149), 50);
    let got = std::fs::read_to_string(d.path().join("out.hex")).unwrap();
    assert_eq!(got.trim(), want.to_hex(BitOrder::Msb));
    // LSB-first packed output of the same.
    let o = sluice(
        d.path(),
        &[
            "extract",
            "raw.txt",
            "--format",
            "ascii",
            "--input-bits",
            "150",
            "--extractor",
            "modified-toeplitz",
            "--seed-file",
            "seed.hex",
            "--seed-format",
            "hex",
            "--allow-longer-seed",
            "--output-bits",
            "50",
            "--output-format",
            "packed",
            "--output-bit-order",
            "lsb",
            "-o",
            "-",
            "--quiet",
        ],
    );
    assert!(o.status.success());
    assert_eq!(o.stdout, want.to_packed(BitOrder::Lsb));
}

#[test]
fn bad_input_is_refused_and_nothing_is_written() {
    let d = tempfile::tempdir().unwrap();
    std::fs::write(d.path().join("raw.txt"), "0101\n01q1").unwrap();
    std::fs::write(d.path().join("seed.bin"), [0u8; 2]).unwrap();
    std::fs::write(d.path().join("raw.bin"), [0u8; 4]).unwrap();
    let cases: &[(&[&str], &str)] = &[
        (
            &[
                "extract",
                "raw.txt",
                "--format",
                "ascii",
                "--extractor",
                "toeplitz",
                "--seed-file",
                "seed.bin",
                "--output-bits",
                "2",
                "-o",
                "out",
            ],
            "raw.txt: byte 7: found 'q'",
        ),
        (
            &[
                "extract",
                "raw.bin",
                "--extractor",
                "toeplitz",
                "--seed-file",
                "seed.bin",
                "--output-bits",
                "8",
                "-o",
                "out",
            ],
            "needs 39 seed bits",
        ),
        (
            &[
                "extract",
                "raw.bin",
                "--extractor",
                "toeplitz",
                "--seed-file",
                "seed.bin",
                "--output-bits",
                "33",
                "-o",
                "out",
            ],
            "larger than the input block of 32 bits",
        ),
        (
            &[
                "extract",
                "raw.bin",
                "--extractor",
                "toeplitz",
                "--seed-file",
                "seed.bin",
                "--output-bits",
                "0",
                "-o",
                "out",
            ],
            "--output-bits 0",
        ),
        (
            &[
                "extract",
                "raw.bin",
                "--extractor",
                "toeplitz",
                "--seed-file",
                "seed.bin",
                "--output-bits",
                "1",
                "--input-bits",
                "0",
                "-o",
                "out",
            ],
            "--input-bits 0",
        ),
        (
            &[
                "extract",
                "raw.bin",
                "--extractor",
                "toeplitz",
                "--seed-file",
                "seed.bin",
                "--output-bits",
                "1",
                "--input-bits",
                "64",
                "-o",
                "out",
                "--allow-longer-seed",
            ],
            "64 bits asked for, but the input ends after 32 bits",
        ),
        (
            &[
                "extract",
                "raw.bin",
                "--extractor",
                "modified-toeplitz",
                "--seed-file",
                "seed.bin",
                "--output-bits",
                "32",
                "-o",
                "out",
            ],
            "must be smaller",
        ),
        (
            &[
                "extract",
                "raw.bin",
                "--extractor",
                "toeplitz",
                "--seed-file",
                "seed.bin",
                "--output-bits",
                "1",
                "--block-bits",
                "5",
                "-o",
                "out",
            ],
            "more than the 5",
        ),
    ];
    for (args, msg) in cases {
        let o = sluice(d.path(), args);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{args:?}: {err}");
        assert!(err.contains(msg), "{args:?}: expected {msg:?} in {err}");
        assert!(!d.path().join("out").exists(), "{args:?} left an output");
    }
    // No temporary files left behind either.
    let leftovers: Vec<_> = std::fs::read_dir(d.path())
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().ends_with(".tmp"))
        .collect();
    assert!(leftovers.is_empty());
    // Usage errors exit 2 too.
    let o = sluice(d.path(), &["extract", "raw.bin", "--extractor", "nope"]);
    assert_eq!(o.status.code(), Some(2));
}

#[test]
fn every_engine_writes_the_same_file() {
    let d = tempfile::tempdir().unwrap();
    std::fs::write(
        d.path().join("raw.bin"),
        pseudo(11, 8 * 3000).to_packed(BitOrder::Msb),
    )
    .unwrap();
    std::fs::write(
        d.path().join("seed.bin"),
        pseudo(12, 8 * 600).to_packed(BitOrder::Msb),
    )
    .unwrap();
    let mut outs = Vec::new();
    for e in ["portable", "pclmul", "vpclmul256", "vpclmul", "fft"] {
        let o = sluice(
            d.path(),
            &[
                "extract",
                "raw.bin",
                "--extractor",
                "toeplitz",
                "--seed-file",
                "seed.bin",
                "--allow-longer-seed",
                "--output-bits",
                "1000",
                "--block-bits",
                "3777",
                "--engine",
                e,
                "-o",
                "-",
                "--quiet",
            ],
        );
        if !o.status.success() {
            // Engines this CPU lacks are refused with a clear message.
            assert!(
                String::from_utf8_lossy(&o.stderr).contains("not supported"),
                "{e}"
            );
            continue;
        }
        outs.push(o.stdout);
    }
    assert!(outs.len() >= 2);
    assert!(outs.windows(2).all(|w| w[0] == w[1]));
}

#[test]
fn trevisan_on_the_command_line_reproduces_the_published_vectors() {
    // vectors/trevisan.vec: V1-V4 of spec/trevisan.md 9 and our own cases.
    let text =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("vectors/trevisan.vec"))
            .unwrap();
    let cases = sluice::vectors::parse(&text).unwrap();
    let d = tempfile::tempdir().unwrap();
    let mut ran = 0;
    for c in cases.iter().filter(|c| c.input_bits <= 1 << 16).take(8) {
        let spec = sluice::vectors::trevisan_spec(c).unwrap();
        let x = c.input.bits(c.input_bits).unwrap();
        std::fs::write(d.path().join("in.txt"), x.to_ascii()).unwrap();
        let plan = sluice::extract::trevisan::Trevisan::new(&spec).unwrap();
        use sluice::extract::Extractor;
        let s = c.seed.bits(plan.seed_bits()).unwrap();
        std::fs::write(d.path().join("seed.bin"), s.to_packed(BitOrder::Msb)).unwrap();
        let m = c.output_bits.to_string();
        let mut args = vec![
            "extract",
            "in.txt",
            "--format",
            "ascii",
            "--output-format",
            "hex",
            "--extractor",
            "trevisan",
        ];
        let one_bit = c.params["one-bit"].clone();
        let design = c.params["design"].clone();
        let factor = c.params.get("design-factor").cloned().unwrap_or("1".into());
        args.extend([
            "--one-bit",
            &one_bit,
            "--design",
            &design,
            "--design-factor",
            &factor,
            "--output-bits",
            &m,
        ]);
        let fb;
        if let Some(l) = c.params.get("field-bits") {
            fb = l.clone();
            args.extend(["--field-bits", &fb]);
        }
        args.extend(["--seed-file", "seed.bin", "-o", "out.hex", "--quiet"]);
        if let Some(q) = c.params.get("prime") {
            // The default rule (smallest prime >= c t) must give the recorded q.
            assert_eq!(q.parse::<u64>().unwrap(), plan.prime(), "{}", c.name);
        }
        let o = sluice(d.path(), &args);
        assert!(
            o.status.success(),
            "{}: {}",
            c.name,
            String::from_utf8_lossy(&o.stderr)
        );
        let got = std::fs::read_to_string(d.path().join("out.hex")).unwrap();
        assert_eq!(got.trim(), c.output.as_deref().unwrap(), "{}", c.name);
        ran += 1;
    }
    assert!(ran >= 4);
}
