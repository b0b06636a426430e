//! The accuracy report opens in a browser with its plots: headless
//! Chromium (Debian package `chromium`) loads `report.html`, dumps the DOM
//! it rendered and takes a screenshot.
//!
//! The report is built from the real NYC TLC trips of
//! `shared/data/trips` (2016-01, SKIPPED without HODOS_DATA_DIR)
//! replayed against a catalog with no region, so every answer is what
//! hodos serves outside its regions: the heuristic tier with the
//! configured default circuity and speed. The figures say nothing about
//! accuracy on a road graph; this test checks the page.
//!
//! Checks: the JSON parses back with the measured count; the rendered DOM
//! holds one SVG per figure (two densities, the grid, calibration, hour of
//! week), each with drawn paths, and the summary table; the screenshot is
//! a PNG (magic bytes, RFC 2083) of the requested width. Without chromium
//! it prints SKIPPED, unless `HODOS_REQUIRE_CHROMIUM=1` (set by `.ci/run`).
//! `HODOS_SCREENSHOT_DIR` keeps the screenshot for a person to look at.

use hodos_serving::answer::Catalog;
use hodos_serving::tier::Tier;
use hodos_testkit::chromium::run as chromium;
use hodos_truth::replay::{replay_all, replay_settings};
use hodos_truth::report::{Inputs, Report};
use hodos_truth::trips::{read_trips_file, ReadOptions, TripFormat};
use std::path::Path;

#[test]
fn the_report_renders_with_its_plots() {
    let files = match hodos_testkit::tlc_trip_files() {
        Ok(f) => f,
        Err(why) => return hodos_testkit::skipped(why),
    };
    let (trips, read) =
        read_trips_file(&files[1], TripFormat::Tlc, &ReadOptions::default()).unwrap();
    assert!(trips.len() > 1500, "{read:?}");
    let rt = tokio::runtime::Builder::new_current_thread()
        .enable_all()
        .build()
        .unwrap();
    let cat = Catalog::new(replay_settings(), vec![]);
    let outcomes = rt.block_on(replay_all(&cat, &trips, |_| {}));
    assert!(outcomes.iter().all(|o| o.tier == Tier::Heuristic));
    let inputs = Inputs {
        trips: vec![files[1].display().to_string()],
        format: "tlc".into(),
        artifact: "(none: every trip outside the regions)".into(),
        time_zone: "America/New_York".into(),
        hodos_version: env!("CARGO_PKG_VERSION").into(),
        ..Inputs::default()
    };
    let report = Report::build(inputs, read, &outcomes, None).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let (json, html) = report.write(dir.path()).unwrap();
    let back: serde_json::Value = serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap();
    assert_eq!(
        back["measurements"][0]["overall"]["n"].as_u64(),
        Some(outcomes.len() as u64)
    );
    assert_eq!(
        back["figures"][0]["calibration"].as_array().unwrap().len(),
        10
    );
    let text = std::fs::read_to_string(&html).unwrap();
    // Self-contained: nothing to fetch (SVG's xmlns URI is a name, not a fetch).
    for bad in ["src=\"http", "href=\"http", "<link", "<script", "url(http"] {
        assert!(!text.contains(bad), "the page refers out: {bad}");
    }

    if !hodos_testkit::chromium::available() {
        return;
    }
    let url = format!("file://{}", html.display());
    let profile = tempfile::tempdir().unwrap();
    let dom = chromium(&["--dump-dom", &url], profile.path());
    assert!(
        dom.status.success(),
        "{}",
        String::from_utf8_lossy(&dom.stderr)
    );
    let dom = String::from_utf8_lossy(&dom.stdout);
    let svgs: Vec<&str> = dom.split("<svg").skip(1).collect();
    assert_eq!(svgs.len(), 5, "one SVG per figure");
    for s in &svgs {
        assert!(s.contains("<path") || s.contains("<polyline") || s.contains("<rect"));
    }
    assert!(dom.contains("Error overall") && dom.contains("<td>heuristic</td>"));

    let shot = dir.path().join("report.png");
    let out = chromium(
        &[
            &format!("--screenshot={}", shot.display()),
            "--window-size=1280,3200",
            &url,
        ],
        profile.path(),
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let png = std::fs::read(&shot).expect("screenshot written");
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
    // IHDR width, big-endian, at bytes 16..20.
    let width = u32::from_be_bytes(png[16..20].try_into().unwrap());
    assert_eq!(width, 1280);
    if let Some(keep) = std::env::var_os("HODOS_SCREENSHOT_DIR") {
        std::fs::create_dir_all(&keep).unwrap();
        std::fs::copy(&shot, Path::new(&keep).join("truth_report.png")).unwrap();
        std::fs::copy(&html, Path::new(&keep).join("truth_report.html")).unwrap();
    }
}
