//! Large zeroed buffers for the transforms, backed by huge pages where the
//! system offers them on request (Linux transparent huge pages in "madvise"
//! mode): the column passes touch hundreds of rows far apart, and with 4 KiB
//! pages nearly every one of those touches misses the TLB.

/// A zeroed vector of `len` words, with huge pages asked for (a hint: the
/// contents and the result do not depend on it).
pub fn zeroed(len: usize) -> Vec<u64> {
    let v = vec![0u64; len];
    advise_huge(&v);
    v
}

/// Resizes `v` to `len` zeroed words, asking for huge pages if it grows.
pub fn resize_zeroed(v: &mut Vec<u64>, len: usize) {
    if v.capacity() < len {
        *v = zeroed(len);
    } else {
        v.clear();
        v.resize(len, 0);
    }
}

#[cfg(target_os = "linux")]
fn advise_huge(v: &[u64]) {
    const HUGE: usize = 2 << 20;
    let bytes = std::mem::size_of_val(v);
    if bytes < 2 * HUGE {
        return;
    }
    let start = v.as_ptr() as usize;
    let aligned = start.next_multiple_of(HUGE);
    let end = (start + bytes) / HUGE * HUGE;
    if end > aligned {
        // SAFETY: the range lies inside the vector's allocation (page
        // aligned, rounded inwards); MADV_HUGEPAGE only changes how the
        // kernel backs those pages, never their contents.
        unsafe {
            libc::madvise(
                aligned as *mut libc::c_void,
                end - aligned,
                libc::MADV_HUGEPAGE,
            );
        }
    }
}

#[cfg(not(target_os = "linux"))]
fn advise_huge(_v: &[u64]) {}
