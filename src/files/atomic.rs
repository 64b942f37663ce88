//! The one writer for every output of every command: files appear whole or
//! not at all.
//!
//! [`AtomicFile::create`] opens a new temporary file in the target's folder
//! (same file system, so the final rename is atomic) under a random name
//! (`.NAME.PID.RANDOM.sluice-tmp`), with `O_EXCL` (an existing name, or a
//! planted symbolic link, is never opened) and owner-only permissions
//! (0600) from the start, locks it, and tags it with its kind
//! ([`super::guard`]). [`AtomicFile::commit`] flushes and fsyncs it, checks
//! the replacement rule at the final name, renames it there and fsyncs the
//! folder. On every failure path (a failed write, flush, fsync or rename,
//! or the file dropped without a commit) the temporary file is removed;
//! after a kill, the next writer into the same folder removes temporary
//! names of ours whose process is gone ([`clean_stale`]); on SIGINT or
//! SIGTERM the interruption handler removes the live ones
//! ([`remove_live`]).

use super::guard::{self, Kind, Replace};
use super::space;
use std::fs::{self, File, OpenOptions};
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::Mutex;
use std::time::{Duration, SystemTime};

/// The suffix of our temporary names.
pub const TEMP_SUFFIX: &str = ".sluice-tmp";

/// A stale temporary file whose process number is in use again is removed
/// only when it is unlocked and older than this.
const STALE_AGE: Duration = Duration::from_secs(60);

/// Temporary files being written by this process.
static LIVE: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());

/// Held around the last check for an interruption and the rename, and by
/// the interruption handler while it marks the process interrupted: so a
/// rename either happened before the handler ran or never happens.
static RENAME: Mutex<()> = Mutex::new(());

/// (device, inode) of every file this process renamed into place.
static RENAMED: Mutex<Vec<(u64, u64)>> = Mutex::new(Vec::new());

/// Runs `f` while no rename can start or be in progress (the interruption
/// handler marks the process interrupted inside it).
pub fn without_renames<T>(f: impl FnOnce() -> T) -> T {
    let _g = RENAME.lock().unwrap_or_else(|p| p.into_inner());
    f()
}

#[cfg(unix)]
fn identity(p: &Path) -> Option<(u64, u64)> {
    use std::os::unix::fs::MetadataExt;
    fs::metadata(p).ok().map(|m| (m.dev(), m.ino()))
}

#[cfg(not(unix))]
fn identity(_: &Path) -> Option<(u64, u64)> {
    None
}

/// Whether the file now at `path` is one this process wrote and renamed
/// there (so removing it never removes an older file it did not replace).
pub fn renamed_here(path: &Path) -> bool {
    let Some(id) = identity(path) else {
        return false;
    };
    RENAMED
        .lock()
        .unwrap_or_else(|p| p.into_inner())
        .contains(&id)
}

fn live() -> std::sync::MutexGuard<'static, Vec<PathBuf>> {
    LIVE.lock().unwrap_or_else(|p| p.into_inner())
}

/// Removes every temporary file this process is writing (the interruption
/// handler calls it); returns the final names they were meant for.
pub fn remove_live() -> Vec<PathBuf> {
    let mut l = live();
    let mut dests = Vec::new();
    for t in l.drain(..) {
        let _ = fs::remove_file(&t);
        if let Some(d) = dest_of(&t) {
            dests.push(d);
        }
    }
    dests
}

/// The final name a temporary name of ours was made for.
fn dest_of(tmp: &Path) -> Option<PathBuf> {
    let (name, _, _) = parse_temp_name(tmp.file_name()?.to_str()?)?;
    Some(tmp.with_file_name(name))
}

/// Splits `.NAME.PID.RANDOM.sluice-tmp` into (NAME, PID, RANDOM).
fn parse_temp_name(file: &str) -> Option<(&str, u32, &str)> {
    let body = file.strip_prefix('.')?.strip_suffix(TEMP_SUFFIX)?;
    let (rest, rand) = body.rsplit_once('.')?;
    let (name, pid) = rest.rsplit_once('.')?;
    if rand.len() != 12 || !rand.bytes().all(|b| b.is_ascii_hexdigit()) {
        return None;
    }
    Some((name, pid.parse().ok()?, rand))
}

/// Whether `file` (a name in a folder) is a temporary name of ours.
pub fn is_temp_name(file: &str) -> bool {
    parse_temp_name(file).is_some()
}

fn process_alive(pid: u32) -> Option<bool> {
    let proc = Path::new("/proc");
    if proc.join("self").exists() {
        Some(proc.join(pid.to_string()).exists())
    } else {
        None
    }
}

/// Removes temporary files of ours left in `dir` by processes that died
/// (killed while writing): those that are not locked by a live writer and
/// whose process is gone (or, if its number is in use again, that are older
/// than a minute). Returns how many were removed.
pub fn clean_stale(dir: &Path) -> usize {
    let Ok(entries) = fs::read_dir(dir) else {
        return 0;
    };
    let me = std::process::id();
    let mut removed = 0;
    for e in entries.flatten() {
        let name = e.file_name();
        let Some(name) = name.to_str() else { continue };
        let Some((_, pid, _)) = parse_temp_name(name) else {
            continue;
        };
        if pid == me {
            continue;
        }
        let path = e.path();
        let Ok(f) = File::open(&path) else { continue };
        // A live writer holds the lock.
        if f.try_lock().is_err() {
            continue;
        }
        let old = f
            .metadata()
            .and_then(|m| m.modified())
            .ok()
            .and_then(|t| SystemTime::now().duration_since(t).ok())
            .is_some_and(|age| age > STALE_AGE);
        let dead = process_alive(pid) == Some(false);
        if (dead || old) && fs::remove_file(&path).is_ok() {
            removed += 1;
        }
        let _ = f.unlock();
    }
    removed
}

/// A file being written under a temporary name.
pub struct AtomicFile {
    tmp: PathBuf,
    dest: PathBuf,
    kind: Kind,
    replace: Replace,
    writer: Option<BufWriter<File>>,
    /// A full disk injected by the test hook (`write-KIND:enospc`).
    injected: bool,
}

impl AtomicFile {
    /// Starts writing what will become `dest`, an output of `kind` that may
    /// replace what `replace` allows. Owner-only (0600) from creation.
    pub fn create(dest: &Path, kind: Kind, replace: Replace) -> io::Result<Self> {
        let name = dest
            .file_name()
            .and_then(|n| n.to_str())
            .ok_or_else(|| {
                io::Error::new(
                    io::ErrorKind::InvalidInput,
                    format!("{}: not a file name (or not valid UTF-8)", dest.display()),
                )
            })?
            .to_string();
        // A folder (or other non-file) at the final name fails now, before
        // any work, rather than at the rename.
        if let Ok(md) = fs::metadata(dest) {
            if !md.is_file() {
                return Err(guard::Error::NotAFile {
                    output: dest.to_path_buf(),
                }
                .into());
            }
        }
        let dir = super::parent_dir(dest).to_path_buf();
        clean_stale(&dir);
        // Keep the temporary name within the usual 255-byte limit.
        let mut short = name.clone();
        while short.len() > 200 {
            short.pop();
        }
        let mut tag = [0u8; 6];
        super::random::fill(&mut tag)?;
        let tmp = dir.join(format!(
            ".{short}.{}.{}{TEMP_SUFFIX}",
            std::process::id(),
            hex::encode(tag)
        ));
        let mut opts = OpenOptions::new();
        opts.write(true).create_new(true);
        #[cfg(unix)]
        {
            use std::os::unix::fs::OpenOptionsExt;
            opts.mode(0o600);
        }
        // Under the list's lock: either the interruption handler (which
        // marks the process first, then empties the list) sees this file,
        // or this sees the mark and creates nothing.
        let f = {
            let mut l = live();
            if super::interrupt::interrupted() {
                return Err(io::Error::new(
                    io::ErrorKind::Interrupted,
                    format!("{}: interrupted", dest.display()),
                ));
            }
            let f = opts
                .open(&tmp)
                .map_err(|e| space::explain(e, &tmp, kind.describe()))?;
            l.push(tmp.clone());
            f
        };
        let _ = f.lock();
        guard::set_tag(&f, kind);
        let injected = super::fault::injected_error(&format!("write-{}", kind.tag())).is_some();
        Ok(AtomicFile {
            tmp,
            dest: dest.to_path_buf(),
            kind,
            replace,
            writer: Some(BufWriter::with_capacity(1 << 20, f)),
            injected,
        })
    }

    /// The final path.
    pub fn dest(&self) -> &Path {
        &self.dest
    }

    /// The temporary path (for tests and messages).
    pub fn temp_path(&self) -> &Path {
        &self.tmp
    }

    fn forget_live(&self) {
        live().retain(|t| t != &self.tmp);
    }

    fn discard(&mut self) {
        self.writer = None;
        let _ = fs::remove_file(&self.tmp);
        self.forget_live();
    }

    /// Flushes, fsyncs, checks the replacement rule, renames the file to
    /// its final name and fsyncs the folder. On failure the temporary file
    /// is removed and nothing appears under the final name.
    pub fn commit(mut self) -> io::Result<()> {
        let res = self.finish();
        if res.is_err() {
            self.discard();
        } else {
            self.forget_live();
        }
        res
    }

    fn finish(&mut self) -> io::Result<()> {
        let what = self.kind.describe();
        let w = self.writer.take().expect("writer present until commit");
        let f = w
            .into_inner()
            .map_err(|e| space::explain(e.into_error(), &self.dest, what))?;
        if self.injected {
            return Err(space::explain(
                super::fault::injected_error(&format!("write-{}", self.kind.tag()))
                    .unwrap_or_else(|| io::Error::from_raw_os_error(28)),
                &self.dest,
                what,
            ));
        }
        f.sync_all()
            .map_err(|e| space::explain(e, &self.dest, what))?;
        let _no_interrupt = RENAME.lock().unwrap_or_else(|p| p.into_inner());
        if super::interrupt::interrupted() {
            return Err(io::Error::new(
                io::ErrorKind::Interrupted,
                format!("{}: interrupted before the rename", self.dest.display()),
            ));
        }
        guard::check_replace(&self.dest, self.kind, self.replace)?;
        if let Some(id) = identity(&self.tmp) {
            RENAMED.lock().unwrap_or_else(|p| p.into_inner()).push(id);
        }
        if self.replace == Replace::Never {
            // A hard link refuses an existing name atomically.
            fs::hard_link(&self.tmp, &self.dest).map_err(|e| {
                if e.kind() == io::ErrorKind::AlreadyExists {
                    guard::Error::Exists {
                        output: self.dest.clone(),
                    }
                    .into()
                } else {
                    space::explain(e, &self.dest, what)
                }
            })?;
            let _ = fs::remove_file(&self.tmp);
        } else {
            fs::rename(&self.tmp, &self.dest).map_err(|e| space::explain(e, &self.dest, what))?;
        }
        drop(f);
        sync_dir(super::parent_dir(&self.dest))
    }
}

/// Fsyncs a folder so a rename in it is durable (file systems that cannot
/// sync a folder are not an error).
pub fn sync_dir(dir: &Path) -> io::Result<()> {
    match File::open(dir).and_then(|d| d.sync_all()) {
        Ok(()) => Ok(()),
        Err(e)
            if matches!(
                e.kind(),
                io::ErrorKind::InvalidInput | io::ErrorKind::Unsupported
            ) =>
        {
            Ok(())
        }
        Err(e) => Err(e),
    }
}

impl Write for AtomicFile {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        let what = self.kind.describe();
        self.writer
            .as_mut()
            .expect("not committed")
            .write(buf)
            .map_err(|e| space::explain(e, &self.dest, what))
    }
    fn flush(&mut self) -> io::Result<()> {
        let what = self.kind.describe();
        self.writer
            .as_mut()
            .expect("not committed")
            .flush()
            .map_err(|e| space::explain(e, &self.dest, what))
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        if self.writer.is_some() {
            self.discard();
        }
    }
}

/// Writes `bytes` to `dest` through an [`AtomicFile`].
pub fn write_all(dest: &Path, kind: Kind, replace: Replace, bytes: &[u8]) -> io::Result<()> {
    let mut f = AtomicFile::create(dest, kind, replace)?;
    f.write_all(bytes)
        .map_err(|e| space::explain(e, dest, kind.describe()))?;
    f.commit()
}

/// The temporary names of ours in `dir` (tests use it to check that none
/// is left behind).
pub fn temp_files_in(dir: &Path) -> Vec<PathBuf> {
    fs::read_dir(dir)
        .map(|r| {
            r.flatten()
                .filter(|e| e.file_name().to_str().is_some_and(is_temp_name))
                .map(|e| e.path())
                .collect()
        })
        .unwrap_or_default()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn commit_renames_and_drop_cleans_up() {
        let dir = tempfile::tempdir().unwrap();
        let dest = dir.path().join("out.bin");
        let mut f = AtomicFile::create(&dest, Kind::ExtractOutput, Replace::SameKind).unwrap();
        f.write_all(b"abc").unwrap();
        let tmp = f.temp_path().to_path_buf();
        assert!(tmp.exists() && !dest.exists());
        assert!(is_temp_name(tmp.file_name().unwrap().to_str().unwrap()));
        f.commit().unwrap();
        assert_eq!(fs::read(&dest).unwrap(), b"abc");
        assert!(!tmp.exists());
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            assert_eq!(
                fs::metadata(&dest).unwrap().permissions().mode() & 0o777,
                0o600
            );
        }
        let dest2 = dir.path().join("never.bin");
        let mut g = AtomicFile::create(&dest2, Kind::ExtractOutput, Replace::SameKind).unwrap();
        g.write_all(b"partial").unwrap();
        let tmp2 = g.temp_path().to_path_buf();
        drop(g);
        assert!(!tmp2.exists() && !dest2.exists());
        assert!(temp_files_in(dir.path()).is_empty());
    }

    #[test]
    fn a_failed_rename_removes_the_temporary_file() {
        // Issue 15 item 2: the final name is a folder that appears after
        // the writer started (a folder there from the start is refused at
        // creation).
        let dir = tempfile::tempdir().unwrap();
        let dest = dir.path().join("x");
        let mut f = AtomicFile::create(&dest, Kind::SeedFile, Replace::Any).unwrap();
        f.write_all(b"secret seed bits").unwrap();
        fs::create_dir(&dest).unwrap();
        fs::write(dest.join("inside"), b"keep").unwrap();
        assert!(f.commit().is_err());
        assert!(temp_files_in(dir.path()).is_empty());
        assert!(AtomicFile::create(&dest, Kind::SeedFile, Replace::Any).is_err());
        assert!(temp_files_in(dir.path()).is_empty());
    }

    #[test]
    fn existing_files_are_replaced_only_by_the_same_kind() {
        let dir = tempfile::tempdir().unwrap();
        let dest = dir.path().join("o");
        fs::write(&dest, b"someone else's file").unwrap();
        let e = write_all(&dest, Kind::ExtractOutput, Replace::SameKind, b"new").unwrap_err();
        assert!(e.to_string().contains("--force"), "{e}");
        assert_eq!(fs::read(&dest).unwrap(), b"someone else's file");
        write_all(&dest, Kind::ExtractOutput, Replace::Any, b"new").unwrap();
        // Now it is tagged as ours: a second run replaces it without force
        // (where the file system keeps extended attributes).
        if guard::tag_of(&dest).is_some() {
            write_all(&dest, Kind::ExtractOutput, Replace::SameKind, b"newer").unwrap();
            assert_eq!(fs::read(&dest).unwrap(), b"newer");
            assert!(write_all(&dest, Kind::Receipt, Replace::SameKind, b"r").is_err());
        }
        let e = write_all(&dest, Kind::ExtractOutput, Replace::Never, b"x").unwrap_err();
        assert_eq!(e.kind(), io::ErrorKind::AlreadyExists);
        assert!(temp_files_in(dir.path()).is_empty());
    }

    #[test]
    fn stale_temporary_files_of_dead_processes_are_cleaned() {
        let dir = tempfile::tempdir().unwrap();
        // A process number that cannot be alive (above the kernel's limit).
        let stale = dir
            .path()
            .join(format!(".out.bin.4294967290.0123456789ab{TEMP_SUFFIX}"));
        fs::write(&stale, b"left by a kill").unwrap();
        // Not ours: a similar name with a different suffix stays.
        let other = dir.path().join(".out.bin.4294967290.0123456789ab.tmp");
        fs::write(&other, b"x").unwrap();
        // A live writer's file (this process) stays.
        let mine = AtomicFile::create(&dir.path().join("b"), Kind::Plot, Replace::Any).unwrap();
        let dest = dir.path().join("out.bin");
        let f = AtomicFile::create(&dest, Kind::ExtractOutput, Replace::SameKind).unwrap();
        assert!(!stale.exists());
        assert!(other.exists());
        assert!(mine.temp_path().exists());
        drop((f, mine));
        assert!(temp_files_in(dir.path()).is_empty());
    }

    #[test]
    fn temp_names_parse() {
        assert_eq!(
            parse_temp_name(".a.b.c.12.0123456789ab.sluice-tmp"),
            Some(("a.b.c", 12, "0123456789ab"))
        );
        assert!(parse_temp_name(".a.12.0123.sluice-tmp").is_none());
        assert!(parse_temp_name("a.12.0123456789ab.sluice-tmp").is_none());
    }
}
