//! Every x86 kernel this CPU runs (through [`AnyKern`], as the transforms
//! call them) against the portable twin [`Portable`] on random inputs:
//! the four butterflies on slices, every block size the transforms hand to
//! [`Kern::block`] at random positions, the pointwise products and the XOR.

use super::gf64;
use super::kernel::{Bfly, Kern, Portable};
use super::transform::BLOCK;
use super::AnyKern;
use crate::gf2::Backend;
use proptest::prelude::*;

/// The SIMD kernels of this CPU, with their backends.
fn simd_kernels() -> Vec<(Backend, AnyKern)> {
    Backend::all_supported()
        .into_iter()
        .filter(|&b| b != Backend::Portable)
        .map(|b| (b, AnyKern::new(b)))
        .collect()
}

const KINDS: [Bfly; 4] = [Bfly::Fft, Bfly::Ifft, Bfly::FftT, Bfly::IfftT];

#[test]
fn each_backend_gets_its_own_kernel() {
    // A backend must not fall back to the portable kernel silently: that
    // would leave its SIMD kernel untested by the comparisons below.
    for (b, k) in simd_kernels() {
        let ok = matches!(
            (b, k),
            (Backend::Pclmul, AnyKern::Pclmul(_))
                | (Backend::Vpclmul256, AnyKern::Vpclmul256(_))
                | (Backend::Vpclmul, AnyKern::Avx512(_))
        );
        assert!(ok, "{b:?} maps to {k:?}");
    }
    // Where the CPU has the instructions (and the features do not disable
    // detection), all three x86 kernels run here.
    if !cfg!(feature = "no_vpclmul")
        && !cfg!(feature = "no_pclmul")
        && std::is_x86_feature_detected!("avx512f")
        && std::is_x86_feature_detected!("avx2")
        && std::is_x86_feature_detected!("vpclmulqdq")
    {
        assert_eq!(simd_kernels().len(), 3);
    }
}

#[test]
fn products_on_edge_values() {
    // Operands with the top bits set exercise both folds of the reduction.
    let edges = [
        0u64,
        1,
        2,
        gf64::P_LOW,
        1 << 63,
        (1 << 63) | 1,
        u64::MAX,
        u64::MAX - 1,
        0xf000_0000_0000_0000,
        0x8000_0000_ffff_ffff,
    ];
    let x: Vec<u64> = edges
        .iter()
        .flat_map(|&a| edges.iter().map(move |_| a))
        .collect();
    let y: Vec<u64> = edges.iter().flat_map(|_| edges.iter().copied()).collect();
    let mut want = vec![0u64; x.len()];
    Portable.mul_acc(&mut want, &x, &y);
    for (i, w) in want.iter().enumerate() {
        assert_eq!(*w, gf64::mul(x[i], y[i]));
    }
    for (b, k) in simd_kernels() {
        let mut got = vec![0u64; x.len()];
        k.mul_acc(&mut got, &x, &y);
        assert_eq!(got, want, "{b:?} mul_acc");
        let mut got = x.clone();
        k.mul_assign(&mut got, &y);
        assert_eq!(got, want, "{b:?} mul_assign");
    }
}

/// A block length `2^lg` (`lg <= log2 BLOCK`, every size the transforms
/// pass to `block`), its contents and a position: a random multiple of the
/// length below `2^32` (the largest transform).
fn block_case() -> impl Strategy<Value = (Vec<u64>, usize)> {
    (0u32..=BLOCK.trailing_zeros()).prop_flat_map(|lg| {
        let len = 1usize << lg;
        (
            prop::collection::vec(any::<u64>(), len),
            0usize..(1usize << (32 - lg)),
        )
            .prop_map(move |(f, q)| (f, q * len))
    })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]

    #[test]
    fn block_matches_portable((f, pos) in block_case(), kind in 0usize..4) {
        let kind = KINDS[kind];
        let mut want = f.clone();
        Portable.block(kind, &mut want, pos);
        for (b, k) in simd_kernels() {
            let mut got = f.clone();
            k.block(kind, &mut got, pos);
            prop_assert_eq!(&got, &want, "{:?} {:?} len {} pos {}", b, kind, f.len(), pos);
        }
    }

    #[test]
    fn butterflies_match_portable(
        ab in prop::collection::vec((any::<u64>(), any::<u64>()), 0..70),
        l in any::<u64>(),
        kind in 0usize..4,
    ) {
        let kind = KINDS[kind];
        let (a, b): (Vec<u64>, Vec<u64>) = ab.into_iter().unzip();
        let (mut wa, mut wb) = (a.clone(), b.clone());
        Portable.bfly(kind, &mut wa, &mut wb, l);
        for (be, k) in simd_kernels() {
            let (mut ga, mut gb) = (a.clone(), b.clone());
            k.bfly(kind, &mut ga, &mut gb, l);
            prop_assert_eq!((&ga, &gb), (&wa, &wb), "{:?} {:?} len {}", be, kind, a.len());
        }
    }

    #[test]
    fn pointwise_and_xor_match_portable(
        v in prop::collection::vec((any::<u64>(), any::<u64>(), any::<u64>()), 0..70),
    ) {
        let acc: Vec<u64> = v.iter().map(|t| t.0).collect();
        let x: Vec<u64> = v.iter().map(|t| t.1).collect();
        let y: Vec<u64> = v.iter().map(|t| t.2).collect();
        let mut w_acc = acc.clone();
        Portable.mul_acc(&mut w_acc, &x, &y);
        let mut w_assign = acc.clone();
        Portable.mul_assign(&mut w_assign, &x);
        let mut w_xor = acc.clone();
        Portable.xor_into(&mut w_xor, &y);
        for (be, k) in simd_kernels() {
            let mut g = acc.clone();
            k.mul_acc(&mut g, &x, &y);
            prop_assert_eq!(&g, &w_acc, "{:?} mul_acc", be);
            let mut g = acc.clone();
            k.mul_assign(&mut g, &x);
            prop_assert_eq!(&g, &w_assign, "{:?} mul_assign", be);
            let mut g = acc.clone();
            k.xor_into(&mut g, &y);
            prop_assert_eq!(&g, &w_xor, "{:?} xor_into", be);
        }
    }
}
