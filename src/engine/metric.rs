//! Metrics: per-edge travel times in integer milliseconds.
//!
//! A metric is one `u32` per road edge. The free-flow metric comes from each
//! edge's length and free-flow speed; [`from_speeds`] turns any per-edge speed
//! vector (historical bucket, live blend) into a metric the hierarchy can be
//! customized with.

use crate::graph::RoadGraph;

/// Travel time in milliseconds for `len_m` metres at `speed_kmh`, at least 1
/// (a zero weight would make ties between different paths arbitrary).
#[inline]
pub fn travel_ms(len_m: f64, speed_kmh: f64) -> u32 {
    if speed_kmh <= 0.0 || !speed_kmh.is_finite() {
        return crate::cch::customize::MAX_EDGE_WEIGHT;
    }
    let ms = len_m * 3600.0 / speed_kmh;
    (ms.round() as u64).clamp(1, crate::cch::customize::MAX_EDGE_WEIGHT as u64) as u32
}

/// Free-flow metric of a graph.
pub fn free_flow(g: &RoadGraph) -> Vec<u32> {
    g.edge_len_m
        .iter()
        .zip(&g.edge_speed_kmh)
        .map(|(&l, &s)| travel_ms(l, f64::from(s)))
        .collect()
}

/// Metric from one speed (km/h) per edge.
pub fn from_speeds(g: &RoadGraph, speeds_kmh: &[f32]) -> Vec<u32> {
    assert_eq!(speeds_kmh.len(), g.num_edges(), "one speed per edge");
    g.edge_len_m
        .iter()
        .zip(speeds_kmh)
        .map(|(&l, &s)| travel_ms(l, f64::from(s)))
        .collect()
}
