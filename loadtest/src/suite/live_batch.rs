//! One large live batch and the server's memory around it (issue 11: "a
//! 100 MB live batch: peak server RSS growth ≤ 2× the batch size; memory
//! returned afterwards"): on the fresh server of the memory phase, after
//! its live metric exists, one JSON batch of `goals::LIVE_BATCH_MIB` MiB of
//! observations stamped now is POSTed while the server's VmRSS is sampled
//! every 50 ms; VmHWM is reset just before (`/proc/<pid>/clear_refs`,
//! proc(5): writing 5 resets the peak), and read again the settle time
//! after the answer, when "afterwards" is read too.

use crate::admin;
use crate::goals::{LIVE_BATCH_MIB, LIVE_BATCH_SETTLE_S};
use crate::noise::QUIET_CORES;
use crate::server::{self, proc_stat};
use crate::suite::ctx::Ctx;
use crate::suite::records::LiveBatch;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

/// Resets the peak resident set of `pid` (proc(5), `clear_refs`: "5").
fn reset_hwm(pid: u32) -> bool {
    std::fs::write(format!("/proc/{pid}/clear_refs"), b"5").is_ok()
}

impl Ctx {
    /// The live batch and memory around it; recorded in `live_batch`.
    pub(crate) async fn live_batch_memory(&mut self) {
        let (Some(pid), Some(admin)) = (self.server.pid, self.server.admin) else {
            return;
        };
        let Some(feed) = self.feed(Duration::ZERO, self.s.seed ^ 0x100) else {
            return;
        };
        let size = (LIVE_BATCH_MIB * 1024.0 * 1024.0) as usize;
        let (body, n) = admin::batch_of_size(&feed, size);
        let bytes = body.len();
        server::wait_quiet(Duration::from_secs(15), QUIET_CORES).await;
        let Some(before) = proc_stat(pid) else { return };
        let hwm_was_reset = reset_hwm(pid);
        let (stop, max_kb) = (
            Arc::new(AtomicBool::new(false)),
            Arc::new(AtomicU64::new(0)),
        );
        let sampler = {
            let (stop, max_kb) = (stop.clone(), max_kb.clone());
            tokio::spawn(async move {
                while !stop.load(Ordering::Relaxed) {
                    if let Some(p) = proc_stat(pid) {
                        max_kb.fetch_max(p.rss_kb, Ordering::Relaxed);
                    }
                    tokio::time::sleep(Duration::from_millis(50)).await;
                }
            })
        };
        let t = Instant::now();
        let path = format!("/admin/regions/{}/live", feed.region);
        let status = match server::call(
            admin,
            "POST",
            &path,
            Some(&feed.token),
            "application/json",
            body,
            Duration::from_secs(240),
        )
        .await
        {
            Ok((code, _)) => code,
            Err(e) => {
                eprintln!("warning: the live batch got no answer: {e:#}");
                0
            }
        };
        let answer_s = t.elapsed().as_secs_f64();
        tokio::time::sleep(Duration::from_secs_f64(LIVE_BATCH_SETTLE_S)).await;
        stop.store(true, Ordering::Relaxed);
        let _ = sampler.await;
        let Some(after) = proc_stat(pid) else { return };
        let mb = |kb: u64| kb as f64 / 1024.0;
        let lb = LiveBatch {
            bytes,
            observations: n,
            status,
            answer_s,
            rss_before_mb: mb(before.rss_kb),
            rss_max_sampled_mb: mb(max_kb.load(Ordering::Relaxed).max(after.rss_kb)),
            hwm_mb: mb(after.hwm_kb),
            hwm_was_reset,
            rss_after_mb: mb(after.rss_kb),
            settle_s: LIVE_BATCH_SETTLE_S,
            in_process: self.server.in_process,
        };
        self.print(format!(
            "memory    live batch {:.1} MiB ({} observations): HTTP {}, {:.2} s; VmRSS {:.1} MB before, max {:.1} MB sampled, VmHWM {:.1} MB{}, {:.1} MB {:.0} s after",
            bytes as f64 / 1048576.0,
            n,
            status,
            answer_s,
            lb.rss_before_mb,
            lb.rss_max_sampled_mb,
            lb.hwm_mb,
            if hwm_was_reset { " (reset before)" } else { " (not reset: since start)" },
            lb.rss_after_mb,
            LIVE_BATCH_SETTLE_S
        ));
        self.live_batch = Some(lb);
    }
}
