//! What runs beside a load, started and stopped by the tool itself: a
//! noisy neighbour (a child process of this binary, `hodos-load spin`,
//! spinning threads so another process takes CPU throughout a run) and
//! sockets held open against the server (stalled bodies: headers and one
//! byte of body, then nothing; idle connections: opened, never used).
//!
//! Both are bounded: the neighbour stops by itself after its seconds, dies
//! with this process (`PR_SET_PDEATHSIG`), and is stopped by its pid at the
//! end of the run; held sockets are loopback connections closed when
//! dropped.

use crate::server::{proc_stat, NEIGHBOUR_PID};
use std::net::SocketAddr;
use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::sync::atomic::Ordering;
use std::time::{Duration, Instant};
use tokio::io::AsyncWriteExt;
use tokio::net::TcpStream;

/// The hidden `spin` command: `threads` threads spinning for `seconds`.
/// Ends by itself, and when its parent dies.
pub fn spin(threads: usize, seconds: f64) {
    // SAFETY: prctl with PR_SET_PDEATHSIG takes a plain signal number and
    // changes only this process.
    unsafe {
        libc::prctl(
            libc::PR_SET_PDEATHSIG,
            libc::SIGKILL as libc::c_ulong,
            0,
            0,
            0,
        );
    }
    let end = Instant::now() + Duration::from_secs_f64(seconds.clamp(0.0, 3600.0));
    let workers: Vec<_> = (0..threads.clamp(1, 64))
        .map(|_| {
            std::thread::spawn(move || {
                let mut x = 0u64;
                while Instant::now() < end {
                    for i in 0..10_000u64 {
                        x = std::hint::black_box(
                            x.wrapping_mul(6364136223846793005).wrapping_add(i),
                        );
                    }
                }
                x
            })
        })
        .collect();
    for w in workers {
        let _ = w.join();
    }
}

/// A running neighbour process; stopped by its pid on `stop` or drop.
pub struct Neighbour {
    child: Child,
    pub pid: u32,
}

impl Neighbour {
    /// Starts `exe spin` with `threads` threads for at most `bound`.
    pub fn start(exe: &Path, threads: usize, bound: Duration) -> std::io::Result<Neighbour> {
        let child = Command::new(exe)
            .arg("spin")
            .arg("--threads")
            .arg(threads.to_string())
            .arg("--seconds")
            .arg(format!("{:.1}", bound.as_secs_f64()))
            .stdin(Stdio::null())
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()?;
        let pid = child.id();
        NEIGHBOUR_PID.store(pid, Ordering::SeqCst);
        Ok(Neighbour { child, pid })
    }

    /// CPU seconds the neighbour used so far.
    pub fn cpu_s(&self) -> Option<f64> {
        proc_stat(self.pid).map(|p| p.cpu_s)
    }

    /// SIGTERM by pid, up to 2 s, then SIGKILL; reaps it.
    pub fn stop(&mut self) {
        if let Ok(Some(_)) = self.child.try_wait() {
            NEIGHBOUR_PID.store(0, Ordering::SeqCst);
            return;
        }
        // SAFETY: kill(2) on the pid of our own child process.
        unsafe {
            libc::kill(self.pid as libc::pid_t, libc::SIGTERM);
        }
        let until = Instant::now() + Duration::from_secs(2);
        while Instant::now() < until {
            if let Ok(Some(_)) = self.child.try_wait() {
                NEIGHBOUR_PID.store(0, Ordering::SeqCst);
                return;
            }
            std::thread::sleep(Duration::from_millis(20));
        }
        let _ = self.child.kill();
        let _ = self.child.wait();
        NEIGHBOUR_PID.store(0, Ordering::SeqCst);
    }
}

impl Drop for Neighbour {
    fn drop(&mut self) {
        self.stop();
    }
}

/// Sockets held open against the server during a run.
pub struct HeldSockets {
    stalled: Vec<TcpStream>,
    idle: Vec<TcpStream>,
}

/// The start of a request whose body never comes: complete headers
/// announcing a 64-byte JSON body, then its first byte.
fn stalled_request(target: SocketAddr) -> String {
    format!(
        "POST /v1/eta HTTP/1.1\r\nHost: {target}\r\nContent-Type: application/json\r\nContent-Length: 64\r\n\r\n{{"
    )
}

async fn connect(target: SocketAddr) -> Option<TcpStream> {
    tokio::time::timeout(Duration::from_secs(2), TcpStream::connect(target))
        .await
        .ok()?
        .ok()
}

impl HeldSockets {
    /// Opens `stalled` stalled bodies and `idle` idle connections to
    /// `target` (each connect bounded by 2 s; failures are left out and
    /// show in the counts).
    pub async fn open(target: SocketAddr, stalled: usize, idle: usize) -> HeldSockets {
        let head = stalled_request(target);
        let mut held = HeldSockets {
            stalled: Vec::with_capacity(stalled),
            idle: Vec::with_capacity(idle),
        };
        for _ in 0..stalled {
            if let Some(mut s) = connect(target).await {
                let sent =
                    tokio::time::timeout(Duration::from_secs(2), s.write_all(head.as_bytes()))
                        .await;
                if matches!(sent, Ok(Ok(()))) {
                    held.stalled.push(s);
                }
            }
        }
        for _ in 0..idle {
            if let Some(s) = connect(target).await {
                held.idle.push(s);
            }
        }
        held
    }

    /// Connections opened: (stalled, idle).
    pub fn opened(&self) -> (usize, usize) {
        (self.stalled.len(), self.idle.len())
    }

    /// Connections still open now, neither closed by the server nor
    /// answered (an answer, such as a 408, means the server gave up on
    /// it): (stalled, idle).
    pub fn still_open(&self) -> (usize, usize) {
        let open = |v: &[TcpStream]| v.iter().filter(|s| quiet_and_open(s)).count();
        (open(&self.stalled), open(&self.idle))
    }
}

/// Whether nothing has arrived on `s` and its peer has not closed it: a
/// non-blocking peek (recv(2) with `MSG_PEEK | MSG_DONTWAIT`) finds no data
/// and no end of stream.
fn quiet_and_open(s: &TcpStream) -> bool {
    use std::os::fd::AsRawFd;
    let mut buf = [0u8; 16];
    // SAFETY: recv(2) on a socket we own, into a buffer of the given length;
    // MSG_PEEK leaves any data in place.
    let n = unsafe {
        libc::recv(
            s.as_raw_fd(),
            buf.as_mut_ptr().cast(),
            buf.len(),
            libc::MSG_PEEK | libc::MSG_DONTWAIT,
        )
    };
    n < 0 && std::io::Error::last_os_error().kind() == std::io::ErrorKind::WouldBlock
}

/// Open descriptors of a process (`/proc/<pid>/fd`).
pub fn open_fds(pid: u32) -> Option<usize> {
    Some(std::fs::read_dir(format!("/proc/{pid}/fd")).ok()?.count())
}

/// Raises this process's soft `RLIMIT_NOFILE` to its hard limit (held
/// sockets and connection pools need more than the usual 1,024); returns
/// the soft limit in force afterwards.
pub fn raise_nofile() -> Option<u64> {
    let mut lim = libc::rlimit {
        rlim_cur: 0,
        rlim_max: 0,
    };
    // SAFETY: getrlimit/setrlimit read and write the struct we pass.
    unsafe {
        if libc::getrlimit(libc::RLIMIT_NOFILE, &mut lim) != 0 {
            return None;
        }
        if lim.rlim_cur < lim.rlim_max {
            let want = libc::rlimit {
                rlim_cur: lim.rlim_max,
                rlim_max: lim.rlim_max,
            };
            if libc::setrlimit(libc::RLIMIT_NOFILE, &want) == 0 {
                lim.rlim_cur = lim.rlim_max;
            }
        }
    }
    #[allow(clippy::unnecessary_cast)]
    Some(lim.rlim_cur as u64)
}
