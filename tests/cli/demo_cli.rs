//! `hodos demo` as a user runs it: a taken port is refused by name (no
//! silent move to other ports), and each run works in a folder of its own
//! that is gone after it stops, so no run serves what an earlier one was
//! sent. Each test runs the real binary, bounded in time, on loopback.

use std::io::{BufRead, BufReader};
use std::net::TcpListener;
use std::process::{Child, Command, Stdio};
use std::sync::mpsc;
use std::time::{Duration, Instant};

/// Kills the child on drop (a failed assertion must not leave a server).
struct Proc(Child);

impl Drop for Proc {
    fn drop(&mut self) {
        if let Ok(None) = self.0.try_wait() {
            let _ = self.0.kill();
            let _ = self.0.wait();
        }
    }
}

fn demo(args: &[&str]) -> Proc {
    Proc(
        Command::new(env!("CARGO_BIN_EXE_hodos"))
            .arg("demo")
            .args(args)
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .expect("run hodos demo"),
    )
}

/// Waits for the child to exit, at most `limit`.
fn wait_exit(p: &mut Proc, limit: Duration) -> Option<std::process::ExitStatus> {
    let end = Instant::now() + limit;
    while Instant::now() < end {
        if let Some(st) = p.0.try_wait().unwrap() {
            return Some(st);
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    None
}

#[test]
fn a_taken_port_is_refused_by_name() {
    // Hold a port so the demo cannot have it.
    let held = TcpListener::bind("127.0.0.1:0").unwrap();
    let port = held.local_addr().unwrap().port().to_string();
    let mut p = demo(&["--port", &port]);
    let st = wait_exit(&mut p, Duration::from_secs(60))
        .expect("the demo must stop when its port is taken, not move elsewhere");
    assert!(!st.success());
    let mut err = String::new();
    std::io::Read::read_to_string(p.0.stderr.as_mut().unwrap(), &mut err).unwrap();
    assert!(err.contains(&port), "names the port: {err}");
    assert!(err.contains("not free"), "{err}");
    drop(held);
}

#[test]
fn each_run_has_a_fresh_folder_removed_at_exit() {
    let mut seen = Vec::new();
    for _ in 0..2 {
        let mut p = demo(&["--port", "0"]);
        // Read stdout on a thread: the demo prints its folder, then builds
        // the city, then says it is serving.
        let out = p.0.stdout.take().unwrap();
        let (tx, rx) = mpsc::channel();
        std::thread::spawn(move || {
            for l in BufReader::new(out).lines().map_while(Result::ok) {
                if tx.send(l).is_err() {
                    break;
                }
            }
        });
        let end = Instant::now() + Duration::from_secs(240);
        let mut dir = None;
        loop {
            let l = rx
                .recv_timeout(end.saturating_duration_since(Instant::now()))
                .expect("demo started serving in time");
            if let Some(d) = l
                .strip_prefix("demo files in ")
                .and_then(|r| r.strip_suffix(" (removed at exit)"))
            {
                dir = Some(std::path::PathBuf::from(d));
            }
            if l.starts_with("serving ") {
                break;
            }
        }
        let dir = dir.expect("the demo names its folder");
        assert!(dir.join("quellhaven.hodos").exists(), "{}", dir.display());
        assert!(!seen.contains(&dir), "a run reused {}", dir.display());
        // SAFETY: plain kill(2) on the PID of our own child.
        let pid = p.0.id() as libc::pid_t;
        assert_eq!(unsafe { libc::kill(pid, libc::SIGTERM) }, 0);
        let st = wait_exit(&mut p, Duration::from_secs(30)).expect("stops on SIGTERM");
        assert!(st.success(), "{st:?}");
        assert!(!dir.exists(), "{} left behind", dir.display());
        seen.push(dir);
    }
}
