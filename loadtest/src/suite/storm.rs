//! The reload storm: single ETAs at a fixed rate while live observations
//! are POSTed every `live_every` and historical tables PUT every
//! `table_every`, from a server already serving fresh live data. Its notes
//! say what the admin streams did and how many customizations the server
//! ran meanwhile (from `/metrics` before and after).

use crate::admin::{self, Feed, StreamReport};
use crate::model::Summary;
use crate::noise::QUIET_CORES;
use crate::server;
use crate::suite::ctx::Ctx;
use bytes::Bytes;
use std::time::{Duration, Instant};

/// What the admin side of a storm did, for its notes.
struct Admin {
    primed: StreamReport,
    live_after: Option<Duration>,
    live: StreamReport,
    table: StreamReport,
    before: Option<String>,
    after: Option<String>,
}

impl Ctx {
    /// ETAs at `rate` while live observations arrive every `live_every` and
    /// historical tables every `table_every`.
    pub async fn reload_storm(&mut self, rate: f64, duration: Duration) -> Option<Summary> {
        let feed = self.feed(Duration::ZERO, self.s.seed ^ 0x11)?;
        // Start from the state a fed server is in: fresh live data served.
        let primed = admin::post_once(&feed).await;
        let live_after = self.wait_for_live_metric(Duration::from_secs(20)).await;
        let tables = self.storm_tables();
        let before = self.scrape().await;
        // Wait for calm before the streams start, not after: once they run
        // the server is busy customizing and the machine never gets quiet.
        if !self.s.quiet_per_run.is_zero() {
            server::wait_quiet(self.s.quiet_per_run, QUIET_CORES).await;
        }
        let (mut s, live, table) = self.storm_run(&feed, tables, rate, duration).await;
        let after = self.scrape().await;
        let a = Admin {
            primed,
            live_after,
            live,
            table,
            before,
            after,
        };
        storm_notes(&mut s, &a);
        self.admin.push(("reload-storm live".into(), a.live));
        self.admin.push(("reload-storm historical".into(), a.table));
        Some(s)
    }

    /// The two historical tables the storm PUTs in turn.
    fn storm_tables(&self) -> Vec<Bytes> {
        [0.6, 0.85]
            .iter()
            .enumerate()
            .map(|(i, f)| {
                admin::historical_table(
                    &self.edges,
                    self.s.table_edges,
                    *f,
                    self.s.tz,
                    self.s.seed + i as u64,
                )
            })
            .collect()
    }

    /// The query run with both admin streams beside it (no quiet wait and
    /// no redo while they run).
    async fn storm_run(
        &mut self,
        feed: &Feed,
        tables: Vec<Bytes>,
        rate: f64,
        duration: Duration,
    ) -> (Summary, StreamReport, StreamReport) {
        let quiet = std::mem::replace(&mut self.s.quiet_per_run, Duration::ZERO);
        let retry = std::mem::replace(&mut self.s.retry_noisy, false);
        let until = Instant::now() + duration;
        let lt = tokio::spawn(admin::live_stream(feed.clone(), self.s.live_every, until));
        let tt = tokio::spawn(admin::table_stream(
            feed.clone(),
            tables,
            self.s.table_every,
            until,
        ));
        let s = self.drive_eta("reload-storm", rate, duration).await;
        self.s.quiet_per_run = quiet;
        self.s.retry_noisy = retry;
        let live = lt.await.unwrap_or_default();
        let table = tt.await.unwrap_or_default();
        (s, live, table)
    }
}

/// The storm's notes: priming, each admin stream, server customizations.
fn storm_notes(s: &mut Summary, a: &Admin) {
    s.notes.push(format!(
        "primed with one fresh batch ({} accepted); live tier served after {}",
        a.primed.accepted,
        a.live_after
            .map(|d| format!("{:.2} s", d.as_secs_f64()))
            .unwrap_or_else(|| "never (20 s)".into())
    ));
    for (name, r) in [("live POSTs", &a.live), ("historical PUTs", &a.table)] {
        s.notes.push(format!(
            "{name}: {} calls, {} accepted, failed {:?}, late {}, p50 {:.1} ms, p99 {:.1} ms, max {:.1} ms, body {:.0} KiB",
            r.calls, r.accepted, r.failed, r.late, r.p50_ms, r.p99_ms, r.max_ms, r.body_kb
        ));
    }
    if let (Some(before), Some(after)) = (&a.before, &a.after) {
        for kind in ["live", "historical"] {
            let label = format!("kind=\"{kind}\"");
            let (s0, c0) = server::prom_sum_count(before, "hodos_customization_seconds", &label);
            let (s1, c1) = server::prom_sum_count(after, "hodos_customization_seconds", &label);
            let n = c1 - c0;
            s.notes.push(format!(
                "server {kind} customizations during the storm: {n:.0}, mean {:.0} ms, {:.1} s of CPU",
                if n > 0.0 { 1000.0 * (s1 - s0) / n } else { 0.0 },
                s1 - s0
            ));
        }
    }
}
