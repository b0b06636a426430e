//! Integration tests of the OpenStreetMap PBF importer on real extracts.
//!
//! The extracts (tests/data/*.osm.pbf, attribution and checksums in
//! tests/data/SOURCES.md) are read twice: by `hodos_engine::import::osm::read_pbf`
//! and, independently, by the test itself with the `osmpbf` crate's element
//! reader. The graph is checked against what that external reader says is in
//! the file (node coordinates, way node order, one-way tags), against the
//! bounding boxes and counts recorded in SOURCES.md, and its edge lengths
//! against the published haversine formula and against geodesic distances
//! from geographiclib-rs.
//!
//! Bad-input and no-road cases use damaged copies of a real file and tiny PBF
//! files written by hand (`hodos_test_support::osm_pbf`): osmpbf can only
//! read, so the tests encode the few protobuf messages they need themselves,
//! following the message definitions of the PBF format (fileformat.proto /
//! osmformat.proto, OpenStreetMap wiki "PBF Format"), and read each fixture
//! back with osmpbf to prove it is a well-formed file before using it.

use hodos_engine::graph::{RoadGraph, NONE};
use hodos_engine::import::osm::{read_pbf, read_pbf_with_progress, OsmImportStats};
use hodos_engine::import::ImportError;
use hodos_test_support::osm_pbf::{self as pbf, square_nodes, FEATURES};
use hodos_test_support::{fixture, write};
use std::collections::{HashMap, HashSet};
use std::path::Path;

/// Bounding boxes from tests/data/SOURCES.md: (lat_min, lat_max, lon_min, lon_max).
const HELSINKI_BBOX: (f64, f64, f64, f64) = (60.1642, 60.1791, 24.9352, 24.9534);
const MONACO_BBOX: (f64, f64, f64, f64) = (43.7234, 43.7517, 7.4092, 7.4486);

/// What the external reader (osmpbf) sees in a file.
struct Osm {
    nodes: HashMap<i64, (f64, f64)>,
    ways: HashMap<i64, (HashMap<String, String>, Vec<i64>)>,
}

fn read_with_osmpbf(path: &Path) -> Osm {
    use osmpbf::{Element, ElementReader};
    let mut osm = Osm {
        nodes: HashMap::new(),
        ways: HashMap::new(),
    };
    ElementReader::from_path(path)
        .unwrap()
        .for_each(|el| match el {
            Element::Node(n) => {
                osm.nodes.insert(n.id(), (n.lat(), n.lon()));
            }
            Element::DenseNode(n) => {
                osm.nodes.insert(n.id(), (n.lat(), n.lon()));
            }
            Element::Way(w) => {
                let tags = w
                    .tags()
                    .map(|(k, v)| (k.to_string(), v.to_string()))
                    .collect();
                osm.ways.insert(w.id(), (tags, w.refs().collect()));
            }
            Element::Relation(_) => {}
        })
        .unwrap();
    osm
}

/// Haversine distance (R. W. Sinnott, "Virtues of the Haversine", Sky and
/// Telescope 68(2), 1984) on a sphere of the IUGG mean Earth radius
/// R1 = 6,371,008.8 m. Written out here rather than taken from hodos_engine::geo so
/// the length check does not test the code with itself.
fn haversine(a: (f64, f64), b: (f64, f64)) -> f64 {
    const R: f64 = 6_371_008.8;
    let (p1, p2) = (a.0.to_radians(), b.0.to_radians());
    let dp = p2 - p1;
    let dl = (b.1 - a.1).to_radians();
    let h = (dp / 2.0).sin().powi(2) + p1.cos() * p2.cos() * (dl / 2.0).sin().powi(2);
    2.0 * R * h.sqrt().asin()
}

fn polyline(g: &RoadGraph, e: usize) -> Vec<(f64, f64)> {
    g.edge_polyline(e as u32)
        .iter()
        .map(|p| (p.lat, p.lon))
        .collect()
}

struct Imported {
    graph: RoadGraph,
    stats: OsmImportStats,
    osm: Osm,
}

fn import(name: &str) -> Imported {
    let path = fixture(name);
    let mut calls = Vec::new();
    let (graph, stats) = read_pbf_with_progress(&path, &mut |b| calls.push(b)).unwrap();
    let len = std::fs::metadata(&path).unwrap().len();
    // Progress is monotone and ends at twice the file length (two passes).
    assert!(calls.windows(2).all(|w| w[0] <= w[1]), "{calls:?}");
    assert_eq!(calls.last().copied(), Some(2 * len));
    println!(
        "{name}: {} graph nodes, {} edges; {stats:?}",
        graph.num_nodes(),
        graph.num_edges()
    );
    Imported {
        graph,
        stats,
        osm: read_with_osmpbf(&path),
    }
}

/// How an extract was cut at its bounding box.
#[derive(Clone, Copy)]
struct Clip {
    /// Every node lies inside the box (ways cut at the border).
    all_inside: bool,
}

/// Structural checks every import must pass.
fn check_graph(imp: &Imported, bbox: (f64, f64, f64, f64), clip: Clip) {
    let g = &imp.graph;
    assert!(g.num_edges() > 0);
    // Node ids are OSM node ids, each once, at the coordinates osmpbf reads.
    let mut seen = HashSet::new();
    for v in 0..g.num_nodes() {
        let id = g.node_ext[v] as i64;
        assert!(seen.insert(id), "node {id} twice");
        let (lat, lon) = imp.osm.nodes[&id];
        assert_eq!((g.node_lat[v], g.node_lon[v]), (lat, lon), "node {id}");
    }
    // The SOURCES.md bounding box (the file header's box, written with 4
    // decimals, so allow one unit in that last place, 1e-4 degrees or about
    // 11 m, for rounding). A clipped extract has every point inside it; an
    // extract cut with complete ways keeps every way that reaches into the
    // box with all its nodes, so there each way has a point inside.
    const ROUNDING: f64 = 1e-4;
    let (la0, la1, lo0, lo1) = (
        bbox.0 - ROUNDING,
        bbox.1 + ROUNDING,
        bbox.2 - ROUNDING,
        bbox.3 + ROUNDING,
    );
    let inside = |(lat, lon): (f64, f64)| (la0..=la1).contains(&lat) && (lo0..=lo1).contains(&lon);
    let mut way_inside: HashMap<u64, bool> = HashMap::new();
    for e in 0..g.num_edges() {
        for p in polyline(g, e) {
            assert!(
                !clip.all_inside || inside(p),
                "edge {e} point {p:?} outside {bbox:?}"
            );
            *way_inside.entry(g.edge_way[e]).or_default() |= inside(p);
        }
    }
    if let Some((way, _)) = way_inside.iter().find(|(_, &i)| !i) {
        panic!("way {way} has no point inside {bbox:?}");
    }
    let outside = (0..g.num_nodes())
        .filter(|&v| !inside((g.node_lat[v], g.node_lon[v])))
        .count();
    println!(
        "{outside} of {} graph nodes outside the header box",
        g.num_nodes()
    );
    // Lengths: positive, equal to the haversine sum over the polyline, and
    // within 0.5 % of the WGS84 geodesic (geographiclib-rs; the sphere
    // differs from the ellipsoid by well under 0.5 % at these latitudes).
    use geographiclib_rs::{Geodesic, InverseGeodesic};
    let wgs84 = Geodesic::wgs84();
    for e in 0..g.num_edges() {
        let len = g.edge_len_m[e];
        assert!(len > 0.0, "edge {e} has length {len}");
        let pts = polyline(g, e);
        let hav: f64 = pts.windows(2).map(|w| haversine(w[0], w[1])).sum();
        assert!(
            (len - hav).abs() <= 1e-9 * hav.max(1.0),
            "edge {e}: {len} vs {hav}"
        );
        let geo: f64 = pts
            .windows(2)
            .map(|w| {
                let s: f64 = wgs84.inverse(w[0].0, w[0].1, w[1].0, w[1].1);
                s
            })
            .sum();
        assert!(
            (len - geo).abs() <= 0.005 * geo + 1e-3,
            "edge {e}: {len} vs geodesic {geo}"
        );
        assert!(g.edge_speed_kmh[e] > 0.0 && g.edge_speed_kmh[e] <= 300.0);
    }
    // Every edge names a way that osmpbf sees with a drivable highway value
    // (OpenStreetMap wiki, Key:highway: roads and link roads).
    const DRIVABLE: &[&str] = &[
        "motorway",
        "motorway_link",
        "trunk",
        "trunk_link",
        "primary",
        "primary_link",
        "secondary",
        "secondary_link",
        "tertiary",
        "tertiary_link",
        "unclassified",
        "residential",
        "living_street",
        "service",
    ];
    for e in 0..g.num_edges() {
        let (tags, _) = &imp.osm.ways[&(g.edge_way[e] as i64)];
        let hw = tags.get("highway").map(String::as_str).unwrap_or("");
        assert!(DRIVABLE.contains(&hw), "edge {e} on way with highway={hw}");
        assert_eq!(g.edge_class[e].name(), hw);
    }
    // Twins are mutual and opposite.
    for e in 0..g.num_edges() {
        let t = g.edge_twin[e];
        if t != NONE {
            let t = t as usize;
            assert_eq!(g.edge_twin[t] as usize, e);
            assert_eq!(
                (g.edge_tail[t], g.edge_head[t]),
                (g.edge_head[e], g.edge_tail[e])
            );
        }
    }
}

/// How an edge runs along its way, found by matching its polyline against
/// the way's node sequence as osmpbf reads it.
#[derive(Debug, PartialEq, Eq, Clone, Copy)]
enum Along {
    Forward,
    Backward,
}

fn along(g: &RoadGraph, osm: &Osm, e: usize) -> Along {
    let (_, refs) = &osm.ways[&(g.edge_way[e] as i64)];
    let pts = polyline(g, e);
    // A node missing from the extract matches no point.
    let coords: Vec<Option<(f64, f64)>> = refs.iter().map(|r| osm.nodes.get(r).copied()).collect();
    let pts: Vec<Option<(f64, f64)>> = pts.into_iter().map(Some).collect();
    let n = pts.len();
    for i in 0..coords.len() {
        if i + n <= coords.len() && coords[i..i + n] == pts[..] {
            return Along::Forward;
        }
        if i + n <= coords.len() && coords[i..i + n].iter().rev().eq(pts.iter()) {
            return Along::Backward;
        }
    }
    panic!("edge {e} of way {} does not follow the way", g.edge_way[e]);
}

fn edges_by_way(g: &RoadGraph) -> HashMap<i64, Vec<usize>> {
    let mut m: HashMap<i64, Vec<usize>> = HashMap::new();
    for e in 0..g.num_edges() {
        m.entry(g.edge_way[e] as i64).or_default().push(e);
    }
    m
}

/// Per-way direction checks against the tags osmpbf reads; returns the
/// numbers of (oneway=yes, roundabout, oneway=-1, two-way) ways checked.
fn check_directions(imp: &Imported) -> (usize, usize, usize, usize) {
    let g = &imp.graph;
    let by_way = edges_by_way(g);
    let (mut yes, mut round, mut back, mut two) = (0, 0, 0, 0);
    for (way, edges) in &by_way {
        let (tags, refs) = &imp.osm.ways[way];
        let tag = |k: &str| tags.get(k).map(String::as_str);
        let dirs: Vec<Along> = edges.iter().map(|&e| along(g, &imp.osm, e)).collect();
        let fwd = dirs.iter().filter(|&&d| d == Along::Forward).count();
        let bwd = dirs.len() - fwd;
        // OpenStreetMap wiki, Key:oneway: oneway=yes is one-way in node order.
        match tag("oneway") {
            Some("yes") => {
                yes += 1;
                assert_eq!(bwd, 0, "oneway=yes way {way} has backward edges");
                for &e in edges {
                    assert_eq!(g.edge_twin[e], NONE);
                }
            }
            Some("-1") => {
                back += 1;
                assert_eq!(fwd, 0, "oneway=-1 way {way} has forward edges");
            }
            None if matches!(tag("junction"), Some("roundabout")) => {
                // Key:junction / Key:oneway: a roundabout implies oneway=yes.
                round += 1;
                assert_eq!(bwd, 0, "roundabout way {way} has backward edges");
            }
            None if !matches!(tag("highway"), Some("motorway" | "motorway_link"))
                && tag("junction").is_none() =>
            {
                two += 1;
                assert_eq!(fwd, bwd, "two-way way {way}");
                for &e in edges {
                    assert_ne!(g.edge_twin[e], NONE, "two-way edge {e} has no twin");
                }
            }
            _ => {}
        }
        // A way whose nodes are all in the extract is covered completely:
        // its forward (or backward) edges add up to the way's own length.
        if refs.iter().all(|r| imp.osm.nodes.contains_key(r)) {
            let way_len: f64 = refs
                .windows(2)
                .map(|w| haversine(imp.osm.nodes[&w[0]], imp.osm.nodes[&w[1]]))
                .sum();
            for d in [Along::Forward, Along::Backward] {
                let sum: f64 = edges
                    .iter()
                    .zip(&dirs)
                    .filter(|(_, &x)| x == d)
                    .map(|(&e, _)| g.edge_len_m[e])
                    .sum();
                if sum > 0.0 {
                    assert!(
                        (sum - way_len).abs() < 1e-6 * way_len + 1e-6,
                        "way {way}: {sum} vs {way_len}"
                    );
                }
            }
        }
    }
    (yes, round, back, two)
}

/// Ways with a plain drivable highway value and no tag that could restrict
/// or shape them must all be in the graph (when their nodes are present).
fn check_plain_roads_kept(imp: &Imported) -> usize {
    let by_way = edges_by_way(&imp.graph);
    let restricting = [
        "access",
        "vehicle",
        "motor_vehicle",
        "motorcar",
        "oneway",
        "area",
        "junction",
    ];
    let mut checked = 0;
    for (id, (tags, refs)) in &imp.osm.ways {
        let plain = matches!(
            tags.get("highway").map(String::as_str),
            Some("residential" | "primary" | "secondary" | "tertiary" | "unclassified")
        ) && !restricting.iter().any(|k| tags.contains_key(*k));
        if plain && refs.len() >= 2 && refs.iter().all(|r| imp.osm.nodes.contains_key(r)) {
            checked += 1;
            assert!(
                by_way.contains_key(id),
                "plain road way {id} missing from the graph"
            );
        }
    }
    checked
}

#[test]
fn helsinki_imports() {
    let imp = import("helsinki-center.osm.pbf");
    // SOURCES.md (counted with the osmium bindings): 2,650 highway ways, 480
    // of them oneway=yes, 795 with maxspeed. The external reader must agree.
    let hw: Vec<_> = imp
        .osm
        .ways
        .values()
        .filter(|(t, _)| t.contains_key("highway"))
        .collect();
    let oneway = hw
        .iter()
        .filter(|(t, _)| t.get("oneway").map(String::as_str) == Some("yes"))
        .count();
    let maxspeed = hw
        .iter()
        .filter(|(t, _)| t.contains_key("maxspeed"))
        .count();
    assert_eq!((hw.len(), oneway, maxspeed), (2650, 480, 795));
    // Clipped at the box: ways crossing the border lose their outside nodes
    // (the import reports them as missing).
    check_graph(&imp, HELSINKI_BBOX, Clip { all_inside: true });
    assert!(imp.stats.nodes_missing > 0 && imp.stats.ways_clipped > 0);
    // SOURCES.md: "about 2,300 nodes on drivable ways"; the exact number
    // depends on the rules, so allow a wide band.
    let s = imp.stats;
    assert!((1500..=3500).contains(&s.nodes_referenced), "{s:?}");
    assert!(imp.graph.num_nodes() as u64 <= s.nodes_referenced);
    let dirs = check_directions(&imp);
    println!("helsinki: checked (oneway=yes, roundabout, oneway=-1, two-way) ways = {dirs:?}");
    assert!(dirs.0 >= 50 && dirs.3 >= 50, "{dirs:?}");
    let plain = check_plain_roads_kept(&imp);
    println!("helsinki: {plain} plain road ways all present");
    assert!(plain > 20);
}

#[test]
fn monaco_imports() {
    let imp = import("monaco.osm.pbf");
    // SOURCES.md: 2,852 highway ways (518 oneway=yes, 83 roundabout ways,
    // 284 with maxspeed).
    let hw: Vec<_> = imp
        .osm
        .ways
        .values()
        .filter(|(t, _)| t.contains_key("highway"))
        .collect();
    let get = |t: &HashMap<String, String>, k: &str| t.get(k).cloned();
    let oneway = hw
        .iter()
        .filter(|(t, _)| get(t, "oneway").as_deref() == Some("yes"))
        .count();
    let round = hw
        .iter()
        .filter(|(t, _)| get(t, "junction").as_deref() == Some("roundabout"))
        .count();
    let maxspeed = hw
        .iter()
        .filter(|(t, _)| t.contains_key("maxspeed"))
        .count();
    assert_eq!((hw.len(), oneway, round, maxspeed), (2852, 518, 83, 284));
    // Cut with complete ways: no node is missing, some lie outside the box.
    check_graph(&imp, MONACO_BBOX, Clip { all_inside: false });
    assert_eq!(imp.stats.nodes_missing, 0);
    // SOURCES.md: "about 6,000 nodes on drivable ways".
    let s = imp.stats;
    assert!((4000..=8000).contains(&s.nodes_referenced), "{s:?}");
    let dirs = check_directions(&imp);
    println!("monaco: checked (oneway=yes, roundabout, oneway=-1, two-way) ways = {dirs:?}");
    assert!(dirs.0 >= 100 && dirs.1 >= 20 && dirs.3 >= 100, "{dirs:?}");
    let plain = check_plain_roads_kept(&imp);
    println!("monaco: {plain} plain road ways all present");
    assert!(plain > 20);
}

/// The first oneway=yes road way of the file (in osmpbf's reading) yields
/// edges tail→head along the way only, and so does the first roundabout.
#[test]
fn one_way_street_and_roundabout_single_direction() {
    let path = fixture("monaco.osm.pbf");
    let osm = read_with_osmpbf(&path);
    let g = read_pbf(&path).unwrap();
    let by_way = edges_by_way(&g);
    let mut ids: Vec<_> = osm.ways.keys().copied().collect();
    ids.sort();
    let pick = |f: &dyn Fn(&HashMap<String, String>) -> bool| {
        ids.iter()
            .copied()
            .find(|id| f(&osm.ways[id].0) && by_way.contains_key(id))
            .expect("no such way")
    };
    let one = pick(&|t| {
        t.get("oneway").map(String::as_str) == Some("yes")
            && t.get("highway").map(String::as_str) == Some("residential")
    });
    let round = pick(&|t| {
        t.get("junction").map(String::as_str) == Some("roundabout") && !t.contains_key("oneway")
    });
    for way in [one, round] {
        let edges = &by_way[&way];
        let refs = &osm.ways[&way].1;
        println!("way {way}: {} nodes, {} edges", refs.len(), edges.len());
        for &e in edges {
            assert_eq!(along(&g, &osm, e), Along::Forward, "way {way} edge {e}");
            // Tail comes before head in the way's node list.
            let t = g.node_ext[g.edge_tail[e] as usize] as i64;
            let h = g.node_ext[g.edge_head[e] as usize] as i64;
            let pt = refs.iter().position(|&r| r == t).unwrap();
            let ph = refs.iter().rposition(|&r| r == h).unwrap();
            assert!(pt < ph, "way {way}: tail {t} at {pt}, head {h} at {ph}");
        }
    }
}

fn assert_err_names(path: &Path, err: &ImportError) {
    let name = path.file_name().unwrap().to_string_lossy().to_string();
    let msg = err.to_string();
    assert!(msg.contains(&name), "{msg:?} does not name {name}");
}

#[test]
fn truncated_copies_are_errors() {
    let bytes = std::fs::read(fixture("monaco.osm.pbf")).unwrap();
    let dir = tempfile::tempdir().unwrap();
    for n in [
        1,
        3,
        4,
        10,
        30,
        100,
        1000,
        bytes.len() / 3,
        bytes.len() / 2,
        bytes.len() - 1,
    ] {
        let path = dir.path().join(format!("monaco-first-{n}-bytes.osm.pbf"));
        std::fs::write(&path, &bytes[..n]).unwrap();
        let err = read_pbf(&path).expect_err(&format!("{n} bytes read fine"));
        println!("{n} bytes: {err}");
        assert!(matches!(err, ImportError::Invalid { .. }), "{n}: {err:?}");
        assert_err_names(&path, &err);
    }
}

#[test]
fn garbage_empty_and_missing_are_errors() {
    let dir = tempfile::tempdir().unwrap();
    // Deterministic pseudo-random bytes (xorshift64, G. Marsaglia 2003).
    let mut x: u64 = 0x9E37_79B9_7F4A_7C15;
    let mut garbage = Vec::new();
    for _ in 0..8192 {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        garbage.push(x as u8);
    }
    let cases: Vec<(&str, Vec<u8>)> = vec![
        ("garbage.osm.pbf", garbage.clone()),
        // A plausible small header length followed by garbage.
        (
            "garbage-small-header.osm.pbf",
            [&[0, 0, 0, 13][..], &garbage[..200]].concat(),
        ),
        ("empty.osm.pbf", Vec::new()),
        (
            "text.osm.pbf",
            b"<?xml version='1.0'?><osm></osm>\n".to_vec(),
        ),
    ];
    for (name, content) in cases {
        let path = dir.path().join(name);
        std::fs::write(&path, content).unwrap();
        let err = read_pbf(&path).expect_err(name);
        println!("{name}: {err}");
        assert!(
            matches!(err, ImportError::Invalid { .. }),
            "{name}: {err:?}"
        );
        assert_err_names(&path, &err);
    }
    let missing = dir.path().join("no-such-file.osm.pbf");
    let err = read_pbf(&missing).unwrap_err();
    assert!(matches!(err, ImportError::Io { .. }), "{err:?}");
    assert_err_names(&missing, &err);
    let err = read_pbf(dir.path()).unwrap_err();
    assert!(matches!(err, ImportError::Io { .. }), "{err:?}");
}

/// An extract with ways but no drivable road: footway, track (excluded by
/// choice), a private residential street and a building outline. (The
/// binary refusing the same file: `bad_inputs_exit_non_zero_naming_the_file`
/// in tests/cli.)
#[test]
fn extract_without_roads_is_no_roads() {
    let dir = tempfile::tempdir().unwrap();
    let f = pbf::without_roads();
    let path = write(dir.path(), "paths-only.osm.pbf", &f);
    // The fixture is a well-formed PBF: osmpbf reads back what was written.
    let osm = read_with_osmpbf(&path);
    assert_eq!(osm.nodes.len(), 4);
    assert_eq!(osm.nodes[&3], (43.7310, 7.4210));
    assert_eq!(osm.ways.len(), 4);
    assert_eq!(osm.ways[&12].0["access"], "private");
    assert_eq!(osm.ways[&13].1, vec![1, 2, 3, 4, 1]);

    let err = read_pbf(&path).unwrap_err();
    assert!(matches!(err, ImportError::NoRoads { .. }), "{err:?}");
    assert_err_names(&path, &err);
}

/// A small hand-made extract: an oneway=-1 street whose middle node is
/// missing (a clipped border) plus a two-way street, nodes as plain and
/// dense nodes.
#[test]
fn small_extract_directions_and_clipping() {
    let dir = tempfile::tempdir().unwrap();
    let c = pbf::coord;
    let mut f = Vec::new();
    pbf::header(&mut f, FEATURES);
    pbf::data(
        &mut f,
        &square_nodes(),
        &[(5, c(43.7320), c(7.4200)), (6, c(43.7320), c(7.4210))],
        &[
            // Node 99 is not in the file.
            pbf::Way {
                id: 20,
                tags: &[
                    ("highway", "tertiary"),
                    ("oneway", "-1"),
                    ("maxspeed", "30"),
                ],
                refs: &[1, 2, 99, 3, 4],
            },
            pbf::Way {
                id: 21,
                tags: &[("highway", "residential")],
                refs: &[4, 5, 6],
            },
        ],
    );
    let path = write(dir.path(), "small.osm.pbf", &f);
    let osm = read_with_osmpbf(&path);
    assert_eq!(osm.nodes.len(), 6);
    assert_eq!(osm.ways[&20].1, vec![1, 2, 99, 3, 4]);

    let (g, stats) = read_pbf_with_progress(&path, &mut |_| {}).unwrap();
    assert_eq!((stats.nodes_missing, stats.ways_clipped), (1, 1));
    let mut edges: Vec<(u64, u64, u64, f32)> = (0..g.num_edges())
        .map(|e| {
            (
                g.edge_way[e],
                g.node_ext[g.edge_tail[e] as usize],
                g.node_ext[g.edge_head[e] as usize],
                g.edge_speed_kmh[e],
            )
        })
        .collect();
    edges.sort_by(|a, b| a.partial_cmp(b).unwrap());
    // oneway=-1 runs against node order (Key:oneway); the segments touching
    // node 99 are gone; way 21 is one two-way stretch 4→(5)→6 at the
    // residential default speed (30, see default_speed_kmh).
    assert_eq!(
        edges,
        vec![
            (20, 2, 1, 30.0),
            (20, 4, 3, 30.0),
            (21, 4, 6, 30.0),
            (21, 6, 4, 30.0)
        ]
    );
}

/// Files the format rules out: data before the header, an unknown required
/// feature, and node ids whose delta coding overflows (osmpbf adds deltas
/// unchecked; with overflow checks that panics, which must become an error).
#[test]
fn malformed_structure_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let road = [pbf::Way {
        id: 1,
        tags: &[("highway", "residential")],
        refs: &[1, 2],
    }];

    let mut f = Vec::new();
    pbf::data(&mut f, &square_nodes(), &[], &road);
    let path = write(dir.path(), "no-header.osm.pbf", &f);
    let err = read_pbf(&path).unwrap_err();
    println!("{err}");
    assert!(matches!(err, ImportError::Invalid { .. }), "{err:?}");
    assert_err_names(&path, &err);

    let mut f = Vec::new();
    pbf::header(&mut f, &["OsmSchema-V0.6", "HistoricalInformation"]);
    pbf::data(&mut f, &square_nodes(), &[], &road);
    let path = write(dir.path(), "history.osm.pbf", &f);
    let err = read_pbf(&path).unwrap_err();
    println!("{err}");
    assert!(err.to_string().contains("HistoricalInformation"), "{err}");
    assert_err_names(&path, &err);

    let mut f = Vec::new();
    pbf::header(&mut f, FEATURES);
    pbf::data(
        &mut f,
        &[],
        &[(i64::MAX, 0, 0), (i64::MIN, 1, 1), (1, 0, 0)],
        &road,
    );
    let path = write(dir.path(), "overflow.osm.pbf", &f);
    // Whether this panics inside osmpbf depends on overflow checks; either
    // way the import must return (here: node 2 is missing, so at most an
    // error or a graph without it), never unwind into the caller.
    let result = std::panic::catch_unwind(|| read_pbf(&path));
    let result = result.expect("read_pbf panicked");
    match result {
        Err(err) => {
            println!("{err}");
            assert_err_names(&path, &err);
        }
        Ok(g) => panic!("overflowing ids gave a graph with {} edges", g.num_edges()),
    }
}
