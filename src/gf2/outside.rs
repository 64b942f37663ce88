//! An outside GF(2)[x] library, loaded at run time, as the speed reference of
//! the benchmarks: gf2x (R. Brent, P. Gaudry, E. Thomé, P. Zimmermann,
//! <https://gitlab.inria.fr/gf2x/gf2x>), built from source for the machine
//! at hand and kept outside this repository. Nothing but the benchmarks uses
//! it; its results are also compared with ours, so a wrong build cannot pass
//! unnoticed.

use std::ffi::CString;
use std::path::Path;

/// `int gf2x_mul(unsigned long *c, const unsigned long *a, unsigned long an,
/// const unsigned long *b, unsigned long bn)`: `c` gets `an + bn` words.
type MulFn = unsafe extern "C" fn(*mut u64, *const u64, u64, *const u64, u64) -> i32;

/// The loaded library.
pub struct Gf2x {
    mul: MulFn,
    _handle: *mut std::ffi::c_void,
}

// SAFETY: the handle is only kept to hold the library loaded; gf2x_mul is
// reentrant (it allocates its own scratch).
unsafe impl Send for Gf2x {}
unsafe impl Sync for Gf2x {}

impl Gf2x {
    /// Loads the shared library at `path` and finds `gf2x_mul`.
    #[cfg(unix)]
    pub fn load(path: &Path) -> Result<Gf2x, String> {
        use std::os::unix::ffi::OsStrExt;
        let c = CString::new(path.as_os_str().as_bytes())
            .map_err(|_| format!("{}: path holds a NUL byte", path.display()))?;
        // SAFETY: dlopen with a valid C string; the library's initialisers
        // are those of gf2x (none with side effects we depend on).
        let handle = unsafe { libc::dlopen(c.as_ptr(), libc::RTLD_NOW | libc::RTLD_LOCAL) };
        if handle.is_null() {
            return Err(format!("{}: cannot load the library", path.display()));
        }
        let name = CString::new("gf2x_mul").expect("no NUL");
        // SAFETY: valid handle and C string.
        let sym = unsafe { libc::dlsym(handle, name.as_ptr()) };
        if sym.is_null() {
            return Err(format!("{}: no symbol gf2x_mul", path.display()));
        }
        // SAFETY: gf2x_mul has the C signature of MulFn (gf2x.h).
        let mul = unsafe { std::mem::transmute::<*mut std::ffi::c_void, MulFn>(sym) };
        Ok(Gf2x {
            mul,
            _handle: handle,
        })
    }

    /// Not available off Unix.
    #[cfg(not(unix))]
    pub fn load(path: &Path) -> Result<Gf2x, String> {
        Err(format!(
            "{}: loading gf2x needs a Unix system",
            path.display()
        ))
    }

    /// The full product `a * b` into `c` (`a.len() + b.len()` words).
    ///
    /// # Panics
    /// If `c` has the wrong length or the library reports an error.
    pub fn mul(&self, c: &mut [u64], a: &[u64], b: &[u64]) {
        assert_eq!(c.len(), a.len() + b.len(), "gf2x product length");
        // SAFETY: the lengths match gf2x_mul's contract (checked above);
        // u64 is unsigned long on the 64-bit Unix targets we build for.
        let r = unsafe {
            (self.mul)(
                c.as_mut_ptr(),
                a.as_ptr(),
                a.len() as u64,
                b.as_ptr(),
                b.len() as u64,
            )
        };
        assert_eq!(r, 0, "gf2x_mul failed");
    }
}
