//! Admission control for answer requests: how many are in flight, and
//! whether one more may do graph work.
//!
//! A request enters when its headers have been read, before its body is
//! read or parsed, and leaves when its response is built. Above the limit a
//! request is still validated (bad input still gets its 4xx), then answered
//! at once from the heuristic tier with reason `overloaded`: under overload
//! the server spends its CPU on cheap answers instead of a growing queue of
//! graph searches, and no caller is refused.
//!
//! Three signals, any of which sheds:
//!
//! - **Requests in flight** above `query.max_in_flight`. This sees requests
//!   that wait inside the server (for a graph permit, a bucket, a matrix
//!   thread). It does not see a CPU backlog: an ETA runs from entry to
//!   response without yielding, so with every core busy the backlog waits
//!   in sockets and in the runtime's run queue, never in flight.
//! - **Scheduling lag** above `query.max_queue_ms`: a probe task asks to be
//!   woken every millisecond and records how late it actually ran
//!   ([`Admission::run_probe`]). A ready task waits behind every other
//!   ready task, so the probe's lateness is the queueing delay a request
//!   arriving now will see before its handler runs. The signal is the
//!   *smallest* lateness of the last [`PROBE_WINDOW`] wake-ups: a backlog
//!   makes every wake-up late, while a single stall (the hypervisor taking
//!   the CPU away for a few ms, a page fault) makes one late and clears by
//!   itself; shedding for it would only turn graph answers into estimates.
//! - **CPU wait** above `query.max_cpu_wait`: the share of the last 100 ms
//!   the runtime's worker threads spent ready but waiting for a CPU, each
//!   ([`crate::serving::cpu_wait`]). This is the one that sees a backlog held
//!   *outside* the server: when callers (or a load generator on the same
//!   machine) keep every core busy, each connection carries one request at
//!   a time, nothing queues in the runtime, and the lag stays small; yet
//!   the handlers wait for CPU and the callers' own queues grow. Shedding
//!   then makes each answer cheap enough for the machine to keep up.
//!
//! All three are separate from the graph permits in [`crate::serving::answer`], which
//! bound concurrent graph work (matrices hold one across a blocking thread).

use std::sync::atomic::{AtomicU64, AtomicUsize, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

use crate::serving::cpu_wait::WaitMeter;

/// How often the probe asks to be woken.
const PROBE_EVERY: Duration = Duration::from_millis(1);
/// Consecutive wake-ups that must all be late before the lag sheds.
pub const PROBE_WINDOW: usize = 8;
/// Window of the CPU-wait signal, and how often (in probe ticks) it is read.
const WAIT_WINDOW: Duration = Duration::from_millis(100);
const WAIT_EVERY_TICKS: u32 = 10;

/// Counts answer requests in flight against a limit, and holds the latest
/// scheduling lag against another.
#[derive(Debug)]
pub struct Admission {
    in_flight: AtomicUsize,
    limit: usize,
    /// Latest probe lateness, µs (0 until a probe runs).
    lag_us: AtomicU64,
    max_lag_us: u64,
    /// Latest CPU-wait share, per mille (0 until measured).
    cpu_wait_milli: AtomicU64,
    max_cpu_wait_milli: u64,
    /// Requests shed so far (any signal).
    shed: AtomicU64,
}

/// One request's place; leaving is its drop.
#[derive(Debug)]
pub struct Ticket {
    admission: Arc<Admission>,
    admitted: bool,
}

impl Admission {
    /// `limit` requests in flight; `max_lag` of scheduling lag (zero: the
    /// lag is not a signal); `max_cpu_wait` share of time waiting for a CPU
    /// per worker (zero or less: not a signal).
    pub fn new(limit: usize, max_lag: Duration, max_cpu_wait: f64) -> Arc<Admission> {
        Arc::new(Admission {
            in_flight: AtomicUsize::new(0),
            limit,
            lag_us: AtomicU64::new(0),
            max_lag_us: if max_lag.is_zero() {
                u64::MAX
            } else {
                max_lag.as_micros() as u64
            },
            cpu_wait_milli: AtomicU64::new(0),
            max_cpu_wait_milli: if max_cpu_wait > 0.0 {
                (max_cpu_wait * 1000.0).round() as u64
            } else {
                u64::MAX
            },
            shed: AtomicU64::new(0),
        })
    }

    /// Enters one request; it may do graph work if at most `limit`
    /// requests (itself included) are in flight and the latest scheduling
    /// lag and CPU wait are within bounds.
    pub fn enter(self: &Arc<Self>) -> Ticket {
        let n = self.in_flight.fetch_add(1, Ordering::AcqRel) + 1;
        let admitted = n <= self.limit
            && self.lag_us.load(Ordering::Relaxed) <= self.max_lag_us
            && self.cpu_wait_milli.load(Ordering::Relaxed) <= self.max_cpu_wait_milli;
        if !admitted {
            self.shed.fetch_add(1, Ordering::Relaxed);
        }
        Ticket {
            admission: self.clone(),
            admitted,
        }
    }

    /// Latest scheduling lag seen by the probe.
    pub fn lag(&self) -> Duration {
        Duration::from_micros(self.lag_us.load(Ordering::Relaxed))
    }

    /// Requests shed since start.
    pub fn shed_total(&self) -> u64 {
        self.shed.load(Ordering::Relaxed)
    }

    /// Latest CPU-wait share per worker (see [`crate::serving::cpu_wait`]).
    pub fn cpu_wait(&self) -> f64 {
        self.cpu_wait_milli.load(Ordering::Relaxed) as f64 / 1000.0
    }

    /// Records one CPU-wait measurement (the probe's, or a test's).
    pub fn record_cpu_wait(&self, share: f64) {
        let milli = (share.max(0.0) * 1000.0).round() as u64;
        self.cpu_wait_milli.store(milli, Ordering::Relaxed);
    }

    /// Records one lateness measurement (the probe's, or a test's).
    pub fn record_lag(&self, lag: Duration) {
        self.lag_us.store(lag.as_micros() as u64, Ordering::Relaxed);
    }

    /// Measures scheduling lag on the current runtime until `shutdown`
    /// resolves: sleeps one tick at a time and records how late it woke;
    /// every tenth tick also reads the CPU wait of the runtime's threads.
    pub async fn run_probe(self: Arc<Self>, shutdown: impl std::future::Future<Output = ()>) {
        tokio::pin!(shutdown);
        let mut window = LagWindow::default();
        let workers = tokio::runtime::Handle::current().metrics().num_workers();
        let mut meter = WaitMeter::new(WAIT_WINDOW, workers);
        let mut tick = 0u32;
        loop {
            tick = tick.wrapping_add(1);
            if tick % WAIT_EVERY_TICKS == 0 {
                if let Some(share) = meter.sample() {
                    self.record_cpu_wait(share);
                }
            }
            let due = Instant::now() + PROBE_EVERY;
            tokio::select! {
                _ = &mut shutdown => break,
                _ = tokio::time::sleep_until(due.into()) => {}
            }
            // The timer wheel has a 1 ms grain: up to a tick late is normal.
            let late = Instant::now().saturating_duration_since(due);
            self.record_lag(window.push(late.saturating_sub(PROBE_EVERY)));
        }
        self.record_lag(Duration::ZERO);
        self.record_cpu_wait(0.0);
    }

    /// Requests in flight now.
    pub fn in_flight(&self) -> usize {
        self.in_flight.load(Ordering::Acquire)
    }
}

/// The last [`PROBE_WINDOW`] lateness readings; the signal is their minimum.
#[derive(Debug, Default)]
pub struct LagWindow {
    last: [Duration; PROBE_WINDOW],
    next: usize,
}

impl LagWindow {
    /// Adds a reading and returns the minimum of the window.
    pub fn push(&mut self, lag: Duration) -> Duration {
        self.last[self.next] = lag;
        self.next = (self.next + 1) % PROBE_WINDOW;
        self.last.iter().copied().min().unwrap_or_default()
    }
}

impl Ticket {
    pub fn admitted(&self) -> bool {
        self.admitted
    }
}

impl Drop for Ticket {
    fn drop(&mut self) {
        self.admission.in_flight.fetch_sub(1, Ordering::AcqRel);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn admits_up_to_the_limit_and_frees_on_drop() {
        let a = Admission::new(2, Duration::from_millis(5), 0.4);
        let t1 = a.enter();
        let t2 = a.enter();
        let t3 = a.enter();
        assert!(t1.admitted() && t2.admitted());
        assert!(
            !t3.admitted(),
            "the third of three over a limit of 2 is shed"
        );
        assert_eq!(a.in_flight(), 3);
        drop(t1);
        drop(t3);
        let t4 = a.enter();
        assert!(t4.admitted());
        drop((t2, t4));
        assert_eq!(a.in_flight(), 0);
        let none = Admission::new(0, Duration::from_millis(5), 0.4);
        assert!(!none.enter().admitted(), "limit 0 sheds everything");
    }

    #[test]
    fn sheds_while_the_lag_is_over_the_bound() {
        let a = Admission::new(100, Duration::from_millis(5), 0.4);
        a.record_lag(Duration::from_millis(5));
        assert!(a.enter().admitted(), "at the bound: admitted");
        a.record_lag(Duration::from_millis(6));
        assert!(!a.enter().admitted());
        a.record_lag(Duration::from_millis(1));
        assert!(a.enter().admitted());
        assert_eq!(a.shed_total(), 1);
        // CPU wait: over the bound sheds, at or under admits.
        let w = Admission::new(100, Duration::from_millis(5), 0.5);
        w.record_cpu_wait(0.5);
        assert!(w.enter().admitted(), "at the bound: admitted");
        w.record_cpu_wait(0.51);
        assert!(!w.enter().admitted());
        assert!((w.cpu_wait() - 0.51).abs() < 1e-9);
        w.record_cpu_wait(0.1);
        assert!(w.enter().admitted());
        let off = Admission::new(100, Duration::ZERO, 0.0);
        off.record_cpu_wait(5.0);
        off.record_lag(Duration::from_secs(1));
        assert!(
            off.enter().admitted(),
            "max_queue_ms = 0 and max_cpu_wait = 0 disable their signals"
        );
    }

    #[test]
    fn one_late_wake_up_is_not_a_backlog() {
        let mut w = LagWindow::default();
        let ms = Duration::from_millis;
        for _ in 0..PROBE_WINDOW {
            w.push(ms(0));
        }
        assert_eq!(w.push(ms(40)), ms(0), "a single stall does not shed");
        for _ in 0..PROBE_WINDOW - 2 {
            assert_eq!(w.push(ms(9)), ms(0));
        }
        assert_eq!(w.push(ms(7)), ms(7), "a full window of late wake-ups does");
        assert_eq!(w.push(ms(0)), ms(0));
    }

    /// A runtime whose only worker is kept busy for 60 ms by tasks that
    /// each hold it 3 ms: the probe, due every millisecond, must see a
    /// backlog (every wake-up late) once the window fills.
    #[test]
    fn probe_sees_a_busy_worker() {
        let rt = tokio::runtime::Builder::new_current_thread()
            .enable_time()
            .build()
            .unwrap();
        let a = Admission::new(100, Duration::from_millis(5), 0.4);
        let (tx, rx) = tokio::sync::oneshot::channel::<()>();
        let seen = rt.block_on(async {
            let probe = tokio::spawn(a.clone().run_probe(async {
                let _ = rx.await;
            }));
            tokio::time::sleep(Duration::from_millis(5)).await;
            // Keep the only worker busy in 3 ms slices: the probe gets a
            // turn between slices, always late.
            let mut seen = Duration::ZERO;
            for _ in 0..20 {
                std::thread::sleep(Duration::from_millis(3));
                tokio::task::yield_now().await;
                seen = seen.max(a.lag());
            }
            let _ = tx.send(());
            let _ = probe.await;
            seen
        });
        assert!(
            seen >= Duration::from_millis(1),
            "probe recorded {seen:?} while every turn came 3 ms late"
        );
        assert_eq!(a.lag(), Duration::ZERO, "reset when the probe stops");
    }
}
