//! Replaying completed trips answers each one from the profile of its own
//! departure hour, checked against petgraph's Dijkstra.
//!
//! A synthetic city (the demo generator; the trips are test inputs, not
//! ground truth) gets a 168-hour historical table with a different speed
//! per hour (`testkit::weekly_table`), grouped exactly (`query.profiles`
//! = 168), in the region zone America/New_York. 300 trips between node
//! positions, departures spread over a January week written with the
//! −05:00 offset, go out as our trips CSV, are read back by
//! `truth::trips`, and replayed by `truth::replay`. For each:
//! - the region's profile hour is the departure's hour of week in
//!   America/New_York by chrono-tz (IANA rules; EST in January), and the
//!   outcome's local hour of week equals it;
//! - `graph_s` equals, to the millisecond, petgraph's Dijkstra between the
//!   two nodes on length × 3600 ÷ speed of that hour as written in the
//!   table (free-flow where it has no row; at least 1 ms; the metric's
//!   documented rounding);
//! - the great-circle distance equals geographiclib's geodesic on the
//!   WGS84 ellipsoid within 0.5 % (haversine on the mean sphere; its error
//!   is at most about 0.5 %, common knowledge of the spherical model).

use chrono::{Datelike, Duration, TimeZone, Timelike};
use geographiclib_rs::{Geodesic, InverseGeodesic};
use hodos_engine::build::{build, Quiet, Source};
use hodos_serving::tier::Tier;
use hodos_test_support::graphs::distinct_nodes;
use hodos_test_support::{petgraph_of, reference_dists, SplitMix64};
use hodos_test_support::{weekly_table, WeeklyTable};
use hodos_truth::replay::{open_catalog, replay_all, replay_settings, ReplayRegion};
use hodos_truth::trips::{read_trips_file, ReadOptions, TripFormat};
use std::fmt::Write as _;

const TRIPS: usize = 300;

#[test]
fn replayed_trips_answer_from_their_departure_hour() {
    let dir = tempfile::tempdir().unwrap();
    let art = build(
        &Source::Synthetic {
            nodes: 3000,
            seed: 11,
        },
        &mut Quiet,
    )
    .unwrap();
    let artifact = dir.path().join("city.hodos");
    art.save(&artifact).unwrap();
    let g = &art.graph;
    let WeeklyTable { csv, speed } = weekly_table(g, 3, 12);
    let table = hodos_test_support::write(dir.path(), "historical.csv", csv);

    // Trips as our CSV, departures in EST (−05:00).
    let ny = chrono_tz::America::New_York;
    let est = chrono::FixedOffset::west_opt(5 * 3600).unwrap();
    let week = est.with_ymd_and_hms(2027, 1, 4, 0, 0, 0).unwrap(); // a Monday
    assert_eq!(week.weekday(), chrono::Weekday::Mon);
    let nodes = distinct_nodes(g);
    let mut rng = SplitMix64::new(13);
    let mut text = String::from("id,from_lat,from_lon,to_lat,to_lon,leaving,duration_s\n");
    let mut asked = Vec::new();
    for i in 0..TRIPS {
        let (s, t) = (
            nodes[rng.below(nodes.len()) as usize],
            nodes[rng.below(nodes.len()) as usize],
        );
        let leaving = week + Duration::seconds(rng.below(7 * 24 * 3600) as i64);
        let (a, b) = (g.node_pos(s), g.node_pos(t));
        writeln!(
            text,
            "t{i},{},{},{},{},{},600",
            a.lat,
            a.lon,
            b.lat,
            b.lon,
            leaving.to_rfc3339()
        )
        .unwrap();
        asked.push((s, t, leaving));
    }
    let trips_csv = hodos_test_support::write(dir.path(), "trips.csv", text);
    let (trips, report) =
        read_trips_file(&trips_csv, TripFormat::Csv, &ReadOptions::default()).unwrap();
    assert_eq!(report.accepted as usize, TRIPS, "{report:?}");

    let mut settings = replay_settings();
    settings.query.profiles = 168;
    let rt = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_all()
        .build()
        .unwrap();
    let region = ReplayRegion {
        name: "city".into(),
        artifact,
        historical: Some(table),
        time_zone: "America/New_York".into(),
        coverage: None,
        model: None,
    };
    let outcomes = rt.block_on(async {
        let cat = open_catalog(&[region], settings, &dir.path().join("state"))
            .await
            .expect("catalog");
        replay_all(&cat, &trips, |_| {}).await
    });
    assert_eq!(outcomes.len(), TRIPS);

    let geod = Geodesic::wgs84();
    let mut checked = 0;
    for ((s, t, leaving), o) in asked.iter().zip(&outcomes) {
        let local = leaving.with_timezone(&ny);
        let hour = (local.weekday().num_days_from_monday() * 24 + local.hour()) as u8;
        assert_eq!(o.hour_of_week, hour);
        assert_eq!(o.weekend, local.weekday().num_days_from_monday() >= 5);
        assert_eq!(o.region.as_deref(), Some("city"));
        assert_eq!(o.actual_s, 600.0);
        assert_eq!(
            o.eta_s, o.graph_s,
            "no model: the served ETA is the graph's"
        );
        let (a, b) = (g.node_pos(*s), g.node_pos(*t));
        let geo_m: f64 = geod.inverse(a.lat, a.lon, b.lat, b.lon);
        assert!(
            (o.great_circle_m - geo_m).abs() <= 0.005 * geo_m + 1e-6,
            "{} vs geographiclib {geo_m}",
            o.great_circle_m
        );
        assert!(
            matches!(o.tier, Tier::Historical | Tier::FreeFlow),
            "{:?} {:?}",
            o.tier,
            o.reason
        );
        let weights: Vec<u32> = (0..g.num_edges())
            .map(|e| {
                let k = (
                    g.node_ext[g.edge_tail[e] as usize],
                    g.node_ext[g.edge_head[e] as usize],
                    hour,
                );
                let kmh = speed.get(&k).copied().unwrap_or(g.edge_speed_kmh[e]);
                ((g.edge_len_m[e] * 3600.0 / f64::from(kmh)).round() as u64).max(1) as u32
            })
            .collect();
        let want = reference_dists(&petgraph_of(g, &weights), *s)[*t as usize]
            .expect("the city is strongly connected");
        assert_eq!(
            (o.graph_s * 1000.0).round() as u64,
            want,
            "{s}→{t} leaving {leaving} (hour {hour})"
        );
        checked += 1;
    }
    assert_eq!(checked, TRIPS);
}
