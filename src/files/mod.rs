//! File plumbing shared by every layer that touches the file system
//! (floor 1, beside `bits`): the one atomic writer for every output
//! ([`atomic`]), the rules for where an output may go ([`guard`]), the
//! operating system's random source ([`random`]), messages for a full disk
//! and checks of available memory ([`space`]), the interruption handler
//! ([`interrupt`]), `key = value` text files ([`keyvalue`]) and the
//! test-only fault points ([`fault`]).
//!
//! Nothing here knows about extractors, seeds or the ledger; `ledger`,
//! `seed` and `pipeline` all build on it.

#![forbid(unsafe_code)]

pub mod atomic;
#[doc(hidden)]
pub mod fault;
pub mod guard;
pub mod interrupt;
pub mod keyvalue;
pub mod random;
pub mod space;

pub use atomic::AtomicFile;
pub use guard::{Kind, Replace};

use std::io;
use std::path::Path;

/// Creates `dir` (and missing parents) and makes sure `dir` itself is
/// readable, writable and searchable by its owner only (mode 0700): the
/// ledger folder and the seed store.
pub fn create_private_dir(dir: &Path) -> io::Result<()> {
    #[cfg(unix)]
    {
        use std::os::unix::fs::{DirBuilderExt, PermissionsExt};
        match std::fs::DirBuilder::new()
            .recursive(true)
            .mode(0o700)
            .create(dir)
        {
            Ok(()) => {}
            Err(e) => return Err(e),
        }
        let md = std::fs::metadata(dir)?;
        if md.permissions().mode() & 0o077 != 0 {
            std::fs::set_permissions(dir, std::fs::Permissions::from_mode(0o700))?;
        }
        Ok(())
    }
    #[cfg(not(unix))]
    {
        std::fs::create_dir_all(dir)
    }
}

/// The folder a path lives in (`.` for a bare file name).
pub fn parent_dir(path: &Path) -> &Path {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}
