//! `hodos build`: an artifact from an OpenStreetMap extract, a DIMACS
//! graph or a synthetic city, with progress bars, then its summary.

use super::info::print_summary;
use super::progress::bars;
use anyhow::Context;
use clap::Args;
use hodos::engine::build::{build, Source};
use hodos::engine::import::synthetic::MIN_NODES;
use std::path::PathBuf;

#[derive(Args)]
#[group(required = true, multiple = false)]
pub struct SourceArgs {
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

#[derive(Args)]
pub struct BuildArgs {
    #[command(flatten)]
    source: SourceArgs,
    /// Seed for --synthetic.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Output artifact path.
    #[arg(long)]
    out: PathBuf,
}

/// Why a `--synthetic` count was refused.
#[derive(Debug, thiserror::Error)]
enum SyntheticNodesError {
    #[error("expected a number of intersections, got {0:?}")]
    NotANumber(String),
    #[error("{n} intersections is below the synthetic city's minimum of {MIN_NODES}")]
    BelowMinimum { n: usize },
}

/// Parses `--synthetic`: a count the generator can honour, or a clear
/// refusal (below its minimum the city's fixed skeleton is larger than
/// asked, so the request would be silently overridden).
fn synthetic_nodes(s: &str) -> Result<usize, SyntheticNodesError> {
    let n: usize = s
        .parse()
        .map_err(|_| SyntheticNodesError::NotANumber(s.to_string()))?;
    if n < MIN_NODES {
        return Err(SyntheticNodesError::BelowMinimum { n });
    }
    Ok(n)
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

pub fn run(args: BuildArgs) -> anyhow::Result<()> {
    let art = build(&source_of(&args), &mut bars())?;
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
