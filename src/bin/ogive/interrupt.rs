//! Ctrl-C and the elapsed-time line.
//!
//! SIGINT only sets a flag (the one thing a signal handler may safely do). While a statement
//! runs, a watcher thread polls the flag and calls `sqlite3_interrupt` through the
//! connection's interrupt handle, so SQLite stops the statement at its next instruction and
//! returns `SQLITE_INTERRUPT`. The same thread draws the elapsed time on standard error
//! once a statement has run for a second (only when standard error is a terminal). Loops of
//! the shell's own (CSV import, demo generation) poll [`requested`] themselves.
//!
//! A second Ctrl-C while the first is still pending ends the process at once with status
//! 130, for work that does not look at the flag.

use std::io::{IsTerminal, Write};
use std::sync::Arc;
use std::sync::OnceLock;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{RecvTimeoutError, channel};
use std::time::{Duration, Instant};

use rusqlite::Connection;

static FLAG: OnceLock<Arc<AtomicBool>> = OnceLock::new();

fn flag() -> &'static Arc<AtomicBool> {
    FLAG.get_or_init(|| Arc::new(AtomicBool::new(false)))
}

/// Installs the SIGINT handlers. Call once, early.
pub fn install() {
    let f = flag().clone();
    // Order matters: the conditional exit is checked before the flag is set by the
    // second registration, so the first Ctrl-C only sets the flag.
    #[cfg(unix)]
    {
        let _ = signal_hook::flag::register_conditional_shutdown(
            signal_hook::consts::SIGINT,
            130,
            f.clone(),
        );
    }
    let _ = signal_hook::flag::register(signal_hook::consts::SIGINT, f);
}

/// Whether Ctrl-C was pressed since the last [`clear`].
pub fn requested() -> bool {
    flag().load(Ordering::SeqCst)
}

/// Forgets a handled Ctrl-C (the prompt does this before each input).
pub fn clear() {
    flag().store(false, Ordering::SeqCst);
}

/// Runs `work` (which steps statements on `conn`) with a watcher that interrupts it on
/// Ctrl-C and shows the elapsed time after a second.
pub fn watch<T>(conn: &Connection, work: impl FnOnce() -> T) -> T {
    let handle = conn.get_interrupt_handle();
    let show = std::io::stderr().is_terminal();
    let (done, wait) = channel::<()>();
    std::thread::scope(|scope| {
        scope.spawn(move || {
            let start = Instant::now();
            let mut drawn = false;
            while let Err(RecvTimeoutError::Timeout) = wait.recv_timeout(Duration::from_millis(40))
            {
                if requested() {
                    handle.interrupt();
                }
                let elapsed = start.elapsed();
                if show && elapsed >= Duration::from_secs(1) {
                    let mut err = std::io::stderr().lock();
                    let _ = write!(
                        err,
                        "\r  running for {:.1} s (Ctrl-C cancels) ",
                        elapsed.as_secs_f64()
                    );
                    let _ = err.flush();
                    drawn = true;
                }
            }
            if drawn {
                let mut err = std::io::stderr().lock();
                let _ = write!(err, "\r{:40}\r", "");
                let _ = err.flush();
            }
        });
        let out = work();
        drop(done);
        out
    })
}
