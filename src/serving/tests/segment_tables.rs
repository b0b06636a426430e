//! Speed tables name hodos segments: rows by `segment` id, by `tail` +
//! `head` external node ids (optionally narrowed by `way`), or both, which
//! must then agree (`segment_mismatch`). The rules are those written in
//! `serving::speeds::edge_index`'s module docs; each expected value below is
//! worked out by hand from the graph drawn in `tiny`, or read from the
//! graph's own arrays (`edge_tail`, `edge_head`, `node_ext`, `edge_way`).

use chrono::{DateTime, Utc};
use hodos_engine::geo::LatLon;
use hodos_engine::graph::{EdgeSpec, GraphBuilder, RoadClass, RoadGraph};
use hodos_engine::import::synthetic::generate;
use hodos_engine::metric::from_speeds;
use hodos_serving::speeds::*;
use hodos_testkit::{observation, segment_observation, HistoricalCsv, LiveCsv, SplitMix64};
use std::collections::HashMap;

const A: u64 = 1001;
const B: u64 = 1002;
const C: u64 = 1003;
const D: u64 = 1004;
const NOW: &str = "2026-03-29T08:05:00Z";

/// Four intersections, five segments (id: ends, way, free-flow km/h):
/// 0: A→B way 1 (50), 1: B→A way 1 (50), 2: B→C way 2 (30),
/// 3: C→D way 3 (80), 4: A→B way 4 (20; parallel to 0 on another way).
fn tiny() -> (RoadGraph, EdgeIndex) {
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
    let g = b.finish();
    let idx = EdgeIndex::new(&g);
    (g, idx)
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

/// The graph's own naming of each segment, read from its arrays.
fn ends(g: &RoadGraph, e: usize) -> (u64, u64) {
    (
        g.node_ext[g.edge_tail[e] as usize],
        g.node_ext[g.edge_head[e] as usize],
    )
}

#[test]
fn the_former_header_is_refused_naming_the_expected_columns() {
    let (_, idx) = tiny();
    let cfg = ValidationConfig::default();
    let old = "from_node,to_node,hour_of_week,speed_kmh\n1001,1002,0,40\n";
    let e = HistoricalProfile::parse(old.as_bytes(), &idx, &cfg).unwrap_err();
    assert!(matches!(e, SpeedsError::Header(_)), "{e}");
    let msg = e.to_string();
    for part in [
        "unknown column `from_node`",
        "that column is now `tail`",
        "`segment` and/or `tail`,`head` (optional `way`)",
        "`hour_of_week`,`kmh`",
    ] {
        assert!(msg.contains(part), "{part:?} missing in: {msg}");
    }
    let old_live =
        "from_node,to_node,speed_kmh,observed_at,samples\n1001,1002,40,2026-03-29T08:00:00Z,1\n";
    let mut live = LiveLayer::new(idx.num_edges());
    let e = live
        .apply_csv(&idx, old_live.as_bytes(), t(NOW), &cfg)
        .unwrap_err();
    let msg = e.to_string();
    assert!(matches!(e, SpeedsError::Header(_)), "{e}");
    assert!(msg.contains("`kmh`,`observed_at`,`samples`"), "{msg}");
    assert!(
        msg.contains("`from_node` (that column is now `tail`)"),
        "{msg}"
    );
    // Only the speed renamed: still refused, naming `kmh`.
    let e = HistoricalProfile::parse(b"tail,head,hour_of_week,speed_kmh\n", &idx, &cfg)
        .unwrap_err()
        .to_string();
    assert!(e.contains("`speed_kmh` (that column is now `kmh`)"), "{e}");
    // The former JSON field names are unknown fields: malformed rows.
    let json = r#"[{"from_node":1001,"to_node":1002,"speed_kmh":40,"observed_at":"2026-03-29T08:00:00Z","samples":1}]"#;
    let r = live
        .apply_json(&idx, json.as_bytes(), t(NOW), &lenient())
        .unwrap();
    assert_eq!(kinds(&r), vec![(None, Some(0), ErrorKind::MalformedRow)]);
    assert!(r.first_errors[0].message.contains("from_node"), "{r:?}");
    assert!(live.is_empty());
}

#[test]
fn historical_rows_by_segment_by_ends_and_mismatches() {
    let (g, idx) = tiny();
    let ff = g.edge_speed_kmh.clone();
    let mut csv = HistoricalCsv::with_header();
    csv.segment_row(4, 0, 11) // line 2: segment 4 only, not its parallel 0
        .row(B, A, 0, 12) // 3: by ends: segment 1
        .row(A, B, 1, 13) // 4: by ends: segments 0 and 4
        .full_row("", 4, A, B, 2, 14) // 5: by ends on way 4: segment 4 only
        .full_row(2, 2, B, C, 0, 15) // 6: all four agree: segment 2
        .full_row(2, "", A, "", 0, 16) // 7: tail of 2 is B, not A
        .full_row(2, "", "", D, 0, 17) // 8: head of 2 is C, not D
        .full_row(2, 3, "", "", 0, 18) // 9: way of 2 is 2, not 3
        .segment_row(5, 0, 19) // 10: ids are 0..5
        .full_row("", 2, A, B, 0, 20) // 11: no A→B segment on way 2
        .full_row("", 1, "", "", 0, 21) // 12: way alone names nothing
        .full_row("", "", A, "", 0, 22) // 13: half a pair
        .full_row("x", "", "", "", 0, 23); // 14: not an id
    let (p, r) = HistoricalProfile::parse(csv.into_string().as_bytes(), &idx, &lenient()).unwrap();
    use ErrorKind::*;
    assert_eq!(
        kinds(&r),
        vec![
            (Some(7), None, SegmentMismatch),
            (Some(8), None, SegmentMismatch),
            (Some(9), None, SegmentMismatch),
            (Some(10), None, UnknownEdge),
            (Some(11), None, UnknownEdge),
            (Some(12), None, MalformedRow),
            (Some(13), None, MalformedRow),
            (Some(14), None, MalformedRow),
        ]
    );
    assert_eq!(r.bad_by_kind.get("segment_mismatch"), Some(&3));
    assert_eq!((r.rows, r.accepted, r.bad), (13, 5, 8));
    assert!(r.first_errors[0].message.contains("tail 1002"), "{r:?}");
    assert!(r.first_errors[2].message.contains("way 2"), "{r:?}");
    // Hour 0: segment 4 = 11, segment 1 = 12, segment 2 = 15; the rest
    // free-flow (50 for segment 0, 80 for segment 3).
    assert_eq!(
        p.speeds_for_hour(&ff, 0),
        vec![50.0, 12.0, 15.0, 80.0, 11.0]
    );
    // Hour 1: both A→B segments.
    assert_eq!(
        p.speeds_for_hour(&ff, 1),
        vec![13.0, 50.0, 30.0, 80.0, 13.0]
    );
    // Hour 2: only the one on way 4.
    assert_eq!(
        p.speeds_for_hour(&ff, 2),
        vec![50.0, 50.0, 30.0, 80.0, 14.0]
    );
    // The index reports the way ids it checks against, from the graph.
    for e in 0..g.num_edges() {
        assert_eq!(idx.way(e as u32), Some(g.edge_way[e]));
    }
    assert_eq!(idx.way(5), None);
}

#[test]
fn a_mismatching_table_is_rejected_whole_by_the_bad_share_rule() {
    let (_, idx) = tiny();
    let mut csv = HistoricalCsv::with_header();
    csv.segment_row(0, 0, 40).full_row(0, "", B, A, 0, 40);
    // 1 of 2 bad = 50 % > the default 5 %.
    let e = HistoricalProfile::parse(
        csv.into_string().as_bytes(),
        &idx,
        &ValidationConfig::default(),
    )
    .unwrap_err();
    let r = e.report().expect("rejected with a report");
    assert!(r.rejected);
    assert_eq!(r.bad_by_kind.get("segment_mismatch"), Some(&1));
}

#[test]
fn live_rows_by_segment_by_ends_and_mismatches() {
    let (_, idx) = tiny();
    let at = "2026-03-29T08:00:00Z";
    let mut csv = LiveCsv::with_header();
    csv.segment_row(4, 21, at, 2) // 2: segment 4 only
        .row(C, D, 22, at, 1) // 3: segment 3
        .full_row(1, 1, B, A, 23, at, 1) // 4: agreeing: segment 1
        .full_row(1, 4, "", "", 24, at, 1) // 5: way of 1 is 1, not 4
        .segment_row(9, 25, at, 1); // 6: no such segment
    let mut live = LiveLayer::new(idx.num_edges());
    let r = live
        .apply_csv(&idx, csv.into_string().as_bytes(), t(NOW), &lenient())
        .unwrap();
    use ErrorKind::*;
    assert_eq!(
        kinds(&r),
        vec![
            (Some(5), None, SegmentMismatch),
            (Some(6), None, UnknownEdge)
        ]
    );
    let held: Vec<Option<f32>> = (0..5).map(|e| live.get(e).map(|x| x.speed_kmh)).collect();
    assert_eq!(held, vec![None, Some(23.0), None, Some(22.0), Some(21.0)]);

    // JSON uses the same field names.
    let batch = serde_json::json!([
        segment_observation(0, 31.0, at, 1),
        observation(B, C, 32.0, at, 1),
        {"segment": 2, "tail": A, "kmh": 33.0, "observed_at": at, "samples": 1},
        {"segment": 3, "way": 3, "tail": C, "head": D, "kmh": 34.0, "observed_at": at, "samples": 1},
        {"way": 3, "kmh": 35.0, "observed_at": at, "samples": 1},
    ]);
    let mut live = LiveLayer::new(idx.num_edges());
    let r = live
        .apply_json(&idx, batch.to_string().as_bytes(), t(NOW), &lenient())
        .unwrap();
    assert_eq!(
        kinds(&r),
        vec![
            (None, Some(2), SegmentMismatch),
            (None, Some(4), MalformedRow)
        ]
    );
    let held: Vec<Option<f32>> = (0..5).map(|e| live.get(e).map(|x| x.speed_kmh)).collect();
    assert_eq!(held, vec![Some(31.0), None, Some(32.0), Some(34.0), None]);
}

/// On a graph without parallel segments, a table naming every row by
/// `segment` and the same table naming it by `tail`/`head` (both written
/// from the graph's own arrays) give the same speeds, hence the same
/// metric, and that metric is the one the rows asked for.
#[test]
fn segment_and_end_tables_give_the_same_metric() {
    let g = generate(3_000, 17);
    let idx = EdgeIndex::new(&g);
    // Segments whose end pair is unique, counted from the graph's arrays.
    let mut count: HashMap<(u64, u64), u32> = HashMap::new();
    for e in 0..g.num_edges() {
        *count.entry(ends(&g, e)).or_default() += 1;
    }
    let unique: Vec<usize> = (0..g.num_edges())
        .filter(|&e| count[&ends(&g, e)] == 1)
        .collect();
    assert!(unique.len() > g.num_edges() * 9 / 10, "{}", unique.len());
    let mut rng = SplitMix64::new(5);
    let hour = 40u8;
    let mut by_segment = HistoricalCsv::with_header();
    let mut by_ends = HistoricalCsv::with_header();
    let mut by_all = HistoricalCsv::with_header();
    let mut live_seg = LiveCsv::with_header();
    let mut live_ends = LiveCsv::with_header();
    let mut want = g.edge_speed_kmh.clone();
    let mut chosen = vec![false; g.num_edges()];
    for &e in &unique {
        if rng.below(3) != 0 {
            continue;
        }
        chosen[e] = true;
        let kmh = 5 + rng.below(100);
        let (tail, head) = ends(&g, e);
        by_segment.segment_row(e, hour, kmh);
        by_ends.row(tail, head, hour, kmh);
        by_all.full_row(e, g.edge_way[e], tail, head, hour, kmh);
        live_seg.segment_row(e, kmh, NOW, 1);
        live_ends.row(tail, head, kmh, NOW, 1);
        want[e] = kmh as f32;
    }
    let cfg = ValidationConfig::default();
    let parse = |csv: HistoricalCsv| {
        let (p, r) = HistoricalProfile::parse(csv.into_string().as_bytes(), &idx, &cfg).unwrap();
        assert_eq!(r.bad, 0, "{r:?}");
        p.speeds_for_hour(&g.edge_speed_kmh, hour)
    };
    let (s1, s2, s3) = (parse(by_segment), parse(by_ends), parse(by_all));
    assert_eq!(s1, want);
    assert_eq!(s2, want);
    assert_eq!(s3, want);
    assert_eq!(from_speeds(&g, &s1), from_speeds(&g, &s2));
    assert_ne!(from_speeds(&g, &s1), from_speeds(&g, &g.edge_speed_kmh));

    let apply = |csv: LiveCsv| {
        let mut live = LiveLayer::new(idx.num_edges());
        let r = live
            .apply_csv(&idx, csv.into_string().as_bytes(), t(NOW), &cfg)
            .unwrap();
        assert_eq!(r.bad, 0, "{r:?}");
        (0..g.num_edges() as u32)
            .map(|e| live.get(e))
            .collect::<Vec<_>>()
    };
    let (l1, l2) = (apply(live_seg), apply(live_ends));
    assert_eq!(l1, l2);
    for (e, x) in l1.iter().enumerate() {
        assert_eq!(x.map(|x| x.speed_kmh), chosen[e].then_some(want[e]));
    }
}
