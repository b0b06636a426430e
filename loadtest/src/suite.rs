//! Scenarios and their order: capacity search, steady runs, overload, the
//! stale feed and the reload storm, each against hodos and (where a ratio
//! is reported) against the in-process baseline, back to back in one run.
//! Also the goals the measured figures are held against.

use crate::baseline::Baseline;
use crate::engine::{self, Plan};
use crate::report::{self, MachineUse, ServerUse, Summary};
use crate::server::{self, proc_stat, ServerInfo};
use crate::storm::{self, Feed, StreamReport};
use crate::workload::{EdgeRef, Kind, Workload};
use bytes::Bytes;
use serde::Serialize;
use std::net::SocketAddr;
use std::path::PathBuf;
use std::sync::Arc;
use std::time::{Duration, Instant};

/// Knobs shared by every scenario.
#[derive(Debug, Clone)]
pub struct Settings {
    pub connections: usize,
    pub overload_connections: usize,
    pub request_timeout: Duration,
    pub drain: Duration,
    /// Length of one capacity-search step.
    pub step: Duration,
    pub steady: Duration,
    pub overload: Duration,
    pub storm: Duration,
    /// A step fails when its p99 exceeds this.
    pub p99_limit_ms: f64,
    /// A step fails when more than this share of answers was shed
    /// (`overloaded` or `budget_exceeded`).
    pub max_shed_share: f64,
    pub growth: f64,
    pub refine: u32,
    pub max_rate: f64,
    pub live_every: Duration,
    pub table_every: Duration,
    pub live_batch: usize,
    pub table_edges: usize,
    pub tz: chrono_tz::Tz,
    pub seed: u64,
    /// Hard cap on requests of any one run.
    pub max_requests: u64,
    /// Run a step that failed on its tail alone once more.
    pub confirm: bool,
    pub realtime_pacer: bool,
    /// Longest wait for a quiet machine before each run.
    pub quiet_per_run: Duration,
    /// Runs redone when other work or the hypervisor spoiled them.
    pub noise_retries: u32,
    /// Whether noisy runs may be redone (off while admin streams run).
    pub retry_noisy: bool,
}

/// The request pools.
#[derive(Debug, Clone)]
pub struct Workloads {
    pub eta: Workload,
    pub route: Workload,
    pub m1x50: Workload,
    pub m20x20: Workload,
}

/// Which server a run targets.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum System {
    Hodos,
    Baseline,
}

impl System {
    fn name(self) -> &'static str {
        match self {
            System::Hodos => "hodos",
            System::Baseline => "baseline",
        }
    }
}

/// One capacity-search step's verdict.
#[derive(Debug, Clone, Serialize)]
pub struct Step {
    pub rate: f64,
    pub pass: bool,
    pub why: String,
    pub achieved: f64,
    pub p99_ms: f64,
    pub errors: u64,
    /// Cores taken by other work and by the hypervisor during the step.
    pub other_cores: f64,
    pub stolen_cores: f64,
}

/// A capacity search.
#[derive(Debug, Clone, Serialize)]
pub struct Probe {
    pub scenario: String,
    pub system: String,
    pub workload: String,
    /// The last rate that passed every criterion.
    pub capacity: Option<f64>,
    pub steps: Vec<Step>,
}

/// Resident memory of the server at one moment.
#[derive(Debug, Clone, Serialize)]
pub struct Memory {
    pub when: String,
    pub rss_mb: f64,
    pub hwm_mb: f64,
    /// Smallest and largest VmRSS over a sampling window, when sampled.
    pub min_rss_mb: Option<f64>,
    pub max_rss_mb: Option<f64>,
}

/// One goal and how the run did against it.
#[derive(Debug, Clone, Serialize)]
pub struct Goal {
    pub goal: String,
    pub measured: String,
    pub pass: Option<bool>,
}

/// The suite's figures, kept until the memory phase is done.
pub struct SuiteOutcome {
    caps: Vec<(String, Option<f64>, Option<f64>)>,
    steady: Option<Summary>,
    /// (workload, multiple of its capacity, hodos, baseline at the same rate)
    overloads: Vec<Overload>,
    pre: Summary,
    storm: Option<Summary>,
}

/// One overload run and, where a baseline runs, the baseline at the same
/// offered rate (the machine's own ceiling for that load).
#[derive(Clone)]
pub struct Overload {
    workload: String,
    k: f64,
    hodos: Summary,
    baseline: Option<Summary>,
}

/// Running state of a suite (or of a single scenario command).
pub struct Ctx {
    pub server: ServerInfo,
    pub baseline: Option<Baseline>,
    pub w: Workloads,
    pub edges: Arc<Vec<EdgeRef>>,
    /// Bounding box of the served graph (for server configurations).
    pub lo: hodos::engine::geo::LatLon,
    pub hi: hodos::engine::geo::LatLon,
    pub s: Settings,
    pub out: PathBuf,
    pub runs: Vec<Summary>,
    pub probes: Vec<Probe>,
    pub memory: Vec<Memory>,
    pub admin: Vec<(String, StreamReport)>,
    pub goals: Vec<Goal>,
    pub table: Vec<String>,
    pub outcome: Option<SuiteOutcome>,
}

impl Ctx {
    fn target(&self, sys: System) -> SocketAddr {
        match sys {
            System::Hodos => self.server.public,
            System::Baseline => self
                .baseline
                .as_ref()
                .map(|b| b.addr)
                .unwrap_or(self.server.public),
        }
    }

    fn print(&mut self, line: String) {
        println!("{line}");
        self.table.push(line);
    }

    /// Prints the table header.
    pub fn header(&mut self) {
        self.print(report::table_header());
    }

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

    /// One run at a fixed rate; prints its row.
    #[allow(clippy::too_many_arguments)]
    pub async fn drive(
        &mut self,
        scenario: &str,
        sys: System,
        w: &Workload,
        rate: f64,
        duration: Duration,
        connections: usize,
        drain: Duration,
    ) -> Summary {
        let mut attempt = 0;
        loop {
            let sum = self
                .drive_once(scenario, sys, w, rate, duration, connections, drain)
                .await;
            let noisy = report::is_noisy(&sum);
            let row = report::table_row(&sum);
            if !noisy || attempt >= self.s.noise_retries || !self.s.retry_noisy {
                self.print(row);
                return sum;
            }
            // A run spoiled by other work says nothing about the server:
            // note it, wait for the machine to calm down, and run it again.
            self.print(format!("{row}  -> redone"));
            attempt += 1;
            server::wait_quiet(Duration::from_secs(30), 0.25).await;
        }
    }

    /// One measured run (no printing, no retry).
    #[allow(clippy::too_many_arguments)]
    async fn drive_once(
        &mut self,
        scenario: &str,
        sys: System,
        w: &Workload,
        rate: f64,
        duration: Duration,
        connections: usize,
        drain: Duration,
    ) -> Summary {
        let plan = Plan {
            scenario: scenario.to_string(),
            system: sys.name().to_string(),
            target: self.target(sys),
            workload: w.clone(),
            rate,
            duration,
            max_requests: self.s.max_requests,
            connections,
            request_timeout: self.s.request_timeout.max(drain),
            drain,
            realtime_pacer: self.s.realtime_pacer,
        };
        if !self.s.quiet_per_run.is_zero() {
            // Other work on a shared machine spoils a run: give it a
            // moment to pass (bounded), and record what was left.
            server::wait_quiet(self.s.quiet_per_run, 0.25).await;
        }
        let me = std::process::id();
        let spid = if sys == System::Hodos {
            self.server.pid
        } else {
            None
        };
        let (s0, g0, m0, la) = (
            spid.and_then(proc_stat),
            proc_stat(me),
            server::machine_cpu(),
            server::loadavg_1m(),
        );
        let t0 = Instant::now();
        let out = engine::run(&plan).await;
        let wall = t0.elapsed().as_secs_f64();
        let (s1, g1, m1) = (
            spid.and_then(proc_stat),
            proc_stat(me),
            server::machine_cpu(),
        );
        let mut sum = Summary::of(&out);
        if let (Some(pid), Some(a), Some(b)) = (spid, s0, s1) {
            let cpu = b.cpu_s - a.cpu_s;
            sum.server = Some(ServerUse {
                pid,
                in_process: self.server.in_process,
                cpu_s: cpu,
                cpu_ms_per_answer: 1000.0 * cpu / sum.ok.max(1) as f64,
                rss_mb: b.rss_kb as f64 / 1024.0,
                hwm_mb: b.hwm_kb as f64 / 1024.0,
            });
        }
        if let (Some(a), Some(b), Some(ma), Some(mb)) = (g0, g1, m0, m1) {
            let gen = b.cpu_s - a.cpu_s;
            let srv = match (&sum.server, self.server.in_process) {
                (Some(s), false) => s.cpu_s,
                _ => 0.0,
            };
            let busy = mb.0 - ma.0;
            sum.machine = Some(MachineUse {
                wall_s: wall,
                busy_cpu_s: busy,
                stolen_cpu_s: mb.1 - ma.1,
                generator_cpu_s: gen,
                server_cpu_s: srv,
                other_cpu_s: (busy - gen - srv).max(0.0),
                loadavg_1m_before: la,
            });
        }
        sum
    }

    /// Capacity search: grow the rate by `growth` while a step passes,
    /// shrink it while none has, then bisect between the last pass and the
    /// first failure `refine` times.
    pub async fn probe(&mut self, scenario: &str, sys: System, w: &Workload, start: f64) -> Probe {
        let mut rate = start;
        let (mut good, mut bad): (Option<f64>, Option<f64>) = (None, None);
        let mut steps = Vec::new();
        let mut refined = 0;
        for _ in 0..16 {
            let name = format!("{scenario}@{rate:.0}");
            let mut s = self
                .drive(
                    &name,
                    sys,
                    w,
                    rate,
                    self.s.step,
                    self.s.connections,
                    Duration::from_secs(2),
                )
                .await;
            let mut why = self.verdict(&s);
            // Other work on a shared machine can spoil one step's tail: a
            // step that failed on its tail alone is run once more.
            if why.is_some()
                && s.error_total == 0
                && s.achieved_rate >= 0.95 * rate
                && self.s.confirm
            {
                tokio::time::sleep(Duration::from_millis(800)).await;
                s = self
                    .drive(
                        &format!("{name}(again)"),
                        sys,
                        w,
                        rate,
                        self.s.step,
                        self.s.connections,
                        Duration::from_secs(2),
                    )
                    .await;
                why = self.verdict(&s);
            }
            steps.push(Step {
                rate,
                pass: why.is_none(),
                why: why.clone().unwrap_or_else(|| "ok".into()),
                achieved: s.achieved_rate,
                p99_ms: s.latency_ms.p99,
                errors: s.error_total,
                other_cores: s
                    .machine
                    .as_ref()
                    .map(|m| m.other_cpu_s / m.wall_s.max(1e-9))
                    .unwrap_or(0.0),
                stolen_cores: s
                    .machine
                    .as_ref()
                    .map(|m| m.stolen_cpu_s / m.wall_s.max(1e-9))
                    .unwrap_or(0.0),
            });
            if why.is_none() {
                good = Some(rate);
            } else {
                bad = Some(rate);
            }
            // Let queues and sockets settle between steps.
            tokio::time::sleep(Duration::from_millis(800)).await;
            rate = match (good, bad) {
                (Some(g), None) => {
                    let r = g * self.s.growth;
                    if r > self.s.max_rate {
                        break;
                    }
                    r
                }
                (None, Some(b)) => {
                    let r = b / self.s.growth;
                    if r < 1.0 {
                        break;
                    }
                    r
                }
                (Some(g), Some(b)) => {
                    if refined >= self.s.refine || b / g < 1.04 {
                        break;
                    }
                    refined += 1;
                    (g + b) / 2.0
                }
                (None, None) => break,
            };
        }
        let p = Probe {
            scenario: scenario.to_string(),
            system: sys.name().to_string(),
            workload: w.kind.label(),
            capacity: good,
            steps,
        };
        self.print(format!(
            "capacity  {:<26} {:<8} {}",
            scenario,
            sys.name(),
            match good {
                Some(g) => format!("{g:.0} req/s (last passing step)"),
                None => "none (no step passed)".into(),
            }
        ));
        self.probes.push(p.clone());
        p
    }

    /// Why a capacity step failed, if it did.
    fn verdict(&self, s: &Summary) -> Option<String> {
        if s.error_total > 0 {
            return Some(format!("{} errors", s.error_total));
        }
        if s.achieved_rate < 0.95 * s.target_rate {
            return Some(format!(
                "achieved {:.0} < 95% of {:.0}",
                s.achieved_rate, s.target_rate
            ));
        }
        if s.latency_ms.p99 > self.s.p99_limit_ms {
            return Some(format!(
                "p99 {:.2} ms > {} ms",
                s.latency_ms.p99, self.s.p99_limit_ms
            ));
        }
        let shed = s.reason_share("overloaded") + s.reason_share("budget_exceeded");
        if shed > self.s.max_shed_share {
            return Some(format!("{:.1}% of answers shed", 100.0 * shed));
        }
        None
    }

    fn feed(&self, observed_ago: Duration, seed: u64) -> Option<Feed> {
        Some(Feed {
            admin: self.server.admin?,
            token: self.server.token.clone()?,
            region: self.server.region.clone(),
            edges: self.edges.clone(),
            live_batch: self.s.live_batch,
            observed_ago,
            seed,
        })
    }

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

    /// Observations stamped older than the live TTL, then ETAs at `rate`:
    /// answers should be historical with reason `live_stale`.
    pub async fn stale_feed(&mut self, rate: f64, duration: Duration) -> Option<Summary> {
        let ago = Duration::from_secs_f64(self.server.live_ttl_s + 1800.0);
        let feed = self.feed(ago, self.s.seed ^ 0x5a)?;
        let posted = storm::post_once(&feed).await;
        let seen = self
            .wait_for_tier("historical", Some("live_stale"), Duration::from_secs(20))
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
        s.notes.push(format!(
            "historical/live_stale share {:.1}%",
            100.0 * s.answers.get("historical/live_stale").copied().unwrap_or(0) as f64
                / s.ok.max(1) as f64
        ));
        self.admin.push(("stale-feed live post".into(), posted));
        Some(s)
    }

    /// ETAs at `rate` while live observations arrive every `live_every` and
    /// historical tables every `table_every`.
    pub async fn reload_storm(&mut self, rate: f64, duration: Duration) -> Option<Summary> {
        let feed = self.feed(Duration::ZERO, self.s.seed ^ 0x11)?;
        // Start from the state a fed server is in: fresh live data served.
        let primed = storm::post_once(&feed).await;
        let live_after = self
            .wait_for_tier("live", None, Duration::from_secs(20))
            .await;
        let tables: Vec<Bytes> = [0.6, 0.85]
            .iter()
            .enumerate()
            .map(|(i, f)| {
                storm::historical_table(
                    &self.edges,
                    self.s.table_edges,
                    *f,
                    self.s.tz,
                    self.s.seed + i as u64,
                )
            })
            .collect();
        let before = self.scrape().await;
        // Wait for calm before the streams start, not after: once they run
        // the server is busy customizing and the machine never gets quiet.
        if !self.s.quiet_per_run.is_zero() {
            server::wait_quiet(self.s.quiet_per_run, 0.25).await;
        }
        let quiet = std::mem::replace(&mut self.s.quiet_per_run, Duration::ZERO);
        let retry = std::mem::replace(&mut self.s.retry_noisy, false);
        let until = Instant::now() + duration;
        let lt = tokio::spawn(storm::live_stream(feed.clone(), self.s.live_every, until));
        let tt = tokio::spawn(storm::table_stream(
            feed.clone(),
            tables,
            self.s.table_every,
            until,
        ));
        let w = self.w.eta.clone();
        let mut s = self
            .drive(
                "reload-storm",
                System::Hodos,
                &w,
                rate,
                duration,
                self.s.connections,
                self.s.drain,
            )
            .await;
        self.s.quiet_per_run = quiet;
        self.s.retry_noisy = retry;
        let live = lt.await.unwrap_or_default();
        let table = tt.await.unwrap_or_default();
        let after = self.scrape().await;
        s.notes.push(format!(
            "primed with one fresh batch ({} accepted); live tier served after {}",
            primed.accepted,
            live_after
                .map(|d| format!("{:.2} s", d.as_secs_f64()))
                .unwrap_or_else(|| "never (20 s)".into())
        ));
        for (name, r) in [("live POSTs", &live), ("historical PUTs", &table)] {
            s.notes.push(format!(
                "{name}: {} calls, {} accepted, failed {:?}, late {}, p50 {:.1} ms, p99 {:.1} ms, max {:.1} ms, body {:.0} KiB",
                r.calls, r.accepted, r.failed, r.late, r.p50_ms, r.p99_ms, r.max_ms, r.body_kb
            ));
        }
        if let (Some(a), Some(b)) = (&before, &after) {
            for kind in ["live", "historical"] {
                let label = format!("kind=\"{kind}\"");
                let (s0, c0) = server::prom_sum_count(a, "hodos_customization_seconds", &label);
                let (s1, c1) = server::prom_sum_count(b, "hodos_customization_seconds", &label);
                let n = c1 - c0;
                s.notes.push(format!(
                    "server {kind} customizations during the storm: {n:.0}, mean {:.0} ms, {:.1} s of CPU",
                    if n > 0.0 { 1000.0 * (s1 - s0) / n } else { 0.0 },
                    s1 - s0
                ));
            }
        }
        self.admin.push(("reload-storm live".into(), live));
        self.admin.push(("reload-storm historical".into(), table));
        Some(s)
    }

    async fn scrape(&self) -> Option<String> {
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

    /// The whole run: every scenario, back to back, and the goals.
    pub async fn suite(&mut self) {
        self.header();
        self.memory_now("ready");
        // Right after the server says it is ready: its first metric is
        // still being customized in the background. No quiet wait here.
        let w = self.w.eta.clone();
        let quiet = std::mem::replace(&mut self.s.quiet_per_run, Duration::ZERO);
        let cold = self
            .drive(
                "cold-start-eta",
                System::Hodos,
                &w,
                1000.0,
                Duration::from_secs(3),
                self.s.connections,
                self.s.drain,
            )
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
        let s = self.s.clone();
        let sets: [(&str, Workload, f64); 4] = [
            ("eta", self.w.eta.clone(), 1000.0),
            ("matrix1x50", self.w.m1x50.clone(), 200.0),
            ("matrix20x20", self.w.m20x20.clone(), 40.0),
            ("route", self.w.route.clone(), 500.0),
        ];
        let mut caps = Vec::new();
        for (name, w, start) in &sets {
            let base = if self.baseline.is_some() {
                self.probe(
                    &format!("capacity-{name}"),
                    System::Baseline,
                    w,
                    start * 4.0,
                )
                .await
                .capacity
            } else {
                None
            };
            let hod = self
                .probe(&format!("capacity-{name}"), System::Hodos, w, *start)
                .await
                .capacity;
            caps.push((name.to_string(), hod, base));
        }
        let eta_cap = caps[0].1;
        let mut steady_eta: Option<Summary> = None;
        for ((name, w, _), (_, hod, _)) in sets.iter().zip(&caps) {
            let Some(c) = hod else { continue };
            let rate = c / 2.0;
            let sum = self
                .drive(
                    &format!("steady-{name}-half"),
                    System::Hodos,
                    w,
                    rate,
                    s.steady,
                    s.connections,
                    s.drain,
                )
                .await;
            if *name == "eta" {
                steady_eta = Some(sum.clone());
                if self.baseline.is_some() {
                    let b = self
                        .drive(
                            "steady-eta-half",
                            System::Baseline,
                            w,
                            rate,
                            s.steady,
                            s.connections,
                            s.drain,
                        )
                        .await;
                    self.runs.push(b);
                }
            }
            self.runs.push(sum);
        }
        // Overload: ETAs (the goal) and 1×50 matrices (graph work dominates
        // there, so shedding has room to work), each at 2× and 3× hodos'
        // capacity; the baseline at the same ETA rates shows what the
        // machine itself allows.
        let mut overloads = Vec::new();
        for (name, idx) in [("eta", 0usize), ("matrix1x50", 1)] {
            let Some(c) = caps[idx].1 else { continue };
            let w = sets[idx].1.clone();
            for k in [2.0, 3.0] {
                // Give the backlog time to drain: answers are awaited for
                // up to (k + 1) × the run length after the last send.
                let drain =
                    Duration::from_secs_f64(s.overload.as_secs_f64() * (k + 1.0)).max(s.drain);
                let run = format!("overload-{name}-{k:.0}x");
                let with_baseline = self.baseline.is_some() && name == "eta";
                let systems: &[System] = if with_baseline {
                    &[System::Hodos, System::Baseline]
                } else {
                    &[System::Hodos]
                };
                let mut got = Vec::new();
                for &sys in systems {
                    let sum = self
                        .drive(
                            &run,
                            sys,
                            &w,
                            c * k,
                            s.overload,
                            s.overload_connections,
                            drain,
                        )
                        .await;
                    self.runs.push(sum.clone());
                    tokio::time::sleep(Duration::from_secs(2)).await;
                    got.push(sum);
                }
                let mut got = got.into_iter();
                let (sum, base) = (got.next().expect("hodos ran"), got.next());
                overloads.push(Overload {
                    workload: name.to_string(),
                    k,
                    hodos: sum,
                    baseline: base,
                });
            }
        }
        let half = eta_cap.map(|c| c / 2.0).unwrap_or(100.0);
        if let Some(sum) = self.stale_feed(half, s.steady).await {
            self.runs.push(sum);
        }
        self.memory_now("after the stale feed (free-flow + live blend)");
        let w = self.w.eta.clone();
        let pre = self
            .drive(
                "steady-eta-pre-storm",
                System::Hodos,
                &w,
                half,
                s.steady,
                s.connections,
                s.drain,
            )
            .await;
        self.runs.push(pre.clone());
        let storm = self.reload_storm(half, s.storm).await;
        if let Some(st) = &storm {
            self.runs.push(st.clone());
        }
        self.memory_now("after the reload storm");
        self.outcome = Some(SuiteOutcome {
            caps,
            steady: steady_eta,
            overloads,
            pre,
            storm,
        });
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
        let w = self.w.eta.clone();
        let (c, d) = (self.s.connections, self.s.drain);
        let run = self
            .drive(
                "memory-eta-100k",
                System::Hodos,
                &w,
                5000.0,
                Duration::from_secs(20),
                c,
                d,
            )
            .await;
        self.runs.push(run);
        self.memory_now("after 100,000 ETAs, /metrics never scraped");
        let _ = self.scrape().await;
        self.memory_now("after one GET /metrics");
        let Some(feed) = self.feed(
            Duration::from_secs_f64(self.server.live_ttl_s + 1800.0),
            self.s.seed ^ 0x77,
        ) else {
            return;
        };
        let posted = storm::post_once(&feed).await;
        let seen = self
            .wait_for_tier("historical", Some("live_stale"), Duration::from_secs(20))
            .await;
        let Some(pid) = self.server.pid else { return };
        let (mut lo, mut hi, mut last) = (f64::INFINITY, 0.0f64, None);
        let t = Instant::now();
        while t.elapsed() < Duration::from_secs(12) {
            tokio::time::sleep(Duration::from_millis(250)).await;
            if let Some(p) = proc_stat(pid) {
                let mb = p.rss_kb as f64 / 1024.0;
                lo = lo.min(mb);
                hi = hi.max(mb);
                last = Some(p);
            }
        }
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

    /// Holds the suite's figures against the goals and prints them.
    pub fn finish_goals(&mut self) {
        if let Some(o) = self.outcome.take() {
            self.goals(
                &o.caps,
                o.steady.as_ref(),
                &o.overloads,
                &o.pre,
                o.storm.as_ref(),
            );
        }
    }

    fn goals(
        &mut self,
        caps: &[(String, Option<f64>, Option<f64>)],
        steady: Option<&Summary>,
        overloads: &[Overload],
        pre: &Summary,
        storm: Option<&Summary>,
    ) {
        let mut g = Vec::new();
        for (name, hod, base) in caps {
            let (pass, measured) = match (hod, base) {
                (Some(h), Some(b)) => (
                    if name == "eta" {
                        Some(h / b >= 0.8)
                    } else {
                        None
                    },
                    format!("hodos {h:.0}/s, baseline {b:.0}/s: {:.0}%", 100.0 * h / b),
                ),
                (Some(h), None) => (None, format!("hodos {h:.0}/s, no baseline")),
                _ => (Some(false), "no passing step".to_string()),
            };
            g.push(Goal {
                goal: if name == "eta" {
                    "single ETA max sustainable rate >= 80% of the baseline's".into()
                } else {
                    format!("{name} max sustainable rate (reported, no goal)")
                },
                measured,
                pass,
            });
        }
        if let Some(s) = steady {
            g.push(Goal {
                goal: "single ETA at half the max rate: p99 <= 2 ms".into(),
                measured: format!(
                    "{:.0}/s: p50 {:.3} ms, p99 {:.3} ms, p99.9 {:.3} ms",
                    s.target_rate, s.latency_ms.p50, s.latency_ms.p99, s.latency_ms.p999
                ),
                pass: Some(s.latency_ms.p99 <= 2.0 && s.error_total == 0),
            });
        }
        for o in overloads {
            let (k, s) = (o.k, &o.hodos);
            let base = o
                .baseline
                .as_ref()
                .map(|b| {
                    format!(
                        "; baseline at the same rate: {:.2}% answered, p99 {:.1} ms, achieved {:.0}/s",
                        100.0 * b.answered_share,
                        b.latency_ms.p99,
                        b.achieved_rate
                    )
                })
                .unwrap_or_default();
            let what = if o.workload == "eta" {
                String::new()
            } else {
                format!("{} ", o.workload)
            };
            g.push(Goal {
                goal: format!("overload {what}{k:.0}x: 100% answered, p99 <= 20 ms (overloaded share reported)"),
                measured: format!(
                    "{:.0}/s: {:.2}% answered, p99 {:.1} ms, max {:.1} ms, overloaded {:.1}%, achieved {:.0}/s{base}",
                    s.target_rate,
                    100.0 * s.answered_share,
                    s.latency_ms.p99,
                    s.latency_ms.max,
                    100.0 * s.reason_share("overloaded"),
                    s.achieved_rate
                ),
                pass: Some(s.answered_share >= 1.0 && s.latency_ms.p99 <= 20.0),
            });
        }
        if let Some(st) = storm {
            let admin_failed: u64 = self
                .admin
                .iter()
                .filter(|(n, _)| n.starts_with("reload-storm"))
                .map(|(_, r)| r.failed.values().sum::<u64>())
                .sum();
            let ratio = st.latency_ms.p99 / pre.latency_ms.p99.max(1e-9);
            g.push(Goal {
                goal: "reload storm: zero errors, p99 <= 1.5x the steady p99 at the same rate".into(),
                measured: format!(
                    "{:.0}/s: {} query errors, {} admin failures, p99 {:.3} ms vs steady {:.3} ms ({:.2}x)",
                    st.target_rate, st.error_total, admin_failed, st.latency_ms.p99, pre.latency_ms.p99, ratio
                ),
                pass: Some(st.error_total == 0 && admin_failed == 0 && ratio <= 1.5),
            });
        }
        let two = self
            .memory
            .iter()
            .find(|m| m.max_rss_mb.is_some())
            .or_else(|| {
                self.memory
                    .iter()
                    .find(|m| m.when.starts_with("after the stale"))
            })
            .cloned();
        if let Some(m) = two {
            let peak = self.memory.iter().map(|m| m.hwm_mb).fold(0.0, f64::max);
            let worst = m.max_rss_mb.unwrap_or(m.rss_mb);
            g.push(Goal {
                goal: "server resident memory with NY and two customized metrics <= 250 MB".into(),
                measured: format!(
                    "VmRSS {:.1} MB (max {:.1}) with free-flow + live metrics [{}]; peak VmHWM seen {:.1} MB{}",
                    m.rss_mb,
                    worst,
                    m.when,
                    peak,
                    if self.server.in_process {
                        " (in process: includes the generator)"
                    } else {
                        ""
                    }
                ),
                pass: Some(worst <= 250.0 && !self.server.in_process),
            });
        }
        println!();
        println!("goals");
        for x in &g {
            let line = format!(
                "  [{}] {} — {}",
                match x.pass {
                    Some(true) => "met",
                    Some(false) => "MISSED",
                    None => "info",
                },
                x.goal,
                x.measured
            );
            self.print(line);
        }
        self.goals = g;
    }
}

/// A request pool of the given kind (for single-scenario commands).
pub fn pick(w: &Workloads, k: Kind) -> Workload {
    match k {
        Kind::Eta => w.eta.clone(),
        Kind::Route => w.route.clone(),
        Kind::Matrix { rows: 1, .. } => w.m1x50.clone(),
        Kind::Matrix { .. } => w.m20x20.clone(),
    }
}
