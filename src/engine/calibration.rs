//! Calibration of the heuristic tier, computed at build time.
//!
//! When no graph answer is possible, hodos estimates a trip as
//! `great-circle distance × circuity(band) / speed(band)`. The two factors
//! are measured on the region's own network: over random origin/destination
//! pairs, circuity is network distance ÷ great-circle distance and speed is
//! network distance ÷ free-flow travel time of the fastest path. Both are
//! kept as medians per great-circle band, with the sample count, because
//! short trips wind more and drive slower than long ones.

use crate::cch::{Cch, CchQuery, CustomizedMetric};
use crate::geo::{haversine_m, LatLon, EARTH_RADIUS_M};
use crate::graph::RoadGraph;
use crate::snap::SnapIndex;
use rand::{Rng, SeedableRng};
use serde::{Deserialize, Serialize};

/// Great-circle band edges in km: `<1, 1–3, 3–10, 10–30, ≥30`.
pub const BAND_EDGES_KM: [f64; 4] = [1.0, 3.0, 10.0, 30.0];

/// Pairs sampled per band (5 bands → 2,500 pairs, above the 2,000 minimum).
pub const PAIRS_PER_BAND: usize = 500;

/// One great-circle band's medians.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Band {
    pub lo_km: f64,
    /// Upper bound (exclusive); `f64::INFINITY` for the last band.
    pub hi_km: f64,
    /// Median network ÷ great-circle distance.
    pub circuity: f64,
    /// Median free-flow network speed in km/h.
    pub speed_kmh: f64,
    /// Pairs that fell in this band.
    pub count: usize,
}

/// Per-band heuristic factors for one region.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Calibration {
    pub bands: Vec<Band>,
    /// Medians over all pairs (used for bands with no sample).
    pub overall_circuity: f64,
    pub overall_speed_kmh: f64,
    pub pairs: usize,
}

impl Calibration {
    /// Factors for a great-circle distance: the band's, or the overall
    /// medians when that band had no sample.
    pub fn factors(&self, gc_m: f64) -> (f64, f64) {
        let km = gc_m / 1000.0;
        for b in &self.bands {
            if km >= b.lo_km && km < b.hi_km {
                if b.count > 0 {
                    return (b.circuity, b.speed_kmh);
                }
                break;
            }
        }
        (self.overall_circuity, self.overall_speed_kmh)
    }

    /// Heuristic estimate `(metres, seconds)` for two coordinates.
    pub fn estimate(&self, from: LatLon, to: LatLon) -> (f64, f64) {
        let gc = haversine_m(from, to);
        let (c, v) = self.factors(gc);
        let meters = gc * c;
        (meters, meters / (v / 3.6))
    }

    /// Fixed factors for use outside every region (from configuration).
    pub fn fixed(circuity: f64, speed_kmh: f64) -> Self {
        Calibration {
            bands: Vec::new(),
            overall_circuity: circuity,
            overall_speed_kmh: speed_kmh,
            pairs: 0,
        }
    }
}

/// Measures the calibration on a customized free-flow metric. Deterministic
/// for a given `seed`.
pub fn calibrate(
    g: &RoadGraph,
    cch: &Cch,
    metric: &CustomizedMetric,
    snap: &SnapIndex,
    seed: u64,
) -> Calibration {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut q = CchQuery::new(cch);
    let n = g.num_nodes();
    let lows = std::iter::once(0.0).chain(BAND_EDGES_KM);
    let highs = BAND_EDGES_KM
        .into_iter()
        .chain(std::iter::once(f64::INFINITY));
    let ranges: Vec<(f64, f64)> = lows.zip(highs).collect();
    let mut samples: Vec<Vec<(f64, f64)>> = vec![Vec::new(); ranges.len()];
    let mut all = Vec::new();
    if n >= 2 {
        for (lo, hi) in ranges.iter().copied() {
            // Aim each pair at the band: a random bearing and distance from
            // a random origin, snapped to the nearest road; the pair is then
            // binned by its real great-circle distance. The last band is
            // open-ended; aim it at 30–60 km, or at a random node when the
            // region is smaller than that.
            let hi_aim = if hi.is_finite() { hi } else { lo * 2.0 };
            for _ in 0..PAIRS_PER_BAND {
                let s = rng.random_range(0..n) as u32;
                let sp = g.node_pos(s);
                let d_m = rng.random_range(lo.max(0.05)..hi_aim) * 1000.0;
                let bearing: f64 = rng.random_range(0.0..std::f64::consts::TAU);
                let tp = destination(sp, bearing, d_m);
                let t = match snap.snap(tp) {
                    Some(sn) if sn.distance_m < d_m * 0.5 => g.edge_tail[sn.edge as usize],
                    _ => rng.random_range(0..n) as u32,
                };
                if s == t {
                    continue;
                }
                let gc = haversine_m(sp, g.node_pos(t));
                if gc < 10.0 {
                    continue;
                }
                if let Some(r) = q.node_to_node(cch, metric, s, t) {
                    let net_m = r.len_cm as f64 / 100.0;
                    let secs = f64::from(r.time) / 1000.0;
                    if secs <= 0.0 {
                        continue;
                    }
                    let pair = (net_m / gc, net_m / secs * 3.6);
                    let band = ranges
                        .iter()
                        .position(|&(l, h)| gc / 1000.0 >= l && gc / 1000.0 < h)
                        .unwrap_or(ranges.len() - 1);
                    samples[band].push(pair);
                    all.push(pair);
                }
            }
        }
    }
    // Bands without a sample (a region smaller than 30 km, say) carry the
    // overall medians with count 0, so every stored number is finite.
    let overall_circuity = or_default(median(all.iter().map(|p| p.0)), 1.3);
    let overall_speed_kmh = or_default(median(all.iter().map(|p| p.1)), 30.0);
    let bands = ranges
        .iter()
        .zip(samples.iter_mut())
        .map(|(&(lo_km, hi_km), s)| Band {
            lo_km,
            hi_km,
            circuity: or_default(median(s.iter().map(|p| p.0)), overall_circuity),
            speed_kmh: or_default(median(s.iter().map(|p| p.1)), overall_speed_kmh),
            count: s.len(),
        })
        .collect();
    Calibration {
        bands,
        overall_circuity,
        overall_speed_kmh,
        pairs: all.len(),
    }
}

/// `x` if finite, else `default`. The defaults (circuity 1.3, 30 km/h) are
/// only reached for a graph with no routable pair; they are common urban
/// values (from memory).
fn or_default(x: f64, default: f64) -> f64 {
    if x.is_finite() {
        x
    } else {
        default
    }
}

/// Median of a sequence (NaN when empty).
pub fn median(it: impl Iterator<Item = f64>) -> f64 {
    let mut v: Vec<f64> = it.filter(|x| x.is_finite()).collect();
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(|a, b| a.total_cmp(b));
    let m = v.len() / 2;
    if v.len() % 2 == 1 {
        v[m]
    } else {
        (v[m - 1] + v[m]) / 2.0
    }
}

/// Point reached from `p` after `d_m` metres on a great circle at `bearing`
/// (radians from north): the spherical direct formula.
pub fn destination(p: LatLon, bearing: f64, d_m: f64) -> LatLon {
    let delta = d_m / EARTH_RADIUS_M;
    let (phi1, lam1) = (p.lat.to_radians(), p.lon.to_radians());
    let phi2 = (phi1.sin() * delta.cos() + phi1.cos() * delta.sin() * bearing.cos()).asin();
    let lam2 = lam1
        + (bearing.sin() * delta.sin() * phi1.cos()).atan2(delta.cos() - phi1.sin() * phi2.sin());
    LatLon::new(
        phi2.to_degrees(),
        ((lam2.to_degrees() + 540.0) % 360.0) - 180.0,
    )
}
