//! Persistence of the speed tables: atomic writes, round trips, and
//! damaged saved files refused.

use super::*;

#[test]
fn write_atomic_replaces_and_leaves_no_temp_file() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("table.bin");
    write_atomic(&path, b"first").unwrap();
    write_atomic(&path, b"second version").unwrap();
    assert_eq!(std::fs::read(&path).unwrap(), b"second version");
    let names: Vec<_> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .collect();
    assert_eq!(names, vec!["table.bin".to_string()]);
    // A directory that does not exist: an error, nothing created.
    assert!(write_atomic(&dir.path().join("nope/x.bin"), b"x").is_err());
}

#[test]
fn historical_round_trip_and_damage() {
    let (_, idx, ff) = setup();
    let cfg = ValidationConfig::default();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("historical.saved");
    assert!(load_historical(&path, &idx, &cfg).unwrap().is_none());

    let csv = hist_rows(19, 1);
    let (p, _) = HistoricalProfile::parse(csv.as_bytes(), &idx, &cfg).unwrap();
    save_historical(&path, csv.as_bytes()).unwrap();
    let (q, r) = load_historical(&path, &idx, &cfg).unwrap().unwrap();
    assert_eq!(q, p);
    assert_eq!(q.version(), p.version());
    assert_eq!(r.bad, 1);
    for h in 0..HOURS_PER_WEEK {
        assert_eq!(q.speeds_for_hour(&ff, h), p.speeds_for_hour(&ff, h));
    }

    // Truncated by a few bytes: a clear corruption error, not a shorter table.
    let full = std::fs::read(&path).unwrap();
    std::fs::write(&path, &full[..full.len() - 7]).unwrap();
    let e = load_historical(&path, &idx, &cfg).unwrap_err();
    assert!(matches!(e, PersistError::Corrupt { .. }), "{e}");
    assert!(e.to_string().contains("truncated"), "{e}");
    // Cut inside the header line.
    std::fs::write(&path, &full[..12]).unwrap();
    assert!(matches!(
        load_historical(&path, &idx, &cfg),
        Err(PersistError::Corrupt { .. })
    ));
    // Same length, one byte changed.
    let mut bad = full.clone();
    let n = bad.len();
    bad[n - 3] ^= 0x01;
    std::fs::write(&path, &bad).unwrap();
    assert!(load_historical(&path, &idx, &cfg)
        .unwrap_err()
        .to_string()
        .contains("checksum"));
    // A live file is not a historical file.
    let live = LiveLayer::new(idx.num_edges());
    save_live(&path, &live, &idx).unwrap();
    assert!(matches!(
        load_historical(&path, &idx, &cfg),
        Err(PersistError::Corrupt { .. })
    ));

    // Intact file, different graph (B→C gone): no longer valid.
    save_historical(&path, csv.as_bytes()).unwrap();
    let mut b = GraphBuilder::default();
    let x = b.add_node(LatLon::new(0.0, 0.0), A);
    let y = b.add_node(LatLon::new(0.0, 0.001), B);
    b.add_edge(EdgeSpec {
        tail: x,
        head: y,
        length_m: None,
        speed_kmh: 50.0,
        way_id: 1,
        class: RoadClass::Residential,
        shape: &[],
    });
    let other = EdgeIndex::new(&b.finish());
    let e = load_historical(&path, &other, &cfg).unwrap_err();
    assert!(matches!(e, PersistError::Invalid { .. }), "{e}");
}

#[test]
fn live_round_trip_and_damage() {
    let (_, idx, _) = setup();
    let cfg = ValidationConfig::default();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("live.saved");
    assert!(load_live(&path, &idx, t(NOW), &cfg).unwrap().is_none());

    let mut live = LiveLayer::new(idx.num_edges());
    live.apply(
        &idx,
        &[
            obs(A, B, 33.25, "2026-03-29T08:00:00.125Z", 7),
            obs(C, D, 61.0, "2026-03-29T09:03:00+01:00", 2),
        ],
        t(NOW),
        &cfg,
    )
    .unwrap();
    save_live(&path, &live, &idx).unwrap();
    let (back, r) = load_live(&path, &idx, t(NOW), &cfg).unwrap().unwrap();
    assert_eq!(r.bad, 0);
    for e in 0..idx.num_edges() as u32 {
        assert_eq!(back.get(e), live.get(e), "edge {e}");
    }
    assert_eq!(back.len(), 3);
    assert_eq!(back.newest_observed_at(), live.newest_observed_at());

    let full = std::fs::read(&path).unwrap();
    std::fs::write(&path, &full[..full.len() / 2]).unwrap();
    let e = load_live(&path, &idx, t(NOW), &cfg).unwrap_err();
    assert!(matches!(e, PersistError::Corrupt { .. }), "{e}");
    std::fs::write(&path, b"").unwrap();
    assert!(matches!(
        load_live(&path, &idx, t(NOW), &cfg),
        Err(PersistError::Corrupt { .. })
    ));
}
