//! The `hodos` command's verbs, one file each, every one a few lines over
//! library calls: arguments in, library out, text on stdout, progress on
//! stderr.
//!
//! # Layout
//!
//! - [`build`]: `hodos build`, an artifact from a road source;
//! - [`info`]: `hodos info`, an artifact described (and the summary
//!   `build` and `demo --once` print);
//! - [`segments`]: `hodos segments`, the directed road segments as CSV or
//!   GeoJSON;
//! - [`eta`]: `hodos eta`, one free-flow answer;
//! - [`trips`]: the completed-trip arguments `eval` and `train` share, and
//!   their replay at departure;
//! - [`eval`]: `hodos eval`, the accuracy report;
//! - [`train`]: `hodos train`, a correction model and its figures;
//! - [`serve`]: `hodos serve`, the HTTP API of a configuration;
//! - [`demo`]: `hodos demo` (the default verb), the demo city served or
//!   answered once;
//! - [`progress`]: progress bars and spinners on stderr;
//! - [`process`]: the async runtime, log setup and the shutdown signal.

pub mod build;
pub mod demo;
pub mod eta;
pub mod eval;
pub mod info;
pub mod process;
pub mod progress;
pub mod segments;
pub mod serve;
pub mod train;
pub mod trips;

use clap::Subcommand;
use hodos::engine::geo::LatLon;
use hodos::engine::region::DEFAULT_MAX_SNAP_M;
use std::path::PathBuf;

#[derive(Subcommand)]
pub enum Command {
    /// Build an artifact from a road source.
    Build(build::BuildArgs),
    /// Describe an artifact.
    Info { file: PathBuf },
    /// Write every directed road segment of an artifact (hodos segment id,
    /// way and end node ids, length, class, default speed, geometry), the
    /// ids a speed table names, as CSV or GeoJSON (RFC 7946).
    Segments {
        file: PathBuf,
        /// Output file; `.geojson` or `.json` writes GeoJSON, anything else
        /// CSV (unless --format says).
        #[arg(long)]
        out: PathBuf,
        /// csv or geojson.
        #[arg(long)]
        format: Option<String>,
    },
    /// Travel time between two coordinates on an artifact (free-flow).
    Eta {
        file: PathBuf,
        /// Origin as LAT,LON (WGS84 degrees).
        #[arg(long, allow_hyphen_values = true)]
        from: LatLon,
        /// Destination as LAT,LON.
        #[arg(long, allow_hyphen_values = true)]
        to: LatLon,
        /// Largest accepted distance from a coordinate to its road, metres.
        #[arg(long, default_value_t = DEFAULT_MAX_SNAP_M)]
        max_snap_m: f64,
    },
    /// Measure ETA accuracy against completed trips: answer each trip as
    /// the service would have at its departure, and report the error.
    Eval(eval::EvalArgs),
    /// Fit a correction model (gradient-boosted trees, conformal
    /// intervals) on completed trips, earlier ones training and later
    /// ones testing.
    Train(train::TrainArgs),
    /// Serve the HTTP API for the regions of a configuration file.
    Serve {
        /// TOML configuration (see config/hodos.toml).
        #[arg(long)]
        config: PathBuf,
        /// Refuse to start if any region's artifact fails to load (default:
        /// such a region starts degraded and answers from the heuristic tier).
        #[arg(long)]
        strict: bool,
    },
    /// Build the demo city and serve it on 127.0.0.1 with a simulated live
    /// feed (the default command).
    Demo {
        /// Public API port (the admin API takes the next one). The demo
        /// refuses to start if either is taken; 0 asks for any free ports.
        #[arg(long, default_value_t = 8080)]
        port: u16,
        /// Build, answer one sample ETA and exit instead of serving.
        #[arg(long)]
        once: bool,
    },
}

impl Command {
    /// Runs the verb.
    pub fn run(self) -> anyhow::Result<()> {
        match self {
            Command::Build(args) => build::run(args),
            Command::Info { file } => info::run(&file),
            Command::Segments { file, out, format } => {
                segments::run(&file, &out, format.as_deref())
            }
            Command::Eta {
                file,
                from,
                to,
                max_snap_m,
            } => eta::run(&file, from, to, max_snap_m),
            Command::Eval(args) => eval::run(args),
            Command::Train(args) => train::run(args),
            Command::Serve { config, strict } => serve::run(&config, strict),
            Command::Demo { port, once } => {
                if once {
                    demo::run_once()
                } else {
                    demo::run(port)
                }
            }
        }
    }
}
