//! `hodos segments`: every directed segment of an artifact, as the binary
//! writes it (run on the test city):
//! - the GeoJSON parses with the `geojson` crate as a FeatureCollection
//!   (RFC 7946) of one LineString Feature per segment, positions
//!   `[lon, lat]` equal to the graph's polyline ends, properties naming the
//!   segment id, its end node ids and its default speed;
//! - the CSV has one row per segment, and a historical table built from
//!   its `segment`, `way`, `tail`, `head` columns (every row naming all
//!   four, so each must agree with the graph) is accepted whole by a speed
//!   table upload: 0 rows refused.

use hodos::engine::artifact::Artifact;
use hodos::serving::settings::{Coverage, CustomizePriority, RegionConfig, ServingSettings};
use hodos::serving::snapshot::{RegionUpdater, UpdateSettings};
use hodos_test_service::service::city;
use std::fmt::Write as _;
use std::process::Command;

fn run(args: &[&str]) {
    let out = Command::new(env!("CARGO_BIN_EXE_hodos"))
        .args(args)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn exported_segments_open_as_geojson_and_name_table_rows() {
    let c = city();
    let art = Artifact::load(&c.artifact).unwrap();
    let g = &art.graph;
    let dir = tempfile::tempdir().unwrap();
    let gj = dir.path().join("segments.geojson");
    let csv = dir.path().join("segments.csv");
    let a = c.artifact.to_str().unwrap();
    run(&["segments", a, "--out", gj.to_str().unwrap()]);
    run(&["segments", a, "--out", csv.to_str().unwrap()]);

    let text = std::fs::read_to_string(&gj).unwrap();
    let parsed: geojson::GeoJson = text.parse().expect("valid GeoJSON");
    let geojson::GeoJson::FeatureCollection(fc) = parsed else {
        panic!("not a FeatureCollection");
    };
    assert_eq!(fc.features.len(), g.num_edges());
    for (e, f) in fc.features.iter().enumerate().step_by(97) {
        let Some(geojson::GeometryValue::LineString { coordinates: line }) =
            f.geometry.as_ref().map(|g| &g.value)
        else {
            panic!("feature {e} is not a LineString");
        };
        let poly = g.edge_polyline(e as u32);
        assert_eq!(line.len(), poly.len());
        let (first, last) = (&line[0], &line[line.len() - 1]);
        assert!((first[0] - poly[0].lon).abs() < 1e-6 && (first[1] - poly[0].lat).abs() < 1e-6);
        let end = poly[poly.len() - 1];
        assert!((last[0] - end.lon).abs() < 1e-6 && (last[1] - end.lat).abs() < 1e-6);
        let p = f.properties.as_ref().unwrap();
        assert_eq!(p["segment"], serde_json::json!(e));
        assert_eq!(
            p["tail"],
            serde_json::json!(g.node_ext[g.edge_tail[e] as usize])
        );
        assert_eq!(
            p["head"],
            serde_json::json!(g.node_ext[g.edge_head[e] as usize])
        );
        assert!((p["kmh"].as_f64().unwrap() - f64::from(g.edge_speed_kmh[e])).abs() < 1e-3);
    }

    // The CSV's ids, as a historical table: every segment at 80 % of its
    // default speed at hour 8.
    let mut rows = csv::Reader::from_path(&csv).unwrap();
    let mut table = String::from("segment,way,tail,head,hour_of_week,kmh\n");
    let mut n = 0u64;
    for r in rows.records() {
        let r = r.unwrap();
        let kmh: f64 = r[6].parse().unwrap();
        writeln!(
            table,
            "{},{},{},{},8,{:.1}",
            &r[0],
            &r[1],
            &r[2],
            &r[3],
            kmh * 0.8
        )
        .unwrap();
        n += 1;
    }
    assert_eq!(n, g.num_edges() as u64);
    let (lo, hi) = g.bbox();
    let cfg = RegionConfig {
        name: "seg".into(),
        artifact: c.artifact.clone(),
        time_zone: "UTC".into(),
        coverage: Coverage::Bbox([lo.lat, lo.lon, hi.lat, hi.lon]),
        historical: None,
        live_dir: None,
        model: None,
        state_dir: dir.path().join("state"),
    };
    let settings = ServingSettings {
        customize_priority: CustomizePriority::Normal,
        ..ServingSettings::default()
    };
    let rt = tokio::runtime::Runtime::new().unwrap();
    let report = rt.block_on(async {
        let h = RegionUpdater::open(cfg, UpdateSettings::from_settings(&settings)).await;
        h.put_historical(table.into_bytes()).await.unwrap()
    });
    assert_eq!(report.rows, n);
    assert_eq!(report.bad, 0, "{:?}", report.bad_by_kind);
    assert_eq!(report.accepted, n);
}
