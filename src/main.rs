//! The `hodos` command: a thin shell over the library.
//!
//! `hodos build` writes an artifact, `hodos info` describes one, `hodos eta`
//! answers one trip from one, `hodos eval` measures the answers against
//! completed trips, and `hodos demo` (also plain `hodos`) builds the
//! fictional demo city and shows a sample answer.

use anyhow::Context;
use clap::{Args, Parser, Subcommand};
use hodos::engine::artifact::Artifact;
use hodos::engine::build::{build, Progress, Source};
use hodos::engine::cch::CchQuery;
use hodos::engine::geo::LatLon;
use hodos::engine::region::{Region, DEFAULT_MAX_SNAP_M};
use indicatif::{ProgressBar, ProgressStyle};
use std::path::PathBuf;
use std::process::ExitCode;
use std::time::Instant;

#[derive(Parser)]
#[command(
    name = "hodos",
    version,
    about = "Travel times over customizable contraction hierarchies"
)]
struct Cli {
    #[command(subcommand)]
    command: Option<Command>,
}

#[derive(Subcommand)]
enum Command {
    /// Build an artifact from a road source.
    Build(BuildArgs),
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
    Eval(EvalArgs),
    /// Fit a correction model (gradient-boosted trees, conformal
    /// intervals) on completed trips, earlier ones training and later
    /// ones testing.
    Train(TrainArgs),
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

#[derive(Args)]
#[group(required = true, multiple = false)]
struct SourceArgs {
    /// An OpenStreetMap PBF extract.
    #[arg(long)]
    osm: Option<PathBuf>,
    /// A 9th DIMACS Challenge graph: the .gr and .co files (plain or gzip).
    #[arg(long, num_args = 2, value_names = ["GR", "CO"])]
    dimacs: Option<Vec<PathBuf>>,
    /// A synthetic city with about this many intersections (at least
    /// the generator's minimum).
    #[arg(long, value_name = "NODES", value_parser = synthetic_nodes)]
    synthetic: Option<usize>,
}

/// Parses `--synthetic`: a count the generator can honour, or a clear
/// refusal (below its minimum the city's fixed skeleton is larger than
/// asked, so the request would be silently overridden).
fn synthetic_nodes(s: &str) -> Result<usize, String> {
    let min = hodos::engine::import::synthetic::MIN_NODES;
    let n: usize = s
        .parse()
        .map_err(|_| format!("expected a number of intersections, got {s:?}"))?;
    if n < min {
        return Err(format!(
            "{n} intersections is below the synthetic city's minimum of {min}"
        ));
    }
    Ok(n)
}

#[derive(Args)]
struct BuildArgs {
    #[command(flatten)]
    source: SourceArgs,
    /// Seed for --synthetic.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Output artifact path.
    #[arg(long)]
    out: PathBuf,
}

/// Completed trips and what to answer them on (`eval` and `train`).
#[derive(Args)]
struct TripsArgs {
    /// Completed-trip files (plain, or gzip when the name ends in .gz).
    #[arg(long, required = true, num_args = 1..)]
    trips: Vec<PathBuf>,
    /// csv (ours, with a header), jsonl (JSON lines) or tlc (NYC TLC
    /// yellow-taxi CSV). Default: jsonl for .jsonl/.ndjson names, else csv.
    #[arg(long)]
    format: Option<hodos::truth::trips::TripFormat>,
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

#[derive(Args)]
struct EvalArgs {
    #[command(flatten)]
    input: TripsArgs,
    /// Correction model written by `hodos train`: measured beside the
    /// uncorrected answer, with its intervals.
    #[arg(long)]
    model: Option<PathBuf>,
    /// Folder for report.html and report.json (created if missing).
    #[arg(long)]
    out: PathBuf,
}

#[derive(Args)]
struct TrainArgs {
    #[command(flatten)]
    input: TripsArgs,
    /// The model file to write.
    #[arg(long)]
    out: PathBuf,
    /// Also write the test trips' accuracy report (report.html and
    /// report.json, corrected beside uncorrected) to this folder.
    #[arg(long)]
    report: Option<PathBuf>,
    /// Share of the latest trips held out for the test figures.
    #[arg(long, default_value_t = 0.25)]
    test_share: f64,
    /// Share of the remaining trips, the latest, that calibrate the
    /// intervals (not fitted on).
    #[arg(long, default_value_t = 0.2)]
    calibration_share: f64,
    /// Boosting rounds (trees).
    #[arg(long, default_value_t = 120)]
    trees: usize,
    #[arg(long, default_value_t = 0.08)]
    learning_rate: f32,
    #[arg(long, default_value_t = 5)]
    depth: usize,
    /// Interval quantile levels LOW,HIGH.
    #[arg(long, default_value = "0.1,0.9")]
    interval: String,
    /// Version reported with every corrected answer. Default: the
    /// training time, in seconds since 1970.
    #[arg(long)]
    model_version: Option<u64>,
}

/// Progress bars on stderr.
struct Bars {
    bar: Option<ProgressBar>,
    started: Instant,
}

impl Progress for Bars {
    fn start(&mut self, phase: &str, total: Option<u64>) {
        let bar = match total {
            Some(t) => ProgressBar::new(t).with_style(
                ProgressStyle::with_template("{msg:32} [{bar:30}] {pos}/{len} {elapsed}")
                    .expect("valid template")
                    .progress_chars("=> "),
            ),
            None => ProgressBar::new_spinner().with_style(
                ProgressStyle::with_template("{msg:32} {spinner} {elapsed}")
                    .expect("valid template"),
            ),
        };
        bar.set_message(phase.to_string());
        bar.enable_steady_tick(std::time::Duration::from_millis(120));
        self.bar = Some(bar);
        self.started = Instant::now();
    }
    fn advance(&mut self, done: u64) {
        if let Some(b) = &self.bar {
            b.set_position(done);
        }
    }
    fn finish(&mut self) {
        if let Some(b) = self.bar.take() {
            b.finish_with_message(format!(
                "{} ({:.2} s)",
                b.message(),
                self.started.elapsed().as_secs_f64()
            ));
        }
    }
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match cli.command.unwrap_or(Command::Demo {
        port: 8080,
        once: false,
    }) {
        Command::Build(args) => cmd_build(args),
        Command::Info { file } => cmd_info(&file),
        Command::Segments { file, out, format } => cmd_segments(&file, &out, format.as_deref()),
        Command::Eta {
            file,
            from,
            to,
            max_snap_m,
        } => cmd_eta(&file, from, to, max_snap_m),
        Command::Eval(args) => cmd_eval(args),
        Command::Train(args) => cmd_train(args),
        Command::Serve { config, strict } => cmd_serve(&config, strict),
        Command::Demo { port, once } => {
            if once {
                cmd_demo_once()
            } else {
                cmd_demo(port)
            }
        }
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e:#}");
            ExitCode::FAILURE
        }
    }
}

fn source_of(args: &BuildArgs) -> Source {
    let s = &args.source;
    if let Some(p) = &s.osm {
        Source::Osm(p.clone())
    } else if let Some(v) = &s.dimacs {
        Source::Dimacs {
            gr: v[0].clone(),
            co: v[1].clone(),
        }
    } else {
        Source::Synthetic {
            nodes: s.synthetic.unwrap_or(20_000),
            seed: args.seed,
        }
    }
}

fn bars() -> Bars {
    Bars {
        bar: None,
        started: Instant::now(),
    }
}

fn cmd_build(args: BuildArgs) -> anyhow::Result<()> {
    let source = source_of(&args);
    let art = build(&source, &mut bars())?;
    let bytes = art
        .save(&args.out)
        .with_context(|| format!("writing {}", args.out.display()))?;
    print_summary(&art);
    println!(
        "wrote {} ({:.1} MB)",
        args.out.display(),
        bytes as f64 / 1e6
    );
    Ok(())
}

fn print_summary(art: &Artifact) {
    let m = &art.meta;
    println!("source        {}", m.source);
    println!("nodes         {}", m.nodes);
    println!("edges         {}", m.edges);
    println!(
        "dropped       {} nodes, {} edges outside the largest strongly connected component ({} components)",
        m.dropped.dropped_nodes, m.dropped.dropped_edges, m.dropped.components
    );
    println!("arcs          {} ({} shortcuts)", m.arcs, m.shortcuts);
    println!("separator     {} nodes at the top level", m.top_separator);
    println!("tree depth    {}", m.elimination_tree_depth);
    let phases: Vec<String> = m
        .phase_seconds
        .iter()
        .map(|(p, s)| format!("{p} {s:.2}s"))
        .collect();
    println!("times         {}", phases.join(", "));
    println!(
        "calibration   {} pairs; circuity, free-flow km/h by great-circle band:",
        art.calibration.pairs
    );
    for b in &art.calibration.bands {
        let hi = if b.hi_km.is_finite() {
            format!("{}", b.hi_km)
        } else {
            "∞".into()
        };
        println!(
            "  {:>4}–{:<4} km  circuity {:.3}  speed {:6.1}  (n={})",
            b.lo_km, hi, b.circuity, b.speed_kmh, b.count
        );
    }
}

fn cmd_segments(
    file: &std::path::Path,
    out: &std::path::Path,
    format: Option<&str>,
) -> anyhow::Result<()> {
    use hodos::engine::segments::{write_csv, write_geojson};
    let ext = out
        .extension()
        .and_then(|e| e.to_str())
        .unwrap_or("")
        .to_ascii_lowercase();
    let geojson = match format {
        Some("geojson") => true,
        Some("csv") => false,
        Some(other) => anyhow::bail!("--format {other:?}: expected csv or geojson"),
        None => ext == "geojson" || ext == "json",
    };
    let art = Artifact::load(file)?;
    let f = std::fs::File::create(out).with_context(|| format!("creating {}", out.display()))?;
    let w = std::io::BufWriter::with_capacity(1 << 20, f);
    let n = if geojson {
        write_geojson(&art.graph, w)
    } else {
        write_csv(&art.graph, w)
    }
    .with_context(|| format!("writing {}", out.display()))?;
    println!(
        "wrote {n} segments to {} ({})",
        out.display(),
        if geojson { "GeoJSON" } else { "CSV" }
    );
    Ok(())
}

fn cmd_info(file: &std::path::Path) -> anyhow::Result<()> {
    let art = Artifact::load(file)?;
    print_summary(&art);
    let (lo, hi) = art.graph.bbox();
    println!(
        "extent        lat {:.6} to {:.6}, lon {:.6} to {:.6}",
        lo.lat, hi.lat, lo.lon, hi.lon
    );
    // Ready to paste into a [[region]] of the configuration, padded by
    // 0.01 degrees so points just off the outermost roads still snap.
    let pad = 0.01;
    println!(
        "coverage      coverage = {{ bbox = [{:.4}, {:.4}, {:.4}, {:.4}] }}",
        lo.lat - pad,
        lo.lon - pad,
        hi.lat + pad,
        hi.lon + pad
    );
    let built = i64::try_from(art.meta.built_at_unix)
        .ok()
        .and_then(|s| chrono::DateTime::from_timestamp(s, 0))
        .map(|t| t.to_rfc3339_opts(chrono::SecondsFormat::Secs, true))
        .unwrap_or_else(|| format!("{} (unix seconds)", art.meta.built_at_unix));
    println!("built at      {built}, hodos {}", art.meta.hodos_version);
    Ok(())
}

fn cmd_eta(
    file: &std::path::Path,
    from: LatLon,
    to: LatLon,
    max_snap_m: f64,
) -> anyhow::Result<()> {
    let region = Region::from_artifact(Artifact::load(file)?);
    let metric = region.free_flow();
    let mut q = CchQuery::new(&region.cch);
    let eta = region.eta(&metric, &mut q, from, to, max_snap_m)?;
    println!("eta_s        {:.1}", eta.time_s);
    println!("meters       {:.1}", eta.meters);
    println!(
        "from snap    {:.1} m (to {})",
        eta.from.distance_m, eta.from.point
    );
    println!(
        "to snap      {:.1} m (to {})",
        eta.to.distance_m, eta.to.point
    );
    Ok(())
}

/// Reads the trips of `args` and answers each at its departure (through
/// `model`, when given).
fn replay_input(
    args: &TripsArgs,
    model: Option<&PathBuf>,
) -> anyhow::Result<(
    Vec<hodos::truth::outcome::TripOutcome>,
    hodos::truth::trips::TripReport,
    hodos::truth::report::Inputs,
)> {
    use hodos::truth::replay::{open_catalog, replay_settings, replay_trip, ReplayRegion};
    use hodos::truth::report::Inputs;
    use hodos::truth::trips::{read_trips_file, ReadOptions, TripFormat, TripReport};
    let zone_name = args.zone.clone().unwrap_or_else(|| {
        if args.format == Some(TripFormat::Tlc) {
            "America/New_York".into()
        } else {
            "UTC".into()
        }
    });
    let zone: chrono_tz::Tz = zone_name
        .parse()
        .map_err(|_| anyhow::anyhow!("--zone {zone_name:?} is not an IANA time zone"))?;
    anyhow::ensure!(
        args.max_duration_min > 0.0,
        "--max-duration-min must be positive"
    );
    let opts = ReadOptions {
        zone: args.zone.as_ref().map(|_| zone),
        max_duration_s: args.max_duration_min * 60.0,
        ..ReadOptions::default()
    };
    let mut trips = Vec::new();
    let mut read = TripReport::default();
    let mut format_used = Vec::new();
    for path in &args.trips {
        let format = args.format.unwrap_or_else(|| TripFormat::from_name(path));
        let (t, rep) = read_trips_file(path, format, &opts)?;
        println!(
            "{}: {} rows, {} accepted, {} refused{}",
            path.display(),
            rep.rows,
            rep.accepted,
            rep.refused,
            rep.first_errors
                .first()
                .map(|e| format!(" (first: {e})"))
                .unwrap_or_default()
        );
        if !format_used.contains(&format.as_str()) {
            format_used.push(format.as_str());
        }
        trips.extend(t);
        read.merge(rep, opts.max_reported_errors);
    }
    anyhow::ensure!(
        !trips.is_empty(),
        "no trip was accepted; nothing to measure"
    );
    let state = std::env::temp_dir().join(format!("hodos-eval-{}", std::process::id()));
    let region = ReplayRegion {
        name: "eval".into(),
        artifact: args.artifact.clone(),
        historical: args.historical.clone(),
        time_zone: zone_name.clone(),
        coverage: None,
        model: model.cloned(),
    };
    let result = runtime()?.block_on(async {
        let spinner = ProgressBar::new_spinner().with_style(
            ProgressStyle::with_template("{msg:32} {spinner} {elapsed}").expect("valid template"),
        );
        spinner.set_message("loading the artifact");
        spinner.enable_steady_tick(std::time::Duration::from_millis(120));
        let cat = open_catalog(&[region], replay_settings(), &state).await?;
        spinner.finish_and_clear();
        let bar = ProgressBar::new(trips.len() as u64).with_style(
            ProgressStyle::with_template("{msg:32} [{bar:30}] {pos}/{len} {elapsed} (eta {eta})")
                .expect("valid template")
                .progress_chars("=> "),
        );
        bar.set_message("answering trips at departure");
        let mut outcomes = Vec::with_capacity(trips.len());
        for t in &trips {
            outcomes.push(replay_trip(&cat, t).await);
            bar.inc(1);
        }
        bar.finish();
        anyhow::Ok(outcomes)
    });
    let _ = std::fs::remove_dir_all(&state);
    let outcomes = result?;
    let inputs = Inputs {
        trips: args.trips.iter().map(|p| p.display().to_string()).collect(),
        format: format_used.join(", "),
        artifact: args.artifact.display().to_string(),
        historical: args.historical.as_ref().map(|p| p.display().to_string()),
        model: model.map(|p| p.display().to_string()),
        time_zone: zone_name,
        hodos_version: env!("CARGO_PKG_VERSION").to_string(),
    };
    Ok((outcomes, read, inputs))
}

fn cmd_eval(args: EvalArgs) -> anyhow::Result<()> {
    use hodos::truth::report::Report;
    let nominal = match &args.model {
        Some(p) => {
            let m = hodos::serving::correction::file::read(p)?;
            Some(m.interval.levels[1] - m.interval.levels[0])
        }
        None => None,
    };
    let (outcomes, read, inputs) = replay_input(&args.input, args.model.as_ref())?;
    let report = Report::build(inputs, read, &outcomes, nominal)?;
    println!();
    print!("{}", report.summary_text());
    let (json, html) = report.write(&args.out)?;
    println!();
    println!("wrote {} and {}", html.display(), json.display());
    Ok(())
}

fn cmd_train(args: TrainArgs) -> anyhow::Result<()> {
    use hodos::learn::train::{corrected, train, TrainOptions};
    use hodos::serving::correction::file;
    use hodos::truth::report::Report;
    let levels: Vec<f64> = args
        .interval
        .split(',')
        .map(|v| v.trim().parse::<f64>())
        .collect::<Result<_, _>>()
        .map_err(|_| anyhow::anyhow!("--interval {:?} is not LOW,HIGH", args.interval))?;
    anyhow::ensure!(levels.len() == 2, "--interval takes two levels, LOW,HIGH");
    let opts = TrainOptions {
        test_share: args.test_share,
        calibration_share: args.calibration_share,
        iterations: args.trees,
        learning_rate: args.learning_rate,
        max_depth: args.depth,
        interval: [levels[0], levels[1]],
        model_version: args
            .model_version
            .unwrap_or_else(|| chrono::Utc::now().timestamp().max(0) as u64),
        ..TrainOptions::default()
    };
    anyhow::ensure!(args.trees >= 1, "--trees must be at least 1");
    let (outcomes, read, mut inputs) = replay_input(&args.input, None)?;
    let (model, rep) = train(&outcomes, &opts)?;
    let bytes = file::encode(&model);
    std::fs::write(&args.out, &bytes).with_context(|| format!("writing {}", args.out.display()))?;
    println!();
    println!(
        "{} usable trips: {} fit the trees, {} calibrate the intervals, {} test (latest)",
        rep.trips_usable, rep.n_fit, rep.n_calibration, rep.n_test
    );
    println!(
        "best constant factors on the training window: {:.3} (MAPE), {:.3} (RMSLE)",
        rep.constant_mape, rep.constant_rmsle
    );
    println!(
        "{} trees, {} nodes, fitted in {:.2} s",
        rep.trees, rep.nodes, rep.fit_seconds
    );
    println!();
    println!(
        "{:<12} {:<15} {:>6} {:>8} {:>7} {:>9}",
        "set", "estimate", "n", "MAPE", "RMSLE", "coverage"
    );
    for f in &rep.figures {
        println!(
            "{:<12} {:<15} {:>6} {:>7.1}% {:>7.3} {:>9}",
            f.set,
            f.estimate,
            f.n,
            f.mape,
            f.rmsle,
            f.coverage
                .map(|c| format!("{:.1}%", c * 100.0))
                .unwrap_or_else(|| "-".into())
        );
    }
    println!();
    println!(
        "wrote {} (model version {}, {} bytes)",
        args.out.display(),
        model.meta.model_version,
        bytes.len()
    );
    if let Some(dir) = &args.report {
        let split = &rep.split;
        anyhow::ensure!(
            !split.test.is_empty(),
            "--report needs test trips (--test-share above 0)"
        );
        let test: Vec<_> = split
            .test
            .iter()
            .map(|&i| corrected(&outcomes[i], &model))
            .collect();
        inputs.model = Some(args.out.display().to_string());
        let nominal = model.interval.levels[1] - model.interval.levels[0];
        let report = Report::build(inputs, read, &test, Some(nominal))?;
        let (json, html) = report.write(dir)?;
        println!(
            "wrote the test trips' report: {} and {}",
            html.display(),
            json.display()
        );
    }
    Ok(())
}

fn cmd_demo_once() -> anyhow::Result<()> {
    let dir = std::env::temp_dir().join("hodos-demo");
    std::fs::create_dir_all(&dir).with_context(|| format!("creating {}", dir.display()))?;
    let out = dir.join("quellhaven.hodos");
    let (_, city) = hodos::engine::import::synthetic::generate_with_info(30_000, 7);
    println!(
        "building the demo city {} (about 30,000 intersections)",
        city.name
    );
    let art = build(
        &Source::Synthetic {
            nodes: 30_000,
            seed: 7,
        },
        &mut bars(),
    )?;
    art.save(&out)?;
    print_summary(&art);
    let region = Region::from_artifact(Artifact::load(&out)?);
    let metric = region.free_flow();
    let mut q = CchQuery::new(&region.cch);
    let (lo, hi) = region.graph.bbox();
    let from = LatLon::new(
        lo.lat + (hi.lat - lo.lat) * 0.2,
        lo.lon + (hi.lon - lo.lon) * 0.2,
    );
    let to = LatLon::new(
        lo.lat + (hi.lat - lo.lat) * 0.8,
        lo.lon + (hi.lon - lo.lon) * 0.75,
    );
    let eta = region.eta(&metric, &mut q, from, to, DEFAULT_MAX_SNAP_M)?;
    println!();
    println!("sample ETA across {} (free-flow):", city.name);
    println!(
        "  from {from} to {to}: {:.0} s over {:.0} m",
        eta.time_s, eta.meters
    );
    println!(
        "try: cargo run --release -- eta {} --from {from} --to {to}",
        out.display()
    );
    Ok(())
}

fn runtime() -> anyhow::Result<tokio::runtime::Runtime> {
    Ok(tokio::runtime::Builder::new_multi_thread()
        .enable_all()
        .build()?)
}

fn init_tracing() {
    let filter = tracing_subscriber::EnvFilter::try_from_env("HODOS_LOG")
        .unwrap_or_else(|_| tracing_subscriber::EnvFilter::new("info,tower_http=warn"));
    // Colour codes only for a terminal: a log redirected to a file or a
    // collector gets plain text.
    let ansi = std::io::IsTerminal::is_terminal(&std::io::stderr());
    let _ = tracing_subscriber::fmt()
        .with_env_filter(filter)
        .with_ansi(ansi)
        .with_writer(std::io::stderr)
        .try_init();
}

/// Resolves on Ctrl-C or SIGTERM. The SIGTERM handler is installed when
/// this is called (not when first polled), so a signal that arrives right
/// after the caller announces it is serving still stops it gracefully.
/// Must be called inside the runtime.
fn shutdown_signal() -> impl std::future::Future<Output = ()> {
    #[cfg(unix)]
    let term = tokio::signal::unix::signal(tokio::signal::unix::SignalKind::terminate()).ok();
    async move {
        let ctrl_c = async {
            let _ = tokio::signal::ctrl_c().await;
        };
        #[cfg(unix)]
        let term = async move {
            match term {
                Some(mut s) => {
                    s.recv().await;
                }
                None => std::future::pending::<()>().await,
            }
        };
        #[cfg(not(unix))]
        let term = std::future::pending::<()>();
        tokio::select! {
            _ = ctrl_c => {},
            _ = term => {},
        }
    }
}

fn cmd_serve(config: &std::path::Path, strict: bool) -> anyhow::Result<()> {
    hodos::serving::os::tune_allocator();
    init_tracing();
    hodos::serving::os::raise_nofile();
    let cfg = hodos::config::Config::load(config)?;
    if cfg.admin.token.is_empty() {
        tracing::warn!(
            "no admin token configured (set {}): the admin API refuses every request",
            hodos::config::ADMIN_TOKEN_ENV
        );
    }
    runtime()?.block_on(async move {
        let (listen, admin) = (cfg.server.listen, cfg.admin.listen);
        // Without --strict the listeners open first and regions load
        // behind them: /healthz answers and /readyz says `loading`.
        let state = hodos::http::AppState::unloaded(cfg);
        if strict {
            state.service.load_regions().await;
            let degraded = state.service.degraded();
            if !degraded.is_empty() {
                anyhow::bail!("--strict: {} region(s) failed to load: {}", degraded.len(),
                    degraded.iter().map(|(n, w)| format!("{n} ({w})")).collect::<Vec<_>>().join("; "));
            }
        }
        let public = hodos::http::bind(listen).await.with_context(|| format!("binding {listen}"))?;
        let admin_l = hodos::http::bind(admin).await.with_context(|| format!("binding {admin}"))?;
        tracing::info!(public = %public.local_addr()?, admin = %admin_l.local_addr()?, "serving");
        let loading = state.clone();
        tokio::spawn(async move {
            loading.service.load_regions().await;
            for (name, why) in loading.service.degraded() {
                tracing::warn!(region = %name, reason = %why, "region degraded: answering from the heuristic tier");
            }
            tracing::info!("regions loaded");
        });
        hodos::server::run(state, public, admin_l, shutdown_signal()).await?;
        Ok(())
    })
}

fn cmd_demo(port: u16) -> anyhow::Result<()> {
    hodos::serving::os::tune_allocator();
    init_tracing();
    hodos::serving::os::raise_nofile();
    // A folder of this run's own (artifact, table, state), removed at
    // exit: a demo always starts clean, never serving what an earlier one
    // was sent.
    let dir = std::env::temp_dir().join(format!("hodos-demo-{}", std::process::id()));
    let token = format!("demo-{:016x}", rand_token());
    let admin_port = match port {
        0 => 0,
        p => p
            .checked_add(1)
            .with_context(|| format!("port {p}: the admin API needs the next port"))?,
    };
    let result = runtime()?.block_on(async {
        let public = hodos::http::bind(([127, 0, 0, 1], port).into())
            .await
            .with_context(|| {
                format!("port {port} (public API) is not free; choose another with --port, or --port 0 for any free ports")
            })?;
        let admin = hodos::http::bind(([127, 0, 0, 1], admin_port).into())
            .await
            .with_context(|| {
                format!("port {admin_port} (admin API, --port + 1) is not free; choose another with --port, or --port 0 for any free ports")
            })?;
        let (pa, aa) = (public.local_addr()?, admin.local_addr()?);
        let _ = std::fs::remove_dir_all(&dir);
        println!("demo files in {} (removed at exit)", dir.display());
        println!(
            "building the demo city {} ({} intersections)...",
            hodos::engine::import::synthetic::CITY_NAME,
            hodos::demo::DEMO_NODES
        );
        let files = {
            let dir = dir.clone();
            let token = token.clone();
            tokio::task::spawn_blocking(move || {
                hodos::demo::prepare(&dir, pa, aa, &token, &mut bars())
            })
            .await??
        };
        let state = hodos::http::AppState::open(files.config.clone()).await;
        if let Some((name, why)) = state.service.degraded().first() {
            anyhow::bail!("demo region {name} failed to load: {why}");
        }
        let (tx, rx) = tokio::sync::watch::channel(false);
        let mut rx2 = rx.clone();
        let feed = tokio::spawn(hodos::demo::live_feed(
            state.service.clone(),
            files.truth.clone(),
            files.bridge.1.clone(),
            async move {
                let _ = rx2.wait_for(|v| *v).await;
            },
        ));
        let stop = shutdown_signal();
        println!();
        println!(
            "serving {} on http://{pa} (admin on http://{aa}, token {token})",
            hodos::engine::import::synthetic::CITY_NAME
        );
        println!(
            "live feed: {} slows to 8 km/h for a minute, then recovers, repeatedly; probe vehicles\nreport a quarter of the segments and 40 simulated trips complete every 10 s (their error:\ncurl -s http://{pa}/metrics | grep hodos_trip_abs_pct_error_sum)",
            files.bridge.0
        );
        println!("Ctrl-C to stop. Try:");
        println!();
        print!("{}", hodos::demo::curl_lines(&files, pa, aa, &token));
        hodos::server::run(state, public, admin, async move {
            stop.await;
            let _ = tx.send(true);
        })
        .await?;
        let _ = feed.await;
        Ok(())
    });
    if dir.exists() {
        if let Err(e) = std::fs::remove_dir_all(&dir) {
            eprintln!("could not remove {}: {e}", dir.display());
        }
    }
    if result.is_ok() {
        println!("stopped");
    }
    result
}

/// A token for the demo's admin API (not a secret worth more than a demo).
fn rand_token() -> u64 {
    use std::hash::{BuildHasher, Hasher};
    let mut h = std::collections::hash_map::RandomState::new().build_hasher();
    h.write_u128(
        std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map(|d| d.as_nanos())
            .unwrap_or(0),
    );
    h.finish()
}
