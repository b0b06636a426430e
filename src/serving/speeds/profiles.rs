//! Hour-of-week profiles: the 168 hourly speed vectors of a historical
//! table grouped into at most `K` representative profiles, so the service
//! can keep one customized metric per profile for every hour of the week
//! instead of customizing hours on demand.
//!
//! # Grouping
//!
//! 1. **Exact**: hours whose stored `(edge, speed)` rows are identical form
//!    one group. When there are at most `K` groups, each group is a profile
//!    and every hour is answered with its own speeds (deviation 0).
//! 2. **k-means** otherwise: each hour becomes a point whose coordinates are
//!    the log travel-time ratios `ln(free_flow / speed)` of a deterministic
//!    sample of the edges the table names (edges it does not name are
//!    free-flow in every hour and add nothing to any distance). Seeding is
//!    k-means++ (Arthur & Vassilvitskii, 2007) from a fixed seed, then
//!    Lloyd's iterations until no hour changes cluster. Each cluster is
//!    served by its *medoid hour*: the member nearest to the centroid, so a
//!    profile's metric is always one real hour of the table.
//!
//! # Deviation
//!
//! Per hour, over the sampled edges: the relative difference of an edge's
//! travel time under the hour's own speeds and under its profile's
//! representative hour, `|t_rep / t_hour − 1|`; the median and the maximum.
//!
//! # Hour factors (heuristic tier)
//!
//! The heuristic tier's calibration was fitted on free-flow fastest paths.
//! Per hour, `factor = Σ_e len_e / v_hour(e) ÷ Σ_e len_e / v_free(e)` over all
//! edges: the length-weighted travel time of the hour against free-flow.
//! Without a table every factor is 1.

use super::clock::HOURS_PER_WEEK;
use super::historical::HistoricalProfile;
use rand::{Rng, SeedableRng};
use std::collections::HashMap;

/// Hours of the week as a `usize`.
const HOURS: usize = HOURS_PER_WEEK as usize;

/// Edges sampled for the k-means features and the deviation figures.
pub const SAMPLE_EDGES: usize = 4096;

/// Lloyd iterations at most (168 points converge in a handful).
const MAX_ITERATIONS: usize = 100;

/// Fixed seed of the k-means++ seeding: the same table groups the same way
/// on every load.
const SEED: u64 = 0x686f_7572_7320_6b6d;

/// How the 168 hours map onto profiles, with the cost of that mapping.
#[derive(Debug, Clone, PartialEq)]
pub struct HourGrouping {
    /// Profile index of each hour of the week.
    pub hour_profile: [u8; HOURS],
    /// Representative hour of each profile (its speeds are the profile's
    /// metric); `representatives.len()` is the number of profiles.
    pub representatives: Vec<u8>,
    /// Whether every hour is served with exactly its own speeds.
    pub exact: bool,
    /// Per hour: median and maximum relative edge travel-time difference
    /// against its representative (over the sampled edges).
    pub deviation: Vec<(f64, f64)>,
    /// Per hour: length-weighted travel time ÷ free-flow (see module doc).
    pub hour_factor: [f64; HOURS],
}

impl HourGrouping {
    /// One free-flow profile for every hour (no table).
    pub fn free_flow() -> Self {
        HourGrouping {
            hour_profile: [0; HOURS],
            representatives: vec![0],
            exact: true,
            deviation: vec![(0.0, 0.0); HOURS],
            hour_factor: [1.0; HOURS],
        }
    }

    /// Groups `table`'s hours into at most `k` profiles (`k ≥ 1`).
    /// `free_flow` and `len_m` are per edge of the graph the table was
    /// validated against.
    pub fn new(table: &HistoricalProfile, free_flow: &[f32], len_m: &[f64], k: usize) -> Self {
        let k = k.clamp(1, HOURS);
        let hour_factor = hour_factors(table, free_flow, len_m);
        let groups = exact_groups(table);
        let sample = sample_edges(table, free_flow.len());
        let features: Vec<Vec<f64>> = (0..HOURS as u8)
            .map(|h| features(table, free_flow, &sample, h))
            .collect();
        let (hour_profile, representatives, exact) = if groups.len() <= k {
            let mut hp = [0u8; HOURS];
            for (p, g) in groups.iter().enumerate() {
                for &h in g {
                    hp[h as usize] = p as u8;
                }
            }
            (hp, groups.iter().map(|g| g[0]).collect(), true)
        } else {
            let (hp, reps) = kmeans(&features, k);
            (hp, reps, false)
        };
        let deviation = (0..HOURS)
            .map(|h| {
                let rep = representatives[hour_profile[h] as usize] as usize;
                deviation(&features[h], &features[rep])
            })
            .collect();
        HourGrouping {
            hour_profile,
            representatives,
            exact,
            deviation,
            hour_factor,
        }
    }

    /// Number of profiles.
    pub fn len(&self) -> usize {
        self.representatives.len()
    }

    pub fn is_empty(&self) -> bool {
        self.representatives.is_empty()
    }

    /// Profile index of an hour of the week (hours ≥ 168 wrap).
    pub fn profile_of(&self, hour: u8) -> u8 {
        self.hour_profile[hour as usize % HOURS]
    }

    /// Heuristic time factor of an hour of the week.
    pub fn factor(&self, hour: u8) -> f64 {
        self.hour_factor[hour as usize % HOURS]
    }

    /// Median over hours of the per-hour median deviation, and the largest
    /// per-hour maximum.
    pub fn deviation_summary(&self) -> (f64, f64) {
        let mut med: Vec<f64> = self.deviation.iter().map(|d| d.0).collect();
        med.sort_by(f64::total_cmp);
        let median = med.get(med.len() / 2).copied().unwrap_or(0.0);
        let max = self.deviation.iter().map(|d| d.1).fold(0.0, f64::max);
        (median, max)
    }
}

/// Hours with identical stored rows, each group in hour order, groups in
/// order of their first hour.
fn exact_groups(table: &HistoricalProfile) -> Vec<Vec<u8>> {
    let mut by_rows: HashMap<Vec<(u32, u32)>, usize> = HashMap::new();
    let mut groups: Vec<Vec<u8>> = Vec::new();
    for h in 0..HOURS as u8 {
        let key: Vec<(u32, u32)> = table
            .hour(h)
            .iter()
            .map(|&(e, s)| (e, s.to_bits()))
            .collect();
        let next = groups.len();
        let g = *by_rows.entry(key).or_insert(next);
        if g == next {
            groups.push(Vec::new());
        }
        groups[g].push(h);
    }
    groups
}

/// Up to [`SAMPLE_EDGES`] edges the table names, evenly spread over the
/// edge ids (deterministic).
fn sample_edges(table: &HistoricalProfile, num_edges: usize) -> Vec<u32> {
    let mut named = vec![false; num_edges];
    for h in 0..HOURS as u8 {
        for &(e, _) in table.hour(h) {
            if let Some(x) = named.get_mut(e as usize) {
                *x = true;
            }
        }
    }
    let all: Vec<u32> = (0..num_edges as u32)
        .filter(|&e| named[e as usize])
        .collect();
    if all.len() <= SAMPLE_EDGES {
        return all;
    }
    let step = all.len() as f64 / SAMPLE_EDGES as f64;
    (0..SAMPLE_EDGES)
        .map(|i| all[(i as f64 * step) as usize])
        .collect()
}

/// `ln(free_flow / speed)` of each sampled edge in hour `h`.
fn features(table: &HistoricalProfile, free_flow: &[f32], sample: &[u32], h: u8) -> Vec<f64> {
    let rows = table.hour(h);
    sample
        .iter()
        .map(|&e| {
            let ff = f64::from(free_flow[e as usize]);
            match rows.binary_search_by_key(&e, |r| r.0) {
                Ok(i) => (ff / f64::from(rows[i].1)).ln(),
                Err(_) => 0.0,
            }
        })
        .collect()
}

/// Median and maximum of `|exp(rep − hour) − 1|` over the coordinates: the
/// relative travel-time difference of each sampled edge.
fn deviation(hour: &[f64], rep: &[f64]) -> (f64, f64) {
    if hour.is_empty() {
        return (0.0, 0.0);
    }
    let mut d: Vec<f64> = hour
        .iter()
        .zip(rep)
        .map(|(a, b)| ((b - a).exp() - 1.0).abs())
        .collect();
    d.sort_by(f64::total_cmp);
    (d[d.len() / 2], d[d.len() - 1])
}

/// Length-weighted travel time of each hour ÷ that of free-flow.
fn hour_factors(table: &HistoricalProfile, free_flow: &[f32], len_m: &[f64]) -> [f64; HOURS] {
    let base: f64 = len_m
        .iter()
        .zip(free_flow)
        .map(|(l, v)| l / f64::from(*v))
        .sum();
    let mut out = [1.0; HOURS];
    if base <= 0.0 || !base.is_finite() {
        return out;
    }
    for (h, f) in out.iter_mut().enumerate() {
        let delta: f64 = table
            .hour(h as u8)
            .iter()
            .filter(|(e, _)| (*e as usize) < len_m.len())
            .map(|&(e, v)| {
                let l = len_m[e as usize];
                l / f64::from(v) - l / f64::from(free_flow[e as usize])
            })
            .sum();
        *f = (base + delta) / base;
    }
    out
}

fn dist2(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| (x - y) * (x - y)).sum()
}

/// k-means with k-means++ seeding and Lloyd's iterations over the 168 hour
/// points; returns each hour's cluster and each cluster's medoid hour.
/// Clusters are renumbered by their first hour, and an empty cluster is
/// dropped, so every profile serves at least one hour.
fn kmeans(points: &[Vec<f64>], k: usize) -> ([u8; HOURS], Vec<u8>) {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(SEED);
    let n = points.len();
    let mut centers: Vec<Vec<f64>> = vec![points[rng.random_range(0..n)].clone()];
    while centers.len() < k {
        let d: Vec<f64> = points
            .iter()
            .map(|p| {
                centers
                    .iter()
                    .map(|c| dist2(p, c))
                    .fold(f64::INFINITY, f64::min)
            })
            .collect();
        let total: f64 = d.iter().sum();
        if total <= 0.0 {
            break; // fewer distinct points than k
        }
        let mut x = rng.random_range(0.0..total);
        let mut pick = n - 1;
        for (i, di) in d.iter().enumerate() {
            if x < *di {
                pick = i;
                break;
            }
            x -= di;
        }
        centers.push(points[pick].clone());
    }
    let nearest = |p: &[f64], centers: &[Vec<f64>]| {
        (0..centers.len())
            .min_by(|&a, &b| dist2(p, &centers[a]).total_cmp(&dist2(p, &centers[b])))
            .unwrap_or(0)
    };
    let mut assign: Vec<usize> = points.iter().map(|p| nearest(p, &centers)).collect();
    for _ in 0..MAX_ITERATIONS {
        for (c, center) in centers.iter_mut().enumerate() {
            let members: Vec<&Vec<f64>> = points
                .iter()
                .zip(&assign)
                .filter(|(_, &a)| a == c)
                .map(|(p, _)| p)
                .collect();
            if members.is_empty() {
                continue;
            }
            for (j, x) in center.iter_mut().enumerate() {
                *x = members.iter().map(|m| m[j]).sum::<f64>() / members.len() as f64;
            }
        }
        let next: Vec<usize> = points.iter().map(|p| nearest(p, &centers)).collect();
        if next == assign {
            break;
        }
        assign = next;
    }
    // Renumber non-empty clusters by first hour; medoid = member nearest to
    // the centroid (lowest hour on ties).
    let mut order: Vec<usize> = Vec::new();
    for &a in &assign {
        if !order.contains(&a) {
            order.push(a);
        }
    }
    let mut hour_profile = [0u8; HOURS];
    for (h, &a) in assign.iter().enumerate() {
        hour_profile[h] = order.iter().position(|&o| o == a).unwrap_or(0) as u8;
    }
    let reps = order
        .iter()
        .map(|&c| {
            (0..n)
                .filter(|&h| assign[h] == c)
                .min_by(|&a, &b| {
                    dist2(&points[a], &centers[c]).total_cmp(&dist2(&points[b], &centers[c]))
                })
                .unwrap_or(0) as u8
        })
        .collect();
    (hour_profile, reps)
}

#[cfg(test)]
mod tests {
    //! Checks against tables whose hour patterns are known by construction
    //! (the ground truth is the pattern each hour was written from), and a
    //! hand computation of the length-weighted factor.

    use super::*;
    use crate::speeds::{EdgeIndex, ValidationConfig};
    use hodos_engine::graph::RoadGraph;
    use hodos_testkit::{HistoricalCsv, SplitMix64};

    fn graph() -> RoadGraph {
        hodos_engine::import::synthetic::generate(400, 7)
    }

    /// A table over every edge: `speed(edge, hour)`, skipping `None`.
    fn table(g: &RoadGraph, speed: impl Fn(usize, u8) -> Option<f64>) -> HistoricalProfile {
        let mut csv = HistoricalCsv::with_header();
        for h in 0..HOURS as u8 {
            for e in 0..g.num_edges() {
                if let Some(s) = speed(e, h) {
                    let (u, v) = (g.edge_tail[e] as usize, g.edge_head[e] as usize);
                    csv.row(g.node_ext[u], g.node_ext[v], h, format!("{s:.3}"));
                }
            }
        }
        let idx = EdgeIndex::new(g);
        HistoricalProfile::parse(
            csv.into_string().as_bytes(),
            &idx,
            &ValidationConfig::default(),
        )
        .unwrap()
        .0
    }

    /// Whether two labelings of the hours are the same partition.
    fn same_partition(a: &[usize], b: &[usize]) -> bool {
        (0..HOURS).all(|i| (0..HOURS).all(|j| (a[i] == a[j]) == (b[i] == b[j])))
    }

    /// Pattern of an hour: 0 night/evening, 1 weekday peak (7–9, 16–18),
    /// 2 weekday midday (10–15), 3 weekend daytime (8–19).
    fn pattern(h: u8) -> usize {
        let (day, hod) = (h / 24, h % 24);
        match (day < 5, hod) {
            (true, 7..=9 | 16..=18) => 1,
            (true, 10..=15) => 2,
            (false, 8..=19) => 3,
            _ => 0,
        }
    }

    /// Share of free-flow speed of each pattern (night is free-flow).
    const SHARE: [f64; 4] = [1.0, 0.45, 0.75, 0.85];

    /// Speed of an edge in the pattern, with the edge's own free-flow speed
    /// (rows equal to free-flow are written too: the table names every
    /// edge in every hour).
    fn pattern_speed(g: &RoadGraph, e: usize, p: usize) -> f64 {
        (f64::from(g.edge_speed_kmh[e]) * SHARE[p]).max(1.0)
    }

    #[test]
    fn identical_hours_group_exactly() {
        let g = graph();
        let t = table(&g, |e, h| Some(pattern_speed(&g, e, pattern(h))));
        let ff = g.edge_speed_kmh.clone();
        let gr = HourGrouping::new(&t, &ff, &g.edge_len_m, 8);
        // Four patterns written → four profiles, every hour with its own
        // speeds, no deviation.
        assert!(gr.exact);
        assert_eq!(gr.len(), 4);
        let labels: Vec<usize> = (0..HOURS as u8).map(pattern).collect();
        let got: Vec<usize> = gr.hour_profile.iter().map(|&p| p as usize).collect();
        assert!(same_partition(&labels, &got));
        assert_eq!(gr.deviation_summary(), (0.0, 0.0));
        // The representative of each profile is its first hour.
        for (p, &rep) in gr.representatives.iter().enumerate() {
            let first = (0..HOURS)
                .find(|&h| gr.hour_profile[h] as usize == p)
                .unwrap();
            assert_eq!(rep as usize, first);
        }
        // Fewer profiles allowed than patterns → k-means, not exact.
        let gr3 = HourGrouping::new(&t, &ff, &g.edge_len_m, 3);
        assert!(!gr3.exact);
        assert_eq!(gr3.len(), 3);
        assert!(gr3.deviation_summary().1 > 0.0);
    }

    #[test]
    fn kmeans_recovers_noisy_daily_patterns() {
        let g = graph();
        // ±2 % noise per (edge, hour) from SplitMix64: every hour distinct.
        let noise: Vec<f64> = {
            let mut r = SplitMix64::new(42);
            (0..HOURS * g.num_edges())
                .map(|_| 0.98 + 0.04 * (r.next_u64() as f64 / u64::MAX as f64))
                .collect()
        };
        let t = table(&g, |e, h| {
            Some(pattern_speed(&g, e, pattern(h)) * noise[h as usize * g.num_edges() + e])
        });
        let ff = g.edge_speed_kmh.clone();
        let gr = HourGrouping::new(&t, &ff, &g.edge_len_m, 4);
        assert!(!gr.exact);
        let labels: Vec<usize> = (0..HOURS as u8).map(pattern).collect();
        let got: Vec<usize> = gr.hour_profile.iter().map(|&p| p as usize).collect();
        assert!(
            same_partition(&labels, &got),
            "k-means with k = 4 finds the four written patterns: {got:?}"
        );
        // Each hour's travel times differ from its representative's by the
        // noise only: at most 0.98⁻¹·1.02 − 1 ≈ 4.1 % per edge (speeds are
        // written to 3 decimals, and a floor of 1 km/h changes nothing here).
        let (median, max) = gr.deviation_summary();
        assert!(max <= 1.02 / 0.98 - 1.0 + 1e-3, "max {max}");
        assert!(median > 0.0 && median < max);
        // With more profiles than patterns, no profile mixes two patterns.
        let gr8 = HourGrouping::new(&t, &ff, &g.edge_len_m, 8);
        assert_eq!(gr8.len(), 8);
        for p in 0..8u8 {
            let pats: Vec<usize> = (0..HOURS as u8)
                .filter(|&h| gr8.profile_of(h) == p)
                .map(pattern)
                .collect();
            assert!(
                pats.windows(2).all(|w| w[0] == w[1]),
                "profile {p}: {pats:?}"
            );
        }
        // Deterministic: the same table groups the same way.
        assert_eq!(gr8, HourGrouping::new(&t, &ff, &g.edge_len_m, 8));
    }

    #[test]
    fn hour_factor_is_length_weighted_time_over_free_flow() {
        let g = graph();
        // Hour 30: every third edge at 10 km/h; no other rows.
        let t = table(&g, |e, h| (h == 30 && e % 3 == 0).then_some(10.0));
        let ff = g.edge_speed_kmh.clone();
        let gr = HourGrouping::new(&t, &ff, &g.edge_len_m, 8);
        // By hand: Σ len / v over all edges, v = 10 on the written edges
        // (parallel edges with the same ends take the row too) and
        // free-flow elsewhere, over Σ len / free-flow.
        let written: std::collections::HashSet<(u32, u32)> = (0..g.num_edges())
            .filter(|e| e % 3 == 0)
            .map(|e| (g.edge_tail[e], g.edge_head[e]))
            .collect();
        let (mut num, mut den) = (0.0, 0.0);
        for e in 0..g.num_edges() {
            let l = g.edge_len_m[e];
            let v = f64::from(g.edge_speed_kmh[e]);
            den += l / v;
            num += if written.contains(&(g.edge_tail[e], g.edge_head[e])) {
                l / 10.0
            } else {
                l / v
            };
        }
        assert!((gr.factor(30) - num / den).abs() < 1e-9 * (num / den));
        assert_eq!(gr.factor(31), 1.0);
        // Two distinct hour vectors → two exact profiles.
        assert!(gr.exact);
        assert_eq!(gr.len(), 2);
        assert_eq!(gr.representatives, vec![0, 30]);
        assert_eq!(HourGrouping::free_flow().factor(30), 1.0);
    }
}
