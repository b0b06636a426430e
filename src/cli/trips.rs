//! The completed trips `eval` and `train` take, and their replay: each
//! file read by [`hodos::truth::inputs`] (one line per file on stdout),
//! then every trip answered at its departure on the artifact, as the
//! service would have, behind a spinner and a counting bar.

use super::process::runtime;
use super::progress::{counter, spinner};
use clap::Args;
use hodos::truth::inputs::TripInputs;
use hodos::truth::outcome::TripOutcome;
use hodos::truth::replay::{open_catalog, replay_all, replay_settings, ReplayRegion};
use hodos::truth::report::Inputs;
use hodos::truth::trips::{TripFormat, TripReport};
use std::path::PathBuf;

/// Completed trips and what to answer them on (`eval` and `train`).
#[derive(Args)]
pub struct TripsArgs {
    /// Completed-trip files (plain, or gzip when the name ends in .gz).
    #[arg(long, required = true, num_args = 1..)]
    trips: Vec<PathBuf>,
    /// csv (ours, with a header), jsonl (JSON lines) or tlc (NYC TLC
    /// yellow-taxi CSV). Default: jsonl for .jsonl/.ndjson names, else csv.
    #[arg(long)]
    format: Option<TripFormat>,
    /// Artifact written by `hodos build`.
    #[arg(long)]
    artifact: PathBuf,
    /// Historical speed table (CSV), as a region's `historical` file.
    #[arg(long)]
    historical: Option<PathBuf>,
    /// IANA time zone of the region's hour-of-week profiles and of
    /// departures written without an offset. Default: America/New_York
    /// for --format tlc, else UTC.
    #[arg(long)]
    zone: Option<String>,
    /// Longest trip accepted, minutes (longer ones are refused by line).
    #[arg(long, default_value_t = 360.0)]
    max_duration_min: f64,
}

/// Reads the trips of `args` and answers each at its departure (through
/// `model`, when given): the outcomes, what the readers refused, and what
/// the report records of the inputs.
pub fn replay(
    args: &TripsArgs,
    model: Option<&PathBuf>,
) -> anyhow::Result<(Vec<TripOutcome>, TripReport, Inputs)> {
    let input = TripInputs {
        files: args.trips.clone(),
        format: args.format,
        zone: args.zone.clone(),
        max_duration_min: args.max_duration_min,
    };
    let read = input.read(|file| println!("{file}"))?;
    let state = std::env::temp_dir().join(format!("hodos-eval-{}", std::process::id()));
    let region = ReplayRegion {
        name: "eval".into(),
        artifact: args.artifact.clone(),
        historical: args.historical.clone(),
        time_zone: read.zone.clone(),
        coverage: None,
        model: model.cloned(),
    };
    let result = runtime()?.block_on(async {
        let loading = spinner("loading the artifact");
        let cat = open_catalog(&[region], replay_settings(), &state).await?;
        loading.finish_and_clear();
        let bar = counter(read.trips.len(), "answering trips at departure");
        let outcomes = replay_all(&cat, &read.trips, |_| bar.inc(1)).await;
        bar.finish();
        anyhow::Ok(outcomes)
    });
    let _ = std::fs::remove_dir_all(&state);
    let outcomes = result?;
    let inputs = input.report_inputs(
        &read,
        &args.artifact,
        args.historical.as_deref(),
        model.map(PathBuf::as_path),
    );
    Ok((outcomes, read.report, inputs))
}
