//! The truth layer's integration tests, one binary: each module was a file
//! of the workspace's tests/ and checks `hodos-truth`'s replay, measures
//! and report against outside references (numpy, petgraph, headless
//! Chromium). They never link HTTP.
//!
//! # Layout
//!
//! - [`truth_numpy`]: the accuracy metrics against numpy.
//! - [`truth_replay`]: replaying trips answers each from its own profile.
//! - [`truth_report`]: the accuracy report in a browser.

mod truth_numpy;
mod truth_replay;
mod truth_report;
