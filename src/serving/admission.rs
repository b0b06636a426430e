//! Admission control for answer requests: whether one may do graph work
//! and get its answer within its own budget.
//!
//! The rule is **admission by deadline**: a request is answered from the
//! heuristic tier with reason `overloaded` only when it would not get its
//! graph answer within its budget (`budget_ms`, default
//! `query.default_budget_ms`). CPU time other processes take is no signal
//! of its own (the CPU-wait signal is gone): it matters only through the
//! queueing it adds to requests, and only once that breaks a budget. A
//! request that gets its graph answer in time is never shed.
//!
//! - A request enters when its body has been read (the HTTP layer enters it
//!   after the body, so a caller that stalls mid-body holds no place), and
//!   leaves when its response is built. `query.max_in_flight` is only a
//!   hard cap on requests past that point (memory, not latency).
//! - Graph work needs one of `query.graph_concurrency` permits. A free
//!   permit is taken at once. When none is free, the request estimates its
//!   wait as a first-come-first-served queue with `c` servers would:
//!   `(ahead / c + 1) × S`, where `ahead` is the number of requests already
//!   waiting and `S` the smoothed time a permit is held (Little's law,
//!   J. D. C. Little, "A proof for the queuing formula L = λW", Operations
//!   Research 9(3), 1961: a queue of `ahead` drains at `c / S` per second).
//!   If that wait plus its own service `S` runs past its deadline, it is
//!   shed at once; otherwise it waits for a permit until `deadline − S`
//!   and is shed if none came by then. The idea of judging a queue by the
//!   time a request spends in it against a target, rather than by its
//!   length, is CoDel's (K. Nichols and V. Jacobson, "Controlling Queue
//!   Delay", ACM Queue 10(5), 2012); here the target is each request's own
//!   budget.
//! - Time spent before the handler runs counts against the budget too: a
//!   CPU backlog waits in the runtime's run queue, not for a permit (an
//!   ETA holds its permit without yielding). A probe task asks to be woken
//!   every millisecond and records how late it ran ([`Admission::run_probe`]);
//!   the smallest lateness of the last [`PROBE_WINDOW`] wake-ups (a single
//!   stall is no backlog) is the queueing a request saw before its handler,
//!   and is taken off its deadline. So under a CPU backlog a request is
//!   shed once that queueing alone exceeds its budget (it is late already,
//!   and a cheap answer drains the backlog), never before. A free permit
//!   with no such backlog is always taken: no wait, the graph answer comes
//!   as soon as it can.
//! - `S` is smoothed like a TCP round-trip time (RFC 6298, section 2:
//!   gains 1/8 for the mean and 1/4 for the mean deviation); the estimate
//!   used is `mean + deviation`, so a burst of slow graph work (a large
//!   matrix holding a permit) makes the queue look slower at once.
//!
//! So every request is answered, and its wait inside the server is bounded
//! by its budget (plus the cost of a heuristic answer); time spent in the
//! listen backlog before the server reads it is not seen. A shed request is
//! still validated (bad input keeps its 4xx) and gets an estimate marked
//! `overloaded`.

use std::sync::atomic::{AtomicU64, AtomicUsize, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};
use tokio::sync::{OwnedSemaphorePermit, Semaphore};

/// Counts answer requests in flight against a hard cap, and estimates how
/// long a request waiting for a graph permit would wait.
#[derive(Debug)]
pub struct Admission {
    in_flight: AtomicUsize,
    /// Hard cap on requests in flight (after their body is read).
    limit: usize,
    /// Requests waiting for a graph permit now: the queue ahead of the
    /// next one.
    waiting: AtomicUsize,
    /// Smoothed permit hold time, ns (RFC 6298 SRTT); 0 before any sample.
    srtt_ns: AtomicU64,
    /// Smoothed mean deviation of the hold time, ns (RFC 6298 RTTVAR).
    rttvar_ns: AtomicU64,
    /// Latest run-queue lateness from the probe, µs (0 until it runs).
    lag_us: AtomicU64,
    /// Requests shed so far (any cause).
    shed: AtomicU64,
}

/// How often the probe asks to be woken.
const PROBE_EVERY: Duration = Duration::from_millis(1);
/// Consecutive wake-ups that must all be late before the lag counts.
pub const PROBE_WINDOW: usize = 8;

/// One request's place; leaving is its drop.
#[derive(Debug)]
pub struct Ticket {
    admission: Arc<Admission>,
    admitted: bool,
}

/// How an answer entered the service: counted in flight by its caller's
/// [`Ticket`] (the HTTP answer routes take one once the body is read), or
/// uncounted (a batch replay of recorded trips, tests), which only the
/// deadline rule of [`Admission::permit`] applies to.
#[derive(Debug, Clone, Copy)]
pub enum Admit<'a> {
    Counted(&'a Ticket),
    Uncounted,
}

/// A graph permit that records how long it was held when dropped (the
/// service time of the queue estimate).
#[derive(Debug)]
pub struct GraphPermit {
    _permit: OwnedSemaphorePermit,
    admission: Arc<Admission>,
    since: Instant,
}

/// Decrements the waiting count when a request stops waiting.
struct Waiting<'a>(&'a AtomicUsize);

impl Drop for Waiting<'_> {
    fn drop(&mut self) {
        self.0.fetch_sub(1, Ordering::AcqRel);
    }
}

impl Admission {
    /// At most `limit` requests in flight (a hard cap, not a load signal).
    pub fn new(limit: usize) -> Arc<Admission> {
        Arc::new(Admission {
            in_flight: AtomicUsize::new(0),
            limit,
            waiting: AtomicUsize::new(0),
            srtt_ns: AtomicU64::new(0),
            rttvar_ns: AtomicU64::new(0),
            lag_us: AtomicU64::new(0),
            shed: AtomicU64::new(0),
        })
    }

    /// Enters one request whose body has been read; it may go on to the
    /// graph permit if at most `limit` requests (itself included) are in
    /// flight.
    pub fn enter(self: &Arc<Self>) -> Ticket {
        let n = self.in_flight.fetch_add(1, Ordering::AcqRel) + 1;
        let admitted = n <= self.limit;
        if !admitted {
            self.shed.fetch_add(1, Ordering::Relaxed);
        }
        Ticket {
            admission: self.clone(),
            admitted,
        }
    }

    /// The one admission decision of an answer: `None` (shed, answered
    /// `overloaded` from the heuristic tier) if its ticket was over the
    /// hard cap on requests in flight, else [`Self::permit`]'s.
    pub async fn admit(
        self: &Arc<Self>,
        admit: Admit<'_>,
        permits: &Arc<Semaphore>,
        total: usize,
        deadline: Instant,
    ) -> Option<GraphPermit> {
        if let Admit::Counted(t) = admit {
            if !t.admitted {
                return None;
            }
        }
        self.permit(permits, total, deadline).await
    }

    /// A graph permit from `permits` (of `total` in all) in time for
    /// `deadline`, or `None`: the request would miss its budget and is
    /// shed. A request whose run-queue lag alone (nonzero) runs past its
    /// deadline is shed; else it takes a free permit at once (no wait: the
    /// graph answer can come no sooner); else, with the deadline moved
    /// earlier by the lag, it is shed at once when the estimated wait plus
    /// service runs past it, else waits for a permit until the deadline
    /// less one service time.
    pub async fn permit(
        self: &Arc<Self>,
        permits: &Arc<Semaphore>,
        total: usize,
        deadline: Instant,
    ) -> Option<GraphPermit> {
        let wrap = |p| GraphPermit {
            _permit: p,
            admission: self.clone(),
            since: Instant::now(),
        };
        let (lag, service, now) = (self.lag(), self.service(), Instant::now());
        if !lag.is_zero() && now + lag > deadline {
            // Already late by its run-queue wait: a backlog to drain.
            self.shed.fetch_add(1, Ordering::Relaxed);
            return None;
        }
        if let Ok(p) = permits.clone().try_acquire_owned() {
            // No wait: the graph answer can come no sooner than this.
            return Some(wrap(p));
        }
        let latest = deadline.checked_sub(lag + service).unwrap_or(now);
        let ahead = self.waiting.fetch_add(1, Ordering::AcqRel);
        let _waiting = Waiting(&self.waiting);
        if total == 0 || now + expected_wait(ahead, total, service) > latest {
            self.shed.fetch_add(1, Ordering::Relaxed);
            return None;
        }
        match tokio::time::timeout_at(latest.into(), permits.clone().acquire_owned()).await {
            Ok(Ok(p)) => Some(wrap(p)),
            _ => {
                self.shed.fetch_add(1, Ordering::Relaxed);
                None
            }
        }
    }

    /// Smoothed service time: mean plus mean deviation of the permit hold
    /// time (zero before the first sample).
    pub fn service(&self) -> Duration {
        Duration::from_nanos(
            self.srtt_ns
                .load(Ordering::Relaxed)
                .saturating_add(self.rttvar_ns.load(Ordering::Relaxed)),
        )
    }

    /// Folds one permit hold time into the estimate (RFC 6298 section 2.3:
    /// RTTVAR ← ¾ RTTVAR + ¼ |SRTT − R'|, SRTT ← ⅞ SRTT + ⅛ R'; the first
    /// sample sets SRTT = R', RTTVAR = R'/2). Two concurrent updates may
    /// lose one sample; the estimate stays a smoothed mean.
    pub fn record_service(&self, took: Duration) {
        let r = took.as_nanos().min(u128::from(u64::MAX)) as u64;
        let srtt = self.srtt_ns.load(Ordering::Relaxed);
        if srtt == 0 {
            self.srtt_ns.store(r.max(1), Ordering::Relaxed);
            self.rttvar_ns.store(r / 2, Ordering::Relaxed);
            return;
        }
        let var = self.rttvar_ns.load(Ordering::Relaxed);
        let var = var - var / 4 + srtt.abs_diff(r) / 4;
        let srtt = srtt - srtt / 8 + r / 8;
        self.rttvar_ns.store(var, Ordering::Relaxed);
        self.srtt_ns.store(srtt.max(1), Ordering::Relaxed);
    }

    /// Latest run-queue lag seen by the probe.
    pub fn lag(&self) -> Duration {
        Duration::from_micros(self.lag_us.load(Ordering::Relaxed))
    }

    /// Records one lag measurement (the probe's, or a test's).
    pub fn record_lag(&self, lag: Duration) {
        self.lag_us.store(lag.as_micros() as u64, Ordering::Relaxed);
    }

    /// Measures run-queue lag on the current runtime until `shutdown`
    /// resolves: sleeps one tick at a time and records how late it woke
    /// (the smallest lateness of the last [`PROBE_WINDOW`] wake-ups).
    pub async fn run_probe(self: Arc<Self>, shutdown: impl std::future::Future<Output = ()>) {
        tokio::pin!(shutdown);
        let mut window = LagWindow::default();
        loop {
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
    }

    /// Requests shed since start.
    pub fn shed_total(&self) -> u64 {
        self.shed.load(Ordering::Relaxed)
    }

    /// Requests in flight now.
    pub fn in_flight(&self) -> usize {
        self.in_flight.load(Ordering::Acquire)
    }

    /// Requests waiting for a graph permit now.
    pub fn waiting(&self) -> usize {
        self.waiting.load(Ordering::Acquire)
    }
}

/// Expected wait for a permit with `ahead` requests queued before this one
/// and `servers` permits each held `service` on average: the queue drains
/// `servers` at a time, and the permits in use now free within one service
/// time (Little's law; see the module docs).
pub fn expected_wait(ahead: usize, servers: usize, service: Duration) -> Duration {
    let rounds = (ahead / servers.max(1) + 1) as u32;
    service.saturating_mul(rounds)
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

impl Drop for GraphPermit {
    fn drop(&mut self) {
        self.admission.record_service(self.since.elapsed());
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn caps_in_flight_and_frees_on_drop() {
        let a = Admission::new(2);
        let t1 = a.enter();
        let t2 = a.enter();
        let t3 = a.enter();
        assert!(t1.admitted() && t2.admitted());
        assert!(!t3.admitted(), "the third of three over a cap of 2");
        assert_eq!(a.in_flight(), 3);
        drop(t1);
        drop(t3);
        let t4 = a.enter();
        assert!(t4.admitted());
        drop((t2, t4));
        assert_eq!(a.in_flight(), 0);
        assert!(!Admission::new(0).enter().admitted(), "cap 0 sheds all");
    }

    /// RFC 6298 section 2 by hand: first sample R = 8 ms gives SRTT 8,
    /// RTTVAR 4; a second of 16 ms gives RTTVAR = ¾·4 + ¼·|8 − 16| = 5 and
    /// SRTT = ⅞·8 + ⅛·16 = 9.
    #[test]
    fn service_time_is_smoothed_as_rfc_6298() {
        let a = Admission::new(10);
        assert_eq!(a.service(), Duration::ZERO);
        a.record_service(Duration::from_millis(8));
        assert_eq!(a.service(), Duration::from_millis(8 + 4));
        a.record_service(Duration::from_millis(16));
        assert_eq!(a.service(), Duration::from_millis(9 + 5));
    }

    /// A FIFO queue with c servers: with `ahead` waiting, this request is
    /// served in round ⌊ahead / c⌋ + 1 (hand count).
    #[test]
    fn expected_wait_counts_rounds_of_servers() {
        let s = Duration::from_millis(3);
        assert_eq!(expected_wait(0, 8, s), s);
        assert_eq!(expected_wait(7, 8, s), s);
        assert_eq!(expected_wait(8, 8, s), s * 2);
        assert_eq!(expected_wait(17, 8, s), s * 3);
        assert_eq!(expected_wait(3, 0, s), s * 4, "no servers: one each");
    }

    fn rt() -> tokio::runtime::Runtime {
        tokio::runtime::Builder::new_current_thread()
            .enable_time()
            .build()
            .unwrap()
    }

    #[test]
    fn free_permit_at_once_and_held_time_is_measured() {
        let a = Admission::new(10);
        let sem = Arc::new(Semaphore::new(1));
        rt().block_on(async {
            let far = Instant::now() + Duration::from_secs(5);
            let p = a.permit(&sem, 1, far).await.expect("a free permit");
            tokio::time::sleep(Duration::from_millis(20)).await;
            drop(p);
        });
        let s = a.service();
        // First sample R ≥ 20 ms: SRTT + RTTVAR = 1.5 R.
        assert!(s >= Duration::from_millis(30), "{s:?}");
        assert_eq!(a.shed_total(), 0);
    }

    /// All permits busy: a request whose budget covers the wait gets the
    /// permit when it frees; one whose budget cannot cover one service
    /// time is shed at once; one that waits in vain is shed at
    /// `deadline − S`, never later than its deadline.
    #[test]
    fn waits_within_the_budget_and_sheds_past_it() {
        let a = Admission::new(10);
        let sem = Arc::new(Semaphore::new(1));
        a.record_service(Duration::from_millis(10)); // S = 15 ms
        rt().block_on(async {
            let held = sem.clone().try_acquire_owned().unwrap();
            let release = tokio::spawn(async move {
                tokio::time::sleep(Duration::from_millis(30)).await;
                drop(held);
            });
            let t0 = Instant::now();
            let p = a.permit(&sem, 1, t0 + Duration::from_secs(2)).await;
            assert!(p.is_some(), "waits for the permit inside its budget");
            assert!(t0.elapsed() >= Duration::from_millis(25));
            release.await.unwrap();

            // Held elsewhere; budget 10 ms < S: shed without waiting.
            let _p = p;
            let t0 = Instant::now();
            let q = a.permit(&sem, 1, t0 + Duration::from_millis(10)).await;
            assert!(q.is_none());
            assert!(t0.elapsed() < Duration::from_millis(5), "at once");

            // Budget 60 ms, permit never frees: shed by the deadline.
            let s = a.service();
            let t0 = Instant::now();
            let deadline = t0 + Duration::from_millis(60) + s;
            let q = a.permit(&sem, 1, deadline).await;
            assert!(q.is_none());
            let now = Instant::now();
            assert!(now >= deadline - s - Duration::from_millis(2));
            assert!(now <= deadline + Duration::from_millis(50), "bounded");
        });
        assert_eq!(a.shed_total(), 2);
        assert_eq!(a.waiting(), 0);
    }

    /// Run-queue lag already spent counts against the budget: with a free
    /// permit and a 100 ms budget, a lag of 90 ms still admits, one of
    /// 120 ms sheds at once; with the permit busy and S = 15 ms, a lag of
    /// 90 ms sheds at once (90 + 15 + 15 > 100).
    #[test]
    fn lag_is_taken_off_the_deadline() {
        let a = Admission::new(10);
        let sem = Arc::new(Semaphore::new(1));
        a.record_service(Duration::from_millis(10)); // S = 15 ms
        let rt = rt();
        let ms = Duration::from_millis;
        a.record_lag(ms(90));
        let p = rt.block_on(a.permit(&sem, 1, Instant::now() + ms(100)));
        assert!(p.is_some());
        let t0 = Instant::now();
        assert!(rt.block_on(a.permit(&sem, 1, t0 + ms(100))).is_none());
        assert!(t0.elapsed() < ms(50), "shed at once, no wait");
        drop(p);
        a.record_lag(ms(120));
        assert!(rt
            .block_on(a.permit(&sem, 1, Instant::now() + ms(100)))
            .is_none());
    }

    #[test]
    fn one_late_wake_up_is_not_a_backlog() {
        let mut w = LagWindow::default();
        let ms = Duration::from_millis;
        for _ in 0..PROBE_WINDOW {
            w.push(ms(0));
        }
        assert_eq!(w.push(ms(40)), ms(0), "a single stall does not count");
        for _ in 0..PROBE_WINDOW - 2 {
            assert_eq!(w.push(ms(9)), ms(0));
        }
        assert_eq!(w.push(ms(7)), ms(7), "a full window of late wake-ups does");
        assert_eq!(w.push(ms(0)), ms(0));
    }

    /// A runtime whose only worker is kept busy in 3 ms slices: the probe,
    /// due every millisecond, sees every wake-up late once the window
    /// fills, and resets when it stops.
    #[test]
    fn probe_sees_a_busy_worker() {
        let a = Admission::new(10);
        let (tx, rx) = tokio::sync::oneshot::channel::<()>();
        let seen = rt().block_on(async {
            let probe = tokio::spawn(a.clone().run_probe(async {
                let _ = rx.await;
            }));
            tokio::time::sleep(Duration::from_millis(5)).await;
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
        assert!(seen >= Duration::from_millis(1), "probe recorded {seen:?}");
        assert_eq!(a.lag(), Duration::ZERO, "reset when the probe stops");
    }

    /// No permits at all (`graph_concurrency = 0`): every request is shed.
    #[test]
    fn no_permits_sheds_everything() {
        let a = Admission::new(10);
        let sem = Arc::new(Semaphore::new(0));
        let far = Instant::now() + Duration::from_secs(5);
        assert!(rt().block_on(a.permit(&sem, 0, far)).is_none());
    }
}
