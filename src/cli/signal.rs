//! Ctrl-C and SIGTERM for the commands without a terminal view: a flag instead of dying, so
//! outputs are flushed and closed. (The live view takes its keys from the terminal.)

use std::sync::atomic::{AtomicBool, Ordering};

static INTERRUPTED: AtomicBool = AtomicBool::new(false);

extern "C" fn on_interrupt(_: libc::c_int) {
    INTERRUPTED.store(true, Ordering::SeqCst);
}

/// Install the handlers (once is enough; again is harmless) and return the flag they set.
pub fn interrupt_flag() -> &'static AtomicBool {
    // SAFETY: installing a handler that only stores to an atomic is async-signal-safe.
    unsafe {
        libc::signal(
            libc::SIGINT,
            on_interrupt as *const () as libc::sighandler_t,
        );
        libc::signal(
            libc::SIGTERM,
            on_interrupt as *const () as libc::sighandler_t,
        );
    }
    &INTERRUPTED
}

/// Whether Ctrl-C or SIGTERM arrived since the handlers were installed.
pub fn interrupted() -> bool {
    INTERRUPTED.load(Ordering::Relaxed)
}
