//! Looking at the server from outside between runs: waiting until single
//! ETAs are answered from given tiers (and reason), waiting for the first
//! graph answer of a fresh server, and scraping `/metrics`.
//!
//! A graph answer's tier names the speed source carrying most of its route
//! (`live`, `historical`, `free_flow`); a region without a historical table
//! answers `free_flow`, and an answer from the live metric whose route
//! crosses no fresh edge is `historical`/`free_flow` with reason
//! `no_live_on_route` (or `live_minority`).

use crate::server;
use crate::suite::ctx::Ctx;
use bytes::Bytes;
use std::time::{Duration, Instant};

impl Ctx {
    /// Asks single ETAs until one answers with one of `tiers` (and
    /// `reason`, when given), at most `limit`; returns how long that took.
    pub async fn wait_for_tier(
        &self,
        tiers: &[&str],
        reason: Option<&str>,
        limit: Duration,
    ) -> Option<Duration> {
        self.wait_for(
            |v| {
                tiers.iter().any(|t| v["tier"] == *t)
                    && reason.map(|r| v["fallback_reason"] == r).unwrap_or(true)
            },
            limit,
        )
        .await
    }

    /// Asks single ETAs until one is answered from the live metric: tier
    /// `live`, or a route that crosses too little fresh live data.
    pub async fn wait_for_live_metric(&self, limit: Duration) -> Option<Duration> {
        self.wait_for(
            |v| {
                v["tier"] == "live"
                    || v["fallback_reason"] == "no_live_on_route"
                    || v["fallback_reason"] == "live_minority"
            },
            limit,
        )
        .await
    }

    /// Asks single ETAs until `ok` holds for an answer body, at most
    /// `limit`; returns how long that took.
    async fn wait_for(
        &self,
        ok: impl Fn(&serde_json::Value) -> bool,
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
                    if ok(&v) {
                        return Some(t.elapsed());
                    }
                }
            }
            tokio::time::sleep(Duration::from_millis(100)).await;
        }
        None
    }

    /// Waits until single ETAs are answered from the graph (any tier but
    /// heuristic): a freshly started server customizes its first metric in
    /// the background after it reports ready.
    pub async fn wait_warm(&self, limit: Duration) -> Option<Duration> {
        let graph = ["live", "historical", "free_flow"];
        self.wait_for_tier(&graph, None, limit).await
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
