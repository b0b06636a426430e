// `unsafe` is denied everywhere but `os` (libc calls the standard
// library does not offer), which allows it and says why.
#![deny(unsafe_code)]
//! Serving: per-region state behind `arc-swap`, speed tables, the answer
//! to a trip or matrix with its tier, admission control and the background
//! threads that do update work.
//!
//! # Layout
//!
//! - [`snapshot`]: per-region serving state behind `arc-swap` and every
//!   update path; [`customizer`]: the low-priority threads that run
//!   customizations and other update work; [`retire`]: superseded data
//!   freed on those threads, never by a request.
//! - [`speeds`]: historical profiles, live observations, blending, saving.
//! - [`answer`], [`tier`]: tier choice and fallbacks for trips and matrices.
//! - [`correction`]: the learned correction of graph times (a model per
//!   region, hot-swapped) and the interval around each ETA.
//! - [`admission`]: shedding by deadline under overload.
//! - [`metrics`]: metric names and their recording (the exporter is the
//!   HTTP layer's).
//! - [`os`]: thread priority, allocator settings and trim, the open-file
//!   limit: the one module with `unsafe` (libc calls), each call justified.
//! - [`service`]: [`service::Service`], every region opened and every
//!   background task started and stopped in one place.
//! - [`settings`]: the serving knobs as plain `serde` types (the file that
//!   holds them is `config`'s business).
//!
//! **Architecture Invariant:** serving knows nothing of HTTP: no
//! `crate::http`, `crate::config` or `crate::demo` import, no axum type.
//! It uses the engine, never the other way round.

pub mod admission;
pub mod answer;
pub mod correction;
pub mod customizer;
pub mod metrics;
pub mod os;
pub mod retire;
pub mod service;
pub mod settings;
pub mod snapshot;
pub mod speeds;
pub mod tier;
