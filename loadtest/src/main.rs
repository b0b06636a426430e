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
//!   unanswered or the tool itself fails;
//! - `spin` (hidden): the noisy neighbour the suite starts as a child
//!   process (threads spinning for a bounded time).
//!
//! Results: a table on stdout, `results.json`, `table.txt` and SVG plots in
//! the output folder.
//!
//! # Layout
//!
//! Modules from the bottom up; each uses only modules earlier in this list
//! (never a later one), so imports run one way. The run's result types live
//! in `model`, which `engine` fills and `report`, `plot` and `output` read:
//! none of those three imports another.
//!
//! 1. `workload` (request pools from the road graph), `guard` (loopback
//!    targets only), `goals` (the goal thresholds), `noise` (the noise
//!    guard's thresholds);
//! 2. `model`: results as data (`Tally`, `Plan`, `Outcome`, `Summary`);
//! 3. `engine` (the open-loop generator: `Plan` in, `Outcome` out);
//!    `report` (the stdout table) and `plot` (SVG), which only read `model`;
//! 4. `server` (the server under test, `/proc` readings), `admin` (admin
//!    traffic beside a load), `baseline` (the in-process ceiling),
//!    `beside` (a noisy-neighbour process and held sockets beside a load);
//! 5. `suite`: the driver and its scenarios;
//! 6. `cli`: the clap definitions (turned into the suite's settings);
//! 7. `draw` (pools from an artifact), `open` (the server of a command),
//!    `output` (`results.json`, `table.txt`, plots);
//! 8. `commands`: one module per command;
//! 9. `watchdog` and `signals` (process bounds), and `main`: parse, start
//!    them, run the command, map the result to an exit code.

mod admin;
mod baseline;
mod beside;
mod cli;
mod commands;
mod draw;
mod engine;
mod goals;
mod guard;
mod model;
mod noise;
mod open;
mod output;
mod plot;
mod report;
mod server;
mod signals;
mod suite;
mod watchdog;
mod workload;

use clap::Parser;
use cli::{Cli, Command};
use std::process::ExitCode;

/// Parses the command line, bounds the process, runs the command on a
/// runtime of `--generator-threads` workers, and maps its result to the
/// exit code.
fn main() -> ExitCode {
    let cli = Cli::parse();
    if let Command::Spin { threads, seconds } = cli.command {
        beside::spin(threads, seconds);
        return ExitCode::SUCCESS;
    }
    // Held sockets and connection pools need more than the usual 1,024
    // descriptors.
    let _ = beside::raise_nofile();
    let (wall, threads) = match &cli.command {
        Command::Suite { load, .. } | Command::Drive { load, .. } | Command::Probe { load, .. } => {
            (load.max_wall_s, load.generator_threads)
        }
        Command::Smoke { .. } | Command::Spin { .. } => (300, 2),
    };
    watchdog::start(wall);
    signals::stop_child_on_signal();
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
            Command::Suite { server, load } => commands::suite::run(server, load).await,
            Command::Drive {
                server,
                load,
                scenario,
                per_second,
                seconds,
                baseline,
            } => commands::drive::run(server, load, scenario, per_second, seconds, baseline).await,
            Command::Probe {
                server,
                load,
                scenario,
                from_rate,
                with_baseline,
            } => commands::probe::run(server, load, scenario, from_rate, with_baseline).await,
            Command::Smoke {
                target,
                admin,
                admin_token,
                artifact,
                per_second,
                seconds,
                out,
            } => {
                commands::smoke::run(
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
            Command::Spin { .. } => Ok(()),
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
