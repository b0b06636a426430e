//! The command line (clap): the four commands (and the hidden `spin`), which server to load
//! (`ServerArgs`), how to load it (`LoadArgs`, turned into the suite's
//! `Settings`), and the scenario names of `drive` and `probe`.

use crate::goals::{STEP_MAX_SHED_SHARE, STEP_P99_LIMIT_MS};
use crate::suite::Settings;
use crate::workload::Kind;
use clap::{Args, Parser, Subcommand, ValueEnum};
use std::path::{Path, PathBuf};
use std::time::Duration;

#[derive(Parser)]
#[command(
    name = "hodos-load",
    version,
    about = "Open-loop load generator for hodos (loopback targets only)"
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Subcommand)]
pub enum Command {
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
    /// The noisy neighbour the suite starts beside a run: `threads` threads
    /// spinning for `seconds` (ends by itself and with its parent).
    #[command(hide = true)]
    Spin {
        #[arg(long, default_value_t = 1)]
        threads: usize,
        #[arg(long, default_value_t = 30.0)]
        seconds: f64,
    },
}

#[derive(Clone, Copy, ValueEnum, PartialEq, Eq)]
pub enum Scenario {
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
pub struct ServerArgs {
    /// The artifact the server serves: trips are drawn from its graph.
    #[arg(long)]
    pub artifact: PathBuf,
    /// Start `<PATH> serve` as a separate process for the run (the real
    /// measurement: memory and CPU are the server's alone).
    #[arg(long, value_name = "PATH", conflicts_with_all = ["target", "in_process"])]
    pub hodos_bin: Option<PathBuf>,
    /// Serve the artifact inside this process (quick tries; memory and CPU
    /// then include the generator).
    #[arg(long, conflicts_with = "target")]
    pub in_process: bool,
    /// An already running server's public listener (loopback only).
    #[arg(long)]
    pub target: Option<String>,
    /// Its admin listener (loopback only).
    #[arg(long, requires = "target")]
    pub admin: Option<String>,
    /// Its admin token (default: $HODOS_ADMIN_TOKEN).
    #[arg(long)]
    pub admin_token: Option<String>,
    /// Its pid, to read resident memory and CPU from /proc.
    #[arg(long, requires = "target")]
    pub server_pid: Option<u32>,
    /// Its live TTL in seconds (for the stale feed), as configured.
    #[arg(long, default_value_t = 900.0)]
    pub live_ttl_s: f64,
    /// Extra environment for a server started with --hodos-bin, as
    /// KEY=VALUE (repeatable; e.g. allocator tunables for experiments).
    #[arg(long, value_parser = parse_env_pair)]
    pub server_env: Vec<(String, String)>,
    /// IANA time zone of the region (hour-of-week of historical tables).
    #[arg(long, default_value = "America/New_York")]
    pub time_zone: String,
}

fn parse_env_pair(s: &str) -> Result<(String, String), String> {
    match s.split_once('=') {
        Some((k, v)) if !k.is_empty() => Ok((k.to_string(), v.to_string())),
        _ => Err(format!("{s:?} is not KEY=VALUE")),
    }
}

/// How to load it.
#[derive(Args, Clone)]
pub struct LoadArgs {
    /// Keep-alive connections in the pool.
    #[arg(long, default_value_t = 32)]
    pub connections: usize,
    /// Connections in the overload runs.
    #[arg(long, default_value_t = 64)]
    pub overload_connections: usize,
    /// Longest wait for one answer once sent, ms.
    #[arg(long, default_value_t = 5000)]
    pub timeout_ms: u64,
    /// Seconds answers are still awaited after the last scheduled send.
    #[arg(long, default_value_t = 5.0)]
    pub drain_s: f64,
    /// Seconds per capacity-search step.
    #[arg(long, default_value_t = 3.0)]
    pub step_s: f64,
    /// Seconds of each steady run.
    #[arg(long, default_value_t = 10.0)]
    pub steady_s: f64,
    /// Seconds of each overload run.
    #[arg(long, default_value_t = 8.0)]
    pub overload_s: f64,
    /// Seconds of the reload storm.
    #[arg(long, default_value_t = 20.0)]
    pub storm_s: f64,
    /// A capacity step fails above this p99 (ms).
    #[arg(long, default_value_t = STEP_P99_LIMIT_MS)]
    pub p99_limit_ms: f64,
    /// A capacity step fails when more than this share was shed.
    #[arg(long, default_value_t = STEP_MAX_SHED_SHARE)]
    pub max_shed_share: f64,
    /// Rate growth between passing capacity steps.
    #[arg(long, default_value_t = 1.5)]
    pub growth: f64,
    /// Bisection steps after the first failure.
    #[arg(long, default_value_t = 3)]
    pub refine: u32,
    /// Never try a rate above this.
    #[arg(long, default_value_t = 200_000.0)]
    pub max_rate: f64,
    /// Hard cap on the requests of any one run.
    #[arg(long, default_value_t = 2_000_000)]
    pub max_requests: u64,
    /// Live observations POSTed per batch in the storm (and stale feed).
    #[arg(long, default_value_t = 2000)]
    pub live_batch: usize,
    /// Milliseconds between live batches in the storm.
    #[arg(long, default_value_t = 100)]
    pub live_every_ms: u64,
    /// Seconds between historical table PUTs in the storm.
    #[arg(long, default_value_t = 3.0)]
    pub table_every_s: f64,
    /// Edges in each storm table (three hours each).
    #[arg(long, default_value_t = 20_000)]
    pub table_edges: usize,
    /// Seed of the trip sampler.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Output folder (results.json, table.txt, SVG plots).
    #[arg(long, default_value = "target/hodos-load")]
    pub out: PathBuf,
    /// Run a capacity step that failed on its tail alone (no errors, rate
    /// achieved) once more before it counts (noise guard).
    #[arg(long, default_value_t = true, action = clap::ArgAction::Set)]
    pub confirm: bool,
    /// Pacer thread at the lowest real-time priority (SCHED_FIFO 1) so
    /// requests leave on time on a busy two-core machine.
    #[arg(long, default_value_t = true, action = clap::ArgAction::Set)]
    pub realtime_pacer: bool,
    /// Worker threads of the generator's runtime (1: one event loop, which
    /// leaves the most CPU to the server).
    #[arg(long, default_value_t = 1)]
    pub generator_threads: usize,
    /// Before measuring, wait up to this many seconds for the machine to be
    /// quiet (other work under 0.25 cores over 1 s).
    #[arg(long, default_value_t = 120)]
    pub wait_quiet_s: u64,
    /// Before each run, wait up to this many seconds for the machine to be
    /// quiet (0: never wait).
    #[arg(long, default_value_t = 15)]
    pub quiet_per_run_s: u64,
    /// How often a run spoiled by other work is redone (after waiting up
    /// to 30 s for a quiet machine).
    #[arg(long, default_value_t = 2)]
    pub noise_retries: u32,
    /// The whole command is stopped after this many seconds, whatever it is
    /// doing (a started server is stopped too).
    #[arg(long, default_value_t = 1800)]
    pub max_wall_s: u64,
}

impl LoadArgs {
    /// The suite's settings (every figure clamped to a usable minimum).
    pub fn settings(&self, tz: chrono_tz::Tz) -> Settings {
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

    /// The defaults, with `out` set (for the smoke, which has few flags).
    pub fn parse_from_defaults(out: &Path) -> LoadArgs {
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

/// The request kind of a query scenario (single ETAs for the others).
pub fn kind_of(s: Scenario) -> Kind {
    match s {
        Scenario::Route => Kind::Route,
        Scenario::Matrix1x50 => Kind::Matrix { rows: 1, cols: 50 },
        Scenario::Matrix20x20 => Kind::Matrix { rows: 20, cols: 20 },
        _ => Kind::Eta,
    }
}
