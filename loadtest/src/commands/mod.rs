//! The commands of `hodos-load`, one module each, and what the measuring
//! ones share.
//!
//! # Layout
//!
//! - `setup`: pools, server, quiet wait and baseline for `suite`, `drive`
//!   and `probe`;
//! - `suite`, `drive`, `probe`, `smoke`: one command each.

pub mod drive;
pub mod probe;
mod setup;
pub mod smoke;
pub mod suite;
