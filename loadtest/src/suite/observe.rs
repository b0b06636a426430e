//! Looking at the server from outside between runs: waiting until single
//! ETAs are answered from a given tier (and reason), waiting for the first
//! graph answer of a fresh server, and scraping `/metrics`.

use crate::server;
use crate::suite::ctx::Ctx;
use bytes::Bytes;
use std::time::{Duration, Instant};

impl Ctx {
    /// Asks single ETAs until one answers with `tier` (and `reason`, when
    /// given), at most `limit`; returns how long that took.
    pub async fn wait_for_tier(
        &self,
        tier: &str,
        reason: Option<&str>,
        limit: Duration,
    ) -> Option<Duration> {
        let t = Instant::now();
        let body = self.w.eta.bodies[0].clone();
        while t.elapsed() < limit {
            if let Ok((200, b)) = server::call(
                self.server.public,
                "POST",
                "/v1/eta",
                None,
                "application/json",
                body.clone(),
                Duration::from_secs(5),
            )
            .await
            {
                if let Ok(v) = serde_json::from_slice::<serde_json::Value>(&b) {
                    if v["tier"] == tier
                        && reason.map(|r| v["fallback_reason"] == r).unwrap_or(true)
                    {
                        return Some(t.elapsed());
                    }
                }
            }
            tokio::time::sleep(Duration::from_millis(100)).await;
        }
        None
    }

    /// Waits until single ETAs are answered from the graph (live or
    /// historical): a freshly started server customizes its first metric in
    /// the background after it reports ready.
    pub async fn wait_warm(&self, limit: Duration) -> Option<Duration> {
        let t = Instant::now();
        let a = self.wait_for_tier("historical", None, limit).await;
        match a {
            Some(d) => Some(d),
            None => {
                self.wait_for_tier("live", None, limit.saturating_sub(t.elapsed()))
                    .await
            }
        }
    }

    /// The server's `/metrics` text, if it answered.
    pub(crate) async fn scrape(&self) -> Option<String> {
        match server::call(
            self.server.public,
            "GET",
            "/metrics",
            None,
            "text/plain",
            Bytes::new(),
            Duration::from_secs(5),
        )
        .await
        {
            Ok((200, b)) => Some(String::from_utf8_lossy(&b).into_owned()),
            _ => None,
        }
    }
}
