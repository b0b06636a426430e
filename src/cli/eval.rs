//! `hodos eval`: completed trips replayed at their departure (through a
//! correction model, when given), measured, summarized on stdout and
//! written as report.html and report.json.

use super::trips::{replay, TripsArgs};
use clap::Args;
use hodos::serving::correction::file;
use hodos::truth::report::Report;
use std::path::PathBuf;

#[derive(Args)]
pub struct EvalArgs {
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

pub fn run(args: EvalArgs) -> anyhow::Result<()> {
    let nominal = match &args.model {
        Some(p) => {
            let m = file::read(p)?;
            Some(m.interval.levels[1] - m.interval.levels[0])
        }
        None => None,
    };
    let (outcomes, read, inputs) = replay(&args.input, args.model.as_ref())?;
    let report = Report::build(inputs, read, &outcomes, nominal)?;
    println!();
    print!("{}", report.summary_text());
    let (json, html) = report.write(&args.out)?;
    println!();
    println!("wrote {} and {}", html.display(), json.display());
    Ok(())
}
