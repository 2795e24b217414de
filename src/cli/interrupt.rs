//! What an interrupt (SIGINT, Ctrl-C) does to a running command.
//!
//! Without a handler the process would die wherever it is. While it plans nothing has been
//! written, so that is harmless; but an interrupt in the middle of writing the outputs could
//! leave a temporary file (`write_atomic` cannot clean up after a signal) or a run whose
//! route is written and whose CSV is not. So the handler (the `ctrlc` crate, which runs it
//! on a thread of its own) takes the same lock as the writing step, [`committing`], and
//! then ends the process with [`EXIT_INTERRUPTED`]:
//! - interrupted before the outputs are written: the process ends at once, nothing written;
//! - interrupted while they are written: the writing finishes (milliseconds), every file of
//!   the run is whole, then the process ends with the same code.
//!
//! So after an interrupted run either none or all of its output files were written, never
//! a partial one, and no temporary file is left behind.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Mutex;

/// Exit code of an interrupted run: 128 + SIGINT (2), the shell's convention (common
/// practice).
pub const EXIT_INTERRUPTED: i32 = 130;

static COMMIT: Mutex<()> = Mutex::new(());
static INTERRUPTED: AtomicBool = AtomicBool::new(false);

/// Install the handler (once, at start-up). A failure to install it is reported and the
/// command runs on without it.
pub fn install() -> Result<(), ctrlc::Error> {
    ctrlc::set_handler(|| {
        INTERRUPTED.store(true, Ordering::SeqCst);
        // Wait for a write in progress; then nothing more may start.
        let _held = COMMIT.lock().unwrap_or_else(|p| p.into_inner());
        eprintln!("interrupted");
        std::process::exit(EXIT_INTERRUPTED);
    })
}

/// Run `f` (which writes output files) so that an interrupt waits for it to finish. An
/// interrupt that arrived meanwhile ends the process right after `f`, with the lock still
/// held (so the run does not go on to report success).
pub fn committing<T>(f: impl FnOnce() -> T) -> T {
    let _held = COMMIT.lock().unwrap_or_else(|p| p.into_inner());
    let out = f();
    if INTERRUPTED.load(Ordering::SeqCst) {
        eprintln!("interrupted (the outputs being written were finished first)");
        std::process::exit(EXIT_INTERRUPTED);
    }
    out
}
