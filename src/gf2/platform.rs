//! The one CPU-feature detection of the process, as the BLAKE3 crate's
//! `Platform` does it: the features the carry-less kernels need are read
//! once, on first use, and every later choice (the [`Backend`] of a plan,
//! the field's product paths, the AVX-512VL Horner loop) asks this value.
//! The test-only features `no_pclmul` and `no_vpclmul` (and Miri) switch
//! detection off here, in one place, so the portable path can be tested.
//! (The additive FFT's kernel choice, `afft::AnyKern::new`, is to be hooked
//! to this type too.)

use super::Backend;
use std::sync::OnceLock;

/// What this CPU offers the kernels.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct Platform {
    /// PCLMULQDQ with SSE2.
    pub pclmul: bool,
    /// VPCLMULQDQ with AVX-512F (the 512-bit backend).
    pub vpclmul512: bool,
    /// VPCLMULQDQ with AVX2 (the 256-bit backend).
    pub vpclmul256: bool,
    /// BMI2 besides the 256-bit backend (the field's 256-bit path shifts by
    /// run-time amounts).
    pub bmi2: bool,
    /// AVX-512VL besides the 512-bit backend (the EVEX Horner loop).
    pub avx512vl: bool,
}

static PLATFORM: OnceLock<Platform> = OnceLock::new();

impl Platform {
    /// The platform of this process, detected once.
    pub fn get() -> Platform {
        *PLATFORM.get_or_init(Platform::detect)
    }

    /// Reads the CPU features (run-time detection), honouring the test-only
    /// switches.
    fn detect() -> Platform {
        #[cfg(target_arch = "x86_64")]
        {
            let pclmul = !cfg!(feature = "no_pclmul")
                && !cfg!(miri)
                && std::is_x86_feature_detected!("pclmulqdq")
                && std::is_x86_feature_detected!("sse2");
            let vp = !cfg!(feature = "no_vpclmul")
                && pclmul
                && std::is_x86_feature_detected!("vpclmulqdq");
            let vpclmul512 = vp && std::is_x86_feature_detected!("avx512f");
            let vpclmul256 = vp && std::is_x86_feature_detected!("avx2");
            Platform {
                pclmul,
                vpclmul512,
                vpclmul256,
                bmi2: vpclmul256 && std::is_x86_feature_detected!("bmi2"),
                avx512vl: vpclmul512 && std::is_x86_feature_detected!("avx512vl"),
            }
        }
        #[cfg(not(target_arch = "x86_64"))]
        {
            Platform {
                pclmul: false,
                vpclmul512: false,
                vpclmul256: false,
                bmi2: false,
                avx512vl: false,
            }
        }
    }

    /// Whether the backend runs here.
    pub fn supports(self, b: Backend) -> bool {
        match b {
            Backend::Portable => true,
            Backend::Pclmul => self.pclmul,
            Backend::Vpclmul => self.vpclmul512,
            Backend::Vpclmul256 => self.vpclmul256,
        }
    }

    /// The widest backend that runs here.
    pub fn backend(self) -> Backend {
        if self.vpclmul512 {
            Backend::Vpclmul
        } else if self.vpclmul256 {
            Backend::Vpclmul256
        } else if self.pclmul {
            Backend::Pclmul
        } else {
            Backend::Portable
        }
    }

    /// Whether the field's 256-bit VPCLMULQDQ paths run here (pclmulqdq,
    /// avx2, vpclmulqdq and bmi2).
    pub fn wide_field(self) -> bool {
        self.vpclmul256 && self.bmi2
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_choice_agrees_with_std_detection() {
        let p = Platform::get();
        assert_eq!(Platform::get(), p, "detected once");
        assert!(p.supports(p.backend()));
        assert!(p.supports(Backend::Portable));
        #[cfg(target_arch = "x86_64")]
        if !cfg!(feature = "no_pclmul") && !cfg!(miri) {
            assert_eq!(p.pclmul, std::is_x86_feature_detected!("pclmulqdq"));
        }
        if cfg!(feature = "no_pclmul") {
            assert_eq!(p.backend(), Backend::Portable);
        }
        // The wider features imply the narrower ones.
        assert!(!p.vpclmul512 || p.pclmul);
        assert!(!p.vpclmul256 || p.pclmul);
        assert!(!p.wide_field() || p.vpclmul256);
        assert!(!p.avx512vl || p.vpclmul512);
    }
}
