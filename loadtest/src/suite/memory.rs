//! Server memory: a reading of resident memory at a named moment, and the
//! memory phase on a fresh server (ready, warm, after 100,000 ETAs with
//! `/metrics` never scraped, after one scrape, sampled for 12 s with a
//! stale live feed: two customized metrics; then around a 100 MiB live
//! batch, in `live_batch`).

use crate::server::{proc_stat, ProcStat};
use crate::suite::ctx::Ctx;
use crate::suite::records::Memory;
use crate::suite::stale::StalePost;
use std::time::{Duration, Instant};

/// Smallest and largest VmRSS (MB) over a sampling window, and the last
/// reading.
struct Sampled {
    lo: f64,
    hi: f64,
    last: Option<ProcStat>,
}

/// Reads `pid`'s resident memory every 250 ms for `window`.
async fn sample_rss(pid: u32, window: Duration) -> Sampled {
    let (mut lo, mut hi, mut last) = (f64::INFINITY, 0.0f64, None);
    let t = Instant::now();
    while t.elapsed() < window {
        tokio::time::sleep(Duration::from_millis(250)).await;
        if let Some(p) = proc_stat(pid) {
            let mb = p.rss_kb as f64 / 1024.0;
            lo = lo.min(mb);
            hi = hi.max(mb);
            last = Some(p);
        }
    }
    Sampled { lo, hi, last }
}

impl Ctx {
    /// Notes the server's resident memory.
    pub fn memory_now(&mut self, when: &str) {
        if let Some(p) = self.server.pid.and_then(proc_stat) {
            let m = Memory {
                when: when.to_string(),
                rss_mb: p.rss_kb as f64 / 1024.0,
                hwm_mb: p.hwm_kb as f64 / 1024.0,
                min_rss_mb: None,
                max_rss_mb: None,
            };
            self.print(format!(
                "memory    {:<40} VmRSS {:>7.1} MB  VmHWM {:>7.1} MB{}",
                m.when,
                m.rss_mb,
                m.hwm_mb,
                if self.server.in_process {
                    "  (in process: includes the generator)"
                } else {
                    ""
                }
            ));
            self.memory.push(m);
        }
    }

    /// Memory on a fresh server: ready, warm (free-flow metric), after
    /// 100,000 ETAs with `/metrics` never scraped, after one scrape, and
    /// sampled for 12 s with a stale live feed (free-flow + live metric:
    /// two customized metrics).
    pub async fn memory_phase(&mut self) {
        self.memory_now("fresh server: ready");
        let warm = self.wait_warm(Duration::from_secs(60)).await;
        tokio::time::sleep(Duration::from_secs(2)).await;
        self.memory_now(&format!(
            "fresh server: warm, free-flow metric (graph answers after {})",
            warm.map(|d| format!("{:.2} s", d.as_secs_f64()))
                .unwrap_or_else(|| "never".into())
        ));
        let run = self
            .drive_eta("memory-eta-100k", 5000.0, Duration::from_secs(20))
            .await;
        self.runs.push(run);
        self.memory_now("after 100,000 ETAs, /metrics never scraped");
        let _ = self.scrape().await;
        self.memory_now("after one GET /metrics");
        self.memory_two_metrics().await;
        self.live_batch_memory().await;
    }

    /// A stale live feed (so the live metric is customized too), then
    /// resident memory sampled for 12 s.
    async fn memory_two_metrics(&mut self) {
        let Some(StalePost { posted, seen, .. }) = self.post_stale(0x77).await else {
            return;
        };
        let Some(pid) = self.server.pid else { return };
        let Sampled { lo, hi, last } = sample_rss(pid, Duration::from_secs(12)).await;
        if let Some(p) = last {
            let m = Memory {
                when: format!(
                    "fresh server: free-flow + live metrics (stale feed, {} accepted, live_stale {}), 12 s",
                    posted.accepted,
                    if seen.is_some() { "seen" } else { "not seen" }
                ),
                rss_mb: p.rss_kb as f64 / 1024.0,
                hwm_mb: p.hwm_kb as f64 / 1024.0,
                min_rss_mb: Some(lo),
                max_rss_mb: Some(hi),
            };
            self.print(format!(
                "memory    {:<40} VmRSS {:>7.1} MB (min {lo:.1}, max {hi:.1} over 12 s)  VmHWM {:>7.1} MB",
                "two customized metrics", m.rss_mb, m.hwm_mb
            ));
            self.memory.push(m);
        }
    }
}
