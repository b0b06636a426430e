//! The stale feed: one batch of observations stamped older than the live
//! TTL, then ETAs at a fixed rate; answers should be historical (free-flow
//! without a table) with reason `live_stale`. The post and the wait for
//! `live_stale` answers are shared with the memory phase.

use crate::admin::{self, StreamReport};
use crate::model::Summary;
use crate::suite::ctx::Ctx;
use std::time::Duration;

/// One stale batch posted, and when its answers showed.
pub(crate) struct StalePost {
    /// How old the observations were stamped.
    pub ago: Duration,
    pub posted: StreamReport,
    /// How long until an ETA answered with reason `live_stale` (at most
    /// 20 s).
    pub seen: Option<Duration>,
}

impl Ctx {
    /// Posts one batch stamped 30 minutes past the live TTL (seeded with
    /// the settings' seed ^ `salt`), then waits up to 20 s for an ETA
    /// answered historical or free-flow with reason `live_stale`. None
    /// without an admin listener and token.
    pub(crate) async fn post_stale(&self, salt: u64) -> Option<StalePost> {
        let ago = Duration::from_secs_f64(self.server.live_ttl_s + 1800.0);
        let feed = self.feed(ago, self.s.seed ^ salt)?;
        let posted = admin::post_once(&feed).await;
        let seen = self
            .wait_for_tier(
                &["historical", "free_flow"],
                Some("live_stale"),
                Duration::from_secs(20),
            )
            .await;
        Some(StalePost { ago, posted, seen })
    }

    /// Observations stamped older than the live TTL, then ETAs at `rate`:
    /// answers should be historical (free-flow without a table) with reason
    /// `live_stale`.
    pub async fn stale_feed(&mut self, rate: f64, duration: Duration) -> Option<Summary> {
        let StalePost { ago, posted, seen } = self.post_stale(0x5a).await?;
        let retry = std::mem::replace(&mut self.s.retry_noisy, false);
        let mut s = self.drive_eta("stale-feed", rate, duration).await;
        self.s.retry_noisy = retry;
        s.notes.push(format!(
            "posted {} observations stamped {:.0} s ago (TTL {:.0} s): {} accepted; live_stale seen after {}",
            self.s.live_batch,
            ago.as_secs_f64(),
            self.server.live_ttl_s,
            posted.accepted,
            seen.map(|d| format!("{:.2} s", d.as_secs_f64())).unwrap_or_else(|| "never (20 s)".into())
        ));
        let stale: u64 = ["historical/live_stale", "free_flow/live_stale"]
            .iter()
            .map(|k| s.answers.get(*k).copied().unwrap_or(0))
            .sum();
        s.notes.push(format!(
            "historical or free_flow / live_stale share {:.1}%",
            100.0 * stale as f64 / s.ok.max(1) as f64
        ));
        self.admin.push(("stale-feed live post".into(), posted));
        Some(s)
    }
}
