//! The watchdog: a thread that stops the whole process (and a server it
//! started, and a noisy neighbour) once `--max-wall-s` has passed, whatever the command is doing.

use crate::server;
use std::time::Duration;

/// Stops the process (and a server it started) after `secs`, so no run
/// outlives its bound even if something hangs.
pub fn start(secs: u64) {
    std::thread::spawn(move || {
        std::thread::sleep(Duration::from_secs(secs));
        eprintln!("error: hodos-load ran past its {secs} s bound (--max-wall-s); stopping");
        for child in [&server::CHILD_PID, &server::NEIGHBOUR_PID] {
            let pid = child.load(std::sync::atomic::Ordering::SeqCst);
            if pid != 0 {
                // SAFETY: kill(2) on the pid of a child this process started.
                unsafe {
                    libc::kill(pid as libc::pid_t, libc::SIGKILL);
                }
            }
        }
        std::process::exit(3);
    });
}
