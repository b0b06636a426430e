//! Where each edge's speed came from: the per-edge source class the engine
//! carries along every path ([`hodos_engine::cch::classes`]), so an answer
//! can say which share of its time lies on which kind of speed.
//!
//! - [`FREE_FLOW`]: the edge's default free-flow speed (no historical row
//!   for it in that hour, or no table at all);
//! - [`HISTORICAL`]: the historical table has a row for the edge in that
//!   hour of the week;
//! - [`LIVE`]: the speed blends in a fresh live observation (age ≤ ttl), the
//!   same test [`blend_into`](super::blend_into) applies.
//!
//! [`hour_classes`] labels a historical bucket; [`live_classes`] labels a
//! live blend on top of the bucket it blends into. Both are one pass over the
//! edges, next to the speed vector they describe.

use super::live::{ttl_ms, LiveLayer, NO_OBS};
use super::HistoricalProfile;
use chrono::{DateTime, Utc};
use std::time::Duration;

/// Class of an edge at its default free-flow speed.
pub const FREE_FLOW: u8 = 0;
/// Class of an edge whose speed is the historical table's row for the hour.
pub const HISTORICAL: u8 = 1;
/// Class of an edge whose speed includes a fresh live observation.
pub const LIVE: u8 = 2;

/// One class per edge for `hour` of `hist`: [`HISTORICAL`] where the table
/// has a row for the edge in that hour, [`FREE_FLOW`] elsewhere (everywhere
/// without a table). Matches
/// [`HistoricalProfile::speeds_for_hour`] edge for edge.
pub fn hour_classes(hist: Option<&HistoricalProfile>, num_edges: usize, hour: u8) -> Vec<u8> {
    let mut out = vec![FREE_FLOW; num_edges];
    if let Some(h) = hist {
        for &(e, _) in h.hour(hour) {
            if let Some(c) = out.get_mut(e as usize) {
                *c = HISTORICAL;
            }
        }
    }
    out
}

/// `base` (the classes of the bucket the live layer blends into) with
/// [`LIVE`] on every edge whose observation is fresh at `now` (age ≤ `ttl`,
/// including ones stamped in the future), as [`blend_into`](super::blend_into)
/// decides which edges blend live data in.
pub fn live_classes(base: &[u8], live: &LiveLayer, now: DateTime<Utc>, ttl: Duration) -> Vec<u8> {
    let now_ms = now.timestamp_millis();
    let ttl_ms = ttl_ms(ttl);
    let (_, observed_ms) = live.columns();
    base.iter()
        .zip(observed_ms)
        .map(|(&c, &ms)| {
            if ms != NO_OBS && now_ms.saturating_sub(ms) <= ttl_ms {
                LIVE
            } else {
                c
            }
        })
        .collect()
}
