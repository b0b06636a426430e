//! Calibration of the heuristic tier on a real street layout (Monaco, OSM
//! extract in tests/data) against published circuity figures: Ballou,
//! Rahardja & Sakai (2002) give about 1.2 for the US and urban practice is
//! 1.2–1.4 (both from memory); we accept 1.1–1.6 for every band of at least
//! 1 km with a useful sample. (NY is checked in src/engine/tests/ny.rs.) Trips under
//! 1 km are reported but not bounded: one-way loops and U-turns dominate them.

use hodos_engine::build::{build, Quiet, Source};

#[test]
fn monaco_circuity_in_published_range() {
    let art = build(
        &Source::Osm(hodos_test_support::fixture("monaco.osm.pbf")),
        &mut Quiet,
    )
    .unwrap();
    let cal = &art.calibration;
    eprintln!("Monaco calibration: {cal:?}");
    // At least 2,000 OD pairs, as medians with counts per band.
    assert!(cal.pairs >= 2000, "{}", cal.pairs);
    assert_eq!(cal.bands.len(), 5);
    let checked: Vec<_> = cal
        .bands
        .iter()
        .filter(|b| b.count >= 100 && b.lo_km >= 1.0)
        .collect();
    assert!(!checked.is_empty());
    for b in checked {
        assert!((1.1..=1.6).contains(&b.circuity), "band {b:?}");
        assert!(b.speed_kmh > 5.0 && b.speed_kmh < 130.0, "band {b:?}");
    }
    // Heuristic estimates grow with distance and use the band factors.
    let (m1, s1) = cal.estimate(
        hodos_engine::geo::LatLon::new(43.73, 7.41),
        hodos_engine::geo::LatLon::new(43.735, 7.415),
    );
    let (m2, s2) = cal.estimate(
        hodos_engine::geo::LatLon::new(43.73, 7.41),
        hodos_engine::geo::LatLon::new(43.745, 7.43),
    );
    assert!(m2 > m1 && s2 > s1 && s1 > 0.0);
}
