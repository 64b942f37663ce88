//! Messages for a full disk (naming the device and the path) and checks of
//! a size against the memory available before anything is allocated.

use std::io;
use std::path::Path;

/// Whether an I/O error means that the file system is full.
pub fn is_full(e: &io::Error) -> bool {
    e.kind() == io::ErrorKind::StorageFull
        || e.kind() == io::ErrorKind::QuotaExceeded
        || e.raw_os_error() == Some(28)
}

/// The device holding `path` (or its folder), for messages: the mounted
/// source and where it is mounted when the system says so, else the device
/// number.
pub fn device_of(path: &Path) -> String {
    let probe = if path.exists() {
        path.to_path_buf()
    } else {
        super::parent_dir(path).to_path_buf()
    };
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        if let Ok(md) = std::fs::metadata(&probe) {
            let dev = md.dev();
            let major = ((dev >> 8) & 0xfff) | ((dev >> 32) & !0xfff);
            let minor = (dev & 0xff) | ((dev >> 12) & !0xff);
            let want = format!("{major}:{minor}");
            if let Ok(info) = std::fs::read_to_string("/proc/self/mountinfo") {
                // Fields: id parent major:minor root mount-point options
                // [optional...] - fstype source super-options.
                let mut best: Option<(usize, String)> = None;
                let abs = std::fs::canonicalize(&probe).unwrap_or(probe.clone());
                for line in info.lines() {
                    let f: Vec<&str> = line.split(' ').collect();
                    if f.len() < 5 || f[2] != want {
                        continue;
                    }
                    let mp = f[4];
                    if !abs.starts_with(mp) {
                        continue;
                    }
                    let rest = line.split(" - ").nth(1).unwrap_or("");
                    let mut r = rest.split(' ');
                    let fstype = r.next().unwrap_or("?");
                    let source = r.next().unwrap_or("?");
                    let text = format!("device {source} ({fstype}, mounted at {mp})");
                    if best.as_ref().is_none_or(|(l, _)| mp.len() > *l) {
                        best = Some((mp.len(), text));
                    }
                }
                if let Some((_, t)) = best {
                    return t;
                }
            }
            return format!("device {want}");
        }
    }
    format!("the device holding {}", probe.display())
}

/// "no space left on DEVICE for WHAT at PATH".
pub fn no_space(path: &Path, what: &str) -> String {
    format!(
        "no space left on {} for {what} at {}",
        device_of(path),
        path.display()
    )
}

/// Rewrites a full-disk error into [`no_space`]; other errors gain the path.
pub fn explain(e: io::Error, path: &Path, what: &str) -> io::Error {
    if is_full(&e) && e.to_string().starts_with("no space left on ") {
        // Already explained.
        return e;
    }
    if is_full(&e) {
        io::Error::new(io::ErrorKind::StorageFull, no_space(path, what))
    } else {
        let kind = e.kind();
        let text = e.to_string();
        let shown = path.display().to_string();
        if text.contains(&shown) {
            e
        } else {
            io::Error::new(kind, format!("{shown}: {text}"))
        }
    }
}

/// Memory available to this process now (`MemAvailable` of
/// `/proc/meminfo`), if the system says.
pub fn available_memory() -> Option<u64> {
    let info = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = info.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    kib.checked_mul(1024)
}

/// A size refused before allocation.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("{what} needs {bytes} bytes of memory, more than {limit_text}; nothing was allocated")]
pub struct TooLarge {
    /// What was to be allocated.
    pub what: String,
    /// Bytes it needs.
    pub bytes: u128,
    /// The limit, in words.
    pub limit_text: String,
}

/// Checks that `bytes` may be allocated for `what`: within the address
/// space and within the memory available now (when the system tells).
pub fn check_memory(bytes: u128, what: &str) -> Result<(), TooLarge> {
    let err = |limit_text: String| TooLarge {
        what: what.to_string(),
        bytes,
        limit_text,
    };
    if bytes > isize::MAX as u128 {
        return Err(err("the address space of this machine".into()));
    }
    if let Some(avail) = available_memory() {
        if bytes > avail as u128 {
            return Err(err(format!("the {avail} bytes available now")));
        }
    }
    Ok(())
}

/// Checks the memory for `bits` bits held packed (and once more as words).
pub fn check_bits(bits: u128, what: &str) -> Result<(), TooLarge> {
    check_memory(bits.div_ceil(8).saturating_mul(2), what)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn huge_sizes_are_refused_small_ones_pass() {
        assert!(check_memory(u64::MAX as u128, "test").is_err());
        assert!(check_bits(u64::MAX as u128, "test").is_err());
        assert!(check_memory(1024, "test").is_ok());
        let e = check_memory(1 << 70, "a receipt's output").unwrap_err();
        assert!(e.to_string().contains("a receipt's output needs"), "{e}");
    }

    #[test]
    fn full_disk_message_names_device_and_path() {
        let e = io::Error::from_raw_os_error(28);
        assert!(is_full(&e));
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("journal.jsonl");
        let m = explain(e, &p, "the ledger").to_string();
        assert!(m.starts_with("no space left on device"), "{m}");
        assert!(m.contains(&p.display().to_string()), "{m}");
    }
}
