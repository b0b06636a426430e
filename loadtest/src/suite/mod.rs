//! The suite and its scenarios: capacity search, steady runs, overload,
//! the stale feed, the reload storm, cold start and memory, each against
//! hodos and (where a ratio is reported) against the in-process baseline,
//! back to back in one run; then the goals they are held against.
//!
//! # Layout
//!
//! - `settings`: the knobs shared by every scenario, and a run's `Wire`
//!   (its connections and drain);
//! - `pools`: the request pools, what is drawn from the artifact, and the
//!   workloads the suite measures;
//! - `records`: what the suite records (plain data, below `ctx`);
//! - `ctx`: the running state (`Ctx`) and which server a run targets;
//!   every module below adds methods to `Ctx` and uses only `ctx` and the
//!   modules above it;
//! - `drive`: one measured run with CPU and memory readings, noise redo;
//! - `observe`: waiting for answer tiers, scraping `/metrics`;
//! - scenarios: `cold_start`, `capacity`, `steady`, `no_shed` (90% of
//!   capacity, and half beside a noisy neighbour), `held` (stalled bodies
//!   and idle sockets beside a steady run), `overload`, `stale`, `storm`,
//!   `memory`, `live_batch` (memory around a 100 MiB live batch);
//! - `run`: the suite's order (the driver), keeping the figures for the goals;
//! - `verdicts`: the figures held against `crate::goals`.

mod capacity;
mod cold_start;
mod ctx;
mod drive;
mod held;
mod live_batch;
mod memory;
mod no_shed;
mod observe;
mod overload;
mod pools;
mod records;
mod run;
mod settings;
mod stale;
mod steady;
mod storm;
mod verdicts;

pub use ctx::{Ctx, System};
pub use pools::{pick, Drawn, Workloads};
pub use records::{Goal, LiveBatch, Memory, Probe};
pub use settings::{Settings, Wire};
