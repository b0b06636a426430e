//! Speed data layer: edge naming, the hour-of-week clock, historical and live
//! table validation, blending and persistence, on a tiny hand-built graph
//! whose expected answers can be worked out by hand.
//!
//! # Layout
//!
//! - this file: the graph and helpers, edge naming, the clock, historical
//!   and live table validation.
//! - [`blend`]: live observations blended into the historical vector.
//! - [`persistence`]: saved tables, their round trips and damage.

use chrono::{DateTime, Duration as TimeDelta, Utc};
use chrono_tz::Tz;
use hodos_engine::geo::LatLon;
use hodos_engine::graph::{EdgeSpec, GraphBuilder, RoadClass, RoadGraph};
use hodos_serving::speeds::*;
use hodos_testkit::HistoricalCsv;
use std::time::Duration;

mod blend;
mod persistence;

/// A historical header naming segments by their ends only (a valid shape:
/// `tail` and `head` without `segment`), so hand-written rows stay short.
const HIST_HEADER: &str = "tail,head,hour_of_week,kmh\n";

const A: u64 = 1001;
const B: u64 = 1002;
const C: u64 = 1003;
const D: u64 = 1004;

/// Four intersections, five directed edges:
/// e0 A→B (50 km/h), e1 B→A (50), e2 B→C (30), e3 C→D (80),
/// e4 A→B (20; a second road parallel to e0).
fn tiny() -> RoadGraph {
    let mut b = GraphBuilder::default();
    let n: Vec<u32> = [A, B, C, D]
        .iter()
        .enumerate()
        .map(|(i, &ext)| b.add_node(LatLon::new(0.0, 0.001 * i as f64), ext))
        .collect();
    for (t, h, speed, way) in [
        (0, 1, 50.0, 1),
        (1, 0, 50.0, 1),
        (1, 2, 30.0, 2),
        (2, 3, 80.0, 3),
        (0, 1, 20.0, 4),
    ] {
        assert!(b.add_edge(EdgeSpec {
            tail: n[t],
            head: n[h],
            length_m: None,
            speed_kmh: speed,
            way_id: way,
            class: RoadClass::Residential,
            shape: &[],
        }));
    }
    b.finish()
}

fn setup() -> (RoadGraph, EdgeIndex, Vec<f32>) {
    let g = tiny();
    let idx = EdgeIndex::new(&g);
    let ff = g.edge_speed_kmh.clone();
    (g, idx, ff)
}

fn lenient() -> ValidationConfig {
    ValidationConfig {
        max_bad_share: 1.0,
        max_reported_errors: 100,
        ..Default::default()
    }
}

fn t(s: &str) -> DateTime<Utc> {
    DateTime::parse_from_rfc3339(s).unwrap().with_timezone(&Utc)
}

fn kinds(r: &TableReport) -> Vec<(Option<u64>, Option<u64>, ErrorKind)> {
    r.first_errors
        .iter()
        .map(|e| (e.line, e.index, e.kind))
        .collect()
}

// ---------------------------------------------------------------- edges

#[test]
fn edge_index_names_edges_by_their_ends() {
    let (g, idx, _) = setup();
    assert_eq!(idx.num_edges(), g.num_edges());
    assert_eq!(idx.edges(A, B), &[0, 4]); // parallel edges both
    assert_eq!(idx.edges(B, A), &[1]);
    assert_eq!(idx.edges(B, C), &[2]);
    assert_eq!(idx.edges(C, B), &[] as &[u32]); // one-way
    assert_eq!(idx.edges(9, 9), &[] as &[u32]);
    for e in 0..g.num_edges() as u32 {
        let (f, to) = idx.ends(e).unwrap();
        assert_eq!(f, g.node_ext[g.edge_tail[e as usize] as usize]);
        assert_eq!(to, g.node_ext[g.edge_head[e as usize] as usize]);
    }
    assert_eq!(idx.ends(5), None);
    let groups: Vec<_> = idx.groups().map(|(k, e)| (k, e.to_vec())).collect();
    assert_eq!(
        groups,
        vec![
            ((A, B), vec![0, 4]),
            ((B, A), vec![1]),
            ((B, C), vec![2]),
            ((C, D), vec![3])
        ]
    );
}

#[test]
fn edge_index_agrees_with_a_scan_of_the_graph() {
    // Reference: a linear scan over the graph's edges. 60 nodes whose
    // external ids are sparse and unordered, 400 pseudo-random edges with
    // repeats (parallel edges) and both directions.
    let mut b = GraphBuilder::default();
    let ext: Vec<u64> = (0..60u64)
        .map(|i| (i * 7_919) % 1_000 + 1_000_000 * (i % 3))
        .collect();
    let n: Vec<u32> = ext
        .iter()
        .enumerate()
        .map(|(i, &x)| b.add_node(LatLon::new(0.0, 0.0001 * i as f64), x))
        .collect();
    let mut x: u64 = 12_345;
    for way in 0..400u64 {
        x = x
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        let (t, h) = ((x >> 33) as usize % 60, (x >> 45) as usize % 60);
        b.add_edge(EdgeSpec {
            tail: n[t],
            head: n[h],
            length_m: Some(10.0),
            speed_kmh: 30.0,
            way_id: way,
            class: RoadClass::Residential,
            shape: &[],
        });
    }
    let g = b.finish();
    let idx = EdgeIndex::new(&g);
    let mut parallel = 0;
    for &f in &ext {
        for &to in &ext {
            let want: Vec<u32> = (0..g.num_edges() as u32)
                .filter(|&e| {
                    g.node_ext[g.edge_tail[e as usize] as usize] == f
                        && g.node_ext[g.edge_head[e as usize] as usize] == to
                })
                .collect();
            parallel += usize::from(want.len() > 1);
            assert_eq!(idx.edges(f, to), &want[..], "{f}->{to}");
        }
        assert!(idx.edges(f, 999_999_999).is_empty());
    }
    assert!(parallel > 0, "the sample should contain parallel edges");
    let total: usize = idx.groups().map(|(_, e)| e.len()).sum();
    assert_eq!(total, g.num_edges());
}

// ---------------------------------------------------------------- clock

// Expected hours are worked out by hand from the published rules, not from
// chrono-tz: hour = 24 × (days since Monday) + local hour.
// Calendar: 2026-01-01 is a Thursday (from memory), so 2026-03-01,
// 2026-03-08, 2026-03-29 and 2026-10-25 are Sundays.
// Rules (IANA tz database, files `europe`, `northamerica`, `asia`; the legal
// texts from memory): EU summer time runs from 01:00 UTC on the last Sunday
// of March to 01:00 UTC on the last Sunday of October (Directive
// 2000/84/EC); US daylight time starts at 02:00 local on the second Sunday
// of March (Energy Policy Act of 2005); India Standard Time is UTC+05:30
// all year.
#[test]
fn hour_of_week_on_literal_instants() {
    let berlin: Tz = "Europe/Berlin".parse().unwrap();
    let cases: &[(&str, Tz, u8)] = &[
        // UTC itself: Monday 00:00 is hour 0, Sunday 23:59:59 hour 167.
        ("2026-03-30T00:00:00Z", Tz::UTC, 0),
        ("2026-03-29T23:59:59Z", Tz::UTC, 167),
        ("2026-04-01T13:15:00Z", Tz::UTC, 2 * 24 + 13), // Wednesday
        // Berlin spring forward, Sunday 2026-03-29.
        ("2026-03-29T00:30:00Z", berlin, 6 * 24 + 1), // 01:30 CET
        ("2026-03-29T00:59:59Z", berlin, 6 * 24 + 1), // 01:59:59 CET
        ("2026-03-29T01:00:00Z", berlin, 6 * 24 + 3), // 03:00 CEST; 02:xx skipped
        // Monday 00:00 CEST = Sunday 22:00 UTC.
        ("2026-03-29T21:59:59Z", berlin, 167),
        ("2026-03-29T22:00:00Z", berlin, 0),
        // Winter: Monday 00:00 CET = Sunday 23:00 UTC.
        ("2026-01-04T23:00:00Z", berlin, 0),
        // Berlin fall back, Sunday 2026-10-25: 02:30 local happens twice.
        ("2026-10-25T00:30:00Z", berlin, 6 * 24 + 2), // 02:30 CEST
        ("2026-10-25T01:30:00Z", berlin, 6 * 24 + 2), // 02:30 CET
        ("2026-10-25T02:30:00Z", berlin, 6 * 24 + 3), // 03:30 CET
        // New York spring forward, Sunday 2026-03-08 at 07:00 UTC.
        ("2026-03-08T06:59:59Z", Tz::America__New_York, 6 * 24 + 1), // 01:59:59 EST
        ("2026-03-08T07:00:00Z", Tz::America__New_York, 6 * 24 + 3), // 03:00 EDT
        // Kolkata, UTC+05:30: the week turns at 18:30 UTC on Sunday.
        ("2026-03-29T18:29:59Z", Tz::Asia__Kolkata, 167),
        ("2026-03-29T18:30:00Z", Tz::Asia__Kolkata, 0),
    ];
    for &(s, tz, want) in cases {
        assert_eq!(hour_of_week(t(s), tz), want, "{s} in {tz}");
    }
    assert_eq!(HOURS_PER_WEEK, 168);
}

// ------------------------------------------------------------ historical

#[test]
fn historical_detects_each_bad_kind_on_its_line() {
    let (_, idx, _) = setup();
    let csv = format!(
        "{HIST_HEADER}\
1001,1002,0,40
1003,1002,0,40
1001,1002,1,0
1001,1002,1,-5
1001,1002,1,NaN
1001,1002,1,inf
1001,1002,1,250
1001,1002,168,40
1001,1002,2.5,40
1001,1002,-1,40
abc,1002,1,40
1001,1002,1
1001,1002,1,fast
1001,1002,1,40,7
1002,1003,3,25
1002,1003,3,1e-50
"
    );
    use ErrorKind::*;
    let (p, r) = HistoricalProfile::parse(csv.as_bytes(), &idx, &lenient()).unwrap();
    assert_eq!(
        kinds(&r),
        vec![
            (Some(3), None, UnknownEdge),
            (Some(4), None, NonpositiveSpeed),
            (Some(5), None, NonpositiveSpeed),
            (Some(6), None, NotANumber),
            (Some(7), None, NotANumber),
            (Some(8), None, OverMaxSpeed),
            (Some(9), None, BadHour),
            (Some(10), None, BadHour),
            (Some(11), None, BadHour),
            (Some(12), None, MalformedRow),
            (Some(13), None, MalformedRow),
            (Some(14), None, MalformedRow),
            (Some(15), None, MalformedRow),
            (Some(17), None, NonpositiveSpeed), // rounds to 0 as f32
        ]
    );
    assert_eq!((r.rows, r.accepted, r.bad), (16, 2, 14));
    assert_eq!(r.bad_by_kind.get("bad_hour"), Some(&3));
    assert_eq!(r.bad_by_kind.get("malformed_row"), Some(&4));
    assert_eq!(r.bad_by_kind.get("future_timestamp"), None);
    assert!(!r.rejected);
    assert_eq!(p.rows(), 2);
    for e in &r.first_errors {
        assert!(!e.message.is_empty());
    }
    // Every message names the offending value.
    assert!(r.first_errors[0].message.contains("1003"));
    assert!(r.first_errors[5].message.contains("250"));
}

#[test]
fn historical_over_max_respects_the_configured_limit() {
    let (_, idx, _) = setup();
    let csv = format!("{HIST_HEADER}1001,1002,0,120\n1002,1003,0,90\n");
    let cfg = ValidationConfig {
        max_speed_kmh: 100.0,
        ..lenient()
    };
    let (_, r) = HistoricalProfile::parse(csv.as_bytes(), &idx, &cfg).unwrap();
    assert_eq!(kinds(&r), vec![(Some(2), None, ErrorKind::OverMaxSpeed)]);
}

#[test]
fn historical_line_numbers_count_physical_lines() {
    let (_, idx, _) = setup();
    // A blank line (skipped, but still a line) and a quoted field holding a
    // newline (the record starts on its first line).
    let csv =
        format!("{HIST_HEADER}1001,1002,0,40\n\n\"1001\",\"10\n02\",0,40\n1001,1002,999,40\n");
    let (_, r) = HistoricalProfile::parse(csv.as_bytes(), &idx, &lenient()).unwrap();
    assert_eq!(
        kinds(&r),
        vec![
            (Some(4), None, ErrorKind::MalformedRow),
            (Some(6), None, ErrorKind::BadHour)
        ]
    );
}

/// `n` good rows (hour 0..n on B→C) followed by `bad` rows with an unknown
/// edge.
fn hist_rows(good: usize, bad: usize) -> String {
    let mut csv = HistoricalCsv::with_header();
    for h in 0..good {
        csv.row(1002, 1003, h, 10 + h);
    }
    for _ in 0..bad {
        csv.row(1004, 1001, 0, 40);
    }
    csv.into_string()
}

#[test]
fn historical_rejected_whole_over_threshold() {
    let (_, idx, _) = setup();
    // 2 of 20 rows bad = 10 % > 5 % (default threshold).
    let csv = hist_rows(18, 2);
    let err =
        HistoricalProfile::parse(csv.as_bytes(), &idx, &ValidationConfig::default()).unwrap_err();
    let SpeedsError::Rejected(r) = &err else {
        panic!("expected rejection, got {err}");
    };
    assert!(r.rejected);
    assert_eq!((r.rows, r.accepted, r.bad), (20, 18, 2));
    assert_eq!(
        kinds(r),
        vec![
            (Some(20), None, ErrorKind::UnknownEdge),
            (Some(21), None, ErrorKind::UnknownEdge)
        ]
    );
    assert!(r.reject_reason.as_deref().unwrap().contains("2 of 20"));
    assert!(err.to_string().contains("rejected"));
    assert_eq!(err.report(), Some(&**r));
}

#[test]
fn historical_under_threshold_applies_the_good_rows() {
    let (_, idx, ff) = setup();
    // 1 of 20 = 5 %: not above the threshold.
    let csv = hist_rows(19, 1);
    let (p, r) =
        HistoricalProfile::parse(csv.as_bytes(), &idx, &ValidationConfig::default()).unwrap();
    assert!(!r.rejected);
    assert_eq!((r.rows, r.accepted, r.bad), (20, 19, 1));
    assert_eq!(kinds(&r), vec![(Some(21), None, ErrorKind::UnknownEdge)]);
    assert_eq!(p.rows(), 19);
    for h in 0..19u8 {
        let s = p.speeds_for_hour(&ff, h);
        assert_eq!(
            s,
            vec![50.0, 50.0, 10.0 + f32::from(h), 80.0, 20.0],
            "hour {h}"
        );
    }
}

#[test]
fn historical_missing_rows_fall_back_to_free_flow() {
    let (_, idx, ff) = setup();
    let csv = format!("{HIST_HEADER}1001,1002,0,40\n1003,1004,167,70\n");
    let (p, r) =
        HistoricalProfile::parse(csv.as_bytes(), &idx, &ValidationConfig::default()).unwrap();
    assert_eq!(r.bad, 0);
    assert_eq!(p.entries(), 3); // A→B names two parallel edges
                                // Hour 0: both parallel A→B edges get 40; the rest free-flow.
    assert_eq!(
        p.speeds_for_hour(&ff, 0),
        vec![40.0, 50.0, 30.0, 80.0, 40.0]
    );
    assert_eq!(
        p.speeds_for_hour(&ff, 167),
        vec![50.0, 50.0, 30.0, 70.0, 20.0]
    );
    // An hour without rows, and one out of range: free-flow exactly.
    assert_eq!(p.speeds_for_hour(&ff, 5), ff);
    assert_eq!(p.speeds_for_hour(&ff, 200), ff);
    assert_eq!(p.hour(0), &[(0, 40.0), (4, 40.0)]);
    // The reusing form gives the same and keeps the buffer.
    let mut buf = vec![1.0; 99];
    p.speeds_for_hour_into(&ff, 0, &mut buf);
    assert_eq!(buf, vec![40.0, 50.0, 30.0, 80.0, 40.0]);
}

#[test]
fn historical_later_row_for_same_edge_and_hour_wins() {
    let (_, idx, ff) = setup();
    let csv = format!("{HIST_HEADER}1002,1003,4,11\n1003,1004,4,60\n1002,1003,4,22\n");
    let (p, r) =
        HistoricalProfile::parse(csv.as_bytes(), &idx, &ValidationConfig::default()).unwrap();
    assert_eq!(r.superseded, 1);
    assert_eq!(
        p.speeds_for_hour(&ff, 4),
        vec![50.0, 50.0, 22.0, 60.0, 20.0]
    );
}

#[test]
fn historical_header_rules() {
    let (_, idx, ff) = setup();
    let cfg = ValidationConfig::default();
    // Any column order, whitespace trimmed.
    let csv = "kmh, hour_of_week ,head,tail\n 45 ,2,1003,1002\n";
    let (p, _) = HistoricalProfile::parse(csv.as_bytes(), &idx, &cfg).unwrap();
    assert_eq!(p.speeds_for_hour(&ff, 2)[2], 45.0);
    for bad in [
        "tail,head,hour_of_week,kmh,comment\n1001,1002,0,40,x\n", // extra
        "tail,head,kmh\n1001,1002,40\n",                          // missing
        "tail,head,hour_of_week,kmh,kmh\n",                       // repeated
        "tail,hour_of_week,kmh\n1001,0,40\n",                     // half a key
        "way,hour_of_week,kmh\n1,0,40\n",                         // no key
        "",                                                       // nothing
    ] {
        let e = HistoricalProfile::parse(bad.as_bytes(), &idx, &cfg).unwrap_err();
        assert!(matches!(e, SpeedsError::Header(_)), "{bad:?}: {e}");
    }
    // Header only: rejected, "no data rows".
    let e = HistoricalProfile::parse(HIST_HEADER.as_bytes(), &idx, &cfg).unwrap_err();
    let r = e.report().expect("rejection carries a report");
    assert_eq!(r.rows, 0);
    assert_eq!(r.reject_reason.as_deref(), Some("no data rows"));
}

#[test]
fn historical_version_follows_content() {
    let (_, idx, _) = setup();
    let cfg = ValidationConfig::default();
    let a = format!("{HIST_HEADER}1001,1002,0,40\n");
    let b = format!("{HIST_HEADER}1001,1002,0,41\n");
    let (pa, _) = HistoricalProfile::parse(a.as_bytes(), &idx, &cfg).unwrap();
    let (pa2, _) = HistoricalProfile::parse(a.as_bytes(), &idx, &cfg).unwrap();
    let (pb, _) = HistoricalProfile::parse(b.as_bytes(), &idx, &cfg).unwrap();
    assert_eq!(pa.version(), pa2.version());
    assert_ne!(pa.version(), pb.version());
    assert!(pa.version().ends_with(&format!("-{}", a.len())));
}

#[test]
fn report_serialises_with_snake_case_kinds() {
    let (_, idx, _) = setup();
    let csv = format!("{HIST_HEADER}1001,1002,0,40\n1001,1002,0,NaN\n");
    let (_, r) = HistoricalProfile::parse(csv.as_bytes(), &idx, &lenient()).unwrap();
    let v: serde_json::Value = serde_json::to_value(&r).unwrap();
    assert_eq!(v["bad_by_kind"]["not_a_number"], 1);
    assert_eq!(v["first_errors"][0]["line"], 3);
    assert_eq!(v["first_errors"][0]["kind"], "not_a_number");
    assert!(v["first_errors"][0].get("index").is_none());
    assert_eq!(v["rejected"], false);
}

#[test]
fn only_the_first_few_errors_are_detailed() {
    let (_, idx, _) = setup();
    let cfg = ValidationConfig {
        max_bad_share: 1.0,
        ..Default::default()
    };
    let csv = hist_rows(1, 30);
    let (_, r) = HistoricalProfile::parse(csv.as_bytes(), &idx, &cfg).unwrap();
    assert_eq!(r.bad, 30);
    assert_eq!(r.first_errors.len(), 10);
    assert_eq!(r.first_errors[0].line, Some(3));
    assert_eq!(r.first_errors[9].line, Some(12));
}

// ------------------------------------------------------------------ live

const NOW: &str = "2026-03-29T08:05:00Z";

fn obs(from: u64, to: u64, speed: f64, at: &str, samples: u32) -> Observation {
    Observation {
        segment: None,
        way: None,
        tail: Some(from),
        head: Some(to),
        kmh: speed,
        observed_at: at.to_string(),
        samples,
    }
}

#[test]
fn live_json_detects_each_bad_kind_by_index() {
    let (_, idx, _) = setup();
    let json = r#"[
      {"tail":1001,"head":1002,"kmh":35.5,"observed_at":"2026-03-29T08:00:00Z","samples":3},
      {"tail":1003,"head":1001,"kmh":30,"observed_at":"2026-03-29T08:00:00Z","samples":1},
      {"tail":1002,"head":1003,"kmh":0,"observed_at":"2026-03-29T08:00:00Z","samples":1},
      {"tail":1002,"head":1003,"kmh":500,"observed_at":"2026-03-29T08:00:00Z","samples":1},
      {"tail":1002,"head":1003,"kmh":30,"observed_at":"yesterday","samples":1},
      {"tail":1002,"head":1003,"kmh":30,"observed_at":"2026-03-29T08:08:00Z","samples":1},
      {"tail":1002,"head":1003,"kmh":30,"observed_at":"2026-03-29T08:00:00Z","samples":0},
      {"tail":1002,"head":1003,"kmh":30,"observed_at":"2026-03-29T08:00:00Z","samples":1,"lane":2},
      {"tail":1002,"head":1003,"kmh":30,"observed_at":"2026-03-29T08:00:00Z"},
      {"tail":1002,"head":1003,"kmh":"fast","observed_at":"2026-03-29T08:00:00Z","samples":1},
      17,
      {"tail":1002,"head":1003,"kmh":-3,"observed_at":"2026-03-29T10:06:30+02:00","samples":1},
      {"tail":1003,"head":1004,"kmh":70,"observed_at":"2026-03-29T10:06:30+02:00","samples":2}
    ]"#;
    let mut live = LiveLayer::new(idx.num_edges());
    let r = live
        .apply_json(&idx, json.as_bytes(), t(NOW), &lenient())
        .unwrap();
    use ErrorKind::*;
    let want: Vec<_> = [
        (1, UnknownEdge),
        (2, NonpositiveSpeed),
        (3, OverMaxSpeed),
        (4, BadTimestamp),
        (5, FutureTimestamp), // 180 s ahead > 120 s skew
        (6, BadSamples),
        (7, MalformedRow),  // unknown field
        (8, MalformedRow),  // missing field
        (9, MalformedRow),  // wrong type
        (10, MalformedRow), // not an object
        (11, NonpositiveSpeed),
    ]
    .into_iter()
    .map(|(i, k)| (None, Some(i), k))
    .collect();
    assert_eq!(kinds(&r), want);
    assert_eq!((r.rows, r.accepted, r.bad), (13, 2, 11));
    assert!(
        r.first_errors[5].message.contains("lane") || r.first_errors[6].message.contains("lane")
    );
    // Index 12 is 90 s ahead (10:06:30+02:00 = 08:06:30Z): within the skew.
    assert_eq!(live.len(), 3); // A→B (two parallel edges) and C→D
    assert_eq!(live.get(0).unwrap().speed_kmh, 35.5);
    assert_eq!(live.get(4).unwrap().samples, 3);
    assert_eq!(live.get(3).unwrap().observed_at, t("2026-03-29T08:06:30Z"));
    assert_eq!(live.get(2), None);
    assert_eq!(live.newest_observed_at(), Some(t("2026-03-29T08:06:30Z")));
}

#[test]
fn live_typed_batch_catches_non_finite_speeds() {
    let (_, idx, _) = setup();
    let mut live = LiveLayer::new(idx.num_edges());
    let batch = [
        obs(B, C, f64::NAN, NOW, 1),
        obs(B, C, f64::INFINITY, NOW, 1),
        obs(B, C, 31.0, NOW, 1),
    ];
    let r = live.apply(&idx, &batch, t(NOW), &lenient()).unwrap();
    assert_eq!(
        kinds(&r),
        vec![
            (None, Some(0), ErrorKind::NotANumber),
            (None, Some(1), ErrorKind::NotANumber)
        ]
    );
    assert_eq!(live.get(2).unwrap().speed_kmh, 31.0);
}

#[test]
fn live_csv_detects_each_bad_kind_by_line() {
    let (_, idx, _) = setup();
    let csv = "\
tail,head,kmh,observed_at,samples
1001,1002,35,2026-03-29T08:00:00Z,3
1003,1001,35,2026-03-29T08:00:00Z,3
1002,1003,-1,2026-03-29T08:00:00Z,3
1002,1003,NaN,2026-03-29T08:00:00Z,3
1002,1003,201,2026-03-29T08:00:00Z,3
1002,1003,35,2026-03-29 08:00,3
1002,1003,35,2026-03-29T09:00:00Z,3
1002,1003,35,2026-03-29T08:00:00Z,0
1002,1003,35,2026-03-29T08:00:00Z,many
1002,1003,35,2026-03-29T08:00:00Z
x,1003,35,2026-03-29T08:00:00Z,1
1002,1003,quick,2026-03-29T08:00:00Z,1
";
    let mut live = LiveLayer::new(idx.num_edges());
    let r = live
        .apply_csv(&idx, csv.as_bytes(), t(NOW), &lenient())
        .unwrap();
    use ErrorKind::*;
    let want: Vec<_> = [
        (3, UnknownEdge),
        (4, NonpositiveSpeed),
        (5, NotANumber),
        (6, OverMaxSpeed),
        (7, BadTimestamp),
        (8, FutureTimestamp),
        (9, BadSamples),
        (10, BadSamples),
        (11, MalformedRow),
        (12, MalformedRow),
        (13, MalformedRow),
    ]
    .into_iter()
    .map(|(l, k)| (Some(l), None, k))
    .collect();
    assert_eq!(kinds(&r), want);
    assert!(r.first_errors[7].message.contains("many"));
    assert_eq!(live.len(), 2);
    // Header rule as for the historical table.
    let e = live
        .apply_csv(&idx, b"tail,head,kmh,observed_at\n", t(NOW), &lenient())
        .unwrap_err();
    assert!(matches!(e, SpeedsError::Header(_)));
}

#[test]
fn live_batch_over_threshold_changes_nothing() {
    let (_, idx, _) = setup();
    let mut live = LiveLayer::new(idx.num_edges());
    live.apply(
        &idx,
        &[obs(C, D, 60.0, "2026-03-29T08:00:00Z", 1)],
        t(NOW),
        &ValidationConfig::default(),
    )
    .unwrap();
    let before = live.clone();
    // 1 bad of 3 = 33 % > 5 %.
    let batch = [
        obs(B, C, 25.0, NOW, 1),
        obs(C, D, 10.0, NOW, 1),
        obs(D, C, 25.0, NOW, 1),
    ];
    let e = live
        .apply(&idx, &batch, t(NOW), &ValidationConfig::default())
        .unwrap_err();
    let r = e.report().unwrap();
    assert!(r.rejected);
    assert_eq!(kinds(r), vec![(None, Some(2), ErrorKind::UnknownEdge)]);
    assert_eq!(live, before);
    // An empty batch is a harmless no-op.
    let r = live
        .apply_json(&idx, b"[]", t(NOW), &ValidationConfig::default())
        .unwrap();
    assert_eq!((r.rows, r.rejected), (0, false));
    assert_eq!(live, before);
    // Not an array at all: a JSON error, not a row error.
    let e = live.apply_json(
        &idx,
        b"{\"observations\":[]}",
        t(NOW),
        &ValidationConfig::default(),
    );
    assert!(matches!(e, Err(SpeedsError::Json(_))));
}

#[test]
fn live_newest_observation_wins() {
    let (_, idx, _) = setup();
    let cfg = ValidationConfig::default();
    let mut live = LiveLayer::new(idx.num_edges());
    let r = live
        .apply(
            &idx,
            &[obs(B, C, 30.0, "2026-03-29T08:00:00Z", 4)],
            t(NOW),
            &cfg,
        )
        .unwrap();
    assert_eq!(r.superseded, 0);
    let g0 = live.generation();
    // Older: ignored and counted.
    let r = live
        .apply(
            &idx,
            &[obs(B, C, 10.0, "2026-03-29T07:59:00Z", 1)],
            t(NOW),
            &cfg,
        )
        .unwrap();
    assert_eq!((r.accepted, r.superseded), (1, 1));
    assert_eq!(live.get(2).unwrap().speed_kmh, 30.0);
    assert_eq!(live.generation(), g0); // nothing changed
                                       // Newer (an offset time zone, 10:01+02:00 = 08:01Z): replaces.
    live.apply(
        &idx,
        &[obs(B, C, 20.0, "2026-03-29T10:01:00+02:00", 2)],
        t(NOW),
        &cfg,
    )
    .unwrap();
    let e = live.get(2).unwrap();
    assert_eq!(
        (e.speed_kmh, e.samples, e.observed_at),
        (20.0, 2, t("2026-03-29T08:01:00Z"))
    );
    assert!(live.generation() > g0);
    // Within one batch the order does not matter: the newest is kept.
    let r = live
        .apply(
            &idx,
            &[
                obs(C, D, 44.0, "2026-03-29T08:03:00Z", 1),
                obs(C, D, 33.0, "2026-03-29T08:02:00Z", 1),
            ],
            t(NOW),
            &cfg,
        )
        .unwrap();
    assert_eq!(r.superseded, 1);
    assert_eq!(live.get(3).unwrap().speed_kmh, 44.0);
    assert_eq!(live.len(), 2);
}

#[test]
fn live_layer_must_match_the_index() {
    let (_, idx, _) = setup();
    let mut live = LiveLayer::new(3);
    let e = live
        .apply(&idx, &[], t(NOW), &ValidationConfig::default())
        .unwrap_err();
    assert!(matches!(e, SpeedsError::LengthMismatch { .. }));
}
