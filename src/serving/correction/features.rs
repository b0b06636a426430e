//! The correction model's inputs: what is known about an answer at query
//! time, as a fixed-size array of `f32` built on the stack (no allocation
//! per answer). A value that does not apply (the hour of an answer outside
//! every region, the source shares of an estimate) is NaN, which the trees
//! route down their missing branch.
//!
//! Only what every answer shape knows is a feature (a matrix cell has no
//! snap distance of its own), so one model corrects trips and matrix cells
//! alike.
//!
//! The order of [`NAMES`] is part of the model file: a model names the
//! features it was trained on and is refused unless they are these.

use crate::tier::{Sources, Tier};
use hodos_engine::geo::LatLon;

/// Number of features.
pub const N: usize = 15;

/// Feature names, in array order.
pub const NAMES: [&str; N] = [
    "graph_s",
    "graph_m",
    "great_circle_m",
    "circuity",
    "graph_kmh",
    "hour_of_week",
    "hour_of_day",
    "weekend",
    "from_lat",
    "from_lon",
    "to_lat",
    "to_lon",
    "tier",
    "live_share",
    "historical_share",
];

/// One feature vector.
pub type Features = [f32; N];

/// What an answer knows before its correction.
#[derive(Debug, Clone, Copy)]
pub struct Query {
    pub from: LatLon,
    pub to: LatLon,
    /// The tier's uncorrected answer, seconds.
    pub graph_s: f64,
    /// Its distance, metres (road distance for graph answers, the
    /// calibration's road-distance estimate for the heuristic tier).
    pub graph_m: f64,
    /// Hour of week of the departure in the region's time zone.
    pub hour_of_week: Option<u8>,
    pub tier: Tier,
    /// Time shares per speed source (graph answers only).
    pub sources: Option<Sources>,
}

/// Numeric code of a tier (its order, best first).
pub fn tier_code(t: Tier) -> f32 {
    match t {
        Tier::Live => 0.0,
        Tier::Historical => 1.0,
        Tier::FreeFlow => 2.0,
        Tier::Heuristic => 3.0,
    }
}

/// Distance between two points on the equirectangular projection at
/// their mean latitude, metres: within 0.1 % of the great-circle distance
/// over a city's distances (Snyder, *Map Projections: A Working Manual*,
/// USGS 1987, p. 90), and a tenth of haversine's cost, which a 100×100
/// matrix pays 10,000 times.
pub fn local_distance_m(a: LatLon, b: LatLon) -> f64 {
    const R: f64 = 6_371_008.8;
    let k = ((a.lat + b.lat) * 0.5).to_radians().cos();
    let dx = (b.lon - a.lon).to_radians() * k;
    let dy = (b.lat - a.lat).to_radians();
    R * (dx * dx + dy * dy).sqrt()
}

/// The feature vector of `q`.
pub fn features(q: &Query) -> Features {
    let gc = local_distance_m(q.from, q.to);
    let nan = f32::NAN;
    let hour = q.hour_of_week.map(f32::from).unwrap_or(nan);
    let kmh = if q.graph_s > 0.0 {
        q.graph_m / q.graph_s * 3.6
    } else {
        f64::NAN
    };
    [
        q.graph_s as f32,
        q.graph_m as f32,
        gc as f32,
        (q.graph_m / gc.max(1.0)) as f32,
        kmh as f32,
        hour,
        q.hour_of_week.map(|h| f32::from(h % 24)).unwrap_or(nan),
        q.hour_of_week
            .map(|h| if h >= 120 { 1.0 } else { 0.0 })
            .unwrap_or(nan),
        q.from.lat as f32,
        q.from.lon as f32,
        q.to.lat as f32,
        q.to.lon as f32,
        tier_code(q.tier),
        q.sources.map(|s| s.live as f32).unwrap_or(nan),
        q.sources.map(|s| s.historical as f32).unwrap_or(nan),
    ]
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Hour 125 is Saturday 05:00 (5 × 24 = 120 is Saturday 00:00);
    /// circuity is road over great-circle distance.
    /// Against geographiclib's geodesic on WGS84 (Karney 2013): within
    /// 0.5 % over 1–20 km at NYC's latitude (the sphere's own error is
    /// about 0.3 % there; the projection adds less than 0.1 %).
    #[test]
    fn local_distance_is_close_to_the_geodesic() {
        use geographiclib_rs::{Geodesic, InverseGeodesic};
        let g = Geodesic::wgs84();
        let a = LatLon::new(40.75, -73.99);
        for (dlat, dlon) in [(0.01, 0.0), (0.0, 0.01), (0.05, 0.07), (0.12, -0.15)] {
            let b = LatLon::new(a.lat + dlat, a.lon + dlon);
            let want: f64 = g.inverse(a.lat, a.lon, b.lat, b.lon);
            let got = local_distance_m(a, b);
            assert!((got - want).abs() / want < 0.005, "{got} vs {want}");
        }
    }

    #[test]
    fn features_follow_their_definitions() {
        let from = LatLon::new(40.75, -73.99);
        let to = LatLon::new(40.76, -73.98);
        let gc = local_distance_m(from, to);
        let q = Query {
            from,
            to,
            graph_s: 200.0,
            graph_m: 2.0 * gc,
            hour_of_week: Some(125),
            tier: Tier::Historical,
            sources: Some(Sources {
                live: 0.0,
                historical: 0.75,
                free_flow: 0.25,
            }),
        };
        let f = features(&q);
        assert_eq!(f[5], 125.0);
        assert_eq!(f[6], 5.0);
        assert_eq!(f[7], 1.0);
        assert!((f[3] - 2.0).abs() < 1e-6);
        assert!((f64::from(f[4]) - 2.0 * gc / 200.0 * 3.6).abs() < 1e-3);
        assert_eq!(f[12], 1.0);
        assert_eq!(f[14], 0.75);
        let est = features(&Query {
            tier: Tier::Heuristic,
            sources: None,
            hour_of_week: None,
            ..q
        });
        assert!(est[5].is_nan() && est[13].is_nan() && est[14].is_nan());
        assert_eq!(est[12], 3.0);
    }
}
