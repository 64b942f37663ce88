//! The published vectors: recomputed by `sluice vectors check`, regenerated
//! and compared byte for byte, and checked outside the project with numpy.

use std::path::Path;
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_sluice");

fn vectors_dir() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("vectors")
}

#[test]
fn every_vector_passes() {
    // Whole-run cases above 2^26 bits take seconds to minutes each: they are
    // checked by `sluice vectors check vectors` without the limit (see
    // DEVELOPERS.md), not here.
    let out = Command::new(BIN)
        .args(["vectors", "check", "--max-input-bits", "67108864"])
        .arg(vectors_dir())
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{text}\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(text.contains(" 0 failed"), "{text}");
    assert!(!text.contains("FAIL"), "{text}");
}

#[test]
fn a_corrupted_vector_fails_with_its_name() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(vectors_dir().join("toeplitz.vec")).unwrap();
    // spec-3.4 expects 2a; claim 2b instead.
    let bad = text.replace("output 2a\n", "output 2b\n");
    assert_ne!(bad, text);
    std::fs::write(dir.path().join("t.vec"), bad).unwrap();
    let out = Command::new(BIN)
        .args(["vectors", "check"])
        .arg(dir.path())
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("FAIL t.vec") && text.contains("spec-3.4"),
        "{text}"
    );
}

#[test]
fn committed_vectors_match_the_generator() {
    let dir = tempfile::tempdir().unwrap();
    let st = Command::new(BIN)
        .args(["vectors", "generate", "--out"])
        .arg(dir.path())
        .status()
        .unwrap();
    assert!(st.success());
    for f in ["toeplitz.vec", "modified-toeplitz.vec", "two-source.vec"] {
        let a = std::fs::read(dir.path().join(f)).unwrap();
        let b = std::fs::read(vectors_dir().join(f)).unwrap();
        assert!(
            a == b,
            "{f}: the committed file differs from `sluice vectors generate`; regenerate it"
        );
    }
}

/// Outside check: numpy / scipy (general-purpose reference libraries)
/// recompute every hashing vector (tests/outside_check.py). Skipped only when
/// python3 or the packages are missing and SLUICE_REQUIRE_OUTSIDE is unset;
/// CI sets it.
#[test]
fn numpy_recomputes_the_hashing_vectors() {
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/outside_check.py");
    let out = match Command::new("python3")
        .arg(&script)
        .arg(vectors_dir())
        .output()
    {
        Ok(o) => o,
        Err(e) => {
            assert!(
                std::env::var_os("SLUICE_REQUIRE_OUTSIDE").is_none(),
                "python3 not runnable: {e}"
            );
            eprintln!("skipped: python3 not found");
            return;
        }
    };
    if out.status.code() == Some(3) {
        assert!(
            std::env::var_os("SLUICE_REQUIRE_OUTSIDE").is_none(),
            "numpy/scipy/blake3 missing: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        eprintln!("skipped: {}", String::from_utf8_lossy(&out.stderr));
        return;
    }
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{text}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(text.contains(" 0 failed"), "{text}");
}
