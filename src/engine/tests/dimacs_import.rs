//! DIMACS importer checks: the real NY road graph of the 9th DIMACS
//! Implementation Challenge (counts, units, coordinates, the second metric)
//! and strict rejection of malformed input with file name and line number.
//!
//! The real-data tests read `$HODOS_DATA_DIR/dimacs` (default
//! `../shared/data/dimacs` next to the crate) and print `SKIPPED: <why>` and
//! pass when the files are absent.

use hodos_engine::geo::{haversine_m, LatLon};
use hodos_engine::graph::{RoadClass, NONE};
use hodos_engine::import::{dimacs, ImportError};
use hodos_test_support::graphs::assert_same_graph;
use hodos_test_support::write;
use hodos_testkit::{skipped, DimacsNy};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

// ---------------------------------------------------------------------------
// Real data
// ---------------------------------------------------------------------------

/// Shared NY distance graph and its raw arcs, loaded once per test binary.
struct Ny {
    graph: hodos_engine::graph::RoadGraph,
    arcs: Vec<(u32, u32, u32)>,
    dir: PathBuf,
}

fn ny() -> Option<&'static Ny> {
    static NY: OnceLock<Result<Ny, String>> = OnceLock::new();
    let r = NY.get_or_init(|| {
        let files = DimacsNy::find()?;
        let (gr, co, dir) = (files.distance_gr, files.coordinates, files.dir);
        let t = std::time::Instant::now();
        let graph = dimacs::read(&gr, &co).map_err(|e| e.to_string())?;
        eprintln!("read USA-road-d.NY in {:.2?}", t.elapsed());
        let arcs = dimacs::read_arc_weights(&gr).map_err(|e| e.to_string())?;
        Ok(Ny { graph, arcs, dir })
    });
    match r {
        Ok(ny) => Some(ny),
        Err(why) => {
            skipped(why);
            None
        }
    }
}

#[test]
fn ny_counts_match_the_challenge_header() {
    let Some(ny) = ny() else { return };
    // 9th DIMACS Challenge, USA-road-d.NY: `p sp 264346 733846`
    // (shared/data/dimacs/SOURCES.md, "Files" table, header verified).
    assert_eq!(ny.graph.num_nodes(), 264_346);
    assert_eq!(ny.arcs.len(), 733_846);
    // No self-loops in NY, so every arc becomes an edge.
    assert_eq!(ny.graph.num_edges(), 733_846);
    // Ids: node i is DIMACS id i+1.
    assert!(ny
        .graph
        .node_ext
        .iter()
        .enumerate()
        .all(|(i, &e)| e == i as u64 + 1));
    // Weight range 1..36,946 (SOURCES.md, "What was verified").
    let (lo, hi) = ny
        .arcs
        .iter()
        .fold((u32::MAX, 0), |(lo, hi), a| (lo.min(a.2), hi.max(a.2)));
    assert_eq!((lo, hi), (1, 36_946));
    // First data line of the d .gr: `a 1 2 803` (SOURCES.md).
    assert_eq!(ny.arcs[0], (0, 1, 803));
}

#[test]
fn ny_first_coordinate_line() {
    let Some(ny) = ny() else { return };
    // SOURCES.md: first data line of the NY .co is `v 1 -73530767 41085396`,
    // i.e. lon -73.530767, lat 41.085396 (microdegrees, longitude first).
    let p = ny.graph.node_pos(0);
    assert!((p.lon - -73.530767).abs() < 1e-9, "lon {}", p.lon);
    assert!((p.lat - 41.085396).abs() < 1e-9, "lat {}", p.lat);
    assert_eq!(ny.graph.node_ext[0], 1);
    // Coordinate ranges, SOURCES.md: lon -74,499,998..-73,500,016,
    // lat 40,300,009..41,299,997 microdegrees.
    let (lo, hi) = ny.graph.bbox();
    assert!((lo.lon - -74.499998).abs() < 1e-9 && (hi.lon - -73.500016).abs() < 1e-9);
    assert!((lo.lat - 40.300009).abs() < 1e-9 && (hi.lat - 41.299997).abs() < 1e-9);
}

#[test]
fn ny_weights_are_decimetres() {
    let Some(ny) = ny() else { return };
    // SOURCES.md, "Units, as measured here": over arcs longer than 50 m,
    // weight / haversine metres (R = 6,371,008.8 m) has median 9.994.
    let g = &ny.graph;
    let mut ratios: Vec<f64> = ny
        .arcs
        .iter()
        .step_by(37)
        .filter_map(|&(u, v, w)| {
            let d = haversine_m(g.node_pos(u), g.node_pos(v));
            (d > 50.0).then_some(f64::from(w) / d)
        })
        .collect();
    assert!(ratios.len() > 10_000, "sample of {}", ratios.len());
    ratios.sort_by(f64::total_cmp);
    let median = ratios[ratios.len() / 2];
    eprintln!(
        "median weight/haversine = {median:.4} over {} arcs",
        ratios.len()
    );
    assert!((9.9..=10.1).contains(&median), "median {median}");
    // And the importer turns that into metres: length = weight / 10.
    for (e, &(u, v, w)) in ny.arcs.iter().enumerate().step_by(101) {
        assert_eq!((g.edge_tail[e], g.edge_head[e]), (u, v));
        assert_eq!(g.edge_len_m[e], f64::from(w) / 10.0);
        assert_eq!(g.edge_class[e], RoadClass::Unknown);
        assert_eq!(g.edge_speed_kmh[e], dimacs::DEFAULT_SPEED_KMH);
    }
}

#[test]
fn ny_opposite_arcs_are_twins() {
    let Some(ny) = ny() else { return };
    // SOURCES.md, "Formats": each road appears as two opposite arcs; with the
    // shared pair-derived way id the builder pairs nearly all of them.
    let g = &ny.graph;
    let paired = g.edge_twin.iter().filter(|&&t| t != NONE).count();
    eprintln!("{paired} of {} edges have a twin", g.num_edges());
    assert!(paired as f64 > 0.99 * g.num_edges() as f64);
    for e in (0..g.num_edges()).step_by(97) {
        let t = g.edge_twin[e];
        if t != NONE {
            let t = t as usize;
            assert_eq!(
                (g.edge_tail[t], g.edge_head[t]),
                (g.edge_head[e], g.edge_tail[e])
            );
            assert_eq!(g.edge_way[t], g.edge_way[e]);
        }
    }
}

#[test]
fn ny_travel_time_graph_has_the_same_arcs() {
    let Some(ny) = ny() else { return };
    // SOURCES.md: "The NY distance and travel-time graphs list exactly the same
    // (u, v) arcs in the same order; only the weights differ."
    let t = dimacs::read_arc_weights(&ny.dir.join("USA-road-t.NY.gr.gz")).unwrap();
    assert_eq!(t.len(), ny.arcs.len());
    assert!(t
        .iter()
        .zip(&ny.arcs)
        .all(|(a, b)| (a.0, a.1) == (b.0, b.1)));
    // Weight range 2..92,366 (SOURCES.md, "What was verified").
    let lo = t.iter().map(|a| a.2).min().unwrap();
    let hi = t.iter().map(|a| a.2).max().unwrap();
    assert_eq!((lo, hi), (2, 92_366));
}

// ---------------------------------------------------------------------------
// Small hand-written files
// ---------------------------------------------------------------------------

const GOOD_GR: &str = "c tiny test graph\np sp 3 4\na 1 2 100\na 2 1 100\na 2 3 250\na 3 2 250\n";
const GOOD_CO: &str = "c coords\np aux sp co 3\nv 1 -30000000 45000000\nv 2 -29999000 45000000\nv 3 -29999000 45001000\n";

fn write_gz(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    let mut enc = flate2::write::GzEncoder::new(
        std::fs::File::create(&p).unwrap(),
        flate2::Compression::default(),
    );
    enc.write_all(text.as_bytes()).unwrap();
    enc.finish().unwrap();
    p
}

/// Reads `gr_text` (with the good .co) and expects a syntax error at `line`.
fn expect_gr_error(name: &str, gr_text: &str, line: usize) {
    let dir = tempfile::tempdir().unwrap();
    let gr = write(dir.path(), name, gr_text);
    let co = write(dir.path(), "good.co", GOOD_CO);
    let err = dimacs::read(&gr, &co).expect_err(name);
    check_error(&err, name, Some(line));
    // read_arc_weights shares the parser and must agree.
    let err2 = dimacs::read_arc_weights(&gr).expect_err(name);
    assert_eq!(err.to_string(), err2.to_string());
}

fn expect_co_error(name: &str, co_text: &str, line: Option<usize>) {
    let dir = tempfile::tempdir().unwrap();
    let gr = write(dir.path(), "good.gr", GOOD_GR);
    let co = write(dir.path(), name, co_text);
    let err = dimacs::read(&gr, &co).expect_err(name);
    check_error(&err, name, line);
}

fn check_error(err: &ImportError, name: &str, line: Option<usize>) {
    let shown = err.to_string();
    eprintln!("{name}: {shown}");
    match line {
        Some(l) => {
            assert!(
                matches!(err, ImportError::Syntax { line, .. } if *line == l),
                "{name}: expected a syntax error at line {l}, got {shown}"
            );
            assert!(shown.contains(&format!("{name}:{l}:")), "{name}: {shown}");
        }
        None => assert!(shown.contains(name), "{name}: {shown}"),
    }
}

#[test]
fn good_small_files_read() {
    let dir = tempfile::tempdir().unwrap();
    let gr = write(dir.path(), "g.gr", GOOD_GR);
    let co = write(dir.path(), "g.co", GOOD_CO);
    let g = dimacs::read(&gr, &co).unwrap();
    assert_eq!((g.num_nodes(), g.num_edges()), (3, 4));
    assert_eq!(g.node_ext, vec![1, 2, 3]);
    assert_eq!(g.node_pos(2), LatLon::new(45.001, -29.999));
    assert_eq!(g.edge_len_m, vec![10.0, 10.0, 25.0, 25.0]);
    assert_eq!(g.edge_twin, vec![1, 0, 3, 2]);
    assert_eq!(g.edge_way[0], dimacs::way_id_for(1, 2));
    assert_eq!(
        dimacs::read_arc_weights(&gr).unwrap(),
        vec![(0, 1, 100), (1, 0, 100), (1, 2, 250), (2, 1, 250)]
    );
}

#[test]
fn gzip_reads_the_same_as_plain() {
    let dir = tempfile::tempdir().unwrap();
    let gr = write(dir.path(), "plain.gr", GOOD_GR);
    let co = write(dir.path(), "plain.co", GOOD_CO);
    // Detection is by magic bytes: gzip under a plain name, plain under .gz.
    let grz = write_gz(dir.path(), "packed.gr", GOOD_GR);
    let coz = write(dir.path(), "notpacked.co.gz", GOOD_CO);
    let a = dimacs::read(&gr, &co).unwrap();
    let b = dimacs::read(&grz, &coz).unwrap();
    assert_same_graph(&a, &b);
    let coz2 = write_gz(dir.path(), "packed.co", GOOD_CO);
    let c = dimacs::read(&grz, &coz2).unwrap();
    assert_eq!(a.node_lat, c.node_lat);
}

#[test]
fn crlf_comments_and_blank_lines_are_fine() {
    let dir = tempfile::tempdir().unwrap();
    let gr = write(
        dir.path(),
        "crlf.gr",
        GOOD_GR.replace('\n', "\r\n").replace("p sp", "\nc\np sp"),
    );
    let co = write(dir.path(), "crlf.co", GOOD_CO.replace('\n', "\r\n"));
    let g = dimacs::read(&gr, &co).unwrap();
    assert_eq!((g.num_nodes(), g.num_edges()), (3, 4));
}

#[test]
fn gr_unknown_line_type() {
    expect_gr_error("unknown.gr", "c x\np sp 3 1\nx 1 2 3\n", 3);
    expect_gr_error("comment_typo.gr", "cx\np sp 3 1\na 1 2 3\n", 1);
}

#[test]
fn gr_wrong_field_count() {
    expect_gr_error("short_arc.gr", "p sp 3 2\na 1 2 3\na 1 2\n", 3);
    expect_gr_error("long_arc.gr", "p sp 3 1\na 1 2 3 4\n", 2);
    expect_gr_error("short_header.gr", "c\nc\np sp 3\n", 3);
    expect_gr_error("bad_header_kind.gr", "p max 3 1\na 1 2 3\n", 1);
}

#[test]
fn gr_non_integer() {
    expect_gr_error("float_weight.gr", "p sp 3 1\na 1 2 3.5\n", 2);
    expect_gr_error("word_id.gr", "p sp 3 1\na one 2 3\n", 2);
    expect_gr_error("word_count.gr", "p sp three 1\n", 1);
    expect_gr_error("huge_weight.gr", "p sp 3 1\na 1 2 99999999999\n", 2);
    expect_gr_error("negative_weight.gr", "p sp 3 1\na 1 2 -3\n", 2);
}

#[test]
fn gr_node_id_out_of_range() {
    expect_gr_error("id_high.gr", "p sp 3 2\na 1 2 3\na 1 4 3\n", 3);
    expect_gr_error("id_zero.gr", "p sp 3 1\na 0 2 3\n", 2);
    expect_gr_error("id_negative.gr", "p sp 3 1\na 1 -2 3\n", 2);
}

#[test]
fn gr_bad_header_sizes() {
    expect_gr_error("neg_nodes.gr", "p sp -3 1\n", 1);
    expect_gr_error("neg_arcs.gr", "c\np sp 3 -1\n", 2);
    expect_gr_error("zero_nodes.gr", "p sp 0 0\n", 1);
    expect_gr_error("two_headers.gr", "p sp 3 1\na 1 2 3\np sp 3 1\n", 3);
}

#[test]
fn gr_arc_count_mismatch() {
    // Too few arcs: reported at the header that announced them.
    expect_gr_error("too_few.gr", "c\np sp 3 3\na 1 2 3\na 2 1 3\n", 2);
    // Too many: reported at the first arc beyond the announced count.
    expect_gr_error("too_many.gr", "p sp 3 1\na 1 2 3\na 2 1 3\n", 3);
}

#[test]
fn gr_missing_header() {
    expect_gr_error("arc_first.gr", "a 1 2 3\np sp 3 1\n", 1);
    // No header at all: an Invalid error naming the file.
    let dir = tempfile::tempdir().unwrap();
    let gr = write(dir.path(), "no_header.gr", "c nothing here\n");
    let err = dimacs::read_arc_weights(&gr).unwrap_err();
    assert!(matches!(err, ImportError::Invalid { .. }), "{err}");
    check_error(&err, "no_header.gr", None);
    let empty = write(dir.path(), "empty.gr", "");
    check_error(
        &dimacs::read_arc_weights(&empty).unwrap_err(),
        "empty.gr",
        None,
    );
}

#[test]
fn co_coordinates_out_of_range() {
    let head = "p aux sp co 3\nv 1 0 0\nv 2 0 0\n";
    expect_co_error("lon_high.co", &format!("{head}v 3 180000001 0\n"), Some(4));
    expect_co_error("lat_low.co", &format!("{head}v 3 0 -90000001\n"), Some(4));
    expect_co_error("lat_float.co", &format!("{head}v 3 0 45.5\n"), Some(4));
    expect_co_error("v_short.co", &format!("{head}v 3 0\n"), Some(4));
}

#[test]
fn co_duplicate_and_missing_ids() {
    expect_co_error(
        "dup.co",
        "p aux sp co 3\nv 1 0 0\nv 2 0 0\nv 2 0 0\n",
        Some(4),
    );
    // Duplicate among fewer lines than announced: still reported at the repeat.
    expect_co_error(
        "dup_short.co",
        "p aux sp co 3\nv 2 0 0\nc\nv 2 0 0\n",
        Some(4),
    );
    // A missing id is reported at the header that announced it.
    expect_co_error(
        "missing.co",
        "c\np aux sp co 3\nv 1 0 0\nv 3 0 0\n",
        Some(2),
    );
    expect_co_error(
        "extra.co",
        "p aux sp co 3\nv 1 0 0\nv 2 0 0\nv 3 0 0\nv 3 0 0\n",
        Some(5),
    );
    expect_co_error("id_out.co", "p aux sp co 3\nv 4 0 0\n", Some(2));
}

#[test]
fn co_header_problems() {
    expect_co_error("v_first.co", "v 1 0 0\np aux sp co 3\n", Some(1));
    expect_co_error("co_header.co", "p aux sp 3\n", Some(1));
    expect_co_error("co_zero.co", "p aux sp co 0\n", Some(1));
    expect_co_error("co_unknown.co", "p aux sp co 3\nw 1 0 0\n", Some(2));
    expect_co_error("co_none.co", "c only comments\n", None);
    // Node counts of .gr and .co disagree: Invalid naming the .co.
    expect_co_error(
        "co_four.co",
        "p aux sp co 4\nv 1 0 0\nv 2 0 0\nv 3 0 0\nv 4 0 0\n",
        None,
    );
}

#[test]
fn missing_file_is_io_error() {
    let dir = tempfile::tempdir().unwrap();
    let co = write(dir.path(), "good.co", GOOD_CO);
    let gr = dir.path().join("nowhere.gr");
    let err = dimacs::read(&gr, &co).unwrap_err();
    assert!(matches!(err, ImportError::Io { .. }), "{err}");
    assert!(err.to_string().contains("nowhere.gr"), "{err}");
}

#[test]
fn corrupt_gzip_is_an_error_not_a_panic() {
    let dir = tempfile::tempdir().unwrap();
    let co = write(dir.path(), "good.co", GOOD_CO);
    let mut bytes = vec![0x1f, 0x8b, 8, 0, 0, 0, 0, 0, 0, 3];
    bytes.extend_from_slice(b"this is not deflate data at all");
    let gr = dir.path().join("broken.gr.gz");
    std::fs::write(&gr, bytes).unwrap();
    let err = dimacs::read(&gr, &co).unwrap_err();
    assert!(err.to_string().contains("broken.gr.gz"), "{err}");
    // Binary garbage that is not gzip: a syntax error, no panic.
    let junk = dir.path().join("junk.gr");
    std::fs::write(&junk, [0xffu8, 0xfe, 0x00, b'\n', b'a']).unwrap();
    check_error(
        &dimacs::read_arc_weights(&junk).unwrap_err(),
        "junk.gr",
        Some(1),
    );
}
