//! Results as data, below everything that produces or shows them: the
//! engine records into a `Tally` and returns an `Outcome` for its `Plan`;
//! the summary of a run is built from that; the table (`report`), the plots
//! (`plot`) and `results.json` only read these types. Nothing here does I/O.
//!
//! # Layout
//!
//! - `tally`: per-connection counts, latencies and parsed answers;
//! - `run`: `Plan` (one run at one rate) and `Outcome` (what it measured);
//! - `latency`: percentiles, the 250 ms timeline and the percentile curve;
//! - `summary`: everything reported for one run (`Summary` and its parts).

pub mod latency;
pub mod run;
pub mod summary;
pub mod tally;

pub use latency::Window;
pub use run::{Outcome, Plan};
pub use summary::{BesideReport, MachineUse, ServerUse, Summary};
pub use tally::Tally;
