//! `hodos-load`: the load generator of the hodos project.
//!
//! Open-loop load at a constant arrival rate against a hodos server on this
//! machine (loopback only), with an in-process baseline server as the
//! machine's ceiling. Commands:
//!
//! - `suite`: every scenario back to back (capacity search, half-rate
//!   steady runs, overload at 2× and 3×, stale feed, reload storm, memory)
//!   and the goals they are held against;
//! - `drive`: one scenario at a fixed rate;
//! - `probe`: capacity search for one workload;
//! - `smoke`: a few seconds at a low rate for CI; fails only if requests go
//!   unanswered or the tool itself fails.
//!
//! Results: a table on stdout, `results.json`, `table.txt` and SVG plots in
//! the output folder.

mod baseline;
mod engine;
mod guard;
mod plot;
mod report;
mod server;
mod storm;
mod suite;
mod workload;

use anyhow::{bail, Context};
use clap::{Args, Parser, Subcommand, ValueEnum};
use serde::Serialize;
use server::ServerInfo;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::sync::Arc;
use std::time::Duration;
use suite::{Ctx, Settings, System, Workloads};
use workload::{Kind, Sampler};

#[derive(Parser)]
#[command(
    name = "hodos-load",
    version,
    about = "Open-loop load generator for hodos (loopback targets only)"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Every scenario back to back, with the baseline, and the goals.
    Suite {
        #[command(flatten)]
        server: ServerArgs,
        #[command(flatten)]
        load: LoadArgs,
    },
    /// One scenario at a fixed arrival rate.
    Drive {
        #[command(flatten)]
        server: ServerArgs,
        #[command(flatten)]
        load: LoadArgs,
        /// What to send.
        #[arg(long, value_enum, default_value_t = Scenario::Eta)]
        scenario: Scenario,
        /// Arrivals per second.
        #[arg(long)]
        per_second: f64,
        /// Send for this many seconds.
        #[arg(long, default_value_t = 10.0)]
        seconds: f64,
        /// Drive the in-process baseline instead of hodos (query scenarios).
        #[arg(long)]
        baseline: bool,
    },
    /// Capacity search for one workload (hodos, and the baseline with
    /// --with-baseline).
    Probe {
        #[command(flatten)]
        server: ServerArgs,
        #[command(flatten)]
        load: LoadArgs,
        #[arg(long, value_enum, default_value_t = Scenario::Eta)]
        scenario: Scenario,
        /// First rate tried.
        #[arg(long, default_value_t = 1000.0)]
        from_rate: f64,
        #[arg(long)]
        with_baseline: bool,
    },
    /// A short low-rate run for CI: every request must be answered.
    Smoke {
        /// An already running hodos to test (else one is built and served
        /// in this process on port 0).
        #[arg(long)]
        target: Option<String>,
        /// Its admin listener (for the admin checks).
        #[arg(long)]
        admin: Option<String>,
        /// Its admin token (default: $HODOS_ADMIN_TOKEN).
        #[arg(long)]
        admin_token: Option<String>,
        /// The artifact it serves (needed with --target, to draw trips).
        #[arg(long)]
        artifact: Option<PathBuf>,
        #[arg(long, default_value_t = 50.0)]
        per_second: f64,
        #[arg(long, default_value_t = 3.0)]
        seconds: f64,
        #[arg(long, default_value = "target/hodos-load/smoke")]
        out: PathBuf,
    },
}

#[derive(Clone, Copy, ValueEnum, PartialEq, Eq)]
enum Scenario {
    Eta,
    Route,
    Matrix1x50,
    Matrix20x20,
    /// ETAs while live observations and historical tables keep arriving.
    Storm,
    /// ETAs after observations stamped older than the live TTL.
    Stale,
}

/// Which server to load.
#[derive(Args, Clone)]
struct ServerArgs {
    /// The artifact the server serves: trips are drawn from its graph.
    #[arg(long)]
    artifact: PathBuf,
    /// Start `<PATH> serve` as a separate process for the run (the real
    /// measurement: memory and CPU are the server's alone).
    #[arg(long, value_name = "PATH", conflicts_with_all = ["target", "in_process"])]
    hodos_bin: Option<PathBuf>,
    /// Serve the artifact inside this process (quick tries; memory and CPU
    /// then include the generator).
    #[arg(long, conflicts_with = "target")]
    in_process: bool,
    /// An already running server's public listener (loopback only).
    #[arg(long)]
    target: Option<String>,
    /// Its admin listener (loopback only).
    #[arg(long, requires = "target")]
    admin: Option<String>,
    /// Its admin token (default: $HODOS_ADMIN_TOKEN).
    #[arg(long)]
    admin_token: Option<String>,
    /// Its pid, to read resident memory and CPU from /proc.
    #[arg(long, requires = "target")]
    server_pid: Option<u32>,
    /// Its live TTL in seconds (for the stale feed), as configured.
    #[arg(long, default_value_t = 900.0)]
    live_ttl_s: f64,
    /// Extra environment for a server started with --hodos-bin, as
    /// KEY=VALUE (repeatable; e.g. allocator tunables for experiments).
    #[arg(long, value_parser = parse_env_pair)]
    server_env: Vec<(String, String)>,
    /// IANA time zone of the region (hour-of-week of historical tables).
    #[arg(long, default_value = "America/New_York")]
    time_zone: String,
}

fn parse_env_pair(s: &str) -> Result<(String, String), String> {
    match s.split_once('=') {
        Some((k, v)) if !k.is_empty() => Ok((k.to_string(), v.to_string())),
        _ => Err(format!("{s:?} is not KEY=VALUE")),
    }
}

/// How to load it.
#[derive(Args, Clone)]
struct LoadArgs {
    /// Keep-alive connections in the pool.
    #[arg(long, default_value_t = 32)]
    connections: usize,
    /// Connections in the overload runs.
    #[arg(long, default_value_t = 64)]
    overload_connections: usize,
    /// Longest wait for one answer once sent, ms.
    #[arg(long, default_value_t = 5000)]
    timeout_ms: u64,
    /// Seconds answers are still awaited after the last scheduled send.
    #[arg(long, default_value_t = 5.0)]
    drain_s: f64,
    /// Seconds per capacity-search step.
    #[arg(long, default_value_t = 3.0)]
    step_s: f64,
    /// Seconds of each steady run.
    #[arg(long, default_value_t = 10.0)]
    steady_s: f64,
    /// Seconds of each overload run.
    #[arg(long, default_value_t = 8.0)]
    overload_s: f64,
    /// Seconds of the reload storm.
    #[arg(long, default_value_t = 20.0)]
    storm_s: f64,
    /// A capacity step fails above this p99 (ms).
    #[arg(long, default_value_t = 10.0)]
    p99_limit_ms: f64,
    /// A capacity step fails when more than this share was shed.
    #[arg(long, default_value_t = 0.01)]
    max_shed_share: f64,
    /// Rate growth between passing capacity steps.
    #[arg(long, default_value_t = 1.5)]
    growth: f64,
    /// Bisection steps after the first failure.
    #[arg(long, default_value_t = 3)]
    refine: u32,
    /// Never try a rate above this.
    #[arg(long, default_value_t = 200_000.0)]
    max_rate: f64,
    /// Hard cap on the requests of any one run.
    #[arg(long, default_value_t = 2_000_000)]
    max_requests: u64,
    /// Live observations POSTed per batch in the storm (and stale feed).
    #[arg(long, default_value_t = 2000)]
    live_batch: usize,
    /// Milliseconds between live batches in the storm.
    #[arg(long, default_value_t = 100)]
    live_every_ms: u64,
    /// Seconds between historical table PUTs in the storm.
    #[arg(long, default_value_t = 3.0)]
    table_every_s: f64,
    /// Edges in each storm table (three hours each).
    #[arg(long, default_value_t = 20_000)]
    table_edges: usize,
    /// Seed of the trip sampler.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Output folder (results.json, table.txt, SVG plots).
    #[arg(long, default_value = "target/hodos-load")]
    out: PathBuf,
    /// Run a capacity step that failed on its tail alone (no errors, rate
    /// achieved) once more before it counts (noise guard).
    #[arg(long, default_value_t = true, action = clap::ArgAction::Set)]
    confirm: bool,
    /// Pacer thread at the lowest real-time priority (SCHED_FIFO 1) so
    /// requests leave on time on a busy two-core machine.
    #[arg(long, default_value_t = true, action = clap::ArgAction::Set)]
    realtime_pacer: bool,
    /// Worker threads of the generator's runtime (1: one event loop, which
    /// leaves the most CPU to the server).
    #[arg(long, default_value_t = 1)]
    generator_threads: usize,
    /// Before measuring, wait up to this many seconds for the machine to be
    /// quiet (other work under 0.25 cores over 1 s).
    #[arg(long, default_value_t = 120)]
    wait_quiet_s: u64,
    /// Before each run, wait up to this many seconds for the machine to be
    /// quiet (0: never wait).
    #[arg(long, default_value_t = 15)]
    quiet_per_run_s: u64,
    /// How often a run spoiled by other work is redone (after waiting up
    /// to 30 s for a quiet machine).
    #[arg(long, default_value_t = 2)]
    noise_retries: u32,
    /// The whole command is stopped after this many seconds, whatever it is
    /// doing (a started server is stopped too).
    #[arg(long, default_value_t = 1800)]
    max_wall_s: u64,
}

impl LoadArgs {
    fn settings(&self, tz: chrono_tz::Tz) -> Settings {
        Settings {
            connections: self.connections.max(1),
            overload_connections: self.overload_connections.max(1),
            request_timeout: Duration::from_millis(self.timeout_ms.max(1)),
            drain: Duration::from_secs_f64(self.drain_s.max(0.1)),
            step: Duration::from_secs_f64(self.step_s.max(0.5)),
            steady: Duration::from_secs_f64(self.steady_s.max(0.5)),
            overload: Duration::from_secs_f64(self.overload_s.max(0.5)),
            storm: Duration::from_secs_f64(self.storm_s.max(0.5)),
            p99_limit_ms: self.p99_limit_ms,
            max_shed_share: self.max_shed_share,
            growth: self.growth.max(1.05),
            refine: self.refine,
            max_rate: self.max_rate,
            live_every: Duration::from_millis(self.live_every_ms.max(1)),
            table_every: Duration::from_secs_f64(self.table_every_s.max(0.1)),
            live_batch: self.live_batch.max(1),
            table_edges: self.table_edges.max(1),
            tz,
            seed: self.seed,
            max_requests: self.max_requests.max(1),
            confirm: self.confirm,
            realtime_pacer: self.realtime_pacer,
            quiet_per_run: Duration::from_secs(self.quiet_per_run_s),
            noise_retries: self.noise_retries,
            retry_noisy: true,
        }
    }
}

/// Stops the process (and a server it started) after `secs`, so no run
/// outlives its bound even if something hangs.
fn watchdog(secs: u64) {
    std::thread::spawn(move || {
        std::thread::sleep(Duration::from_secs(secs));
        eprintln!("error: hodos-load ran past its {secs} s bound (--max-wall-s); stopping");
        let pid = server::CHILD_PID.load(std::sync::atomic::Ordering::SeqCst);
        if pid != 0 {
            // SAFETY: kill(2) on the pid of the child this process started.
            unsafe {
                libc::kill(pid as libc::pid_t, libc::SIGKILL);
            }
        }
        std::process::exit(3);
    });
}

/// Ctrl-C or SIGTERM: stop a server this process started, then exit.
fn on_signal_stop_child() {
    extern "C" fn handler(sig: libc::c_int) {
        let pid = server::CHILD_PID.load(std::sync::atomic::Ordering::SeqCst);
        if pid != 0 {
            // SAFETY: kill(2) is async-signal-safe; the pid is our child's.
            unsafe {
                libc::kill(pid as libc::pid_t, libc::SIGTERM);
            }
        }
        // SAFETY: _exit(2) is async-signal-safe.
        unsafe { libc::_exit(128 + sig) }
    }
    // SAFETY: installing a handler that only calls async-signal-safe
    // functions.
    unsafe {
        libc::signal(libc::SIGINT, handler as *const () as libc::sighandler_t);
        libc::signal(libc::SIGTERM, handler as *const () as libc::sighandler_t);
    }
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let (wall, threads) = match &cli.command {
        Command::Suite { load, .. } | Command::Drive { load, .. } | Command::Probe { load, .. } => {
            (load.max_wall_s, load.generator_threads)
        }
        Command::Smoke { .. } => (300, 2),
    };
    watchdog(wall);
    on_signal_stop_child();
    let built = if threads <= 1 {
        tokio::runtime::Builder::new_current_thread()
            .enable_all()
            .build()
    } else {
        tokio::runtime::Builder::new_multi_thread()
            .worker_threads(threads)
            .enable_all()
            .build()
    };
    let rt = match built {
        Ok(r) => r,
        Err(e) => {
            eprintln!("error: starting the runtime: {e}");
            return ExitCode::FAILURE;
        }
    };
    let result = rt.block_on(async move {
        match cli.command {
            Command::Suite { server, load } => cmd_suite(server, load).await,
            Command::Drive {
                server,
                load,
                scenario,
                per_second,
                seconds,
                baseline,
            } => cmd_drive(server, load, scenario, per_second, seconds, baseline).await,
            Command::Probe {
                server,
                load,
                scenario,
                from_rate,
                with_baseline,
            } => cmd_probe(server, load, scenario, from_rate, with_baseline).await,
            Command::Smoke {
                target,
                admin,
                admin_token,
                artifact,
                per_second,
                seconds,
                out,
            } => {
                cmd_smoke(
                    target,
                    admin,
                    admin_token,
                    artifact,
                    per_second,
                    seconds,
                    out,
                )
                .await
            }
        }
    });
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e:#}");
            ExitCode::FAILURE
        }
    }
}

/// What is drawn from the artifact: request pools, edges, bounding box.
struct Drawn {
    w: Workloads,
    edges: Arc<Vec<workload::EdgeRef>>,
    lo: hodos::engine::geo::LatLon,
    hi: hodos::engine::geo::LatLon,
    nodes: usize,
}

fn draw(g: &hodos::engine::graph::RoadGraph, seed: u64, scale: usize) -> Drawn {
    let mut s = Sampler::new(g, seed);
    let (lo, hi) = g.bbox();
    Drawn {
        w: Workloads {
            eta: s.trips(Kind::Eta, 20_000 / scale),
            route: s.trips(Kind::Route, 5_000 / scale),
            m1x50: s.matrices(1, 50, 2_000 / scale),
            m20x20: s.matrices(20, 20, 1_000 / scale),
        },
        edges: Arc::new(workload::edges_of(g)),
        lo,
        hi,
        nodes: g.num_nodes(),
    }
}

fn draw_from(path: &Path, seed: u64) -> anyhow::Result<Drawn> {
    let art = hodos::engine::artifact::Artifact::load(path)
        .with_context(|| format!("loading {}", path.display()))?;
    Ok(draw(&art.graph, seed, 1))
}

/// The server of a command, and what keeps it alive.
enum Held {
    Spawned(server::Spawned),
    InProcess(server::InProcess),
    External,
}

async fn open_server(a: &ServerArgs, d: &Drawn, out: &Path) -> anyhow::Result<(ServerInfo, Held)> {
    let env_token = std::env::var(hodos::config::ADMIN_TOKEN_ENV)
        .ok()
        .filter(|t| !t.is_empty());
    if let Some(bin) = &a.hodos_bin {
        eprintln!(
            "starting {} serve (loading {}) ...",
            bin.display(),
            a.artifact.display()
        );
        let s = server::spawn_external(
            bin,
            &a.artifact,
            d.lo,
            d.hi,
            &a.time_zone,
            a.live_ttl_s,
            &a.server_env,
            out,
        )
        .await?;
        eprintln!(
            "server pid {} on {} (config {})",
            s.child_id(),
            s.info.public,
            s.config_path.display()
        );
        return Ok((s.info.clone(), Held::Spawned(s)));
    }
    if a.in_process {
        let token = server::random_token();
        let state = out.join("server-state");
        let _ = std::fs::remove_dir_all(&state);
        let text = server::config_text(
            "127.0.0.1:0".parse()?,
            "127.0.0.1:0".parse()?,
            &std::fs::canonicalize(&a.artifact)?,
            &state,
            d.lo,
            d.hi,
            &a.time_zone,
            a.live_ttl_s,
        );
        let mut cfg = hodos::config::Config::parse(&text).map_err(anyhow::Error::msg)?;
        cfg.admin.token = token.clone();
        cfg.validate()
            .map_err(|(k, m)| anyhow::anyhow!("{k}: {m}"))?;
        let p = server::start_in_process(cfg, token).await?;
        return Ok((p.info.clone(), Held::InProcess(p)));
    }
    let Some(t) = &a.target else {
        bail!(
            "say which server: --hodos-bin PATH (preferred), --in-process, or --target HOST:PORT"
        );
    };
    let public = guard::resolve_loopback(t).await?;
    let admin = match &a.admin {
        Some(x) => Some(guard::resolve_loopback(x).await?),
        None => None,
    };
    server::wait_ready(public, Duration::from_secs(10)).await?;
    Ok((
        ServerInfo {
            public,
            admin,
            token: a.admin_token.clone().or(env_token),
            region: server::REGION.into(),
            pid: a.server_pid,
            in_process: false,
            live_ttl_s: a.live_ttl_s,
        },
        Held::External,
    ))
}

async fn close(held: Held) {
    match held {
        Held::Spawned(mut s) => s.stop(),
        Held::InProcess(p) => p.stop().await,
        Held::External => {}
    }
}

#[derive(Serialize)]
struct Environment {
    date_utc: String,
    command: Vec<String>,
    cpu: String,
    cores: usize,
    memory_gb: f64,
    loadavg_1m_start: f64,
    loadavg_1m_end: f64,
    tool_version: &'static str,
}

fn environment(start_load: f64) -> Environment {
    let cpu = std::fs::read_to_string("/proc/cpuinfo")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("model name"))
                .and_then(|l| l.split_once(':'))
                .map(|(_, v)| v.trim().to_string())
        })
        .unwrap_or_default();
    let mem = std::fs::read_to_string("/proc/meminfo")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("MemTotal:"))
                .and_then(|l| {
                    l.split_whitespace()
                        .nth(1)
                        .and_then(|v| v.parse::<f64>().ok())
                })
        })
        .unwrap_or(0.0)
        / 1024.0
        / 1024.0;
    Environment {
        date_utc: chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true),
        command: std::env::args().collect(),
        cpu,
        cores: std::thread::available_parallelism()
            .map(|n| n.get())
            .unwrap_or(0),
        memory_gb: mem,
        loadavg_1m_start: start_load,
        loadavg_1m_end: server::loadavg_1m(),
        tool_version: env!("CARGO_PKG_VERSION"),
    }
}

#[derive(Serialize)]
struct Results<'a> {
    environment: Environment,
    server: serde_json::Value,
    trip_mix: serde_json::Value,
    goals: &'a [suite::Goal],
    probes: &'a [suite::Probe],
    memory: &'a [suite::Memory],
    admin: serde_json::Value,
    runs: &'a [report::Summary],
}

fn write_outputs(ctx: &Ctx, start_load: f64, out: &Path) -> anyhow::Result<()> {
    std::fs::create_dir_all(out)?;
    let mix: Vec<_> = [&ctx.w.eta, &ctx.w.m1x50]
        .iter()
        .map(|w| serde_json::json!({"workload": w.kind.label(), "bands": w.mix_check(), "assumed": workload::TRIP_MIX}))
        .collect();
    let res = Results {
        environment: environment(start_load),
        server: serde_json::json!({
            "public": ctx.server.public.to_string(),
            "pid": ctx.server.pid,
            "in_process": ctx.server.in_process,
            "live_ttl_s": ctx.server.live_ttl_s,
        }),
        trip_mix: serde_json::Value::Array(mix),
        goals: &ctx.goals,
        probes: &ctx.probes,
        memory: &ctx.memory,
        admin: serde_json::to_value(&ctx.admin)?,
        runs: &ctx.runs,
    };
    let json = out.join("results.json");
    std::fs::write(&json, serde_json::to_vec_pretty(&res)?)?;
    std::fs::write(out.join("table.txt"), ctx.table.join("\n") + "\n")?;
    let lines: Vec<(String, Vec<(f64, f64)>)> = ctx
        .runs
        .iter()
        .map(|s| {
            (
                format!("{} {} {:.0}/s", s.system, s.scenario, s.target_rate),
                s.curve.clone(),
            )
        })
        .collect();
    plot::percentiles(
        &out.join("latency-percentiles.svg"),
        "hodos-load: latency by percentile (from scheduled send)",
        &lines,
    )
    .map_err(anyhow::Error::msg)?;
    for s in &ctx.runs {
        let name = format!(
            "timeline-{}-{}.svg",
            s.system,
            s.scenario.replace(['@', '/'], "_")
        );
        plot::timeline(&out.join(name), s).map_err(anyhow::Error::msg)?;
    }
    eprintln!(
        "wrote {}, table.txt and SVG plots in {}",
        json.display(),
        out.display()
    );
    Ok(())
}

async fn make_ctx(
    sa: &ServerArgs,
    la: &LoadArgs,
    need_baseline: bool,
    cold_first: bool,
) -> anyhow::Result<(Ctx, Held)> {
    let tz: chrono_tz::Tz = sa
        .time_zone
        .parse()
        .map_err(|_| anyhow::anyhow!("unknown IANA time zone {:?}", sa.time_zone))?;
    std::fs::create_dir_all(&la.out).with_context(|| format!("creating {}", la.out.display()))?;
    eprintln!("drawing trips from {} ...", sa.artifact.display());
    let d = draw_from(&sa.artifact, la.seed)?;
    eprintln!(
        "{} nodes, {} edges; trip mix of the ETA pool: {}",
        d.nodes,
        d.edges.len(),
        d.w.eta
            .mix_check()
            .iter()
            .map(|(b, s)| format!("{b} {:.0}%", 100.0 * s))
            .collect::<Vec<_>>()
            .join(", ")
    );
    let (info, held) = open_server(sa, &d, &la.out).await?;
    if la.wait_quiet_s > 0 && !cold_first {
        let busy = server::wait_quiet(Duration::from_secs(la.wait_quiet_s), 0.25).await;
        eprintln!("machine busy over the last second before measuring: {busy:.2} cores");
    }
    let baseline = if need_baseline {
        Some(baseline::Baseline::start()?)
    } else {
        None
    };
    Ok((
        Ctx {
            server: info,
            baseline,
            w: d.w,
            edges: d.edges,
            lo: d.lo,
            hi: d.hi,
            s: la.settings(tz),
            out: la.out.clone(),
            runs: Vec::new(),
            probes: Vec::new(),
            memory: Vec::new(),
            admin: Vec::new(),
            goals: Vec::new(),
            table: Vec::new(),
            outcome: None,
        },
        held,
    ))
}

async fn cmd_suite(sa: ServerArgs, la: LoadArgs) -> anyhow::Result<()> {
    let start_load = server::loadavg_1m();
    let (mut ctx, held) = make_ctx(&sa, &la, true, true).await?;
    ctx.suite().await;
    close(held).await;
    if sa.hodos_bin.is_some() {
        // Memory on a fresh process: the load run's allocator history and
        // caches would blur what the region and its metrics need.
        let d = Drawn {
            w: ctx.w.clone(),
            edges: ctx.edges.clone(),
            lo: ctx.lo,
            hi: ctx.hi,
            nodes: 0,
        };
        match open_server(&sa, &d, &ctx.out.clone()).await {
            Ok((info, held)) => {
                ctx.server = info;
                ctx.memory_phase().await;
                close(held).await;
            }
            Err(e) => eprintln!("warning: the memory phase could not start a server: {e:#}"),
        }
    }
    ctx.finish_goals();
    write_outputs(&ctx, start_load, &ctx.out.clone())
}

fn kind_of(s: Scenario) -> Kind {
    match s {
        Scenario::Route => Kind::Route,
        Scenario::Matrix1x50 => Kind::Matrix { rows: 1, cols: 50 },
        Scenario::Matrix20x20 => Kind::Matrix { rows: 20, cols: 20 },
        _ => Kind::Eta,
    }
}

async fn cmd_drive(
    sa: ServerArgs,
    la: LoadArgs,
    sc: Scenario,
    rate: f64,
    seconds: f64,
    baseline: bool,
) -> anyhow::Result<()> {
    if !(rate > 0.0 && rate.is_finite()) {
        bail!("--per-second must be a positive number");
    }
    let start_load = server::loadavg_1m();
    let (mut ctx, held) = make_ctx(&sa, &la, baseline, false).await?;
    if ctx.wait_warm(Duration::from_secs(60)).await.is_none() {
        eprintln!("warning: no graph answer within 60 s; measuring anyway");
    }
    ctx.header();
    let dur = Duration::from_secs_f64(seconds.max(0.1));
    ctx.memory_now("before");
    let sum = match sc {
        Scenario::Storm => ctx.reload_storm(rate, dur).await,
        Scenario::Stale => ctx.stale_feed(rate, dur).await,
        _ => {
            let w = suite::pick(&ctx.w, kind_of(sc));
            let sys = if baseline {
                System::Baseline
            } else {
                System::Hodos
            };
            let label = format!("{}-fixed", w.kind.label());
            let (c, d) = (ctx.s.connections, ctx.s.drain);
            Some(ctx.drive(&label, sys, &w, rate, dur, c, d).await)
        }
    };
    let Some(sum) = sum else {
        bail!("this scenario needs the admin API: give --admin and an admin token (or let the tool start the server)");
    };
    for n in &sum.notes {
        println!("  {n}");
    }
    ctx.runs.push(sum);
    ctx.memory_now("after");
    close(held).await;
    write_outputs(&ctx, start_load, &ctx.out.clone())
}

async fn cmd_probe(
    sa: ServerArgs,
    la: LoadArgs,
    sc: Scenario,
    from: f64,
    with_baseline: bool,
) -> anyhow::Result<()> {
    let start_load = server::loadavg_1m();
    let (mut ctx, held) = make_ctx(&sa, &la, with_baseline, false).await?;
    if ctx.wait_warm(Duration::from_secs(60)).await.is_none() {
        eprintln!("warning: no graph answer within 60 s; measuring anyway");
    }
    ctx.header();
    let w = suite::pick(&ctx.w, kind_of(sc));
    let name = format!("capacity-{}", w.kind.label());
    if with_baseline {
        ctx.probe(&name, System::Baseline, &w, from * 4.0).await;
    }
    ctx.probe(&name, System::Hodos, &w, from).await;
    close(held).await;
    write_outputs(&ctx, start_load, &ctx.out.clone())
}

/// The smoke: small runs of every query workload, one admin round trip,
/// the baseline; fails if any request went unanswered.
async fn cmd_smoke(
    target: Option<String>,
    admin: Option<String>,
    admin_token: Option<String>,
    artifact: Option<PathBuf>,
    rate: f64,
    seconds: f64,
    out: PathBuf,
) -> anyhow::Result<()> {
    let start_load = server::loadavg_1m();
    std::fs::create_dir_all(&out)?;
    let tmp = tempfile::tempdir()?;
    let (d, info, held) = match target {
        Some(t) => {
            let Some(art) = artifact else {
                bail!("--target needs --artifact (the served artifact, to draw trips from)");
            };
            let d = draw_from(&art, 7)?;
            let public = guard::resolve_loopback(&t).await?;
            let admin = match admin {
                Some(a) => Some(guard::resolve_loopback(&a).await?),
                None => None,
            };
            server::wait_ready(public, Duration::from_secs(10)).await?;
            let token = admin_token.or_else(|| std::env::var(hodos::config::ADMIN_TOKEN_ENV).ok());
            let info = ServerInfo {
                public,
                admin,
                token,
                region: server::REGION.into(),
                pid: None,
                in_process: false,
                live_ttl_s: 900.0,
            };
            (d, info, Held::External)
        }
        None => {
            // A small synthetic city of the project's demo generator,
            // built and served here on port 0.
            eprintln!("building a 3,000-node synthetic city for the smoke ...");
            let art = tokio::task::spawn_blocking(|| {
                hodos::engine::build::build(
                    &hodos::engine::build::Source::Synthetic {
                        nodes: 3_000,
                        seed: 5,
                    },
                    &mut hodos::engine::build::Quiet,
                )
            })
            .await??;
            let path = tmp.path().join("smoke.hodos");
            art.save(&path)?;
            let d = draw(&art.graph, 7, 20);
            drop(art);
            let token = server::random_token();
            let text = server::config_text(
                "127.0.0.1:0".parse()?,
                "127.0.0.1:0".parse()?,
                &path,
                &tmp.path().join("state"),
                d.lo,
                d.hi,
                "UTC",
                900.0,
            );
            let mut cfg = hodos::config::Config::parse(&text).map_err(anyhow::Error::msg)?;
            cfg.admin.token = token.clone();
            cfg.validate()
                .map_err(|(k, m)| anyhow::anyhow!("{k}: {m}"))?;
            let p = server::start_in_process(cfg, token).await?;
            (d, p.info.clone(), Held::InProcess(p))
        }
    };
    let la = LoadArgs::parse_from_defaults(&out);
    let mut ctx = Ctx {
        server: info,
        baseline: Some(baseline::Baseline::start()?),
        w: d.w,
        edges: d.edges,
        lo: d.lo,
        hi: d.hi,
        s: la.settings(chrono_tz::UTC),
        out: out.clone(),
        runs: Vec::new(),
        probes: Vec::new(),
        memory: Vec::new(),
        admin: Vec::new(),
        goals: Vec::new(),
        table: Vec::new(),
        outcome: None,
    };
    ctx.s.quiet_per_run = Duration::ZERO;
    ctx.s.retry_noisy = false;
    ctx.s.live_batch = 200;
    ctx.s.table_edges = 200;
    ctx.header();
    let dur = Duration::from_secs_f64(seconds.clamp(0.5, 60.0));
    let short = Duration::from_secs_f64((seconds / 2.0).clamp(0.5, 30.0));
    let (c, dr) = (4, Duration::from_secs(10));
    let w = ctx.w.clone();
    let plans = [
        ("smoke-eta", System::Hodos, &w.eta, rate, dur),
        (
            "smoke-matrix1x50",
            System::Hodos,
            &w.m1x50,
            (rate / 5.0).max(1.0),
            short,
        ),
        (
            "smoke-matrix20x20",
            System::Hodos,
            &w.m20x20,
            (rate / 10.0).max(1.0),
            short,
        ),
        (
            "smoke-route",
            System::Hodos,
            &w.route,
            (rate / 2.5).max(1.0),
            short,
        ),
        ("smoke-eta", System::Baseline, &w.eta, rate, short),
    ];
    for (name, sys, wl, r, t) in plans {
        let s = ctx.drive(name, sys, wl, r, t, c, dr).await;
        ctx.runs.push(s);
    }
    if ctx.server.admin.is_some() && ctx.server.token.is_some() {
        ctx.s.live_every = Duration::from_millis(100);
        ctx.s.table_every = Duration::from_secs(1);
        if let Some(s) = ctx.reload_storm(rate, short).await {
            for n in &s.notes {
                println!("  {n}");
            }
            ctx.runs.push(s);
        }
    } else {
        println!("(no admin listener or token: the storm check is skipped)");
    }
    close(held).await;
    drop(ctx.baseline.take());
    write_outputs(&ctx, start_load, &out)?;
    let mut bad = Vec::new();
    for s in &ctx.runs {
        if s.scheduled == 0 || s.ok < s.scheduled {
            bad.push(format!(
                "{} ({}): {} of {} answered, errors {:?}",
                s.scenario, s.system, s.ok, s.scheduled, s.errors
            ));
        }
    }
    for (name, r) in &ctx.admin {
        if r.calls == 0 || r.accepted < r.calls {
            bad.push(format!(
                "{name}: {} of {} admin calls accepted ({:?})",
                r.accepted, r.calls, r.failed
            ));
        }
    }
    if bad.is_empty() {
        let answered: u64 = ctx.runs.iter().map(|s| s.ok).sum();
        println!(
            "smoke: {} runs, {answered} requests, every one answered",
            ctx.runs.len()
        );
        Ok(())
    } else {
        bail!("smoke failed:\n  {}", bad.join("\n  "))
    }
}

impl LoadArgs {
    /// The defaults, with `out` set (for the smoke, which has few flags).
    fn parse_from_defaults(out: &Path) -> LoadArgs {
        #[derive(Parser)]
        struct Only {
            #[command(flatten)]
            load: LoadArgs,
        }
        let mut l = Only::parse_from(["smoke"]).load;
        l.out = out.to_path_buf();
        l
    }
}

impl server::Spawned {
    fn child_id(&self) -> u32 {
        self.info.pid.unwrap_or(0)
    }
}
