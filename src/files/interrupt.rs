//! SIGINT and SIGTERM: stop cleanly, say what was done.
//!
//! [`install`] starts a thread that waits for the signals. When one comes,
//! it marks the process as interrupted (an [`super::AtomicFile`] then
//! refuses to rename), runs the cleanups registered with [`on_interrupt`]
//! (the ledgered run records its use as abandoned there: it stays charged),
//! removes every temporary file the process is writing, prints what it did
//! on standard error and exits with status 128 + the signal number (130
//! for SIGINT, 143 for SIGTERM). Without [`install`] (the library used on
//! its own) the signals keep their default action.

use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Mutex;

static INTERRUPTED: AtomicBool = AtomicBool::new(false);
static NEXT: AtomicU64 = AtomicU64::new(1);

type Cleanup = Box<dyn FnOnce(&str) -> Vec<String> + Send>;

static CLEANUPS: Mutex<Vec<(u64, Cleanup)>> = Mutex::new(Vec::new());

fn cleanups() -> std::sync::MutexGuard<'static, Vec<(u64, Cleanup)>> {
    CLEANUPS.lock().unwrap_or_else(|p| p.into_inner())
}

/// Whether a SIGINT or SIGTERM has arrived.
pub fn interrupted() -> bool {
    INTERRUPTED.load(Ordering::SeqCst)
}

/// A registered cleanup; dropping it unregisters the cleanup.
pub struct Registration(u64);

impl Drop for Registration {
    fn drop(&mut self) {
        cleanups().retain(|(id, _)| *id != self.0);
    }
}

/// Registers `f`, run with the signal's name if the process is interrupted
/// while the returned [`Registration`] lives; it returns lines to print.
pub fn on_interrupt(f: impl FnOnce(&str) -> Vec<String> + Send + 'static) -> Registration {
    let id = NEXT.fetch_add(1, Ordering::Relaxed);
    cleanups().push((id, Box::new(f)));
    Registration(id)
}

/// What the handler does, without exiting (tests call it directly).
pub fn run_cleanups(signal: &str) -> Vec<String> {
    // After this no rename starts; one in progress has finished.
    super::atomic::without_renames(|| INTERRUPTED.store(true, Ordering::SeqCst));
    let mut lines = Vec::new();
    let taken: Vec<(u64, Cleanup)> = std::mem::take(&mut *cleanups());
    // Partial outputs first, so nothing half-written survives the rest.
    for dest in super::atomic::remove_live() {
        lines.push(format!(
            "removed the unfinished output for {} (nothing was written there)",
            dest.display()
        ));
    }
    for (_, f) in taken {
        lines.extend(f(signal));
    }
    lines
}

/// Installs the handler for SIGINT and SIGTERM (once per process).
pub fn install() -> std::io::Result<()> {
    #[cfg(unix)]
    {
        use signal_hook::consts::{SIGINT, SIGTERM};
        static DONE: AtomicBool = AtomicBool::new(false);
        if DONE.swap(true, Ordering::SeqCst) {
            return Ok(());
        }
        let mut signals = signal_hook::iterator::Signals::new([SIGINT, SIGTERM])?;
        std::thread::Builder::new()
            .name("sluice-signals".into())
            .spawn(move || {
                if let Some(sig) = signals.forever().next() {
                    let name = if sig == SIGINT { "SIGINT" } else { "SIGTERM" };
                    let lines = run_cleanups(name);
                    use std::io::Write;
                    let mut err = std::io::stderr().lock();
                    let _ = writeln!(err, "interrupted by {name}:");
                    for l in &lines {
                        let _ = writeln!(err, "  {l}");
                    }
                    if lines.is_empty() {
                        let _ = writeln!(err, "  nothing was being written");
                    }
                    let _ = err.flush();
                    std::process::exit(128 + sig);
                }
            })?;
    }
    Ok(())
}
