//! Black-box tests of the service in this process, one test binary: each
//! module was a file of tests/ and drives `hodos::http`'s routers with
//! `oneshot` or a real server on 127.0.0.1 port 0, plus the shipped
//! configuration and deployment files. Tests that read the process-wide
//! metrics re-run themselves alone in a child process
//! (`hodos_testkit::child::alone`), as each had a process to itself when
//! it was its own binary.
//!
//! # Layout
//!
//! - [`admin_answers`]: the admin API's answers in the corners.
//! - [`config_file`]: the shipped example configuration.
//! - [`correction`]: the correction model end to end on the test city.
//! - [`dashboard`]: the dashboard in headless Chromium against /metrics.
//! - [`deploy`]: the deployment files agree with the service.
//! - [`http_exact`]: exactness through the HTTP API on USA-road-d.NY.
//! - [`ops_rules`]: the operator files name only exported series.
//! - [`routes`]: the route table against the routers and documents.
//! - [`service_api`]: the HTTP API through `app()`.
//! - [`service_ops`]: hot swaps and shutdown on a real server.
//! - [`streamed_uploads`]: uploads parsed as streams.

mod admin_answers;
mod config_file;
mod correction;
mod dashboard;
mod deploy;
mod http_exact;
mod ops_rules;
mod routes;
mod service_api;
mod service_ops;
mod streamed_uploads;
