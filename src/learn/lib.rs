#![forbid(unsafe_code)]
//! Making what the service loads: models (and, next, speed tables) fitted
//! from completed trips. Measuring is `hodos-truth`'s job; this crate reads
//! trips and their replayed answers through it and writes files in the
//! formats the service already loads (the correction model file of
//! `hodos_serving::correction::file`).
//!
//! **Architecture Invariant:** learning sits beside HTTP, above truth: the
//! service (serving, HTTP) never links it; only the command line does.
//!
//! # Layout
//!
//! - [`train`]: the correction model: a time split, gradient-boosted trees
//!   on `ln(actual/graph)`, split-conformal intervals, the figures.

pub mod train;
