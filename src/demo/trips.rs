//! Ground truth for the demo: completed trips whose durations come from
//! speeds hodos does not see exactly, so `hodos eval` and `hodos train`
//! have something true to measure against in the fictional city.
//!
//! The hidden world: every segment's true speed is its default speed times
//! a fixed factor of its own (side streets are slower than their signs
//! say, arterials closer to them), times the demo profile's rush-hour
//! factor on arterials (the one the historical table tells hodos), and at
//! rush hours a few segments carry an incident (a third of their speed).
//! Each trip is driven on the true speeds of its departure's hour class
//! (off-peak, shoulder, peak), by a driver a little faster or slower than
//! the next, plus time to set off and arrive. Everything here is invented
//! for the demo and used by no test as a reference.

use crate::engine::artifact::Artifact;
use crate::engine::cch::CchQuery;
use crate::engine::geo::LatLon;
use crate::engine::metric::from_speeds;
use crate::engine::region::{End, Region};
use chrono::{DateTime, Datelike, Duration, Timelike, Utc};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::fmt::Write as _;

/// Farther than this from a road, a point is off the network for the
/// service (its default `query.max_snap_m`).
const OFF_ROAD_M: f64 = 500.0;

/// Trips the demo writes.
pub const DEMO_TRIPS: usize = 6000;

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

/// Completed trips as our trips CSV (header `id,from_lat,...`): `n` trips
/// departing over the `days` days before `end`, seeded by `seed`.
pub fn completed_trips_csv(
    art: &Artifact,
    n: usize,
    days: i64,
    end: DateTime<Utc>,
    seed: u64,
) -> String {
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
    let metrics: Vec<_> = [1.0f32, 0.7, 0.55]
        .iter()
        .enumerate()
        .map(|(class, &rush)| {
            let speeds: Vec<f32> = (0..g.num_edges())
                .map(|e| {
                    let base = f64::from(g.edge_speed_kmh[e]) * own[e];
                    let arterial = super::is_arterial(g.edge_class[e]);
                    let r = if arterial { f64::from(rush) } else { 1.0 };
                    let inc = if class == 2 && incident[e] { 0.33 } else { 1.0 };
                    (base * r * inc).max(2.0) as f32
                })
                .collect();
            region.metric(from_speeds(g, &speeds))
        })
        .collect();
    let mut q = CchQuery::new(&region.cch);
    let (lo, hi) = g.bbox();
    let mut out = String::from(
        "id,from_lat,from_lon,to_lat,to_lon,leaving,duration_s,distance_m,vehicle,served_eta_s,served_tier,served_snapshot\n",
    );
    let span_s = days * 86_400;
    let mut made = 0;
    let mut tries = 0;
    while made < n && tries < 50 * n {
        tries += 1;
        // Origins anywhere in the middle of the city; destinations 0.5 to
        // about 15 km away (exponential, mean 4 km); one trip in 25 starts
        // off the road network (a yard, a park), which hodos can only
        // estimate.
        let off_road = unit(&mut rng) < 0.04;
        let a = if off_road {
            // Just past the city's southern or northern edge, inside the
            // region's coverage (0.01° of padding).
            let out = 0.006 + 0.003 * unit(&mut rng);
            let lat = if unit(&mut rng) < 0.5 {
                lo.lat - out
            } else {
                hi.lat + out
            };
            LatLon::new(
                lat,
                lo.lon + (hi.lon - lo.lon) * (0.1 + 0.8 * unit(&mut rng)),
            )
        } else {
            LatLon::new(
                lo.lat + (hi.lat - lo.lat) * (0.1 + 0.8 * unit(&mut rng)),
                lo.lon + (hi.lon - lo.lon) * (0.1 + 0.8 * unit(&mut rng)),
            )
        };
        let d = 500.0 - 4000.0 * unit(&mut rng).max(1e-9).ln();
        let th = std::f64::consts::TAU * unit(&mut rng);
        let b = LatLon::new(
            a.lat + d * th.cos() / 111_320.0,
            a.lon + d * th.sin() / (111_320.0 * a.lat.to_radians().cos()),
        );
        let snapped = region.snap_within(a, End::From, OFF_ROAD_M).is_ok();
        if off_road == snapped {
            continue;
        }
        let leaving = end - Duration::seconds((unit(&mut rng) * span_s as f64) as i64);
        let how = leaving.weekday().num_days_from_monday() * 24 + leaving.hour();
        // The driver reaches the road network first (off-road ends at
        // 10 km/h on top of the drive from the nearest road).
        let Ok(eta) = region.eta(&metrics[hour_class(how)], &mut q, a, b, 5000.0) else {
            continue;
        };
        if region.snap_within(b, End::To, OFF_ROAD_M).is_err() {
            continue;
        }
        let walk_s = (eta.from.distance_m + eta.to.distance_m) * 3.6 / 10.0;
        if eta.meters < 300.0 {
            continue;
        }
        let driver = (0.08 * normal(&mut rng)).exp();
        let stops = 30.0 + 90.0 * unit(&mut rng);
        let duration = eta.time_s * driver + stops + walk_s;
        let _ = writeln!(
            out,
            "d{made},{:.6},{:.6},{:.6},{:.6},{},{:.0},{:.0},car,,,",
            a.lat,
            a.lon,
            b.lat,
            b.lon,
            leaving.to_rfc3339_opts(chrono::SecondsFormat::Secs, true),
            duration,
            eta.meters
        );
        made += 1;
    }
    out
}
