//! Black-box tests of the `hodos` binary, one test binary: each module was
//! a file of tests/ and runs the real binary (`CARGO_BIN_EXE_hodos`),
//! mostly `hodos serve` on 127.0.0.1, or its other commands.
//!
//! # Layout
//!
//! - [`admission`]: admission by deadline under light and real overload.
//! - [`cli`]: build, info and eta end to end; bad inputs named.
//! - [`connections`]: slow and idle clients, timeouts, compression.
//! - [`demo_cli`]: `hodos demo` as a user runs it.
//! - [`durability`]: crash and restart behaviour.
//! - [`segments`]: `hodos segments` as GeoJSON naming table rows.

mod admission;
mod cli;
mod connections;
mod demo_cli;
mod durability;
mod segments;
