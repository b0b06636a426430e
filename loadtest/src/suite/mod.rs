//! The suite and its scenarios: capacity search, steady runs, overload,
//! the stale feed, the reload storm, cold start and memory, each against
//! hodos and (where a ratio is reported) against the in-process baseline,
//! back to back in one run; then the goals they are held against.
//!
//! # Layout
//!
//! - `settings`: the knobs shared by every scenario;
//! - `pools`: the request pools and what is drawn from the artifact;
//! - `ctx`: the running state (`Ctx`) and which server a run targets;
//! - `drive`: one measured run with CPU and memory readings, noise redo;
//! - `observe`: waiting for answer tiers, scraping `/metrics`;
//! - scenarios: `cold_start`, `capacity`, `steady`, `overload`, `stale`,
//!   `storm`, `memory`;
//! - `run`: the suite's order (the driver) and the figures it keeps;
//! - `verdicts`: the figures held against `crate::goals`.

mod capacity;
mod cold_start;
mod ctx;
mod drive;
mod memory;
mod observe;
mod overload;
mod pools;
mod run;
mod settings;
mod stale;
mod steady;
mod storm;
mod verdicts;

pub use capacity::Probe;
pub use ctx::{Ctx, System};
pub use memory::Memory;
pub use pools::{pick, Drawn, Workloads};
pub use settings::Settings;
pub use verdicts::Goal;
