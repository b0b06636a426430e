//! Signal handling: Ctrl-C or SIGTERM stops a server (and a noisy
//! neighbour) this process started, then exits with 128 + the signal number.

use crate::server;

/// Ctrl-C or SIGTERM: stop a server this process started, then exit.
pub fn stop_child_on_signal() {
    extern "C" fn handler(sig: libc::c_int) {
        for child in [&server::CHILD_PID, &server::NEIGHBOUR_PID] {
            let pid = child.load(std::sync::atomic::Ordering::SeqCst);
            if pid != 0 {
                // SAFETY: kill(2) is async-signal-safe; the pid is our child's.
                unsafe {
                    libc::kill(pid as libc::pid_t, libc::SIGTERM);
                }
            }
        }
        // SAFETY: _exit(2) is async-signal-safe.
        unsafe { libc::_exit(128 + sig) }
    }
    // SAFETY: installing a handler that only calls async-signal-safe
    // functions.
    unsafe {
        libc::signal(libc::SIGINT, handler as *const () as libc::sighandler_t);
        libc::signal(libc::SIGTERM, handler as *const () as libc::sighandler_t);
    }
}
