//! Haversine against geodesics on the WGS84 ellipsoid (geographiclib-rs, an
//! implementation of Karney, "Algorithms for geodesics", J. Geodesy 2013),
//! and against a published worked example.

use geographiclib_rs::{Geodesic, InverseGeodesic};
use hodos_engine::geo::{haversine_m, haversine_with_radius, LatLon};
use hodos_test_support::SplitMix64;

#[test]
fn haversine_within_half_percent_of_ellipsoidal_geodesic() {
    let wgs84 = Geodesic::wgs84();
    let mut rng = SplitMix64::new(42);
    let mut worst: f64 = 0.0;
    for _ in 0..5000 {
        let lat1 = rng.below(17_000) as f64 / 100.0 - 85.0;
        let lon1 = rng.below(36_000) as f64 / 100.0 - 180.0;
        // City-to-continent scales: up to about ±5 degrees away.
        let lat2 = (lat1 + (rng.below(1000) as f64 - 500.0) / 100.0).clamp(-89.0, 89.0);
        let lon2 = lon1 + (rng.below(1000) as f64 - 500.0) / 100.0;
        let s12: f64 = wgs84.inverse(lat1, lon1, lat2, lon2);
        if s12 < 1.0 {
            continue;
        }
        let h = haversine_m(LatLon::new(lat1, lon1), LatLon::new(lat2, lon2));
        let rel = (h - s12).abs() / s12;
        worst = worst.max(rel);
        // The sphere of mean radius R1 differs from the WGS84 ellipsoid by
        // at most (R1 − M0)/M0 = 0.56%, where M0 = a(1 − e²) = 6,335,439 m is
        // the meridional radius of curvature at the equator (WGS84 constants,
        // NIMA TR8350.2): north–south trips near the equator are the worst
        // case. Away from it (|lat| ≥ 15°) the error stays within 0.5%.
        assert!(
            rel < 0.0057,
            "{lat1},{lon1} -> {lat2},{lon2}: haversine {h} vs geodesic {s12}"
        );
        if lat1.abs().min(lat2.abs()) >= 15.0 {
            assert!(
                rel < 0.005,
                "{lat1},{lon1} -> {lat2},{lon2}: haversine {h} vs geodesic {s12}"
            );
        }
    }
    eprintln!("worst relative difference {worst:.5}");
}

#[test]
fn haversine_worked_example() {
    // Rosetta Code, "Haversine formula" task (from memory): BNA
    // (36.12, -86.67) to LAX (33.94, -118.40) on a sphere of R = 6372.8 km
    // is 2887.2599506071106 km.
    let d = haversine_with_radius(
        LatLon::new(36.12, -86.67),
        LatLon::new(33.94, -118.40),
        6372.8,
    );
    assert!((d - 2887.2599506071106).abs() < 1e-6, "{d}");
}

#[test]
fn coordinates_parse_and_reject() {
    assert_eq!(
        "45.5,-30.25".parse::<LatLon>().unwrap(),
        LatLon::new(45.5, -30.25)
    );
    for bad in ["95,0", "0,181", "abc,1", "1", "NaN,0", "inf,0"] {
        assert!(bad.parse::<LatLon>().is_err(), "{bad}");
    }
}
