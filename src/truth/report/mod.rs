//! The accuracy report of one evaluation: `report.json` for machines and
//! a self-contained `report.html` (inline CSS and SVG plots, no script,
//! nothing fetched) for people, with the same figures, plus the summary
//! table printed on the terminal.
//!
//! # Layout
//!
//! - this file: [`Report`] (what was evaluated, the read report, the
//!   measurements and figures), [`Report::build`], [`Report::write`],
//!   [`Report::summary_text`];
//! - `figures`: the numbers behind each plot;
//! - `plots`: each plot drawn as SVG with plotters;
//! - `html`: the page.

pub mod figures;
mod html;
pub mod plots;

use super::measure::{measure, Estimate, Grouping, Measurement};
use super::outcome::TripOutcome;
use super::trips::TripReport;
use figures::Figures;
use serde::Serialize;
use std::path::{Path, PathBuf};

/// What was evaluated.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Inputs {
    pub trips: Vec<String>,
    pub format: String,
    pub artifact: String,
    pub historical: Option<String>,
    pub model: Option<String>,
    pub time_zone: String,
    /// `hodos` version that answered.
    pub hodos_version: String,
}

/// One evaluation.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Report {
    pub inputs: Inputs,
    /// When the report was made (RFC 3339, UTC).
    pub generated_at: String,
    /// What the trip readers accepted and refused.
    pub read: TripReport,
    /// Trips answered and measured.
    pub answered: usize,
    /// Nominal coverage of the intervals, when answers carried them.
    pub nominal_coverage: Option<f64>,
    /// The uncorrected graph answer, then (when a model applied to any
    /// trip) the served ETA.
    pub measurements: Vec<Measurement>,
    /// The figures of each measured estimate, in the same order.
    pub figures: Vec<Figures>,
}

/// Why a report could not be written.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    #[error("no trip was answered: nothing to measure")]
    Empty,
    #[error("drawing {figure}: {cause}")]
    Plot {
        figure: &'static str,
        cause: plots::PlotError,
    },
    #[error("writing {path}: {source}")]
    Write {
        path: PathBuf,
        source: std::io::Error,
    },
}

impl Report {
    /// Measures `outcomes`: the graph answer always, the served ETA too
    /// when any outcome carries a model version.
    pub fn build(
        inputs: Inputs,
        read: TripReport,
        outcomes: &[TripOutcome],
        nominal_coverage: Option<f64>,
    ) -> Result<Report, ReportError> {
        let mut estimates = vec![Estimate::Graph];
        if outcomes.iter().any(|o| o.model_version.is_some()) {
            estimates.push(Estimate::Served);
        }
        let measurements: Vec<Measurement> = estimates
            .iter()
            .map(|&e| measure(outcomes, e).ok_or(ReportError::Empty))
            .collect::<Result<_, _>>()?;
        let figures = estimates
            .iter()
            .map(|&e| figures::figures(outcomes, e))
            .collect();
        let any_interval = outcomes.iter().any(|o| o.interval_s.is_some());
        Ok(Report {
            inputs,
            generated_at: chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true),
            read,
            answered: outcomes.len(),
            nominal_coverage: nominal_coverage.filter(|_| any_interval),
            measurements,
            figures,
        })
    }

    /// The page as HTML text.
    pub fn html(&self) -> Result<String, ReportError> {
        html::page(self)
    }

    /// Writes `dir/report.json` and `dir/report.html` (creating `dir`);
    /// returns both paths.
    pub fn write(&self, dir: &Path) -> Result<(PathBuf, PathBuf), ReportError> {
        let w = |path: PathBuf, bytes: &[u8]| {
            std::fs::create_dir_all(dir)
                .and_then(|_| std::fs::write(&path, bytes))
                .map_err(|source| ReportError::Write {
                    path: path.clone(),
                    source,
                })
                .map(|_| path)
        };
        let json = serde_json::to_vec_pretty(self).expect("a report serializes");
        let html = self.html()?;
        Ok((
            w(dir.join("report.json"), &json)?,
            w(dir.join("report.html"), html.as_bytes())?,
        ))
    }

    /// The terminal table: overall, then tier, day type, distance and
    /// duration bands (hour of week and region are in the files).
    pub fn summary_text(&self) -> String {
        use std::fmt::Write as _;
        let mut s = String::new();
        let _ = writeln!(
            s,
            "{} trips read, {} refused, {} answered",
            self.read.rows, self.read.refused, self.answered
        );
        for (k, v) in &self.read.refused_by_kind {
            let _ = writeln!(s, "  refused {k}: {v}");
        }
        for m in &self.measurements {
            let _ = writeln!(s);
            let _ = writeln!(
                s,
                "{} answers{}",
                match m.estimate {
                    Estimate::Graph => "uncorrected graph",
                    Estimate::Served => "served (corrected)",
                },
                if m.overall.coverage.is_some() {
                    ", with interval coverage"
                } else {
                    ""
                }
            );
            let _ = writeln!(s, "{}", table_header(m.overall.coverage.is_some()));
            let _ = writeln!(s, "{}", table_row("all", &m.overall));
            for g in [
                Grouping::Tier,
                Grouping::DayType,
                Grouping::DistanceBand,
                Grouping::DurationBand,
            ] {
                let _ = writeln!(s, "  {}", g.title());
                for grp in m.grouping(g) {
                    let _ = writeln!(s, "{}", table_row(&format!("  {}", grp.key), &grp.summary));
                }
            }
        }
        s
    }
}

fn table_header(coverage: bool) -> String {
    format!(
        "{:<16} {:>6} {:>7} {:>7} {:>7} {:>6} {:>6} {:>7} {:>6} {:>6}{}",
        "group",
        "n",
        "MAPE%",
        "medAPE",
        "p90APE",
        "ratio",
        "RMSLE",
        "MAE s",
        "±10%",
        "±20%",
        if coverage { "  cover" } else { "" }
    )
}

fn table_row(key: &str, s: &super::measure::ErrorSummary) -> String {
    format!(
        "{:<16} {:>6} {:>7.1} {:>7.1} {:>7.1} {:>6.3} {:>6.3} {:>7.0} {:>6.3} {:>6.3}{}",
        key,
        s.n,
        s.mape,
        s.median_ape,
        s.p90_ape,
        s.median_ratio,
        s.rmsle,
        s.mae_s,
        s.within_10,
        s.within_20,
        s.coverage.map(|c| format!("  {c:.3}")).unwrap_or_default()
    )
}
