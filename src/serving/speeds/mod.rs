//! Speed data: the weekly historical profile, live observations, and their
//! blend into one speed (km/h) per road edge.
//!
//! This is the layer the HTTP service feeds uploads through. It is pure
//! library code apart from [`persist`], which saves accepted tables so a
//! restart brings them back.
//!
//! # Pieces
//!
//! - [`edge_index`]: how a row names segments (`segment` id, or `tail` and
//!   `head` external node ids, optional `way`) → segment (edge) ids.
//! - [`clock`]: an instant → hour of the week in the region's time zone.
//! - [`historical`]: the 168-hour profile parsed from CSV; missing rows fall
//!   back to free-flow.
//! - [`live`]: recent observations (JSON batch or CSV), newest per edge wins.
//! - `observation`: one live observation as uploaded and its checks,
//!   shared by `batch` and `live`.
//! - [`batch`]: a live batch read as a stream (JSON element by element, CSV
//!   record by record) into its compact form, which the log also records.
//! - [`blend`](mod@blend): historical bucket + live layer → one speed vector, with
//!   exponential decay of the live weight.
//! - [`profiles`]: the 168 hours grouped into a bounded set of
//!   representative profiles (exact or k-means), their deviation, and the
//!   per-hour factors of the heuristic tier.
//! - [`sources`]: the source class of each edge's speed (free-flow,
//!   historical, live), next to the speed vector it describes.
//! - [`persist`]: atomic file writes and save/load of both tables.
//! - [`wal`]: the write-ahead log of accepted live batches (framed, fsynced
//!   before the answer, replayed at start).
//! - [`report`]: the per-upload validation report (serde, returned as JSON).
//! - [`config`]: validation limits (maximum speed, bad-row share, ...).
//! - [`error`]: typed errors.
//!
//! # Validation in one place
//!
//! Both tables validate rows the same way and fill the same
//! [`TableReport`]: bad rows are counted by [`ErrorKind`], the first few are
//! reported with their line (CSV, 1-based, header = line 1) or index (JSON,
//! 0-based), and a table whose bad share exceeds
//! [`ValidationConfig::max_bad_share`] is rejected whole: nothing of it is
//! applied and the error carries the report.

pub mod batch;
pub mod blend;
pub mod clock;
pub mod config;
mod csv_input;
pub mod edge_index;
pub mod error;
pub mod historical;
pub mod live;
mod observation;
pub mod persist;
pub mod profiles;
pub mod report;
pub mod sources;
pub mod wal;

pub use batch::{read_csv, read_json, Batch};
pub use blend::{blend, blend_into, live_weight, BlendStats};
pub use clock::{hour_of_week, HOURS_PER_WEEK};
pub use config::ValidationConfig;
pub use edge_index::{EdgeIndex, Named, Refusal, SegmentKey};
pub use error::{BatchFormError, PersistError, SpeedsError};
pub use historical::HistoricalProfile;
pub use live::{LiveEntry, LiveLayer, Observation};
pub use persist::{
    load_historical, load_live, open_historical, save_historical, save_live, write_atomic,
    EnvelopeError, PendingTable, SavedTable,
};
pub use profiles::HourGrouping;
pub use report::{ErrorKind, RowError, TableReport};
