//! Where an output may go: never over an input, and over an existing file
//! only if it is an earlier output of the same kind (or with `--force`).
//!
//! Every output file carries its kind in the extended attribute
//! `user.sluice.kind` (set on the temporary file before it is renamed), and
//! the self-describing kinds (certificate, receipt, vector file, journal
//! head, plot) are also recognized by their first bytes, so a file system
//! without extended attributes still lets them be replaced. A file that
//! shows neither is not replaced without `--force`.

use std::fmt;
use std::io::Read;
use std::path::{Path, PathBuf};

/// The extended attribute that names an output's kind.
pub const TAG_NAME: &str = "user.sluice.kind";

/// The kinds of file sluice writes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Kind {
    /// Extracted bits (`extract -o`, also after `seed recycle` cut them).
    ExtractOutput,
    /// A receipt (`sluice-receipt/1`).
    Receipt,
    /// A certificate (`sluice-certificate/1`).
    Certificate,
    /// The raw bits a1 b1 .. of a Bell-test record (`certify --raw-out`).
    RawOutput,
    /// Seed bits written for a person (`seed reveal -o`, the demo's seed).
    SeedFile,
    /// A file of the seed store.
    SeedStore,
    /// A drawing (SVG).
    Plot,
    /// A published vector file.
    Vectors,
    /// The planner's cached speed measurements.
    SpeedCache,
    /// The engine thresholds measured by `bench --tune`.
    Thresholds,
    /// The demo's simulated raw bits.
    DemoRaw,
    /// A copy of the journal saved before a repair.
    JournalCopy,
    /// The journal's head file.
    Head,
}

impl Kind {
    /// The value of the extended attribute.
    pub fn tag(self) -> &'static str {
        match self {
            Kind::ExtractOutput => "extract-output",
            Kind::Receipt => "receipt",
            Kind::Certificate => "certificate",
            Kind::RawOutput => "raw-output",
            Kind::SeedFile => "seed-file",
            Kind::SeedStore => "seed-store",
            Kind::Plot => "plot",
            Kind::Vectors => "vectors",
            Kind::SpeedCache => "speed-cache",
            Kind::Thresholds => "thresholds",
            Kind::DemoRaw => "demo-raw",
            Kind::JournalCopy => "journal-copy",
            Kind::Head => "journal-head",
        }
    }

    /// Plain words for messages.
    pub fn describe(self) -> &'static str {
        match self {
            Kind::ExtractOutput => "sluice output",
            Kind::Receipt => "sluice receipt",
            Kind::Certificate => "sluice certificate",
            Kind::RawOutput => "raw output of sluice certify",
            Kind::SeedFile => "seed file written by sluice",
            Kind::SeedStore => "seed store file",
            Kind::Plot => "plot drawn by sluice",
            Kind::Vectors => "sluice vector file",
            Kind::SpeedCache => "speed cache",
            Kind::Thresholds => "engine thresholds",
            Kind::DemoRaw => "demo raw file",
            Kind::JournalCopy => "journal copy",
            Kind::Head => "journal head file",
        }
    }

    /// The first bytes that identify a self-describing kind.
    fn signature(self) -> Option<&'static [&'static str]> {
        match self {
            Kind::Certificate => Some(&["\"sluice-certificate/"]),
            Kind::Receipt => Some(&["\"sluice-receipt/"]),
            Kind::Vectors => Some(&["sluice-vectors "]),
            Kind::Head => Some(&["\"sluice-journal-head/"]),
            Kind::Plot => Some(&["<svg"]),
            _ => None,
        }
    }

    /// Whether `path` holds an earlier output of this kind.
    pub fn recognizes(self, path: &Path) -> bool {
        if tag_of(path).as_deref() == Some(self.tag()) {
            return true;
        }
        let Some(sigs) = self.signature() else {
            return false;
        };
        let mut head = Vec::with_capacity(512);
        let read = std::fs::File::open(path)
            .and_then(|f| f.take(512).read_to_end(&mut head))
            .is_ok();
        let text = String::from_utf8_lossy(&head);
        read && sigs.iter().any(|s| text.contains(s))
    }
}

/// The kind tag of a file, if it has one.
pub fn tag_of(path: &Path) -> Option<String> {
    #[cfg(unix)]
    {
        xattr::get(path, TAG_NAME)
            .ok()
            .flatten()
            .and_then(|v| String::from_utf8(v).ok())
    }
    #[cfg(not(unix))]
    {
        let _ = path;
        None
    }
}

/// Tags an open file with its kind (best effort: file systems without
/// extended attributes simply keep no tag).
pub fn set_tag(f: &std::fs::File, kind: Kind) {
    #[cfg(unix)]
    {
        use xattr::FileExt;
        let _ = f.set_xattr(TAG_NAME, kind.tag().as_bytes());
    }
    #[cfg(not(unix))]
    let _ = (f, kind);
}

/// What may be replaced at the final name.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Replace {
    /// Nothing: the final name must not exist (the rename is done with a
    /// hard link, which refuses an existing name atomically).
    Never,
    /// An earlier output of the same kind (the default of every command).
    SameKind,
    /// Any regular file (`--force`).
    Any,
}

impl Replace {
    /// `SameKind`, or `Any` with `--force`.
    pub fn forced(force: bool) -> Replace {
        if force {
            Replace::Any
        } else {
            Replace::SameKind
        }
    }
}

/// Why an output was refused.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Error {
    /// The output names an input (or another output) of the same command.
    SameFile {
        /// The output.
        output: PathBuf,
        /// The input it names.
        other: PathBuf,
        /// What the other file is ("input", "receipt"...).
        role: String,
    },
    /// The output exists and is not an earlier output of this kind.
    NotOurs {
        /// The output.
        output: PathBuf,
        /// Its kind.
        kind: Kind,
    },
    /// The output exists and must not be replaced.
    Exists {
        /// The output.
        output: PathBuf,
    },
    /// The output names a folder or something else that is not a file.
    NotAFile {
        /// The output.
        output: PathBuf,
    },
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::SameFile {
                output,
                other,
                role,
            } => write!(
                f,
                "{}: this is the same file as the {role} {}; an output never replaces an input or another output: choose another name; nothing was written",
                output.display(),
                other.display()
            ),
            Error::NotOurs { output, kind } => write!(
                f,
                "{}: the file exists and is not an earlier {}; give --force to replace it, or choose another name; nothing was written",
                output.display(),
                kind.describe()
            ),
            Error::Exists { output } => write!(
                f,
                "{}: the file exists and is never replaced; nothing was written",
                output.display()
            ),
            Error::NotAFile { output } => write!(
                f,
                "{}: this is a folder or a special file, not a file name; nothing was written",
                output.display()
            ),
        }
    }
}

impl std::error::Error for Error {}

impl From<Error> for std::io::Error {
    fn from(e: Error) -> Self {
        let kind = match e {
            Error::Exists { .. } => std::io::ErrorKind::AlreadyExists,
            _ => std::io::ErrorKind::InvalidInput,
        };
        std::io::Error::new(kind, e)
    }
}

/// The absolute form of a path that may not exist yet: its folder resolved
/// (symbolic links followed), then its name.
fn resolved(path: &Path) -> Option<PathBuf> {
    if let Ok(p) = std::fs::canonicalize(path) {
        return Some(p);
    }
    let dir = std::fs::canonicalize(super::parent_dir(path)).ok()?;
    Some(dir.join(path.file_name()?))
}

/// Whether `a` and `b` name the same file: the same device and inode when
/// both exist, else the same resolved path.
pub fn same_file(a: &Path, b: &Path) -> bool {
    if a.as_os_str() == "-" || b.as_os_str() == "-" {
        return false;
    }
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        if let (Ok(x), Ok(y)) = (std::fs::metadata(a), std::fs::metadata(b)) {
            return x.dev() == y.dev() && x.ino() == y.ino();
        }
    }
    match (resolved(a), resolved(b)) {
        (Some(x), Some(y)) => x == y,
        _ => a == b,
    }
}

/// Checks the final name of an output: not one of `others` (inputs and the
/// command's other outputs, with their roles), not a folder, and, if it
/// exists, replaceable under `replace`. `-` (standard output) always passes.
pub fn check_output(
    output: &Path,
    kind: Kind,
    others: &[(&Path, &str)],
    replace: Replace,
) -> Result<(), Error> {
    if output.as_os_str() == "-" {
        return Ok(());
    }
    for (other, role) in others {
        if same_file(output, other) {
            return Err(Error::SameFile {
                output: output.to_path_buf(),
                other: other.to_path_buf(),
                role: role.to_string(),
            });
        }
    }
    check_replace(output, kind, replace)
}

/// Checks only the replacement rule for `output`.
pub fn check_replace(output: &Path, kind: Kind, replace: Replace) -> Result<(), Error> {
    let md = match std::fs::metadata(output) {
        Ok(md) => md,
        Err(_) => {
            // Absent (or a dangling link, which the rename replaces).
            return Ok(());
        }
    };
    if !md.is_file() {
        return Err(Error::NotAFile {
            output: output.to_path_buf(),
        });
    }
    match replace {
        Replace::Any => Ok(()),
        Replace::Never => Err(Error::Exists {
            output: output.to_path_buf(),
        }),
        Replace::SameKind if kind.recognizes(output) => Ok(()),
        Replace::SameKind => Err(Error::NotOurs {
            output: output.to_path_buf(),
            kind,
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn same_file_by_inode_path_and_link() {
        let d = tempfile::tempdir().unwrap();
        let a = d.path().join("a");
        std::fs::write(&a, b"x").unwrap();
        assert!(same_file(&a, &a));
        // Another spelling of the same path.
        let b = d.path().join(".").join("a");
        assert!(same_file(&a, &b));
        // A hard link is the same file.
        let h = d.path().join("h");
        std::fs::hard_link(&a, &h).unwrap();
        assert!(same_file(&h, &a));
        // A name that does not exist yet, spelt two ways.
        let n1 = d.path().join("new");
        let n2 = d.path().join("sub/../new");
        std::fs::create_dir(d.path().join("sub")).unwrap();
        assert!(same_file(&n1, &n2));
        assert!(!same_file(&a, &n1));
        assert!(!same_file(Path::new("-"), Path::new("-")));
    }

    #[test]
    fn replacement_rules() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("f");
        assert!(check_replace(&p, Kind::Receipt, Replace::SameKind).is_ok());
        std::fs::write(&p, b"{\"schema\": \"sluice-receipt/1\"}").unwrap();
        assert!(check_replace(&p, Kind::Receipt, Replace::SameKind).is_ok());
        assert!(matches!(
            check_replace(&p, Kind::Certificate, Replace::SameKind),
            Err(Error::NotOurs { .. })
        ));
        assert!(check_replace(&p, Kind::Certificate, Replace::Any).is_ok());
        assert!(matches!(
            check_replace(&p, Kind::Receipt, Replace::Never),
            Err(Error::Exists { .. })
        ));
        assert!(matches!(
            check_replace(d.path(), Kind::Receipt, Replace::Any),
            Err(Error::NotAFile { .. })
        ));
    }
}
