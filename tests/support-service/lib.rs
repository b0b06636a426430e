#![forbid(unsafe_code)]
//! Helpers for the black-box tests of the service (`tests/service`,
//! `tests/cli`): a synthetic-city fixture with its configuration, speed
//! tables over it, one request through a router, and a service running on
//! 127.0.0.1. It needs the whole stack (the configuration is the `hodos`
//! crate's), so only the root package's tests use it.
//!
//! # Layout
//!
//! - [`service`]: a synthetic-city artifact and configuration for service
//!   tests.
//! - [`tables`]: speed tables over that city's edges.
//! - [`http`]: one request through a router, read back.
//! - [`running`]: a service on 127.0.0.1 port 0 with its stop, and a
//!   bounded client.

pub mod http;
pub mod running;
pub mod service;
pub mod tables;
