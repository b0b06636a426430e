//! `hodos train`: completed trips replayed uncorrected, a correction model
//! fitted on the earlier ones and written, its figures printed, and
//! (with `--report`) the test trips' accuracy report, corrected beside
//! uncorrected.

use super::trips::{replay, TripsArgs};
use anyhow::Context;
use clap::Args;
use hodos::learn::train::{corrected, train, TrainOptions};
use hodos::serving::correction::file;
use hodos::truth::report::Report;
use std::path::PathBuf;

#[derive(Args)]
pub struct TrainArgs {
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

/// The training options the arguments ask for.
fn options(args: &TrainArgs) -> anyhow::Result<TrainOptions> {
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
    Ok(opts)
}

pub fn run(args: TrainArgs) -> anyhow::Result<()> {
    let opts = options(&args)?;
    let (outcomes, read, mut inputs) = replay(&args.input, None)?;
    let (model, rep) = train(&outcomes, &opts)?;
    let bytes = file::encode(&model);
    std::fs::write(&args.out, &bytes).with_context(|| format!("writing {}", args.out.display()))?;
    println!();
    print!("{}", rep.summary_text());
    println!();
    println!(
        "wrote {} (model version {}, {} bytes)",
        args.out.display(),
        model.meta.model_version,
        bytes.len()
    );
    let Some(dir) = &args.report else {
        return Ok(());
    };
    anyhow::ensure!(
        !rep.split.test.is_empty(),
        "--report needs test trips (--test-share above 0)"
    );
    let test: Vec<_> = rep
        .split
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
    Ok(())
}
