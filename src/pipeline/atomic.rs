//! Output files that appear whole or not at all.
//!
//! [`AtomicFile`] writes to a temporary file in the target's folder (same
//! file system, so the final rename is atomic), flushes and fsyncs it, then
//! renames it over the final name. Dropped without [`AtomicFile::commit`], it
//! removes the temporary file: a failed run leaves nothing under the final
//! name. Files holding secrets are created owner-only (mode 0600) from the
//! start, never chmod-ed afterwards.

use std::fs::{self, File, OpenOptions};
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};

/// A file being written under a temporary name.
pub struct AtomicFile {
    tmp: PathBuf,
    dest: PathBuf,
    writer: Option<BufWriter<File>>,
}

impl AtomicFile {
    /// Starts writing what will become `dest`. With `private`, the file is
    /// readable and writable by its owner only.
    pub fn create(dest: &Path, private: bool) -> io::Result<Self> {
        let dir = match dest.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        let name = dest
            .file_name()
            .ok_or_else(|| {
                io::Error::new(
                    io::ErrorKind::InvalidInput,
                    format!("{}: not a file name", dest.display()),
                )
            })?
            .to_string_lossy()
            .into_owned();
        let mut tag = [0u8; 6];
        getrandom_fill(&mut tag)?;
        let tmp = dir.join(format!(".{name}.{}.tmp", hex::encode(tag)));
        let mut opts = OpenOptions::new();
        opts.write(true).create_new(true);
        #[cfg(unix)]
        {
            use std::os::unix::fs::OpenOptionsExt;
            opts.mode(if private { 0o600 } else { 0o644 });
        }
        #[cfg(not(unix))]
        let _ = private;
        let f = opts.open(&tmp)?;
        Ok(AtomicFile {
            tmp,
            dest: dest.to_path_buf(),
            writer: Some(BufWriter::with_capacity(1 << 20, f)),
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

    /// Flushes, fsyncs and renames the file to its final name, then fsyncs
    /// the folder so the rename itself is durable.
    pub fn commit(mut self) -> io::Result<()> {
        let w = self.writer.take().expect("writer present until commit");
        let f = w.into_inner().map_err(|e| e.into_error())?;
        f.sync_all()?;
        drop(f);
        fs::rename(&self.tmp, &self.dest)?;
        if let Some(dir) = self.dest.parent() {
            let dir = if dir.as_os_str().is_empty() {
                Path::new(".")
            } else {
                dir
            };
            if let Ok(d) = File::open(dir) {
                let _ = d.sync_all();
            }
        }
        Ok(())
    }
}

impl Write for AtomicFile {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        self.writer.as_mut().expect("not committed").write(buf)
    }
    fn flush(&mut self) -> io::Result<()> {
        self.writer.as_mut().expect("not committed").flush()
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        if self.writer.take().is_some() {
            let _ = fs::remove_file(&self.tmp);
        }
    }
}

/// Fills `buf` from the operating system's random source.
pub(crate) fn getrandom_fill(buf: &mut [u8]) -> io::Result<()> {
    use rand_core::{OsRng, RngCore};
    OsRng
        .try_fill_bytes(buf)
        .map_err(|e| io::Error::other(format!("operating-system random source failed: {e}")))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn commit_renames_and_drop_cleans_up() {
        let dir = tempfile::tempdir().unwrap();
        let dest = dir.path().join("out.bin");
        let mut f = AtomicFile::create(&dest, true).unwrap();
        f.write_all(b"abc").unwrap();
        let tmp = f.temp_path().to_path_buf();
        assert!(tmp.exists() && !dest.exists());
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
        let mut g = AtomicFile::create(&dest2, false).unwrap();
        g.write_all(b"partial").unwrap();
        let tmp2 = g.temp_path().to_path_buf();
        drop(g);
        assert!(!tmp2.exists() && !dest2.exists());
    }
}
