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
//! naive forgeries; someone who can rewrite the file and recompute every
//! digest after the change is caught only by comparing the head digest
//! (`ledger verify` prints it) with a copy kept elsewhere.

pub mod error;
pub mod record;
pub mod state;

pub use error::{Error, ErrorKind, Rule};
pub use record::{Body, Position, Record};
pub use state::{SeedState, State, UseState};

use std::fs::{File, OpenOptions};
use std::io::{Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

/// The journal file's name inside the ledger folder.
pub const JOURNAL_FILE: &str = "journal.jsonl";

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
        r.state
            .apply(line_no, rec.time, &rec.body, record::line_digest(line));
        r.records.push(rec.clone());
        offset += nl + 1;
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
    let mut b = [0u8; 16];
    crate::pipeline::atomic::getrandom_fill(&mut b)?;
    Ok(hex::encode(b))
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

    /// Whether a journal exists.
    pub fn exists(&self) -> bool {
        self.journal_path().exists()
    }

    fn err(&self, e: impl Into<Error>) -> Error {
        e.into().in_file(&self.journal_path())
    }

    /// Reads and replays the journal under a shared lock (an absent journal
    /// replays as empty).
    pub fn read(&self) -> Result<Replay, Error> {
        let path = self.journal_path();
        let mut f = match File::open(&path) {
            Ok(f) => f,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(replay(b"")),
            Err(e) => return Err(self.err(e)),
        };
        f.lock_shared().map_err(|e| self.err(e))?;
        let mut bytes = Vec::new();
        f.read_to_end(&mut bytes).map_err(|e| self.err(e))?;
        let _ = f.unlock();
        let mut r = replay(&bytes);
        if let Some(p) = r.problem.take() {
            r.problem = Some(p.in_file(&path));
        }
        Ok(r)
    }

    /// Under the exclusive lock: replays the journal, lets `decide` look at
    /// the state and return the records to append (it may refuse), checks
    /// each against the rules, appends them, fsyncs, unlocks. Creates the
    /// folder and the journal (with its first record) when absent.
    pub fn append<T, E: From<Error>>(
        &self,
        decide: impl FnOnce(&State) -> Result<(Vec<Body>, T), E>,
    ) -> Result<(T, State), E> {
        let dir_existed = self.dir.exists();
        std::fs::create_dir_all(&self.dir).map_err(|e| self.err(e))?;
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
            let r = replay(&bytes);
            if let Some(p) = r.problem {
                return Err(E::from(p.in_file(&path)));
            }
            let mut state = r.state;
            let mut bodies = Vec::new();
            if state.lines == 0 {
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
                crate::pipeline::test_hook::point("journal-write");
                if crate::pipeline::test_hook::tear("journal-write") {
                    let half = &text.as_bytes()[..text.len() / 2];
                    let _ = f.write_all(half);
                    let _ = f.sync_all();
                    std::process::abort();
                }
                f.write_all(text.as_bytes()).map_err(|e| self.err(e))?;
                f.sync_all().map_err(|e| self.err(e))?;
            }
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

    /// Removes a torn last line (and nothing else) after copying the journal
    /// to `journal.jsonl.before-repair-TIME-RANDOM`, then records the repair.
    /// Returns the copy's path and the bytes dropped.
    pub fn repair(&self) -> Result<(PathBuf, u64), Error> {
        let path = self.journal_path();
        let mut f = OpenOptions::new()
            .read(true)
            .write(true)
            .open(&path)
            .map_err(|e| self.err(e))?;
        f.lock().map_err(|e| self.err(e))?;
        let res = (|| {
            let mut bytes = Vec::new();
            f.read_to_end(&mut bytes).map_err(|e| self.err(e))?;
            let r = replay(&bytes);
            let Some(cut) = r.torn_at else {
                return Err(self.err(Error::new(ErrorKind::NotRepairable {
                    reason: match r.problem {
                        None => "the journal verifies".to_string(),
                        Some(p) => format!(
                            "only a torn last line is repaired, and the journal has another problem: {p}"
                        ),
                    },
                })));
            };
            let copy = self.dir.join(format!(
                "{JOURNAL_FILE}.before-repair-{}-{}",
                now(),
                &random_id()?[..8]
            ));
            let mut c = OpenOptions::new();
            c.write(true).create_new(true);
            #[cfg(unix)]
            {
                use std::os::unix::fs::OpenOptionsExt;
                c.mode(0o600);
            }
            let mut cf = c.open(&copy).map_err(|e| self.err(e))?;
            cf.write_all(&bytes).map_err(|e| self.err(e))?;
            cf.sync_all().map_err(|e| self.err(e))?;
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
            f.seek(SeekFrom::End(0)).map_err(|e| self.err(e))?;
            f.write_all(format!("{l}\n").as_bytes())
                .map_err(|e| self.err(e))?;
            f.sync_all().map_err(|e| self.err(e))?;
            Ok((copy, dropped))
        })();
        let _ = f.unlock();
        res
    }
}

#[cfg(test)]
mod tests;
