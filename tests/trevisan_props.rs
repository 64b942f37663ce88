//! Trevisan extractor: the fast path against its slow twin on random
//! parameters and inputs (proptest), every carry-less backend, bound seeds,
//! reused scratch, and the collision bound D1 of `spec/trevisan.md` 3.1
//! checked exhaustively where the spec says it is tight.

use proptest::prelude::*;
use sluice::bits::Bits;
use sluice::extract::trevisan::onebit::{parse_blocks, ph_bit};
use sluice::extract::trevisan::{reference, DesignKind, ErrorKind, OneBit, Trevisan, TrevisanSpec};
use sluice::extract::Extractor;
use sluice::gf2::field::Field;
use sluice::gf2::Backend;

/// Deterministic bits from a 64-bit seed (the crate's one test generator).
fn random_bits(len: usize, s: u64) -> Bits {
    sluice::bits::pseudo::bits(s | 1, len)
}

fn check_against_reference(spec: TrevisanSpec, data_seed: u64) -> Result<(), TestCaseError> {
    let plan = match Trevisan::new(&spec) {
        Ok(p) => p,
        Err(e) => {
            // the only refusal on these ranges: POLY with m > q^t (4.1)
            prop_assert!(matches!(e.kind(), ErrorKind::TooManySets { .. }), "{e}");
            return Ok(());
        }
    };
    let x = random_bits(spec.n, data_seed);
    let y = random_bits(plan.seed_bits(), data_seed ^ 0x9e37_79b9_7f4a_7c15);
    let p = reference::Params {
        n: spec.n,
        m: spec.m,
        one_bit: spec.one_bit,
        l: spec.field_bits,
        design: spec.design,
        q: plan.prime(),
    };
    prop_assert_eq!(reference::seed_bits(&p), plan.seed_bits());
    let want = Bits::from_bools(&reference::extract(
        &p,
        &x.iter().collect::<Vec<_>>(),
        &y.iter().collect::<Vec<_>>(),
    ));
    for be in Backend::all_supported() {
        let tr = Trevisan::with_backend(&spec, be).unwrap();
        // garbage in the output buffer must not matter
        let mut z = random_bits(spec.m, data_seed.rotate_left(7));
        tr.extract(&x, &y, &mut z);
        prop_assert_eq!(&z, &want, "backend {:?}", be);
        // the same plan again on another input (reused scratch), then back
        let x2 = random_bits(spec.n, data_seed.wrapping_add(1));
        let mut z2 = Bits::zeros(spec.m);
        tr.extract(&x2, &y, &mut z2);
        let mut z3 = Bits::zeros(spec.m);
        tr.with_seed(&y).extract(&x, &mut z3);
        prop_assert_eq!(&z3, &want, "bound seed, backend {:?}", be);
    }
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(160))]

    #[test]
    fn ph_fast_path_matches_reference(
        n in 1usize..400,
        l in 1usize..140,
        m in 1usize..90,
        block in any::<bool>(),
        c in 1u64..4,
        data in any::<u64>(),
    ) {
        let spec = TrevisanSpec {
            n, m, one_bit: OneBit::Ph, field_bits: l,
            design: if block { DesignKind::Block } else { DesignKind::Poly },
            design_factor: c, prime: None,
        };
        check_against_reference(spec, data)?;
    }

    #[test]
    fn ip_fast_path_matches_reference(
        n in 1usize..200,
        m in 1usize..150,
        block in any::<bool>(),
        c in 1u64..3,
        data in any::<u64>(),
    ) {
        let spec = TrevisanSpec {
            n, m, one_bit: OneBit::Ip, field_bits: 0,
            design: if block { DesignKind::Block } else { DesignKind::Poly },
            design_factor: c, prime: None,
        };
        check_against_reference(spec, data)?;
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(400))]

    /// The fixed-width fast product of every backend equals the generic
    /// product (`clmul_words` and a word-level fold) of the portable backend;
    /// the unit tests check the generic product against a bit-by-bit oracle.
    #[test]
    fn field_fast_product_matches_generic(l in 1usize..700, sa in any::<u64>(), sb in any::<u64>()) {
        let a = random_bits(l, sa).words().to_vec();
        let b = random_bits(l, sb).words().to_vec();
        let slow = Field::with_backend(l, Backend::Portable).unwrap();
        let mut want = vec![0u64; slow.words()];
        slow.mul_generic(&a, &b, &mut want);
        for be in Backend::all_supported() {
            let base = Field::with_backend(l, be).unwrap();
            for path in base.paths() {
                let f = base.clone().with_path(path).unwrap();
                let mut got = vec![0u64; f.words()];
                f.mul(&a, &b, &mut got);
                prop_assert_eq!(&got, &want, "l = {}, backend {:?}, path {}", l, be, f.path_name());
            }
        }
    }

    /// The same on the sizes of the n = 2^16 .. 2^24 worked table (spec
    /// section 7: l = 237, 241, 255, 261, 275, 281) and their neighbours,
    /// with operands that are often all-ones or sparse (edge words).
    #[test]
    fn field_fast_product_matches_generic_on_table_sizes(
        l in prop::sample::select(vec![
            129usize, 192, 193, 237, 241, 254, 255, 256, 257, 261, 275, 281, 320, 321, 383, 384, 576,
        ]),
        sa in any::<u64>(), sb in any::<u64>(), fill in 0u8..3,
    ) {
        let mut a = random_bits(l, sa).words().to_vec();
        let b = random_bits(l, sb).words().to_vec();
        if fill > 0 {
            // all ones below l, or only the top word
            let w = a.len();
            for (i, x) in a.iter_mut().enumerate() {
                *x = if fill == 1 || i + 1 == w { u64::MAX } else { 0 };
            }
            if l % 64 != 0 {
                a[w - 1] &= (1u64 << (l % 64)) - 1;
            }
        }
        let slow = Field::with_backend(l, Backend::Portable).unwrap();
        let mut want = vec![0u64; slow.words()];
        slow.mul_generic(&a, &b, &mut want);
        for be in Backend::all_supported() {
            let base = Field::with_backend(l, be).unwrap();
            for path in base.paths() {
                let f = base.clone().with_path(path).unwrap();
                let mut got = vec![0u64; f.words()];
                f.mul(&a, &b, &mut got);
                prop_assert_eq!(&got, &want, "l = {}, backend {:?}, path {}", l, be, f.path_name());
            }
        }
    }

    /// Horner on every product path of this CPU gives the same bits as the
    /// slow twin (PH, widths 3 to 6 words).
    #[test]
    fn horner_paths_match_reference(
        l in prop::sample::select(vec![130usize, 200, 255, 256, 261, 300, 330]),
        nb in 1usize..40, m in 1usize..80, block in any::<bool>(), data in any::<u64>(),
    ) {
        let spec = TrevisanSpec {
            n: nb * l - (data as usize % l).min(nb * l - 1),
            m,
            one_bit: OneBit::Ph,
            field_bits: l,
            design: if block { DesignKind::Block } else { DesignKind::Poly },
            design_factor: 1,
            prime: None,
        };
        let x = random_bits(spec.n, data);
        let base = Trevisan::new(&spec).unwrap();
        let y = random_bits(base.seed_bits(), data ^ 0x5555);
        let p = reference::Params {
            n: spec.n, m: spec.m, one_bit: OneBit::Ph, l: spec.field_bits,
            design: spec.design, q: base.prime(),
        };
        let want = Bits::from_bools(&reference::extract(
            &p,
            &x.iter().collect::<Vec<_>>(),
            &y.iter().collect::<Vec<_>>(),
        ));
        for path in base.field().unwrap().paths() {
            let tr = Trevisan::new(&spec).unwrap().with_field_path(path).unwrap();
            let mut z = Bits::zeros(spec.m);
            tr.extract(&x, &y, &mut z);
            prop_assert_eq!(&z, &want, "path {}", path.name());
            let bound = tr.with_seed(&y);
            let mut z2 = Bits::zeros(spec.m);
            bound.extract(&x, &mut z2);
            prop_assert_eq!(&z2, &want, "bound seed, path {}", path.name());
        }
    }
}

#[test]
fn wide_fields_match_reference() {
    // Fields past the fixed-width fast path (more than 9 words) and large
    // word counts, a few cases each (slow reference).
    for (n, l, m) in [
        (1300usize, 577usize, 5usize),
        (2100, 1000, 3),
        (2048, 2048, 2),
    ] {
        for design in [DesignKind::Poly, DesignKind::Block] {
            let spec = TrevisanSpec {
                n,
                m,
                one_bit: OneBit::Ph,
                field_bits: l,
                design,
                design_factor: 1,
                prime: None,
            };
            check_against_reference(spec, (n * l) as u64).unwrap();
        }
    }
}

#[test]
fn d1_collision_bound_is_met_and_tight() {
    // spec/trevisan.md 3.1 (D1) and its checks: for x != x',
    // Pr_u[C(x,u) = C(x',u)] <= 1/2 + (nb-1)/2^(l+1), with equality for the
    // worst pair at (n, l) in {(6,2), (6,3), (8,2), (8,4), (9,3), (10,2)}.
    for (n, l) in [(6usize, 2usize), (6, 3), (8, 2), (8, 4), (9, 3), (10, 2)] {
        let f = Field::new(l).unwrap();
        let nb = n.div_ceil(l);
        let seeds = 1usize << (2 * l);
        // table[x][u] = C(x, u)
        let table: Vec<Vec<bool>> = (0..1u64 << n)
            .map(|xv| {
                let x = Bits::from_words(vec![xv], n);
                let mut blocks = vec![0u64; nb];
                parse_blocks(&x, l, &mut blocks);
                (0..seeds as u64)
                    .map(|u| {
                        let alpha = u & ((1 << l) - 1);
                        let beta = u >> l;
                        ph_bit(&f, &blocks, &[alpha], &[beta])
                    })
                    .collect()
            })
            .collect();
        let mut worst = 0usize;
        for a in 0..table.len() {
            for b in a + 1..table.len() {
                let same = table[a]
                    .iter()
                    .zip(&table[b])
                    .filter(|(p, q)| p == q)
                    .count();
                worst = worst.max(same);
            }
        }
        // bound * seeds = seeds/2 + (nb-1) * seeds / 2^(l+1)
        let bound = seeds / 2 + (nb - 1) * seeds / (1 << (l + 1));
        assert_eq!(worst, bound, "n = {n}, l = {l}");
    }
}

#[test]
fn bad_parameters_name_the_field() {
    let base = TrevisanSpec {
        n: 100,
        m: 10,
        one_bit: OneBit::Ph,
        field_bits: 16,
        design: DesignKind::Poly,
        design_factor: 1,
        prime: None,
    };
    let e = Trevisan::new(&TrevisanSpec { m: 0, ..base }).unwrap_err();
    assert_eq!(e.field(), "output-bits");
    let e = Trevisan::new(&TrevisanSpec {
        field_bits: 3000,
        ..base
    })
    .unwrap_err();
    assert_eq!(e.field(), "field-bits");
    assert!(e.to_string().contains("3000"), "{e}");
    let e = Trevisan::new(&TrevisanSpec {
        prime: Some(39),
        ..base
    })
    .unwrap_err();
    assert!(matches!(e.kind(), ErrorKind::NotPrime { value: 39 }), "{e}");
    let e = Trevisan::new(&TrevisanSpec {
        prime: Some(31),
        ..base
    })
    .unwrap_err();
    assert!(
        matches!(e.kind(), ErrorKind::TooSmall { value: 31, min: 32 }),
        "{e}"
    );
    // t = 4, q = 5: m = 626 > 5^4 needs D = 4 > t - 1 (4.1)
    let e = Trevisan::new(&TrevisanSpec {
        field_bits: 2,
        m: 626,
        ..base
    })
    .unwrap_err();
    assert!(
        matches!(e.kind(), ErrorKind::TooManySets { degree: 4, .. }),
        "{e}"
    );
    // BLOCK has no such limit
    assert!(Trevisan::new(&TrevisanSpec {
        field_bits: 2,
        m: 626,
        design: DesignKind::Block,
        ..base
    })
    .is_ok());
    let e = Trevisan::new(&TrevisanSpec {
        one_bit: OneBit::Ip,
        ..base
    })
    .unwrap_err();
    assert_eq!(e.field(), "field-bits");
}
