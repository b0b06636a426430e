//! The open-loop engine: requests at a constant arrival rate over a bounded
//! pool of keep-alive HTTP/1.1 connections.
//!
//! A pacer thread releases ticket `i` at `start + i / rate`, whatever the
//! server is doing; it never waits for an answer. Connection tasks take
//! tickets from one queue, one request at a time per connection. A ticket
//! that finds every connection busy waits in the queue, and that wait counts:
//! each latency is measured from the ticket's *scheduled* time, not from when
//! the request actually left. Measuring from the actual send would let a
//! stalled server slow the generator down and hide exactly the slow answers
//! a caller sees ("coordinated omission": Gil Tene, "How NOT to Measure
//! Latency", 2015).
//!
//! Every run is bounded twice: at most `max_requests` tickets, and none
//! scheduled after `duration`. Whatever is still unanswered `drain` after the
//! last scheduled time is given up (tickets never sent count as `unsent`,
//! requests in flight as `timeout`), so a run always ends by itself.

use crate::model::{Outcome, Plan, Tally};
use crate::workload::{Kind, Workload};
use bytes::Bytes;
use hdrhistogram::Histogram;
use http_body_util::{BodyExt, Full};
use hyper::client::conn::http1::SendRequest;
use hyper_util::rt::TokioIo;
use std::net::SocketAddr;
use std::sync::Arc;
use std::time::{Duration, Instant};

/// A scheduled arrival.
#[derive(Debug, Clone, Copy)]
struct Ticket {
    seq: u64,
    at: Instant,
}

type Sender = SendRequest<Full<Bytes>>;

async fn connect(target: SocketAddr) -> Result<Sender, String> {
    let stream = tokio::time::timeout(
        Duration::from_secs(2),
        tokio::net::TcpStream::connect(target),
    )
    .await
    .map_err(|_| "connect timed out".to_string())?
    .map_err(|e| e.to_string())?;
    let _ = stream.set_nodelay(true);
    let (sender, conn) = hyper::client::conn::http1::handshake(TokioIo::new(stream))
        .await
        .map_err(|e| e.to_string())?;
    tokio::spawn(async move {
        let _ = conn.await;
    });
    Ok(sender)
}

/// A usable connection: the held one if it is still open, else a new one.
async fn ensure(
    conn: &mut Option<Sender>,
    target: SocketAddr,
    reconnects: &mut u64,
) -> Result<(), String> {
    if let Some(s) = conn.as_mut() {
        if !s.is_closed() && s.ready().await.is_ok() {
            return Ok(());
        }
    }
    *conn = None;
    *reconnects += 1;
    *conn = Some(connect(target).await?);
    Ok(())
}

async fn exchange(
    sender: &mut Sender,
    req: hyper::Request<Full<Bytes>>,
) -> Result<(u16, Bytes), hyper::Error> {
    let resp = sender.send_request(req).await?;
    let status = resp.status().as_u16();
    let body = resp.into_body().collect().await?.to_bytes();
    Ok((status, body))
}

fn request(kind: Kind, host: &str, body: Bytes) -> hyper::Request<Full<Bytes>> {
    hyper::Request::post(kind.path())
        .header(hyper::header::HOST, host)
        .header(hyper::header::CONTENT_TYPE, "application/json")
        .body(Full::new(body))
        .expect("static request parts are valid")
}

#[allow(clippy::too_many_arguments)]
async fn connection_task(
    mut conn: Option<Sender>,
    target: SocketAddr,
    host: Arc<str>,
    workload: Workload,
    rx: async_channel::Receiver<Ticket>,
    start: Instant,
    hard_end: Instant,
    timeout: Duration,
) -> Tally {
    let mut t = Tally::new(workload.kind);
    let bodies = workload.bodies.clone();
    while let Ok(ticket) = rx.recv().await {
        let now = Instant::now();
        t.record_wait(now.saturating_duration_since(ticket.at));
        if now >= hard_end {
            t.error("unsent");
            continue;
        }
        if let Err(_e) = ensure(&mut conn, target, &mut t.reconnects).await {
            t.error("connect");
            continue;
        }
        let body = bodies[(ticket.seq % bodies.len() as u64) as usize].clone();
        let req = request(workload.kind, &host, body);
        let left = hard_end
            .saturating_duration_since(Instant::now())
            .max(Duration::from_millis(1));
        let result = {
            let s = conn.as_mut().expect("ensured above");
            tokio::time::timeout(timeout.min(left), exchange(s, req)).await
        };
        match result {
            Err(_) => {
                // The answer may still arrive on this connection; a fresh
                // one keeps it from being read as the next request's.
                t.error("timeout");
                conn = None;
            }
            Ok(Err(_)) => {
                t.error("io");
                conn = None;
            }
            Ok(Ok((status, body))) => {
                let done = Instant::now();
                if status != 200 {
                    t.error(&format!("http_{status}"));
                } else if t.answer(&body).is_ok() {
                    t.ok_at(
                        ticket.at.saturating_duration_since(start),
                        done.saturating_duration_since(ticket.at),
                    );
                    t.last_done = Some(t.last_done.map(|d: Instant| d.max(done)).unwrap_or(done));
                } else {
                    t.error("bad_body");
                }
            }
        }
    }
    t
}

/// Releases tickets on time; returns how late each one went (µs) and how
/// many were released.
fn pace(
    tx: async_channel::Sender<Ticket>,
    start: Instant,
    rate: f64,
    count: u64,
    end: Instant,
    realtime: bool,
) -> (Histogram<u64>, u64) {
    // A 1 µs timer slack instead of Linux's default 50 µs lets short sleeps
    // end on time (prctl(2), PR_SET_TIMERSLACK; this thread only).
    // SAFETY: prctl with PR_SET_TIMERSLACK takes a plain integer argument
    // and changes only the calling thread's timer slack.
    unsafe {
        libc::prctl(libc::PR_SET_TIMERSLACK, 1 as libc::c_ulong, 0, 0, 0);
    }
    if realtime {
        // On two cores the server's and the generator's threads keep both
        // busy; a normal-priority pacer then waits milliseconds for a CPU
        // and every request starts late. The lowest real-time priority lets
        // it run the moment its sleep ends. It sleeps between tickets and
        // does ~100 ns of work per ticket, so it takes almost no CPU (and
        // the kernel's real-time throttling bounds it in any case).
        let param = libc::sched_param { sched_priority: 1 };
        // SAFETY: sched_setscheduler(2) on the calling thread (pid 0) with
        // a valid parameter struct; failure (no permission) is harmless.
        unsafe {
            libc::sched_setscheduler(0, libc::SCHED_FIFO, &param);
        }
    }
    let mut late = Histogram::<u64>::new_with_bounds(1, 600_000_000, 3).expect("static bounds");
    let mut released = 0;
    for i in 0..count {
        let at = start + Duration::from_secs_f64(i as f64 / rate);
        if at >= end {
            break;
        }
        let now = Instant::now();
        if at > now {
            std::thread::sleep(at - now);
        }
        let l = Instant::now().saturating_duration_since(at).as_micros() as u64;
        late.saturating_record(l.max(1));
        if tx.send_blocking(Ticket { seq: i, at }).is_err() {
            break;
        }
        released += 1;
    }
    (late, released)
}

/// Runs one plan to completion (bounded by count, duration and drain).
pub async fn run(plan: &Plan) -> Outcome {
    let count = plan
        .max_requests
        .min((plan.rate * plan.duration.as_secs_f64()).floor() as u64)
        .max(1);
    let host: Arc<str> = Arc::from(plan.target.to_string());
    // Open the pool before the clock starts, so the first tickets do not pay
    // for connection set-up.
    let mut pool = Vec::with_capacity(plan.connections);
    let mut set = tokio::task::JoinSet::new();
    for _ in 0..plan.connections {
        let target = plan.target;
        set.spawn(async move { connect(target).await.ok() });
    }
    while let Some(c) = set.join_next().await {
        pool.push(c.ok().flatten());
    }
    let (tx, rx) = async_channel::unbounded::<Ticket>();
    let start = Instant::now() + Duration::from_millis(5);
    let end = start + plan.duration;
    let hard_end = end + plan.drain;
    let mut tasks = Vec::with_capacity(pool.len());
    for conn in pool {
        tasks.push(tokio::spawn(connection_task(
            conn,
            plan.target,
            host.clone(),
            plan.workload.clone(),
            rx.clone(),
            start,
            hard_end,
            plan.request_timeout,
        )));
    }
    drop(rx);
    let (rate, rt) = (plan.rate, plan.realtime_pacer);
    let pacer = std::thread::Builder::new()
        .name("pacer".into())
        .spawn(move || pace(tx, start, rate, count, end, rt))
        .expect("spawning the pacer thread");
    let mut tally = Tally::new(plan.workload.kind);
    for task in tasks {
        // Every task ends by `hard_end` (its requests' timeouts are capped
        // there); the extra second only guards against a stuck runtime.
        let left = hard_end.saturating_duration_since(Instant::now()) + Duration::from_secs(1);
        let abort = task.abort_handle();
        match tokio::time::timeout(left, task).await {
            Ok(Ok(t)) => tally.merge(t),
            _ => {
                abort.abort();
                tally.error("lost");
            }
        }
    }
    let (pacer_late, scheduled) = tokio::task::spawn_blocking(move || pacer.join())
        .await
        .ok()
        .and_then(|r| r.ok())
        .unwrap_or_else(|| (Histogram::new(3).expect("static"), count));
    let last = tally.last_done.unwrap_or(end);
    let span = Duration::from_secs_f64(scheduled as f64 / plan.rate);
    let elapsed = last.saturating_duration_since(start).max(span);
    Outcome {
        plan: plan.clone(),
        scheduled,
        tally,
        pacer_late,
        elapsed,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use axum::routing::post;
    use std::sync::atomic::{AtomicBool, Ordering};

    fn workload() -> Workload {
        let body = Bytes::from_static(br#"{"from":{"lat":1,"lon":2},"to":{"lat":1.01,"lon":2}}"#);
        Workload {
            kind: Kind::Eta,
            bodies: Arc::new(vec![body]),
            lengths_km: vec![1.1],
        }
    }

    /// A server that stalls its first answer for `stall`, then answers at once.
    async fn stalling_server(stall: Duration) -> SocketAddr {
        let first = Arc::new(AtomicBool::new(true));
        let app = axum::Router::new().route(
            "/v1/eta",
            post(move || {
                let first = first.clone();
                async move {
                    if first.swap(false, Ordering::SeqCst) {
                        tokio::time::sleep(stall).await;
                    }
                    r#"{"eta_s":60.0,"tier":"historical","fallback_reason":"no_live_data"}"#
                }
            }),
        );
        let l = tokio::net::TcpListener::bind("127.0.0.1:0").await.unwrap();
        let addr = l.local_addr().unwrap();
        tokio::spawn(async move { axum::serve(l, app).await.unwrap() });
        addr
    }

    fn plan(target: SocketAddr, rate: f64, secs: f64, connections: usize) -> Plan {
        Plan {
            scenario: "test".into(),
            system: "test".into(),
            target,
            workload: workload(),
            rate,
            duration: Duration::from_secs_f64(secs),
            max_requests: 10_000,
            connections,
            request_timeout: Duration::from_secs(5),
            drain: Duration::from_secs(3),
            realtime_pacer: false,
        }
    }

    // The defining property of an open-loop generator (Tene, 2015): a stall
    // shows up in the latency of every request scheduled during it, not in
    // one request only. 100 req/s on one connection, a 300 ms stall: the
    // ~30 requests scheduled during the stall queue behind it, so many
    // latencies exceed 100 ms. A closed loop timing from the actual send
    // would report one slow request.
    #[tokio::test(flavor = "multi_thread", worker_threads = 2)]
    async fn a_stall_is_charged_to_every_request_scheduled_during_it() {
        let addr = stalling_server(Duration::from_millis(300)).await;
        let out = run(&plan(addr, 100.0, 1.0, 1)).await;
        assert_eq!(out.tally.ok, out.scheduled, "{:?}", out.tally.errors);
        let slow = out
            .tally
            .samples
            .iter()
            .filter(|(_, l)| *l > 100_000)
            .count();
        assert!(slow >= 15, "only {slow} requests over 100 ms");
        assert!(out.tally.hist.max() >= 290_000);
    }

    #[tokio::test(flavor = "multi_thread", worker_threads = 2)]
    async fn bounded_by_count_and_duration() {
        let addr = stalling_server(Duration::ZERO).await;
        let mut p = plan(addr, 500.0, 0.5, 4);
        p.max_requests = 40;
        let out = run(&p).await;
        assert_eq!(out.scheduled, 40, "the count bound holds");
        assert_eq!(out.tally.ok, 40);
        let out = run(&plan(addr, 200.0, 0.5, 4)).await;
        assert_eq!(out.scheduled, 100, "the duration bound holds");
    }

    #[tokio::test(flavor = "multi_thread", worker_threads = 2)]
    async fn refused_connections_count_as_connect_errors() {
        // A port that was free a moment ago: nothing listens there.
        let addr = {
            let l = std::net::TcpListener::bind("127.0.0.1:0").unwrap();
            l.local_addr().unwrap()
        };
        let out = run(&plan(addr, 100.0, 0.2, 2)).await;
        assert_eq!(out.tally.ok, 0);
        assert_eq!(
            out.tally.errors.get("connect").copied().unwrap_or(0),
            out.scheduled
        );
    }
}
