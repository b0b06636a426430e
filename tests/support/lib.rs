#![forbid(unsafe_code)]
//! Test helpers that need hodos types (the leaf helpers without them are
//! `hodos-testkit`'s): a 168-hour table over a graph, the `[[region]]`
//! text of a configuration file, and the shared NYC trips replayed on
//! USA-road-d.NY. A dev-only crate: the service never links it.
//!
//! # Layout
//!
//! - [`weekly`]: a 168-hour historical table with daily patterns and noise.
//! - [`config_text`]: the `[[region]]` table of a configuration file.
//! - [`ny_trips`]: the shared NYC trips replayed on USA-road-d.NY.

pub mod config_text;
pub mod ny_trips;
pub mod weekly;

pub use config_text::region_table;
pub use ny_trips::replayed_tlc_on_ny;
pub use weekly::{weekly_table, WeeklyTable};
