//! Admin traffic that runs beside a query load: live observations POSTed
//! on a fixed schedule (every 100 ms in the reload storm), historical
//! tables PUT every few seconds, or one batch of observations stamped far in
//! the past (the stale feed), or one batch of a given size (the memory
//! phase's 100 MiB live batch). Each stream keeps its own schedule on its own
//! task; a call slower than its interval makes the next one late (counted),
//! never skipped. Bounded by the same deadline as the query run.

use crate::server::call;
use crate::workload::EdgeRef;
use bytes::Bytes;
use chrono::{SecondsFormat, Utc};
use hdrhistogram::Histogram;
use hodos_testkit::HistoricalCsv;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::Serialize;
use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::net::SocketAddr;
use std::sync::Arc;
use std::time::{Duration, Instant};

/// Where and how to send admin traffic.
#[derive(Debug, Clone)]
pub struct Feed {
    pub admin: SocketAddr,
    pub token: String,
    pub region: String,
    pub edges: Arc<Vec<EdgeRef>>,
    /// Observations per live batch.
    pub live_batch: usize,
    /// Age stamped on observations (zero: "now").
    pub observed_ago: Duration,
    pub seed: u64,
}

/// What one admin stream did.
#[derive(Debug, Clone, Serialize, Default)]
pub struct StreamReport {
    pub calls: u64,
    pub accepted: u64,
    /// Failure kind (`http_422`, `error`) → count.
    pub failed: BTreeMap<String, u64>,
    pub p50_ms: f64,
    pub p99_ms: f64,
    pub max_ms: f64,
    /// Calls that started more than one interval late.
    pub late: u64,
    pub body_kb: f64,
}

fn observations(feed: &Feed, rng: &mut ChaCha8Rng) -> Bytes {
    let mut s = String::with_capacity(feed.live_batch * 110);
    let at = stamp(feed);
    s.push('[');
    for i in 0..feed.live_batch {
        if i > 0 {
            s.push(',');
        }
        observation(feed, rng, &at, &mut s);
    }
    s.push(']');
    Bytes::from(s)
}

/// The `observed_at` stamp of a feed's observations.
fn stamp(feed: &Feed) -> String {
    (Utc::now() - chrono::Duration::from_std(feed.observed_ago).unwrap_or_default())
        .to_rfc3339_opts(SecondsFormat::Millis, true)
}

/// Appends one observation of a random edge (0.3–1.0 × its free-flow
/// speed) as JSON.
fn observation(feed: &Feed, rng: &mut ChaCha8Rng, at: &str, s: &mut String) {
    let e = &feed.edges[rng.random_range(0..feed.edges.len())];
    let f = 0.3 + 0.7 * rng.random::<f64>();
    let _ = write!(
        s,
        r#"{{"segment":{},"kmh":{:.1},"observed_at":"{at}","samples":{}}}"#,
        e.segment,
        (e.free_kmh as f64 * f).max(1.0),
        1 + rng.random_range(0..5)
    );
}

/// One JSON batch of at least `bytes` bytes (observations of random
/// edges, stamped like the feed's) and the number of observations in it.
pub fn batch_of_size(feed: &Feed, bytes: usize) -> (Bytes, usize) {
    let mut rng = ChaCha8Rng::seed_from_u64(feed.seed);
    let at = stamp(feed);
    let mut s = String::with_capacity(bytes + 256);
    s.push('[');
    let mut n = 0;
    while s.len() + 1 < bytes {
        if n > 0 {
            s.push(',');
        }
        observation(feed, &mut rng, &at, &mut s);
        n += 1;
    }
    s.push(']');
    (Bytes::from(s), n)
}

/// A historical table for `n` random edges over the hours just before, at
/// and after `now` in `tz`, at `factor` × free-flow.
pub fn historical_table(
    edges: &[EdgeRef],
    n: usize,
    factor: f64,
    tz: chrono_tz::Tz,
    seed: u64,
) -> Bytes {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let h = hodos::serving::speeds::hour_of_week(Utc::now(), tz) as u32;
    let hours = [(h + 167) % 168, h, (h + 1) % 168];
    let mut table = HistoricalCsv::with_header();
    for _ in 0..n {
        let e = &edges[rng.random_range(0..edges.len())];
        let speed = (e.free_kmh as f64 * factor).max(1.0);
        for hr in hours {
            table.row(e.tail, e.head, hr, format_args!("{speed:.1}"));
        }
    }
    Bytes::from(table.into_string())
}

/// The calls of one admin stream so far: its report and the latency of
/// its accepted calls.
struct Calls<'a> {
    feed: &'a Feed,
    r: StreamReport,
    h: Histogram<u64>,
}

impl<'a> Calls<'a> {
    fn new(feed: &'a Feed) -> Calls<'a> {
        Calls {
            feed,
            r: StreamReport::default(),
            h: Histogram::new_with_bounds(1, 600_000_000, 3).expect("static bounds"),
        }
    }

    /// One call to the feed's admin listener (30 s timeout), counted; its
    /// latency recorded when accepted.
    async fn one(&mut self, method: &str, path: &str, ct: &str, body: Bytes) {
        let t = Instant::now();
        let r = &mut self.r;
        r.calls += 1;
        let token = Some(self.feed.token.as_str());
        let timeout = Duration::from_secs(30);
        match call(self.feed.admin, method, path, token, ct, body, timeout).await {
            Ok((200, _)) => {
                r.accepted += 1;
                self.h
                    .saturating_record((t.elapsed().as_micros() as u64).max(1));
            }
            Ok((code, _)) => *r.failed.entry(format!("http_{code}")).or_default() += 1,
            Err(_) => *r.failed.entry("error".into()).or_default() += 1,
        }
    }

    /// POSTs a batch of observations to the region's live endpoint `path`.
    async fn post_live(&mut self, path: &str, body: Bytes) {
        self.one("POST", path, "application/json", body).await;
    }

    /// The report, with the latency percentiles of the accepted calls.
    fn finish(self) -> StreamReport {
        let (mut r, h) = (self.r, self.h);
        if !h.is_empty() {
            r.p50_ms = h.value_at_quantile(0.5) as f64 / 1000.0;
            r.p99_ms = h.value_at_quantile(0.99) as f64 / 1000.0;
            r.max_ms = h.max() as f64 / 1000.0;
        }
        r
    }
}

/// A fixed schedule from now: call `k` is due at start + `k` × `every`,
/// the last one before `until`.
struct Schedule {
    start: Instant,
    every: Duration,
    until: Instant,
    k: u32,
}

impl Schedule {
    fn new(every: Duration, until: Instant) -> Schedule {
        Schedule {
            start: Instant::now(),
            every,
            until,
            k: 0,
        }
    }

    /// Sleeps until the next call is due and returns its number (None once
    /// it would fall at or after `until`); a call that starts more than one
    /// interval late is counted in `late`.
    async fn next(&mut self, late: &mut u64) -> Option<u32> {
        let at = self.start + self.every * self.k;
        if at >= self.until {
            return None;
        }
        tokio::time::sleep_until(at.into()).await;
        if Instant::now().saturating_duration_since(at) > self.every {
            *late += 1;
        }
        let k = self.k;
        self.k += 1;
        Some(k)
    }
}

/// The region's live endpoint.
fn live_path(feed: &Feed) -> String {
    format!("/admin/regions/{}/live", feed.region)
}

/// Posts a live batch every `every` until `until`.
pub async fn live_stream(feed: Feed, every: Duration, until: Instant) -> StreamReport {
    let mut rng = ChaCha8Rng::seed_from_u64(feed.seed);
    let path = live_path(&feed);
    let mut calls = Calls::new(&feed);
    let mut schedule = Schedule::new(every, until);
    let mut bytes = 0usize;
    while schedule.next(&mut calls.r.late).await.is_some() {
        let body = observations(&feed, &mut rng);
        bytes = body.len();
        calls.post_live(&path, body).await;
    }
    calls.r.body_kb = bytes as f64 / 1024.0;
    calls.finish()
}

/// PUTs the tables in turn every `every` until `until`.
pub async fn table_stream(
    feed: Feed,
    tables: Vec<Bytes>,
    every: Duration,
    until: Instant,
) -> StreamReport {
    let path = format!("/admin/regions/{}/historical", feed.region);
    let mut calls = Calls::new(&feed);
    calls.r.body_kb = tables.first().map(|t| t.len()).unwrap_or(0) as f64 / 1024.0;
    if !tables.is_empty() {
        let mut schedule = Schedule::new(every, until);
        while let Some(k) = schedule.next(&mut calls.r.late).await {
            let body = tables[k as usize % tables.len()].clone();
            calls.one("PUT", &path, "text/csv", body).await;
        }
    }
    calls.finish()
}

/// Posts one batch (e.g. stale observations) and returns the report.
pub async fn post_once(feed: &Feed) -> StreamReport {
    let mut rng = ChaCha8Rng::seed_from_u64(feed.seed);
    let mut calls = Calls::new(feed);
    let body = observations(feed, &mut rng);
    calls.r.body_kb = body.len() as f64 / 1024.0;
    calls.post_live(&live_path(feed), body).await;
    calls.finish()
}
