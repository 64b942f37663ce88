//! The tamper-evident ledger of seeds and their uses
//! (`spec/hashing-and-composition.md` 4.3 and 4.6).
//!
//! An append-only journal, one JSON record per line, each holding the
//! SHA3-256 (FIPS 202) digest of the previous line, the first chaining from
//! [`record::GENESIS`]. State (per seed: uses, bits consumed, error spent,
//! budget left, disclosure) is derived by replaying the journal, never
//! stored. Every append happens under an exclusive advisory lock on the
//! journal: read, replay and check, append, fsync, unlock.
//!
//! A hash chain without a secret detects edits, deletions, reordering and
//! naive forgeries. The head of the chain (line count, byte length, digest
//! of the last line) is also kept in a head file beside the journal,
//! rewritten after every append, so a journal cut at a line boundary, a
//! changed last line or a deleted journal is caught too; a journal that
//! only grew since the head file (or since a head kept elsewhere and given
//! to `ledger verify --head`) is accepted. Someone who rewrites both files
//! and recomputes every digest is caught only by a head kept elsewhere.
//!
//! An append that fails (a full disk) truncates the journal back to its
//! previous length and fsyncs it, so a failure never tears the journal; only
//! a kill in the middle of a write can, and `ledger repair` then cuts the
//! unterminated last line (nothing else, and only past the head file).

#![forbid(unsafe_code)]

pub mod error;
pub mod record;
pub mod state;

pub use error::{Error, ErrorKind, Rule};
pub use record::{Body, Position, Record};
pub use state::{SeedState, State, UseState};

use crate::files::{self, fault, space, Kind, Replace};
use std::fs::{File, OpenOptions};
use std::io::{Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Mutex;

/// The journal file's name inside the ledger folder.
pub const JOURNAL_FILE: &str = "journal.jsonl";

/// The head file's name inside the ledger folder.
pub const HEAD_FILE: &str = "journal.head";

/// The head file's format name.
pub const HEAD_FORMAT: &str = "sluice-journal-head/1";

/// The seed store's folder inside the ledger folder.
pub const SEEDS_DIR: &str = "seeds";

/// The folder of the lock files of runs in progress.
pub const RUNS_DIR: &str = "runs";

/// The head of the chain, as kept in the head file (and, shortened to
/// `LINES:DIGEST`, elsewhere by the user).
#[derive(Clone, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Head {
    /// Always [`HEAD_FORMAT`].
    pub format: String,
    /// Records in the journal.
    pub lines: u64,
    /// Bytes of the journal.
    pub bytes: u64,
    /// SHA3-256 hex of the last line.
    pub head: String,
}

impl Head {
    /// Parses a head file's bytes (no I/O).
    pub fn parse(bytes: &[u8]) -> Result<Head, String> {
        let h: Head = serde_json::from_slice(bytes).map_err(|e| format!("not a head file: {e}"))?;
        if h.format != HEAD_FORMAT {
            return Err(format!("format {:?}, expected {HEAD_FORMAT:?}", h.format));
        }
        if !state::is_digest(&h.head) {
            return Err(format!("head {:?} is not 64 lower-case hex digits", h.head));
        }
        if h.lines == 0 {
            return Err("lines = 0: a head names at least the first record".into());
        }
        Ok(h)
    }

    /// `LINES:DIGEST`, the short form printed by `ledger verify`.
    pub fn short(&self) -> String {
        format!("{}:{}", self.lines, self.head)
    }
}

/// Checks that a replayed journal holds the chain a head describes (it may
/// have grown since): at least `lines` records, the last of them with the
/// digest `digest` (and, when `bytes` is given, ending at that byte). No
/// I/O.
pub fn check_head(r: &Replay, lines: u64, digest: &str, bytes: Option<u64>) -> Result<(), Error> {
    let have = r.line_digests.len() as u64;
    if lines == 0 || have < lines {
        return Err(Error::new(ErrorKind::HeadAhead { lines, have }));
    }
    let i = (lines - 1) as usize;
    let at_bytes = bytes.is_none_or(|b| r.line_ends[i] == b);
    if r.line_digests[i] != digest || !at_bytes {
        return Err(Error::new(ErrorKind::HeadMismatch {
            line: lines,
            expected: digest.to_string(),
            found: r.line_digests[i].clone(),
        }));
    }
    Ok(())
}

/// Serializes appends within this process, so that the interruption
/// handler can stop them between two appends ([`freeze_appends`]).
static APPEND: Mutex<()> = Mutex::new(());
static FROZEN: AtomicBool = AtomicBool::new(false);

/// Waits for an append of this process in progress to finish and lets no
/// other start (the interruption handler calls it before the process
/// exits, so an exit never cuts a journal write). Then only
/// [`Ledger::append_while_frozen`] appends.
pub fn freeze_appends() {
    if FROZEN.swap(true, Ordering::SeqCst) {
        return;
    }
    let g = APPEND.lock().unwrap_or_else(|p| p.into_inner());
    std::mem::forget(g);
}

/// Registers (once per process) the interruption cleanup that freezes
/// appends ([`freeze_appends`]); every append does it, and a caller that
/// registers its own cleanup using the ledger calls it first, so the freeze
/// runs before that cleanup.
pub fn register_freeze_on_interrupt() {
    static ONCE: std::sync::Once = std::sync::Once::new();
    ONCE.call_once(|| {
        std::mem::forget(files::interrupt::on_interrupt(|_| {
            freeze_appends();
            Vec::new()
        }));
    });
}
/// The outcome of replaying a journal's bytes.
#[derive(Debug)]
pub struct Replay {
    /// The state after the last good record.
    pub state: State,
    /// Every record, in order.
    pub records: Vec<Record>,
    /// The first problem, if any (replay stops there).
    pub problem: Option<Error>,
    /// Byte offset where a torn last line starts, if that is the problem.
    pub torn_at: Option<u64>,
    /// SHA3-256 hex of every good line.
    pub line_digests: Vec<String>,
    /// Byte offset just after every good line's newline.
    pub line_ends: Vec<u64>,
}

/// Replays a journal held in memory: chain, kinds, positions and every rule.
/// No I/O. An empty input is an empty (not yet started) journal.
pub fn replay(bytes: &[u8]) -> Replay {
    let mut r = Replay {
        state: State {
            head: record::GENESIS.to_string(),
            ..State::default()
        },
        records: Vec::new(),
        problem: None,
        torn_at: None,
        line_digests: Vec::new(),
        line_ends: Vec::new(),
    };
    let mut offset = 0usize;
    let mut line_no = 0u64;
    let mut rec = Record {
        seq: 0,
        prev: String::new(),
        time: 0,
        body: Body::Repair {
            dropped_bytes: 0,
            copy: String::new(),
        },
    };
    while offset < bytes.len() {
        line_no += 1;
        let pos = Position {
            line: line_no,
            offset: offset as u64,
        };
        let rest = &bytes[offset..];
        let Some(nl) = rest.iter().position(|&b| b == b'\n') else {
            r.problem = Some(
                Error::new(ErrorKind::TornTail {
                    bytes: rest.len() as u64,
                })
                .at(pos),
            );
            r.torn_at = Some(offset as u64);
            return r;
        };
        let line = &rest[..nl];
        if let Err(e) = record::parse_line(line, pos, &r.state.head, &mut rec) {
            r.problem = Some(if line_no == 1 {
                Error::new(ErrorKind::NotOurs {
                    found: e.kind.to_string(),
                })
                .at(pos)
            } else {
                e
            });
            return r;
        }
        if line_no == 1 {
            let ours =
                matches!(&rec.body, Body::JournalStarted { format } if format == record::FORMAT);
            if !ours {
                r.problem = Some(
                    Error::new(ErrorKind::NotOurs {
                        found: format!("first record is {}", rec.body.kind()),
                    })
                    .at(pos),
                );
                return r;
            }
        }
        if let Err(rule) = r.state.check(line_no, rec.time, &rec.body) {
            r.problem = Some(Error::from(rule).at(pos));
            return r;
        }
        let digest = record::line_digest(line);
        r.line_digests.push(digest.clone());
        r.state.apply(line_no, rec.time, &rec.body, digest);
        r.records.push(rec.clone());
        offset += nl + 1;
        r.line_ends.push(offset as u64);
    }
    r
}

/// The ledger folder: the journal and, beside it, the seed store.
#[derive(Clone, Debug)]
pub struct Ledger {
    dir: PathBuf,
}

/// Whether `path` still names the open file `f`.
fn same_file(f: &File, path: &Path) -> bool {
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        match (f.metadata(), std::fs::metadata(path)) {
            (Ok(a), Ok(b)) => a.dev() == b.dev() && a.ino() == b.ino(),
            _ => false,
        }
    }
    #[cfg(not(unix))]
    {
        let _ = (f, path);
        true
    }
}

/// Seconds since the Unix epoch.
fn now() -> u64 {
    std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_secs())
        .unwrap_or(0)
}

/// A fresh random identifier: 128 bits from the operating system, 32
/// lower-case hex digits (`spec/conventions.md`, seed identifiers).
pub fn random_id() -> Result<String, Error> {
    Ok(files::random::random_id()?)
}

/// The largest head file read (it holds one short JSON object).
const HEAD_FILE_LIMIT: u64 = 4096;

/// The lock file of a run in progress (`runs/USE.lock`): held (locked)
/// while the run lives, so `ledger abandon` can tell a dead run's open
/// reservation from a live one. Removed when dropped.
pub struct RunLock {
    path: PathBuf,
    file: Option<File>,
}

impl Drop for RunLock {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.path);
        if let Some(f) = self.file.take() {
            let _ = f.unlock();
        }
    }
}

impl Ledger {
    /// The ledger in `dir` (nothing is touched yet).
    pub fn new(dir: impl Into<PathBuf>) -> Self {
        Ledger { dir: dir.into() }
    }

    /// The folder.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// The journal's path.
    pub fn journal_path(&self) -> PathBuf {
        self.dir.join(JOURNAL_FILE)
    }

    /// The head file's path.
    pub fn head_path(&self) -> PathBuf {
        self.dir.join(HEAD_FILE)
    }

    /// The seed store's folder.
    pub fn seeds_dir(&self) -> PathBuf {
        self.dir.join(SEEDS_DIR)
    }

    /// Whether a journal exists.
    pub fn exists(&self) -> bool {
        self.journal_path().exists()
    }

    fn err(&self, e: impl Into<Error>) -> Error {
        e.into().in_file(&self.journal_path())
    }

    /// The identifiers of the files in the seed store (`seeds/ID.seed.json`).
    pub fn stored_seed_ids(&self) -> Vec<String> {
        let mut ids: Vec<String> = std::fs::read_dir(self.seeds_dir())
            .map(|r| {
                r.flatten()
                    .filter_map(|e| {
                        e.file_name()
                            .to_str()
                            .and_then(|n| n.strip_suffix(".seed.json"))
                            .map(String::from)
                    })
                    .collect()
            })
            .unwrap_or_default();
        ids.sort();
        ids
    }

    /// The head file, if there is one.
    pub fn read_head(&self) -> Result<Option<Head>, Error> {
        let p = self.head_path();
        match files::keyvalue::read_limited(&p, HEAD_FILE_LIMIT, "head file") {
            Ok(b) => Head::parse(&b)
                .map(Some)
                .map_err(|reason| Error::new(ErrorKind::BadHeadFile { reason }).in_file(&p)),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(None),
            Err(e) => Err(Error::from(e).in_file(&p)),
        }
    }

    /// Replays `bytes` and checks them against `head`, the head file as
    /// read under the same lock as the bytes (outside it another process
    /// may append between the two reads).
    fn replay_checked(&self, bytes: &[u8], head: Result<Option<Head>, Error>) -> Replay {
        let path = self.journal_path();
        let mut r = replay(bytes);
        let head_checkable = match &r.problem {
            None => true,
            Some(p) => matches!(p.kind, ErrorKind::TornTail { .. }),
        };
        if head_checkable {
            match head {
                Ok(Some(h)) => {
                    if let Err(e) = check_head(&r, h.lines, &h.head, Some(h.bytes)) {
                        r.problem = Some(e);
                        r.torn_at = None;
                    }
                }
                Ok(None) => {}
                Err(e) => {
                    r.problem = Some(e);
                    r.torn_at = None;
                }
            }
        }
        if let Some(p) = r.problem.take() {
            r.problem = Some(if p.path.is_none() {
                p.in_file(&path)
            } else {
                p
            });
        }
        r
    }

    /// Reads and replays the journal under a shared lock (an absent journal
    /// replays as empty, unless a head file says it existed), checking it
    /// against the head file.
    pub fn read(&self) -> Result<Replay, Error> {
        let path = self.journal_path();
        let mut f = match File::open(&path) {
            Ok(f) => f,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                let head = self.read_head();
                // A first append may have created both files since the
                // open: look once more before calling the journal missing.
                match (&head, File::open(&path)) {
                    (Ok(Some(_)), Ok(f)) => f,
                    _ => return Ok(self.replay_checked(b"", head)),
                }
            }
            Err(e) => return Err(self.err(e)),
        };
        f.lock_shared().map_err(|e| self.err(e))?;
        let mut bytes = Vec::new();
        f.read_to_end(&mut bytes).map_err(|e| self.err(e))?;
        let head = self.read_head();
        let _ = f.unlock();
        Ok(self.replay_checked(&bytes, head))
    }

    /// Under the exclusive lock: replays the journal, lets `decide` look at
    /// the state and return the records to append (it may refuse), checks
    /// each against the rules, appends them, fsyncs, updates the head file,
    /// unlocks. Creates the folder (owner-only) and the journal (with its
    /// first record) when absent. A failed write leaves the journal as it
    /// was.
    pub fn append<T, E: From<Error>>(
        &self,
        decide: impl FnOnce(&State) -> Result<(Vec<Body>, T), E>,
    ) -> Result<(T, State), E> {
        self.append_with(decide, |_| Ok(()))
    }

    /// As [`Ledger::append`], then runs `after_write` with the new state
    /// while still holding the lock (the seed store moves a new seed's file
    /// into place there, so no other process sees the record without the
    /// file). An error of `after_write` is returned, but the records stay.
    pub fn append_with<T, E: From<Error>>(
        &self,
        decide: impl FnOnce(&State) -> Result<(Vec<Body>, T), E>,
        after_write: impl FnOnce(&State) -> Result<(), E>,
    ) -> Result<(T, State), E> {
        register_freeze_on_interrupt();
        let _g = APPEND.lock().unwrap_or_else(|p| p.into_inner());
        self.append_locked(decide, after_write)
    }

    /// Appends after [`freeze_appends`] (the interruption handler only).
    #[doc(hidden)]
    pub fn append_while_frozen<T, E: From<Error>>(
        &self,
        decide: impl FnOnce(&State) -> Result<(Vec<Body>, T), E>,
    ) -> Result<(T, State), E> {
        self.append_locked(decide, |_| Ok(()))
    }

    fn append_locked<T, E: From<Error>>(
        &self,
        decide: impl FnOnce(&State) -> Result<(Vec<Body>, T), E>,
        after_write: impl FnOnce(&State) -> Result<(), E>,
    ) -> Result<(T, State), E> {
        let dir_existed = self.dir.exists();
        files::create_private_dir(&self.dir).map_err(|e| self.err(e))?;
        // Temporary files of killed runs (head file, seed store) go here.
        files::atomic::clean_stale(&self.dir);
        files::atomic::clean_stale(&self.seeds_dir());
        let path = self.journal_path();
        let existed = path.exists();
        let mut opts = OpenOptions::new();
        opts.read(true).append(true).create(true);
        #[cfg(unix)]
        {
            use std::os::unix::fs::OpenOptionsExt;
            opts.mode(0o600);
        }
        // A refused first append removes the empty journal it created; a
        // process that opened that file meanwhile must not write into the
        // removed file, so it checks, under the lock, that the path still
        // names the file it holds, and reopens if not.
        let mut f = loop {
            let f = opts.open(&path).map_err(|e| self.err(e))?;
            f.lock().map_err(|e| self.err(e))?;
            if same_file(&f, &path) {
                break f;
            }
            let _ = f.unlock();
        };
        let result = (|| {
            let mut bytes = Vec::new();
            f.seek(SeekFrom::Start(0)).map_err(|e| self.err(e))?;
            f.read_to_end(&mut bytes).map_err(|e| self.err(e))?;
            let r = self.replay_checked(&bytes, self.read_head());
            if let Some(p) = r.problem {
                return Err(E::from(p));
            }
            let mut state = r.state;
            let mut bodies = Vec::new();
            if state.lines == 0 {
                // A new journal beside seeds it does not know would forget
                // their uses: the old journal was deleted or moved.
                let stored = self.stored_seed_ids();
                if !stored.is_empty() {
                    return Err(E::from(
                        Error::new(ErrorKind::NewJournalBesideSeeds {
                            seeds: stored.len() as u64,
                            dir: self.seeds_dir(),
                        })
                        .in_file(&path),
                    ));
                }
                bodies.push(Body::JournalStarted {
                    format: record::FORMAT.to_string(),
                });
            }
            let (more, out) = decide(&state)?;
            bodies.extend(more);
            let mut text = String::new();
            let time = now().max(state.last_time);
            for body in bodies {
                let line = state.lines + 1;
                let pos = Position {
                    line,
                    offset: (bytes.len() + text.len()) as u64,
                };
                state
                    .check(line, time, &body)
                    .map_err(|rule| E::from(Error::from(rule).at(pos).in_file(&path)))?;
                let rec = Record {
                    seq: line,
                    prev: state.head.clone(),
                    time,
                    body,
                };
                let l = record::to_line(&rec);
                let digest = record::line_digest(l.as_bytes());
                state.apply(line, time, &rec.body, digest);
                text.push_str(&l);
                text.push('\n');
            }
            if !text.is_empty() {
                self.write_tail(&mut f, bytes.len() as u64, text.as_bytes())
                    .map_err(E::from)?;
                self.write_head(&state, bytes.len() as u64 + text.len() as u64);
            }
            after_write(&state)?;
            Ok((out, state))
        })();
        if result.is_err() && !existed && f.metadata().is_ok_and(|m| m.len() == 0) {
            // A refused first append leaves nothing behind.
            let _ = std::fs::remove_file(&path);
            if !dir_existed {
                let _ = std::fs::remove_dir(&self.dir);
            }
        }
        let _ = f.unlock();
        result
    }

    /// Appends `text` to the journal of length `len0` (opened for
    /// appending, locked) and fsyncs it; on any failure truncates it back
    /// to `len0` and fsyncs, so the journal is exactly as before.
    fn write_tail(&self, f: &mut File, len0: u64, text: &[u8]) -> Result<(), Error> {
        let path = self.journal_path();
        fault::point("journal-write");
        if fault::tear("journal-write") {
            let half = &text[..text.len() / 2];
            let _ = f.write_all(half);
            let _ = f.sync_all();
            std::process::abort();
        }
        let res = (|| -> std::io::Result<()> {
            if let Some(e) = fault::injected_error("journal-write") {
                // As on a full disk: part of the bytes, then the failure.
                f.write_all(&text[..text.len() / 2])?;
                return Err(e);
            }
            f.write_all(text)?;
            f.sync_all()
        })();
        if let Err(e) = res {
            let restored = f.set_len(len0).and_then(|()| f.sync_all());
            let e = space::explain(e, &path, "the ledger");
            return Err(match restored {
                Ok(()) => Error::new(ErrorKind::Io(e)),
                Err(r) => Error::new(ErrorKind::Io(std::io::Error::new(
                    e.kind(),
                    format!("{e}; truncating the journal back to {len0} bytes also failed ({r}): run `sluice ledger repair`"),
                ))),
            });
        }
        Ok(())
    }

    /// Rewrites the head file (best effort: a head file that lags behind is
    /// still a valid earlier head, since the journal only grew).
    fn write_head(&self, state: &State, bytes: u64) {
        let h = Head {
            format: HEAD_FORMAT.to_string(),
            lines: state.lines,
            bytes,
            head: state.head.clone(),
        };
        let Ok(mut text) = serde_json::to_vec(&h) else {
            return;
        };
        text.push(b'\n');
        fault::point("head-write");
        let _ = files::atomic::write_all(&self.head_path(), Kind::Head, Replace::SameKind, &text);
    }

    /// Removes a torn last line (an unterminated tail after the last
    /// newline, and only past the length the head file records) after
    /// copying the journal to `journal.jsonl.before-repair-TIME-RANDOM`,
    /// then records the repair. Returns the copy's path and the bytes
    /// dropped. Anything else (a journal cut short of its head file, a
    /// broken line in the middle) is refused.
    pub fn repair(&self) -> Result<(PathBuf, u64), Error> {
        register_freeze_on_interrupt();
        let _g = APPEND.lock().unwrap_or_else(|p| p.into_inner());
        let path = self.journal_path();
        let mut f = OpenOptions::new()
            .read(true)
            .append(true)
            .open(&path)
            .map_err(|e| self.err(e))?;
        f.lock().map_err(|e| self.err(e))?;
        let res = (|| {
            let mut bytes = Vec::new();
            f.read_to_end(&mut bytes).map_err(|e| self.err(e))?;
            let r = self.replay_checked(&bytes, self.read_head());
            let Some(cut) = r.torn_at else {
                return Err(self.err(Error::new(ErrorKind::NotRepairable {
                    reason: match r.problem {
                        None => "the journal verifies".to_string(),
                        Some(p) => format!(
                            "only an unterminated last line is repaired, and the journal has another problem: {p}"
                        ),
                    },
                })));
            };
            let copy = self.dir.join(format!(
                "{JOURNAL_FILE}.before-repair-{}-{}",
                now(),
                &random_id()?[..8]
            ));
            // Through the atomic writer: on a full disk no empty copy stays.
            files::atomic::write_all(&copy, Kind::JournalCopy, Replace::Never, &bytes).map_err(
                |e| Error::new(ErrorKind::Io(space::explain(e, &copy, "the journal copy"))),
            )?;
            f.set_len(cut).map_err(|e| self.err(e))?;
            f.sync_all().map_err(|e| self.err(e))?;
            let dropped = bytes.len() as u64 - cut;
            let mut state = r.state;
            let line = state.lines + 1;
            let time = now().max(state.last_time);
            let rec = Record {
                seq: line,
                prev: state.head.clone(),
                time,
                body: Body::Repair {
                    dropped_bytes: dropped,
                    copy: copy
                        .file_name()
                        .map(|n| n.to_string_lossy().into_owned())
                        .unwrap_or_default(),
                },
            };
            let l = record::to_line(&rec);
            state.apply(line, time, &rec.body, record::line_digest(l.as_bytes()));
            let text = format!("{l}\n");
            self.write_tail(&mut f, cut, text.as_bytes())?;
            self.write_head(&state, cut + text.len() as u64);
            Ok((copy, dropped))
        })();
        let _ = f.unlock();
        res
    }

    /// Takes the lock file of a run of use `use_id` (before reserving it).
    /// Lock files left by killed runs (unlocked, older than a few seconds)
    /// are removed here.
    pub fn lock_run(&self, use_id: &str) -> Result<RunLock, Error> {
        let dir = self.dir.join(RUNS_DIR);
        files::create_private_dir(&self.dir).map_err(|e| self.err(e))?;
        files::create_private_dir(&dir).map_err(|e| Error::from(e).in_file(&dir))?;
        if let Ok(rd) = std::fs::read_dir(&dir) {
            for e in rd.flatten() {
                let p = e.path();
                let old = e
                    .metadata()
                    .and_then(|m| m.modified())
                    .ok()
                    .and_then(|t| std::time::SystemTime::now().duration_since(t).ok())
                    .is_some_and(|a| a.as_secs() >= 5);
                if old && self.run_lock_free(&p) {
                    let _ = std::fs::remove_file(&p);
                }
            }
        }
        let path = dir.join(format!("{use_id}.lock"));
        let mut opts = OpenOptions::new();
        opts.write(true).create_new(true);
        #[cfg(unix)]
        {
            use std::os::unix::fs::OpenOptionsExt;
            opts.mode(0o600);
        }
        let f = opts
            .open(&path)
            .map_err(|e| Error::from(e).in_file(&path))?;
        f.lock().map_err(|e| Error::from(e).in_file(&path))?;
        Ok(RunLock {
            path,
            file: Some(f),
        })
    }

    fn run_lock_free(&self, p: &Path) -> bool {
        match File::open(p) {
            Ok(f) => {
                let free = f.try_lock().is_ok();
                let _ = f.unlock();
                free
            }
            Err(_) => true,
        }
    }

    /// Whether the run of use `use_id` is still going (its lock is held).
    pub fn run_in_progress(&self, use_id: &str) -> bool {
        let p = self.dir.join(RUNS_DIR).join(format!("{use_id}.lock"));
        p.exists() && !self.run_lock_free(&p)
    }

    /// Removes the lock file of a dead run, if any.
    pub fn remove_run_lock(&self, use_id: &str) {
        let _ = std::fs::remove_file(self.dir.join(RUNS_DIR).join(format!("{use_id}.lock")));
    }
}

#[cfg(test)]
mod tests;
