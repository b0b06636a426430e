//! How long the request threads wait for a CPU: the overload signal that
//! sees a backlog the server cannot count.
//!
//! When every core is busy (the server's own work plus whatever else runs
//! on the machine), a request's handler is ready but not running: it waits
//! in the kernel's run queue. Linux records that wait per thread
//! (`/proc/<pid>/task/<tid>/schedstat`, second field, nanoseconds), so the
//! share of time the runtime's threads spent waiting over the last window
//! says how CPU-starved request handling is, whether the waiting requests
//! sit in this server's sockets or in a caller's connection pool. Only
//! the runtime's *worker* threads count: the update threads
//! ([`crate::serving::customizer`]) run at idle priority and are meant to wait, and
//! blocking-pool threads (matrices) wait behind each other within their
//! own bounds (graph permits, budgets) without the workers waiting.
//!
//! The runtime's workers register with [`register_worker`] from its
//! `on_thread_park` hook, which tokio calls on worker threads only (the
//! first park registers; later ones cost a thread-local check), and leave
//! with [`unregister_current_thread`] (`on_thread_stop`); [`WaitMeter`]
//! reads them. Elsewhere than Linux, or with no registered thread, the
//! meter reports nothing and the signal is off.

use std::collections::{HashMap, VecDeque};
use std::sync::Mutex;
use std::time::{Duration, Instant};

/// Thread ids of the request runtime's worker threads.
static THREADS: Mutex<Vec<i32>> = Mutex::new(Vec::new());

fn threads() -> std::sync::MutexGuard<'static, Vec<i32>> {
    THREADS.lock().unwrap_or_else(|p| p.into_inner())
}

thread_local! {
    static REGISTERED: std::cell::Cell<bool> = const { std::cell::Cell::new(false) };
}

/// Registers the calling thread as a request worker, once (a runtime's
/// `on_thread_park`).
pub fn register_worker() {
    if REGISTERED.with(|r| r.replace(true)) {
        return;
    }
    if let Some(tid) = current_tid() {
        threads().push(tid);
    }
}

/// Removes the calling thread (a runtime's `on_thread_stop`).
pub fn unregister_current_thread() {
    if let Some(tid) = current_tid() {
        threads().retain(|&t| t != tid);
    }
}

#[cfg(target_os = "linux")]
fn current_tid() -> Option<i32> {
    // SAFETY: gettid has no preconditions and cannot fail.
    Some(unsafe { libc::gettid() })
}

#[cfg(not(target_os = "linux"))]
fn current_tid() -> Option<i32> {
    None
}

/// Run-queue wait of one thread so far, from its `schedstat` line
/// ("cpu_ns wait_ns timeslices"); `None` if the thread is gone or the
/// kernel does not keep the figure.
pub fn wait_ns(tid: i32) -> Option<u64> {
    let s = std::fs::read_to_string(format!("/proc/self/task/{tid}/schedstat")).ok()?;
    parse_wait(&s)
}

fn parse_wait(schedstat: &str) -> Option<u64> {
    schedstat.split_whitespace().nth(1)?.parse().ok()
}

/// Share of the last window the registered threads spent waiting for a
/// CPU, per worker: 0 when every ready handler runs at once, 1 when each
/// worker's worth of handlers waited the whole window.
#[derive(Debug)]
pub struct WaitMeter {
    window: Duration,
    workers: f64,
    /// Last cumulative wait per thread (threads come and go: only a
    /// thread seen twice contributes, so an exit never counts negative).
    last: HashMap<i32, u64>,
    /// This sample's readings, swapped into `last` (kept to reuse its
    /// allocation).
    seen: HashMap<i32, u64>,
    /// (when, wait added since the previous sample), oldest first.
    steps: VecDeque<(Instant, u64)>,
    tids: Vec<i32>,
}

impl WaitMeter {
    /// A meter over `window`, normalised by `workers` request threads.
    pub fn new(window: Duration, workers: usize) -> Self {
        WaitMeter {
            window,
            workers: workers.max(1) as f64,
            last: HashMap::new(),
            seen: HashMap::new(),
            steps: VecDeque::new(),
            tids: Vec::new(),
        }
    }

    /// Reads the registered threads now; returns the wait share over the
    /// window once a full window has been seen.
    pub fn sample(&mut self) -> Option<f64> {
        self.tids.clear();
        self.tids.extend(threads().iter().copied());
        if self.tids.is_empty() {
            return None;
        }
        let now = Instant::now();
        let mut added = 0u64;
        self.seen.clear();
        for &tid in &self.tids {
            if let Some(w) = wait_ns(tid) {
                if let Some(&prev) = self.last.get(&tid) {
                    added += w.saturating_sub(prev);
                }
                self.seen.insert(tid, w);
            }
        }
        std::mem::swap(&mut self.last, &mut self.seen);
        self.push(now, added)
    }

    /// Adds one step (wait accumulated since the previous sample) and
    /// returns the share over the window, if a full window is held.
    pub fn push(&mut self, now: Instant, added_ns: u64) -> Option<f64> {
        self.steps.push_back((now, added_ns));
        // Keep one step at or before the window's start as its anchor.
        while self.steps.len() > 2 && now.duration_since(self.steps[1].0) >= self.window {
            self.steps.pop_front();
        }
        let (start, _) = *self.steps.front()?;
        let span = now.duration_since(start);
        if span < self.window {
            return None;
        }
        let waited: u64 = self.steps.iter().skip(1).map(|s| s.1).sum();
        Some(waited as f64 / (span.as_nanos() as f64 * self.workers))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_the_wait_field() {
        // Format from the kernel's Documentation/scheduler/sched-stats.rst:
        // time on the CPU, time waiting on a run queue (both ns), timeslices.
        assert_eq!(parse_wait("202471318 14023473 519\n"), Some(14_023_473));
        assert_eq!(parse_wait("1 2"), Some(2));
        assert_eq!(parse_wait("garbage"), None);
        assert_eq!(parse_wait(""), None);
    }

    #[test]
    fn a_worker_registers_once_and_leaves() {
        std::thread::spawn(|| {
            let Some(tid) = current_tid() else { return };
            register_worker();
            register_worker(); // every park calls it
            assert_eq!(threads().iter().filter(|&&t| t == tid).count(), 1);
            unregister_current_thread();
            assert!(!threads().contains(&tid));
        })
        .join()
        .unwrap();
    }

    #[test]
    fn share_over_the_window() {
        let ms = Duration::from_millis;
        let t0 = Instant::now();
        let mut m = WaitMeter::new(ms(100), 2);
        assert_eq!(m.push(t0, 0), None, "no window yet");
        for i in 1..10 {
            assert_eq!(m.push(t0 + ms(10 * i), 10_000_000), None);
        }
        // Ten 10 ms steps, each with 10 ms of waiting, over two workers.
        let s = m.push(t0 + ms(100), 10_000_000).unwrap();
        assert!((s - 0.5).abs() < 1e-9, "{s}");
        // The window slides: ten steps of nothing bring it to 0.
        let mut last = s;
        for i in 11..=20 {
            last = m.push(t0 + ms(10 * i), 0).unwrap();
        }
        assert_eq!(last, 0.0);
    }

    /// The kernel's accounting is real: a registered thread that competes
    /// with more spinning threads than there are CPUs accumulates run-queue
    /// wait (skipped where the kernel keeps no schedstat).
    #[cfg(target_os = "linux")]
    #[test]
    fn a_thread_competing_for_cpus_waits() {
        let Some(tid) = current_tid() else { return };
        if wait_ns(tid).is_none() {
            eprintln!("skipped: no /proc/self/task/<tid>/schedstat");
            return;
        }
        let cpus = std::thread::available_parallelism().map_or(2, |n| n.get());
        let stop = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false));
        let spin = |stop: std::sync::Arc<std::sync::atomic::AtomicBool>| {
            move || {
                let mut x = 0u64;
                while !stop.load(std::sync::atomic::Ordering::Relaxed) {
                    x = std::hint::black_box(x.wrapping_add(1));
                }
                x
            }
        };
        let hogs: Vec<_> = (0..2 * cpus)
            .map(|_| std::thread::spawn(spin(stop.clone())))
            .collect();
        let (waited, me) = std::thread::spawn(move || {
            let me = current_tid().unwrap();
            let before = wait_ns(me).unwrap();
            let t = Instant::now();
            let mut x = 0u64;
            while t.elapsed() < Duration::from_millis(400) {
                x = std::hint::black_box(x.wrapping_add(1));
            }
            (wait_ns(me).unwrap() - before, me)
        })
        .join()
        .unwrap();
        stop.store(true, std::sync::atomic::Ordering::Relaxed);
        for h in hogs {
            h.join().unwrap();
        }
        assert!(me != tid);
        // With 2×CPUs + 1 runnable threads each gets about a third of a
        // CPU; require a tenth of the 400 ms spent waiting, a wide margin.
        assert!(
            waited >= 40_000_000,
            "waited {waited} ns of 400 ms behind {} spinners",
            2 * cpus
        );
    }
}
