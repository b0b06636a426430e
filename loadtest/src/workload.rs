//! Workloads: request bodies drawn from the served region's own road graph.
//!
//! Origins are road nodes picked uniformly. Each trip's great-circle length
//! follows the project's own assumed mix for urban fleet traffic (an
//! assumption, not a measurement): 50% short (0.2–3 km), 35% medium
//! (3–10 km), 15% long (10–30 km), the length uniform within its band. A
//! destination is the road node nearest to the point at that length and a
//! random bearing from the origin, kept only if its real great-circle length
//! falls in the band. Both ends are then moved up to 25 m in a random
//! direction, because callers send GPS fixes and addresses, not node
//! coordinates, so snapping is part of every query.
//!
//! Dispatch matrices use the same mix around a centre: 1×50 is one pickup
//! and fifty candidate drivers around it; 20×20 is twenty drivers and twenty
//! orders scattered around one centre. Bodies are serialized once, up front,
//! so the generator does no JSON work while it sends.

use bytes::Bytes;
use hodos::engine::geo::{haversine_m, LatLon};
use hodos::engine::graph::RoadGraph;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::collections::HashMap;

/// Great-circle length bands (km) and their shares of trips.
pub const TRIP_MIX: [(f64, f64, f64); 3] =
    [(0.2, 3.0, 0.50), (3.0, 10.0, 0.35), (10.0, 30.0, 0.15)];

/// Largest random offset of a request coordinate from its road node, metres.
pub const JITTER_M: f64 = 25.0;

/// The sphere of the destination formula: the same as hodos' haversine.
const EARTH_R: f64 = hodos::engine::geo::EARTH_RADIUS_M;

/// What a request body asks for (decides how the answer is parsed).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Kind {
    Eta,
    Route,
    Matrix { rows: usize, cols: usize },
}

impl Kind {
    pub fn path(self) -> &'static str {
        match self {
            Kind::Eta => "/v1/eta",
            Kind::Route => "/v1/route",
            Kind::Matrix { .. } => "/v1/eta/matrix",
        }
    }

    pub fn label(self) -> String {
        match self {
            Kind::Eta => "eta".into(),
            Kind::Route => "route".into(),
            Kind::Matrix { rows, cols } => format!("matrix{rows}x{cols}"),
        }
    }
}

/// A pool of ready request bodies, used round robin.
#[derive(Debug, Clone)]
pub struct Workload {
    pub kind: Kind,
    pub bodies: std::sync::Arc<Vec<Bytes>>,
    /// Great-circle length of each pool trip (km; first pair for matrices),
    /// kept for the report's mix check.
    pub lengths_km: Vec<f64>,
}

impl Workload {
    /// Share of pool trips per band, to show that the mix came out as asked.
    pub fn mix_check(&self) -> Vec<(String, f64)> {
        let n = self.lengths_km.len().max(1) as f64;
        TRIP_MIX
            .iter()
            .map(|(lo, hi, _)| {
                let k = self
                    .lengths_km
                    .iter()
                    .filter(|&&d| d >= *lo && d < *hi)
                    .count();
                (format!("{lo}-{hi} km"), k as f64 / n)
            })
            .collect()
    }
}

/// Node coordinates with a uniform grid for nearest-node look-ups.
pub struct Sampler {
    nodes: Vec<LatLon>,
    cell_deg: f64,
    grid: HashMap<(i32, i32), Vec<u32>>,
    rng: ChaCha8Rng,
}

impl Sampler {
    pub fn new(g: &RoadGraph, seed: u64) -> Sampler {
        let nodes: Vec<LatLon> = (0..g.num_nodes() as u32).map(|v| g.node_pos(v)).collect();
        // About 500 m cells in latitude; longitude cells are narrower away
        // from the equator, which only makes look-ups cheaper.
        let cell_deg = 0.0045;
        let mut grid: HashMap<(i32, i32), Vec<u32>> = HashMap::new();
        for (i, p) in nodes.iter().enumerate() {
            grid.entry(Self::cell_of(cell_deg, *p))
                .or_default()
                .push(i as u32);
        }
        Sampler {
            nodes,
            cell_deg,
            grid,
            rng: ChaCha8Rng::seed_from_u64(seed),
        }
    }

    fn cell_of(cell_deg: f64, p: LatLon) -> (i32, i32) {
        (
            (p.lat / cell_deg).floor() as i32,
            (p.lon / cell_deg).floor() as i32,
        )
    }

    /// Nearest node within the 3×3 cells around `p`.
    fn nearest(&self, p: LatLon) -> Option<LatLon> {
        let (cy, cx) = Self::cell_of(self.cell_deg, p);
        let mut best: Option<(f64, LatLon)> = None;
        for dy in -1..=1 {
            for dx in -1..=1 {
                if let Some(ids) = self.grid.get(&(cy + dy, cx + dx)) {
                    for &i in ids {
                        let q = self.nodes[i as usize];
                        let d = haversine_m(p, q);
                        if best.map(|(b, _)| d < b).unwrap_or(true) {
                            best = Some((d, q));
                        }
                    }
                }
            }
        }
        best.map(|(_, q)| q)
    }

    fn random_node(&mut self) -> LatLon {
        let i = self.rng.random_range(0..self.nodes.len());
        self.nodes[i]
    }

    fn band(&mut self) -> (f64, f64) {
        let u: f64 = self.rng.random();
        let mut acc = 0.0;
        for (lo, hi, share) in TRIP_MIX {
            acc += share;
            if u < acc {
                return (lo, hi);
            }
        }
        let (lo, hi, _) = TRIP_MIX[TRIP_MIX.len() - 1];
        (lo, hi)
    }

    fn jitter(&mut self, p: LatLon) -> LatLon {
        let d = self.rng.random::<f64>() * JITTER_M;
        let b = self.rng.random::<f64>() * std::f64::consts::TAU;
        destination(p, d, b)
    }

    /// A node at a great-circle length from `origin` drawn from the mix.
    fn partner(&mut self, origin: LatLon) -> Option<(LatLon, f64)> {
        let (lo, hi) = self.band();
        for _ in 0..24 {
            let want_m = 1000.0 * (lo + (hi - lo) * self.rng.random::<f64>());
            let bearing = self.rng.random::<f64>() * std::f64::consts::TAU;
            let Some(q) = self.nearest(destination(origin, want_m, bearing)) else {
                continue;
            };
            let km = haversine_m(origin, q) / 1000.0;
            if km >= lo && km < hi {
                return Some((q, km));
            }
        }
        None
    }

    /// An origin–destination pair (jittered) and its node-to-node length.
    pub fn pair(&mut self) -> (LatLon, LatLon, f64) {
        for _ in 0..1000 {
            let o = self.random_node();
            if let Some((d, km)) = self.partner(o) {
                return (self.jitter(o), self.jitter(d), km);
            }
        }
        // A graph too small for every band (a tiny test city): any pair.
        let (o, d) = (self.random_node(), self.random_node());
        (self.jitter(o), self.jitter(d), haversine_m(o, d) / 1000.0)
    }

    /// `n` points around `centre` (lengths from the mix), jittered.
    fn around(&mut self, centre: LatLon, n: usize) -> Vec<LatLon> {
        let mut out = Vec::with_capacity(n);
        let mut tries = 0;
        while out.len() < n && tries < n * 50 {
            tries += 1;
            if let Some((q, _)) = self.partner(centre) {
                let q = self.jitter(q);
                out.push(q);
            }
        }
        while out.len() < n {
            let q = self.jitter(centre);
            out.push(q);
        }
        out
    }

    /// The single-trip pool (ETA or route).
    pub fn trips(&mut self, kind: Kind, n: usize) -> Workload {
        let mut bodies = Vec::with_capacity(n);
        let mut lengths = Vec::with_capacity(n);
        for _ in 0..n {
            let (a, b, km) = self.pair();
            bodies.push(Bytes::from(trip_json(a, b)));
            lengths.push(km);
        }
        Workload {
            kind,
            bodies: std::sync::Arc::new(bodies),
            lengths_km: lengths,
        }
    }

    /// A dispatch-matrix pool: `rows` origins × `cols` destinations. With one
    /// row the origin is the centre itself (a pickup and its candidates).
    pub fn matrices(&mut self, rows: usize, cols: usize, n: usize) -> Workload {
        let mut bodies = Vec::with_capacity(n);
        let mut lengths = Vec::with_capacity(n);
        for _ in 0..n {
            let centre = self.random_node();
            let from = if rows == 1 {
                vec![self.jitter(centre)]
            } else {
                self.around(centre, rows)
            };
            let to = self.around(centre, cols);
            lengths.push(haversine_m(from[0], to[0]) / 1000.0);
            bodies.push(Bytes::from(matrix_json(&from, &to)));
        }
        Workload {
            kind: Kind::Matrix { rows, cols },
            bodies: std::sync::Arc::new(bodies),
            lengths_km: lengths,
        }
    }
}

/// The point at `dist_m` and `bearing` (radians from north) from `p` on a
/// sphere: the standard direct formula of spherical trigonometry
/// (e.g. Snyder, "Map Projections: A Working Manual", USGS 1987, eq. 5-5
/// and 5-6).
pub fn destination(p: LatLon, dist_m: f64, bearing: f64) -> LatLon {
    let (lat1, lon1) = (p.lat.to_radians(), p.lon.to_radians());
    let delta = dist_m / EARTH_R;
    let lat2 = (lat1.sin() * delta.cos() + lat1.cos() * delta.sin() * bearing.cos()).asin();
    let lon2 = lon1
        + (bearing.sin() * delta.sin() * lat1.cos()).atan2(delta.cos() - lat1.sin() * lat2.sin());
    LatLon {
        lat: lat2.to_degrees(),
        lon: ((lon2.to_degrees() + 540.0) % 360.0) - 180.0,
    }
}

fn coord(p: LatLon) -> String {
    format!("{{\"lat\":{:.6},\"lon\":{:.6}}}", p.lat, p.lon)
}

/// The body of `POST /v1/eta` and `POST /v1/route` (departing now).
pub fn trip_json(a: LatLon, b: LatLon) -> String {
    format!("{{\"from\":{},\"to\":{}}}", coord(a), coord(b))
}

/// The body of `POST /v1/eta/matrix`.
pub fn matrix_json(from: &[LatLon], to: &[LatLon]) -> String {
    let list = |v: &[LatLon]| v.iter().map(|p| coord(*p)).collect::<Vec<_>>().join(",");
    format!("{{\"from\":[{}],\"to\":[{}]}}", list(from), list(to))
}

/// Segments of the served artifact, by id and by their external end nodes,
/// with free-flow speeds, for live observations and historical tables.
#[derive(Debug, Clone)]
pub struct EdgeRef {
    /// Segment (edge) id in the artifact.
    pub segment: u32,
    /// External ids of the end nodes.
    pub tail: u64,
    pub head: u64,
    pub free_kmh: f32,
}

/// Every edge of the graph by external ids.
pub fn edges_of(g: &RoadGraph) -> Vec<EdgeRef> {
    (0..g.num_edges())
        .map(|e| EdgeRef {
            segment: e as u32,
            tail: g.node_ext[g.edge_tail[e] as usize],
            head: g.node_ext[g.edge_head[e] as usize],
            free_kmh: g.edge_speed_kmh[e],
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    // Reference: geographiclib-rs (Karney's geodesic algorithms on WGS84).
    // On the sphere the destination must agree with the ellipsoid to well
    // under 0.5% of the distance at these lengths (flattening is 1/298).
    #[test]
    fn destination_matches_geodesic_within_sphere_error() {
        use geographiclib_rs::{DirectGeodesic, Geodesic};
        let g = Geodesic::wgs84();
        let p = LatLon {
            lat: 40.7,
            lon: -73.9,
        };
        for (d, az) in [(1_000.0, 0.0), (5_000.0, 45.0), (30_000.0, 200.0)] {
            let q = destination(p, d, f64::to_radians(az));
            let (lat2, lon2, _) = g.direct(p.lat, p.lon, az, d);
            let err = haversine_m(
                q,
                LatLon {
                    lat: lat2,
                    lon: lon2,
                },
            );
            assert!(err < d * 0.005, "{d} m at {az}°: {err} m apart");
            let back = haversine_m(p, q);
            assert!(
                (back - d).abs() < 1e-6 * d + 1e-6,
                "haversine of the result {back} vs {d}"
            );
        }
    }

    #[test]
    fn drawn_trips_follow_the_mix() {
        // A synthetic city large enough for 30 km trips; shares must come
        // out as asked (binomial sd at n = 2000 is about 1.1 points).
        let (g, _) = hodos::engine::import::synthetic::generate_with_info(60_000, 3);
        let (lo, hi) = g.bbox();
        let span_km = haversine_m(lo, hi) / 1000.0;
        let mut s = Sampler::new(&g, 9);
        let w = s.trips(Kind::Eta, 2000);
        let mix = w.mix_check();
        if span_km < 35.0 {
            eprintln!("SKIPPED mix shares: the test city spans only {span_km:.1} km");
            return;
        }
        for ((_, got), (_, _, want)) in mix.iter().zip(TRIP_MIX) {
            assert!((got - want).abs() < 0.05, "{mix:?}");
        }
        for b in w.bodies.iter() {
            let v: serde_json::Value = serde_json::from_slice(b).unwrap();
            assert!(v["from"]["lat"].is_f64() && v["to"]["lon"].is_f64());
        }
    }

    #[test]
    fn trip_mix_shares_sum_to_one() {
        let s: f64 = TRIP_MIX.iter().map(|b| b.2).sum();
        assert!((s - 1.0).abs() < 1e-12);
    }
}
