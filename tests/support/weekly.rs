//! A realistic-looking 168-hour historical table for tests, benches and
//! examples: four daily patterns (night and evening free-flow, weekday
//! peaks 7–9 and 16–18 at 45 % of free-flow, weekday midday 10–15 at 75 %,
//! weekend daytime 8–19 at 85 %) times ±3 % noise per (edge, hour), on
//! every `step`-th (tail, head) pair of a graph. Deterministic by seed.

use hodos_engine::graph::RoadGraph;
use hodos_testkit::{HistoricalCsv, SplitMix64};
use std::collections::HashMap;

/// Share of free-flow speed by pattern (see [`pattern`]).
pub const SHARE: [f64; 4] = [1.0, 0.45, 0.75, 0.85];

/// Pattern of an hour of week (hour 0 = Monday 00:00): 0 night/evening,
/// 1 weekday peaks, 2 weekday midday, 3 weekend daytime.
pub fn pattern(h: u8) -> usize {
    let (day, hod) = (h / 24, h % 24);
    match (day < 5, hod) {
        (true, 7..=9 | 16..=18) => 1,
        (true, 10..=15) => 2,
        (false, 8..=19) => 3,
        _ => 0,
    }
}

/// The table text and, for each written (from_node, to_node, hour), the
/// speed as the service stores it (the written text parsed as `f32`).
pub struct WeeklyTable {
    pub csv: String,
    pub speed: HashMap<(u64, u64, u8), f32>,
}

/// Builds the table over every `step`-th distinct (tail, head) pair.
pub fn weekly_table(g: &RoadGraph, step: usize, seed: u64) -> WeeklyTable {
    let mut ff: HashMap<(u64, u64), f32> = HashMap::new();
    for e in 0..g.num_edges() {
        let k = (
            g.node_ext[g.edge_tail[e] as usize],
            g.node_ext[g.edge_head[e] as usize],
        );
        ff.entry(k).or_insert(g.edge_speed_kmh[e]);
    }
    let mut pairs: Vec<(u64, u64)> = ff.keys().copied().collect();
    pairs.sort_unstable();
    let mut rng = SplitMix64::new(seed);
    let mut csv = HistoricalCsv::with_header();
    let mut speed = HashMap::new();
    for k in pairs.iter().step_by(step.max(1)) {
        for h in 0..168u8 {
            let noise = 0.97 + 0.06 * (rng.next_u64() as f64 / u64::MAX as f64);
            let v = f64::from(ff[k]) * SHARE[pattern(h)] * noise;
            let text = format!("{:.2}", v.clamp(1.0, 199.0));
            csv.row(k.0, k.1, h, &text);
            speed.insert((k.0, k.1, h), text.parse::<f32>().unwrap_or(1.0));
        }
    }
    WeeklyTable {
        csv: csv.into_string(),
        speed,
    }
}
