//! The cold start: single ETAs right after the server says it is ready,
//! while its first metric is still being customized in the background (no
//! quiet wait), then how long until the graph answers.

use crate::suite::ctx::Ctx;
use std::time::Duration;

impl Ctx {
    /// 3 s of ETAs at 1,000/s from ready, then the wait for graph answers
    /// and the server's memory once warm.
    pub(crate) async fn cold_start(&mut self) {
        // Right after the server says it is ready: its first metric is
        // still being customized in the background. No quiet wait here.
        let quiet = std::mem::replace(&mut self.s.quiet_per_run, Duration::ZERO);
        let cold = self
            .drive_eta("cold-start-eta", 1000.0, Duration::from_secs(3))
            .await;
        self.runs.push(cold);
        self.s.quiet_per_run = quiet;
        let warm = self.wait_warm(Duration::from_secs(60)).await;
        self.print(format!(
            "warm      graph answers {}",
            warm.map(|d| format!("after {:.2} s more", d.as_secs_f64()))
                .unwrap_or_else(|| "not seen in 60 s".into())
        ));
        self.memory_now("idle, warm (free-flow metric)");
    }
}
