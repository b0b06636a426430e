//! Ground truth for the demo: completed trips whose durations come from
//! speeds hodos does not see exactly, so `hodos eval` and `hodos train`
//! have something true to measure against in the fictional city, and the
//! running demo completes trips of its own whose error the service records.
//!
//! The hidden world ([`Truth`]): every segment's true speed is its default
//! speed times a fixed factor of its own (side streets are slower than
//! their signs say, arterials closer to them), times the demo profile's
//! rush-hour factor on arterials (the one the historical table tells
//! hodos), and at rush hours a few segments carry an incident (a third of
//! their speed); while the live feed jams the bridge, the bridge is at the
//! jam's speed. Each trip is driven on the true speeds of its departure's
//! hour class (off-peak, shoulder, peak), by a driver a little faster or
//! slower than the next, plus time to set off and arrive. Everything here
//! is invented for the demo and used by no test as a reference.

use crate::engine::artifact::Artifact;
use crate::engine::cch::CchQuery;
use crate::engine::geo::LatLon;
use crate::engine::metric::from_speeds;
use crate::engine::region::{End, Metric, Region};
use chrono::{DateTime, Datelike, Duration, Timelike, Utc};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::fmt::Write as _;

/// Farther than this from a road, a point is off the network for the
/// service (its default `query.max_snap_m`).
const OFF_ROAD_M: f64 = 500.0;

/// Trips the demo writes.
pub const DEMO_TRIPS: usize = 6000;

/// The bridge's speed while the live feed jams it, km/h (as the feed says).
pub const JAM_KMH: f32 = 8.0;

fn unit(rng: &mut ChaCha8Rng) -> f64 {
    rng.random::<f64>()
}

/// A standard normal draw (Box–Muller).
fn normal(rng: &mut ChaCha8Rng) -> f64 {
    let u = unit(rng).max(1e-12);
    let v = unit(rng);
    (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
}

/// The rush factor class of an hour of week: 0 off-peak, 1 shoulder (0.7),
/// 2 peak (0.55), as the demo's historical profile.
fn hour_class(hour_of_week: u32) -> usize {
    match super::rush_factor(hour_of_week) {
        None => 0,
        Some(f) if f > 0.6 => 1,
        Some(_) => 2,
    }
}

/// Hour of week (0 = Monday 00:00 UTC, the demo region's zone) of `t`.
fn hour_of_week(t: DateTime<Utc>) -> u32 {
    t.weekday().num_days_from_monday() * 24 + t.hour()
}

/// The demo's hidden world.
pub struct Truth {
    region: Region,
    /// True speed per edge, km/h, per hour class; then the same with the
    /// bridge jammed.
    speeds: Vec<Vec<f32>>,
    metrics: Vec<Metric>,
}

impl std::fmt::Debug for Truth {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Truth")
            .field("edges", &self.num_edges())
            .finish()
    }
}

impl Truth {
    /// The hidden speeds of `art`'s city (`bridge`: the edges the live
    /// feed jams, as (tail, head) external ids), seeded by `seed`.
    pub fn new(art: &Artifact, bridge: &[(u64, u64)], seed: u64) -> Truth {
        let region = Region::from_artifact(art.clone());
        let g = &region.graph;
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let own: Vec<f64> = (0..g.num_edges())
            .map(|e| {
                let arterial = super::is_arterial(g.edge_class[e]);
                let (mean, sd) = if arterial { (0.92, 0.12) } else { (0.7, 0.25) };
                (mean * (sd * normal(&mut rng)).exp()).clamp(0.2, 1.5)
            })
            .collect();
        let incident: Vec<bool> = (0..g.num_edges()).map(|_| unit(&mut rng) < 0.03).collect();
        let on_bridge: Vec<bool> = (0..g.num_edges())
            .map(|e| {
                let ends = (
                    g.node_ext[g.edge_tail[e] as usize],
                    g.node_ext[g.edge_head[e] as usize],
                );
                bridge.contains(&ends)
            })
            .collect();
        let mut speeds = Vec::new();
        for jammed in [false, true] {
            for (class, rush) in [1.0f64, 0.7, 0.55].into_iter().enumerate() {
                speeds.push(
                    (0..g.num_edges())
                        .map(|e| {
                            if jammed && on_bridge[e] {
                                return JAM_KMH;
                            }
                            let base = f64::from(g.edge_speed_kmh[e]) * own[e];
                            let r = if super::is_arterial(g.edge_class[e]) {
                                rush
                            } else {
                                1.0
                            };
                            let inc = if class == 2 && incident[e] { 0.33 } else { 1.0 };
                            (base * r * inc).max(2.0) as f32
                        })
                        .collect::<Vec<f32>>(),
                );
            }
        }
        let metrics = speeds
            .iter()
            .map(|s| region.metric(from_speeds(g, s)))
            .collect();
        Truth {
            region,
            speeds,
            metrics,
        }
    }

    fn which(&self, leaving: DateTime<Utc>, jammed: bool) -> usize {
        hour_class(hour_of_week(leaving)) + if jammed { 3 } else { 0 }
    }

    /// True speeds, km/h per edge (the artifact's edge order), at `t`.
    pub fn speeds_at(&self, t: DateTime<Utc>, jammed: bool) -> &[f32] {
        &self.speeds[self.which(t, jammed)]
    }

    /// The edges' (tail, head) external ids.
    pub fn edge_ends(&self, e: usize) -> (u64, u64) {
        let g = &self.region.graph;
        (
            g.node_ext[g.edge_tail[e] as usize],
            g.node_ext[g.edge_head[e] as usize],
        )
    }

    pub fn num_edges(&self) -> usize {
        self.region.graph.num_edges()
    }

    /// How long the trip from `a` to `b` leaving at `leaving` really takes
    /// (seconds) and how far it goes (metres): `None` when `b` is off the
    /// network or no road joins them. An off-road start adds its distance
    /// at 10 km/h.
    pub fn drive(
        &self,
        q: &mut CchQuery,
        rng: &mut ChaCha8Rng,
        a: LatLon,
        b: LatLon,
        leaving: DateTime<Utc>,
        jammed: bool,
    ) -> Option<(f64, f64)> {
        let metric = &self.metrics[self.which(leaving, jammed)];
        let eta = self.region.eta(metric, q, a, b, 5000.0).ok()?;
        self.region.snap_within(b, End::To, OFF_ROAD_M).ok()?;
        let walk_s = (eta.from.distance_m + eta.to.distance_m) * 3.6 / 10.0;
        let driver = (0.08 * normal(rng)).exp();
        let stops = 30.0 + 90.0 * unit(rng);
        Some((eta.time_s * driver + stops + walk_s, eta.meters))
    }

    /// A trip's two ends: an origin in the middle of the city (one in 25
    /// just past its southern or northern edge, off the road network,
    /// which hodos can only estimate) and a destination 0.5 to about 15 km
    /// away (exponential, mean 4 km).
    pub fn ends(&self, rng: &mut ChaCha8Rng) -> (LatLon, LatLon) {
        let (lo, hi) = self.region.graph.bbox();
        loop {
            let off_road = unit(rng) < 0.04;
            let a = if off_road {
                let out = 0.006 + 0.003 * unit(rng);
                let lat = if unit(rng) < 0.5 {
                    lo.lat - out
                } else {
                    hi.lat + out
                };
                LatLon::new(lat, lo.lon + (hi.lon - lo.lon) * (0.1 + 0.8 * unit(rng)))
            } else {
                LatLon::new(
                    lo.lat + (hi.lat - lo.lat) * (0.1 + 0.8 * unit(rng)),
                    lo.lon + (hi.lon - lo.lon) * (0.1 + 0.8 * unit(rng)),
                )
            };
            let d = 500.0 - 4000.0 * unit(rng).max(1e-9).ln();
            let th = std::f64::consts::TAU * unit(rng);
            let b = LatLon::new(
                a.lat + d * th.cos() / 111_320.0,
                a.lon + d * th.sin() / (111_320.0 * a.lat.to_radians().cos()),
            );
            let snapped = self.region.snap_within(a, End::From, OFF_ROAD_M).is_ok();
            if off_road != snapped {
                return (a, b);
            }
        }
    }

    /// A query scratch for [`Truth::drive`].
    pub fn query(&self) -> CchQuery {
        CchQuery::new(&self.region.cch)
    }
}

/// Completed trips as our trips CSV (header `id,from_lat,...`): `n` trips
/// departing over the `days` days before `end` (the bridge open), seeded
/// by `seed`.
pub fn completed_trips_csv(
    truth: &Truth,
    n: usize,
    days: i64,
    end: DateTime<Utc>,
    seed: u64,
) -> String {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut q = truth.query();
    let mut out = String::from(
        "id,from_lat,from_lon,to_lat,to_lon,leaving,duration_s,distance_m,vehicle,served_eta_s,served_tier,served_snapshot\n",
    );
    let span_s = days * 86_400;
    let mut made = 0;
    let mut tries = 0;
    while made < n && tries < 50 * n {
        tries += 1;
        let (a, b) = truth.ends(&mut rng);
        let leaving = end - Duration::seconds((unit(&mut rng) * span_s as f64) as i64);
        let Some((duration, meters)) = truth.drive(&mut q, &mut rng, a, b, leaving, false) else {
            continue;
        };
        if meters < 300.0 {
            continue;
        }
        let _ = writeln!(
            out,
            "d{made},{:.6},{:.6},{:.6},{:.6},{},{:.0},{:.0},car,,,",
            a.lat,
            a.lon,
            b.lat,
            b.lon,
            leaving.to_rfc3339_opts(chrono::SecondsFormat::Secs, true),
            duration,
            meters
        );
        made += 1;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::build::{build, Quiet, Source};
    use crate::truth::trips::{read_trips, ReadOptions, TripFormat};

    /// The demo's trips file is one our own reader takes whole, with the
    /// share of off-road starts it is built with (1 in 25, within
    /// sampling noise: 400 trips, binomial sd ≈ 1 %).
    #[test]
    fn demo_trips_read_back_whole() {
        let art = build(
            &Source::Synthetic {
                nodes: 3000,
                seed: 3,
            },
            &mut Quiet,
        )
        .unwrap();
        let truth = Truth::new(&art, &[], 5);
        let csv = completed_trips_csv(&truth, 400, 7, Utc::now(), 5);
        let (trips, rep) =
            read_trips(csv.as_bytes(), TripFormat::Csv, &ReadOptions::default()).unwrap();
        assert_eq!((rep.rows, rep.refused), (400, 0), "{:?}", rep.first_errors);
        let region = Region::from_artifact(art);
        let off = trips
            .iter()
            .filter(|t| region.snap_within(t.from, End::From, OFF_ROAD_M).is_err())
            .count();
        assert!((2..=32).contains(&off), "{off} off-road starts of 400");
        assert!(trips.iter().all(|t| t.duration_s >= 30.0));
    }
}
