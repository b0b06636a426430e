#![forbid(unsafe_code)]
//! The shared NYC trips replayed on USA-road-d.NY, for the correction's
//! training test and the `train_sweep` example. Its own dev-only crate
//! because it needs `hodos-truth`: the engine's and serving's tests never
//! build it.
//!
//! # Layout
//!
//! - [`ny_trips`]: the shared NYC trips replayed on USA-road-d.NY.

pub mod ny_trips;

pub use ny_trips::replayed_tlc_on_ny;
