//! Trevisan extractor against the vectors of `spec/trevisan.md` section 9
//! (V1-V4, with the intermediate values of V1), and against
//! `vectors/trevisan.vec`.
//!
//! `vectors/trevisan.vec` is written by the ignored test
//! `regenerate_vector_file` (run it with
//! `cargo test --release --test trevisan_vectors -- --ignored`) from the slow
//! twin `sluice::extract::trevisan::reference`, never from the fast path;
//! `vector_file_is_current` regenerates it in memory and compares.

use sha2::{Digest, Sha256};
use sluice::bits::{BitOrder, Bits};
use sluice::extract::trevisan::{reference, DesignKind, OneBit, Trevisan, TrevisanSpec};
use sluice::extract::Extractor;
use std::fmt::Write as _;

/// stream(label, N) of spec section 9: the first N bits of
/// SHA-256(label || LE64(0)) || SHA-256(label || LE64(1)) || ..., MSB-first.
fn stream(label: &str, nbits: usize) -> Bits {
    let mut bytes = Vec::new();
    let mut ctr = 0u64;
    while bytes.len() * 8 < nbits {
        let mut h = Sha256::new();
        h.update(label.as_bytes());
        h.update(ctr.to_le_bytes());
        bytes.extend_from_slice(&h.finalize());
        ctr += 1;
    }
    Bits::from_packed(&bytes, nbits, BitOrder::Msb).unwrap()
}

fn sha256_hex(bytes: &[u8]) -> String {
    hex::encode(Sha256::digest(bytes))
}

fn to_bools(b: &Bits) -> Vec<bool> {
    b.iter().collect()
}

struct SpecVector {
    id: &'static str,
    spec: TrevisanSpec,
    q: u64,
    d: usize,
    seed_sha256: &'static str,
    z: &'static str,
}

fn spec_vectors() -> Vec<SpecVector> {
    let ph = |n, l, m, design| TrevisanSpec {
        n,
        m,
        one_bit: OneBit::Ph,
        field_bits: l,
        design,
        design_factor: 1,
        prime: None,
    };
    // spec/trevisan.md section 9, table of vectors.
    vec![
        SpecVector {
            id: "V1",
            spec: ph(256, 16, 64, DesignKind::Poly),
            q: 37,
            d: 1184,
            seed_sha256: "eca14942010fe9ee635bae0d1e530f7365d33a526222335f4d0a322a5067d35e",
            z: "9503dc7f6022c7eb",
        },
        SpecVector {
            id: "V2",
            spec: ph(256, 16, 64, DesignKind::Block),
            q: 37,
            d: 2048,
            seed_sha256: "c404d0d11bcff0a228406ef4f7d9777ed6da010438059849a36a8de4388b3c22",
            z: "9503dc7f66b994e2",
        },
        SpecVector {
            id: "V3",
            spec: TrevisanSpec {
                n: 64,
                m: 8,
                one_bit: OneBit::Ip,
                field_bits: 0,
                design: DesignKind::Poly,
                design_factor: 1,
                prime: None,
            },
            q: 67,
            d: 512,
            seed_sha256: "2709cb128e14782b982b82989d6dc544acaa55855cda0437bc0939deefc628df",
            z: "cf",
        },
        SpecVector {
            id: "V4",
            spec: ph(1000, 24, 100, DesignKind::Poly),
            q: 53,
            d: 2544,
            seed_sha256: "41b373a34b1d2a1115afa2648312133b1c851826919925f90933176d8515cb4e",
            z: "511846a2cb07eb7c9aaf671ec0",
        },
    ]
}

#[test]
fn spec_section_9_vectors_fast_and_reference() {
    for v in spec_vectors() {
        let x = stream("trevisan-spec/x", v.spec.n);
        // section 9: x starts with 30a5216d5d81739d02bc36e729cad3e9
        assert!(x
            .to_hex(BitOrder::Msb)
            .starts_with(&"30a5216d5d81739d02bc36e729cad3e9"[..(v.spec.n / 4).min(32)]));
        let tr = Trevisan::new(&v.spec).unwrap();
        assert_eq!(tr.prime(), v.q, "{}", v.id);
        assert_eq!(tr.seed_bits(), v.d, "{}", v.id);
        let y = stream("trevisan-spec/y", v.d);
        assert_eq!(
            sha256_hex(&y.to_packed(BitOrder::Msb)),
            v.seed_sha256,
            "{} seed",
            v.id
        );
        let mut z = Bits::zeros(v.spec.m);
        tr.extract(&x, &y, &mut z);
        assert_eq!(z.to_hex(BitOrder::Msb), v.z, "{} fast path", v.id);
        let mut z2 = Bits::zeros(v.spec.m);
        tr.with_seed(&y).extract(&x, &mut z2);
        assert_eq!(z2, z, "{} bound seed", v.id);
        let p = reference::Params {
            n: v.spec.n,
            m: v.spec.m,
            one_bit: v.spec.one_bit,
            l: v.spec.field_bits,
            design: v.spec.design,
            q: v.q,
        };
        let zr = reference::extract(&p, &to_bools(&x), &to_bools(&y));
        assert_eq!(
            Bits::from_bools(&zr).to_hex(BitOrder::Msb),
            v.z,
            "{} reference",
            v.id
        );
    }
}

#[test]
fn spec_v1_intermediate_values() {
    // spec/trevisan.md section 9, "Intermediate values for V1": set, alpha,
    // beta, p_x(alpha), z_i; and B_0 = 0xa50c, B_1 = 0xb684, B_15 = 0xd9c9.
    let v = &spec_vectors()[0];
    let tr = Trevisan::new(&v.spec).unwrap();
    let x = stream("trevisan-spec/x", 256);
    let y = stream("trevisan-spec/y", v.d);
    let field = tr.field().unwrap();
    let mut blocks = vec![0u64; 16];
    sluice::extract::trevisan::onebit::parse_blocks(&x, 16, &mut blocks);
    assert_eq!((blocks[0], blocks[1], blocks[15]), (0xa50c, 0xb684, 0xd9c9));
    // (i, first four of S_i, last of S_i, alpha, beta, p_x(alpha), z_i)
    type Row = (u64, [u64; 4], u64, u64, u64, u64, bool);
    let rows: [Row; 4] = [
        (0, [0, 37, 74, 111], 1147, 0x771e, 0x6474, 0xa226, true),
        (37, [0, 38, 76, 114], 1178, 0x33ec, 0x0166, 0x0550, false),
        (40, [3, 41, 79, 117], 1181, 0x6472, 0xfc91, 0xe3c8, false),
        (63, [26, 64, 102, 140], 1167, 0xd478, 0x3711, 0xcd3a, true),
    ];
    let mut z = Bits::zeros(64);
    tr.extract(&x, &y, &mut z);
    for (i, first4, last, alpha, beta, px, zi) in rows {
        let mut pos = vec![0u64; 32];
        tr.design().positions(i, &mut pos);
        assert_eq!(&pos[..4], &first4, "S_{i}");
        assert_eq!(pos[31], last, "S_{i} last");
        let u: Vec<u64> = pos.iter().map(|&e| y.get(e as usize) as u64).collect();
        let a: u64 = (0..16).map(|j| u[j] << j).sum();
        let b: u64 = (0..16).map(|j| u[16 + j] << j).sum();
        assert_eq!((a, b), (alpha, beta), "i = {i}");
        // Horner from the highest block (3.1 step 3)
        let mut acc = [blocks[15]];
        for k in (0..15).rev() {
            let mut t = [0u64];
            field.mul(&acc, &[a], &mut t);
            acc = [t[0] ^ blocks[k]];
        }
        assert_eq!(acc[0], px, "p_x(alpha), i = {i}");
        assert_eq!(z.get(i as usize), zi, "z_{i}");
    }
}

// ---- vectors/trevisan.vec --------------------------------------------------

/// One case of the vector file: (name, one-bit, design, n, m, l, c, explicit q).
type Case = (
    &'static str,
    OneBit,
    DesignKind,
    usize,
    usize,
    usize,
    u64,
    Option<u64>,
);

/// The cases of `vectors/trevisan.vec` (own choice: both one-bit extractors,
/// both designs, l not a multiple of 64, padded last blocks, m = 1, degrees
/// 0 to 2, c > 1, an explicit prime), plus V1-V4 of the spec.
fn cases() -> Vec<Case> {
    use DesignKind::{Block, Poly};
    use OneBit::{Ip, Ph};
    vec![
        ("spec-v1", Ph, Poly, 256, 64, 16, 1, None),
        ("spec-v2", Ph, Block, 256, 64, 16, 1, None),
        ("spec-v3", Ip, Poly, 64, 8, 0, 1, None),
        ("spec-v4", Ph, Poly, 1000, 100, 24, 1, None),
        ("ph-poly-gf2-m1", Ph, Poly, 5, 1, 1, 1, None),
        ("ph-poly-l2-d0", Ph, Poly, 7, 5, 2, 1, None),
        ("ph-poly-l2-d2", Ph, Poly, 16, 30, 2, 1, None),
        ("ph-block-l2-d2", Ph, Block, 16, 60, 2, 1, None),
        ("ph-poly-l3-d1", Ph, Poly, 20, 20, 3, 1, None),
        ("ph-block-l3-d1", Ph, Block, 20, 20, 3, 1, None),
        ("ph-block-l5-groups", Ph, Block, 30, 200, 5, 1, None),
        ("ph-poly-l7-padded", Ph, Poly, 50, 40, 7, 1, None),
        ("ph-block-l7-padded", Ph, Block, 50, 40, 7, 1, None),
        ("ph-poly-l16-q41", Ph, Poly, 256, 64, 16, 1, Some(41)),
        ("ph-poly-l24-c3", Ph, Poly, 500, 90, 24, 3, None),
        ("ph-poly-l33-m1-one-block", Ph, Poly, 20, 1, 33, 1, None),
        ("ph-poly-l63", Ph, Poly, 200, 30, 63, 1, None),
        ("ph-poly-l64-d1", Ph, Poly, 256, 150, 64, 1, None),
        ("ph-block-l64-d1", Ph, Block, 256, 150, 64, 1, None),
        ("ph-poly-l65-padded", Ph, Poly, 300, 140, 65, 1, None),
        ("ph-block-l65-padded", Ph, Block, 300, 140, 65, 1, None),
        ("ph-poly-l100-c2", Ph, Poly, 1000, 33, 100, 2, None),
        ("ph-poly-l127-one-block", Ph, Poly, 127, 1, 127, 1, None),
        ("ph-poly-l129-padded", Ph, Poly, 388, 70, 129, 1, None),
        ("ip-poly-m1", Ip, Poly, 9, 1, 0, 1, None),
        ("ip-poly-d0", Ip, Poly, 40, 30, 0, 1, None),
        ("ip-block-d0", Ip, Block, 40, 30, 0, 1, None),
        ("ip-poly-d2", Ip, Poly, 5, 40, 0, 1, None),
        ("ip-block-d2", Ip, Block, 5, 40, 0, 1, None),
        ("ip-poly-c2", Ip, Poly, 70, 64, 0, 2, None),
        ("ip-poly-n130", Ip, Poly, 130, 65, 0, 1, None),
    ]
}

fn spec_of(c: &Case) -> TrevisanSpec {
    TrevisanSpec {
        n: c.3,
        m: c.4,
        one_bit: c.1,
        field_bits: c.5,
        design: c.2,
        design_factor: c.6,
        prime: c.7,
    }
}

/// Input and seed of a case: the spec's labels for V1-V4, else
/// `sluice-vectors/trevisan/<name>/x` and `.../y` in the same stream.
fn data_of(name: &str, n: usize, d: usize) -> (Bits, Bits) {
    if name.starts_with("spec-v") {
        (stream("trevisan-spec/x", n), stream("trevisan-spec/y", d))
    } else {
        (
            stream(&format!("sluice-vectors/trevisan/{name}/x"), n),
            stream(&format!("sluice-vectors/trevisan/{name}/y"), d),
        )
    }
}

fn render_vector_file() -> String {
    let mut s = String::new();
    s.push_str(
        "sluice-vectors 1\n\
         # Trevisan-style extractor (spec/trevisan.md sections 2-4; bit order and\n\
         # field polynomials P_l of spec/conventions.md).\n\
         # Written by `cargo test --release --test trevisan_vectors -- --ignored`\n\
         # (regenerate_vector_file) from the slow reference twin\n\
         # sluice::extract::trevisan::reference, not from the fast path.\n\
         # Cases spec-v1 .. spec-v4 are V1-V4 of spec/trevisan.md section 9 and use\n\
         # its data; every other case uses the same generator with the labels\n\
         # sluice-vectors/trevisan/<case>/x and .../y: the first N bits of\n\
         # SHA-256(label || LE64(0)) || SHA-256(label || LE64(1)) || ..., MSB-first.\n\
         # The function is fixed by (input-bits, output-bits, one-bit, field-bits,\n\
         # design, prime); design-factor is the c that chose the prime.\n",
    );
    for c in cases() {
        let spec = spec_of(&c);
        let tr = Trevisan::new(&spec).unwrap();
        let q = tr.prime();
        let d = tr.seed_bits();
        let (x, y) = data_of(c.0, c.3, d);
        let p = reference::Params {
            n: c.3,
            m: c.4,
            one_bit: c.1,
            l: c.5,
            design: c.2,
            q,
        };
        assert_eq!(reference::seed_bits(&p), d, "{}: seed length", c.0);
        let z = Bits::from_bools(&reference::extract(&p, &to_bools(&x), &to_bools(&y)));
        writeln!(s, "\ncase {}", c.0).unwrap();
        writeln!(s, "extractor trevisan").unwrap();
        writeln!(s, "input-bits {}", c.3).unwrap();
        writeln!(s, "output-bits {}", c.4).unwrap();
        writeln!(s, "param one-bit {}", c.1.name()).unwrap();
        writeln!(s, "param design {}", c.2.name()).unwrap();
        if c.1 == OneBit::Ph {
            writeln!(s, "param field-bits {}", c.5).unwrap();
        }
        writeln!(s, "param design-factor {}", c.6).unwrap();
        writeln!(s, "param prime {q}").unwrap();
        writeln!(s, "input {}", x.to_hex(BitOrder::Msb)).unwrap();
        writeln!(s, "seed {}", y.to_hex(BitOrder::Msb)).unwrap();
        writeln!(s, "output {}", z.to_hex(BitOrder::Msb)).unwrap();
        writeln!(s, "end").unwrap();
    }
    s
}

const VECTOR_FILE: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/vectors/trevisan.vec");

#[test]
#[ignore = "writes vectors/trevisan.vec; run on purpose"]
fn regenerate_vector_file() {
    std::fs::create_dir_all(concat!(env!("CARGO_MANIFEST_DIR"), "/vectors")).unwrap();
    std::fs::write(VECTOR_FILE, render_vector_file()).unwrap();
}

#[test]
fn vector_file_is_current() {
    let on_disk = std::fs::read_to_string(VECTOR_FILE).expect("vectors/trevisan.vec");
    assert!(
        on_disk == render_vector_file(),
        "vectors/trevisan.vec is stale: regenerate it"
    );
}

/// A minimal reader of the vector format (the project's reader is separate).
fn parse_vector_file(text: &str) -> Vec<Vec<(String, String)>> {
    let mut out = Vec::new();
    let mut cur: Option<Vec<(String, String)>> = None;
    for line in text.lines() {
        let line = line.trim();
        if line.is_empty() || line.starts_with('#') || line == "sluice-vectors 1" {
            continue;
        }
        if line == "end" {
            out.push(cur.take().expect("end without case"));
            continue;
        }
        let (k, v) = line.split_once(' ').expect("key value");
        let (k, v) = if k == "param" {
            let (pk, pv) = v.split_once(' ').expect("param key value");
            (format!("param {pk}"), pv.to_string())
        } else {
            (k.to_string(), v.to_string())
        };
        if k == "case" {
            cur = Some(Vec::new());
        }
        cur.as_mut().expect("line outside a case").push((k, v));
    }
    out
}

#[test]
fn fast_path_reproduces_the_vector_file() {
    let text = std::fs::read_to_string(VECTOR_FILE).expect("vectors/trevisan.vec");
    let cases = parse_vector_file(&text);
    assert!(cases.len() >= 24, "at least V1-V4 and 20 own cases");
    for c in cases {
        let get = |k: &str| c.iter().find(|(a, _)| a == k).map(|(_, v)| v.as_str());
        let name = get("case").unwrap();
        let num = |k: &str| get(k).map(|v| v.parse::<usize>().unwrap());
        let spec = TrevisanSpec {
            n: num("input-bits").unwrap(),
            m: num("output-bits").unwrap(),
            one_bit: match get("param one-bit").unwrap() {
                "ph" => OneBit::Ph,
                "ip" => OneBit::Ip,
                o => panic!("{name}: one-bit {o}"),
            },
            field_bits: num("param field-bits").unwrap_or(0),
            design: match get("param design").unwrap() {
                "poly" => DesignKind::Poly,
                "block" => DesignKind::Block,
                o => panic!("{name}: design {o}"),
            },
            design_factor: num("param design-factor").unwrap_or(1) as u64,
            prime: Some(num("param prime").unwrap() as u64),
        };
        let tr = Trevisan::new(&spec).unwrap();
        let x = Bits::from_hex(get("input").unwrap(), Some(spec.n), BitOrder::Msb).unwrap();
        let y = Bits::from_hex(get("seed").unwrap(), Some(tr.seed_bits()), BitOrder::Msb).unwrap();
        let mut z = Bits::zeros(spec.m);
        tr.extract(&x, &y, &mut z);
        assert_eq!(z.to_hex(BitOrder::Msb), get("output").unwrap(), "{name}");
        // the default rule gives the recorded prime
        let default = Trevisan::new(&TrevisanSpec {
            prime: None,
            ..spec
        })
        .unwrap();
        if !name.contains("-q") {
            assert_eq!(default.prime(), spec.prime.unwrap(), "{name}");
        }
    }
}
