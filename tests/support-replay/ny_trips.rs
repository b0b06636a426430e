//! The shared NYC TLC trip sample answered on USA-road-d.NY: the artifact
//! built from the DIMACS files (free-flow at the importer's default speed),
//! every trip of the four monthly files replayed at its departure with no
//! historical table and no model. What `hodos-learn`'s `correction_ny` test and
//! `examples/train_sweep.rs` train and measure on.

use hodos_engine::build::{build_from_graph, Quiet};
use hodos_engine::import::dimacs;
use hodos_testkit::{tlc_trip_files, DimacsNy};
use hodos_truth::outcome::TripOutcome;
use hodos_truth::replay::{open_catalog, replay_all, replay_settings, ReplayRegion};
use hodos_truth::trips::{read_trips_file, ReadOptions, TripFormat};

/// The replayed trips (working files in `dir`), or why the data is not
/// here (for [`hodos_testkit::skipped`]).
pub fn replayed_tlc_on_ny(dir: &std::path::Path) -> Result<Vec<TripOutcome>, String> {
    let ny = DimacsNy::find()?;
    let files = tlc_trip_files()?;
    let raw = dimacs::read(&ny.distance_gr, &ny.coordinates).map_err(|e| e.to_string())?;
    let art =
        build_from_graph("dimacs:NY".into(), raw, 0.0, &mut Quiet).map_err(|e| e.to_string())?;
    let artifact = dir.join("ny.hodos");
    art.save(&artifact).map_err(|e| e.to_string())?;
    drop(art);
    let mut trips = Vec::new();
    for f in &files {
        let (t, _) = read_trips_file(f, TripFormat::Tlc, &ReadOptions::default())
            .map_err(|e| e.to_string())?;
        trips.extend(t);
    }
    let region = ReplayRegion {
        name: "ny".into(),
        artifact,
        historical: None,
        time_zone: "America/New_York".into(),
        coverage: None,
        model: None,
    };
    let rt = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_all()
        .build()
        .map_err(|e| e.to_string())?;
    rt.block_on(async {
        let cat = open_catalog(&[region], replay_settings(), &dir.join("state"))
            .await
            .map_err(|e| e.to_string())?;
        Ok(replay_all(&cat, &trips, |_| {}).await)
    })
}
