//! The stale feed: one batch of observations stamped older than the live
//! TTL, then ETAs at a fixed rate; answers should be historical (free-flow
//! without a table) with reason `live_stale`.

use crate::admin;
use crate::model::Summary;
use crate::suite::ctx::{Ctx, System};
use std::time::Duration;

impl Ctx {
    /// Observations stamped older than the live TTL, then ETAs at `rate`:
    /// answers should be historical (free-flow without a table) with reason
    /// `live_stale`.
    pub async fn stale_feed(&mut self, rate: f64, duration: Duration) -> Option<Summary> {
        let ago = Duration::from_secs_f64(self.server.live_ttl_s + 1800.0);
        let feed = self.feed(ago, self.s.seed ^ 0x5a)?;
        let posted = admin::post_once(&feed).await;
        let seen = self
            .wait_for_tier(
                &["historical", "free_flow"],
                Some("live_stale"),
                Duration::from_secs(20),
            )
            .await;
        let w = self.w.eta.clone();
        let retry = std::mem::replace(&mut self.s.retry_noisy, false);
        let mut s = self
            .drive(
                "stale-feed",
                System::Hodos,
                &w,
                rate,
                duration,
                self.s.connections,
                self.s.drain,
            )
            .await;
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
