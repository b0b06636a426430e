//! Speed tables over the service fixture's edges ([`super::service::city`]),
//! written with `hodos_testkit`'s CSV and JSON writers.

use super::service::city;
use hodos_testkit::{observation, HistoricalCsv};
use serde_json::Value;

/// A historical table setting every edge to `speed` at every weekday 10:00.
pub fn every_edge_at_ten(speed: f64) -> String {
    let mut csv = HistoricalCsv::with_header();
    for (f, t) in &city().edges {
        for day in 0..7 {
            csv.row(f, t, day * 24 + 10, speed);
        }
    }
    csv.into_string()
}

/// Only bad rows (hour 999 with a negative speed, or a speed that is no
/// number): rejected whole.
pub fn corrupt() -> String {
    let mut csv = HistoricalCsv::with_header();
    for (i, (f, t)) in city().edges.iter().enumerate() {
        if i % 2 == 0 {
            csv.row(f, t, 999, -3);
        } else {
            csv.row(f, t, 10, "abc");
        }
    }
    csv.into_string()
}

/// One live observation (by `tail`, `head`) per edge of the first `count`
/// edges.
pub fn observations(count: usize, speed_kmh: f64, observed_at: &str, samples: u32) -> Vec<Value> {
    city()
        .edges
        .iter()
        .take(count)
        .map(|&(f, t)| observation(f, t, speed_kmh, observed_at, samples))
        .collect()
}
