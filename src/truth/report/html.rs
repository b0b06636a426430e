//! The report page: one HTML file with its CSS inline and every plot as
//! inline SVG, so it opens from disk or as an attachment with nothing to
//! fetch. No script.

use super::figures::Figures;
use super::plots::{self, PlotError};
use super::{Report, ReportError};
use crate::measure::{band_label, ErrorSummary, Estimate, Grouping, DISTANCE_BANDS_KM};
use std::fmt::Write as _;

const STYLE: &str = r#"
:root { --ink: #1d2a33; --muted: #5b6b75; --line: #d8e0e5; --band: #f3f6f8; --accent: #005e82; }
* { box-sizing: border-box; }
body { font: 15px/1.45 system-ui, -apple-system, "Segoe UI", sans-serif; color: var(--ink);
       margin: 0; background: #fff; }
header { background: var(--accent); color: #fff; padding: 18px 32px; }
header h1 { margin: 0; font-size: 22px; font-weight: 600; }
header p { margin: 4px 0 0; opacity: .85; }
main { padding: 12px 32px 40px; max-width: 1240px; }
h2 { font-size: 18px; margin: 28px 0 8px; border-bottom: 2px solid var(--line); padding-bottom: 4px; }
h3 { font-size: 15px; margin: 18px 0 6px; color: var(--muted); }
.cards { display: flex; flex-wrap: wrap; gap: 12px; margin: 14px 0; }
.card { border: 1px solid var(--line); border-radius: 6px; padding: 10px 16px; min-width: 150px; }
.card b { display: block; font-size: 24px; font-weight: 600; }
.card span { color: var(--muted); font-size: 13px; }
table { border-collapse: collapse; margin: 6px 0 10px; font-variant-numeric: tabular-nums; }
th, td { padding: 3px 10px; text-align: right; border-bottom: 1px solid var(--line); }
th:first-child, td:first-child { text-align: left; }
thead th { background: var(--band); font-weight: 600; font-size: 13px; }
dl { display: grid; grid-template-columns: max-content 1fr; gap: 2px 16px; margin: 8px 0; }
dt { color: var(--muted); } dd { margin: 0; word-break: break-all; }
.figs { display: flex; flex-wrap: wrap; gap: 18px; }
figure { margin: 0; border: 1px solid var(--line); border-radius: 6px; padding: 6px; }
figcaption { color: var(--muted); font-size: 13px; max-width: 740px; padding: 4px 6px 2px; }
.note { color: var(--muted); font-size: 13px; max-width: 900px; }
"#;

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

fn estimate_name(e: Estimate) -> &'static str {
    match e {
        Estimate::Graph => "uncorrected graph answer",
        Estimate::Served => "served ETA (corrected)",
    }
}

fn pct(x: f64) -> String {
    format!("{:.1} %", x)
}

fn share(x: f64) -> String {
    format!("{:.1} %", x * 100.0)
}

fn row(out: &mut String, key: &str, s: &ErrorSummary, coverage: bool) {
    let _ = write!(
        out,
        "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{:.3}</td><td>{:.3}</td><td>{:.0}</td><td>{}</td><td>{}</td>",
        esc(key),
        s.n,
        pct(s.mape),
        pct(s.median_ape),
        pct(s.p90_ape),
        s.median_ratio,
        s.rmsle,
        s.mae_s,
        share(s.within_10),
        share(s.within_20)
    );
    if coverage {
        let _ = write!(
            out,
            "<td>{}</td>",
            s.coverage.map(share).unwrap_or_else(|| "–".into())
        );
    }
    out.push_str("</tr>\n");
}

fn head(out: &mut String, first: &str, coverage: bool) {
    let _ = writeln!(
        out,
        "<table><thead><tr><th>{}</th><th>trips</th><th>MAPE</th><th>median APE</th><th>p90 APE</th>\
         <th>median ratio</th><th>RMSLE</th><th>MAE (s)</th><th>within ±10 %</th><th>within ±20 %</th>{}</tr></thead><tbody>",
        esc(first),
        if coverage { "<th>interval coverage</th>" } else { "" }
    );
}

fn figure(out: &mut String, svg: String, caption: &str) {
    let _ = writeln!(
        out,
        "<figure>{svg}<figcaption>{}</figcaption></figure>",
        esc(caption)
    );
}

fn plot(r: Result<String, PlotError>, figure: &'static str) -> Result<String, ReportError> {
    r.map_err(|cause| ReportError::Plot { figure, cause })
}

fn figures_section(out: &mut String, r: &Report, f: &Figures) -> Result<(), ReportError> {
    let name = estimate_name(f.estimate);
    let _ = writeln!(out, "<h2>Figures: {name}</h2><div class=\"figs\">");
    for d in &f.density {
        let what = match d.grouping {
            Grouping::Tier => "per tier",
            _ => "per great-circle distance band",
        };
        figure(
            out,
            plot(
                plots::density(d, &format!("Error density {what}")),
                "error density",
            )?,
            "Histogram density of ln(estimate ÷ actual) in bins of 0.1; trips beyond ±3 count in the end bins. A curve left of 0 means the estimates run too fast.",
        );
    }
    figure(
        out,
        plot(
            plots::grid(&f.grid, "Estimate against actual"),
            "estimate vs actual",
        )?,
        "Trips per cell of a 40 × 40 grid on log axes (darker: more trips); cells above the diagonal are trips that took longer than estimated.",
    );
    let cal: Vec<(&str, &[crate::measure::Decile])> = r
        .figures
        .iter()
        .map(|x| (estimate_name(x.estimate), x.calibration.as_slice()))
        .collect();
    if f.estimate == Estimate::Graph {
        figure(
            out,
            plot(
                plots::calibration(&cal, "Calibration by decile of the estimate"),
                "calibration",
            )?,
            "Trips sorted by estimate and cut into ten groups of equal count; each point is a group's mean estimate and mean actual duration.",
        );
        let hours: Vec<(&str, &[super::figures::HourPoint])> = r
            .figures
            .iter()
            .map(|x| (estimate_name(x.estimate), x.by_hour.as_slice()))
            .collect();
        figure(
            out,
            plot(
                plots::by_hour(&hours, "Median estimate ÷ actual by hour of week"),
                "by hour",
            )?,
            "One point per hour of the week with trips (local clock of each trip); 1 is unbiased.",
        );
    }
    if !f.coverage.is_empty() {
        let nominal = r.nominal_coverage.unwrap_or(0.8);
        figure(
            out,
            plot(
                plots::coverage(&f.coverage, nominal, "Interval coverage by tier and distance band"),
                "coverage",
            )?,
            "Share of trips whose actual duration lies inside the answer's interval (ends included).",
        );
    }
    out.push_str("</div>\n");
    Ok(())
}

/// The whole page.
pub fn page(r: &Report) -> Result<String, ReportError> {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
         <title>hodos accuracy report</title><style>{STYLE}</style></head><body>\n\
         <header><h1>Accuracy from completed trips</h1><p>{} trips answered as hodos would have at their departure; made {}</p></header><main>",
        r.answered,
        esc(&r.generated_at)
    );
    let main = &r.measurements[0];
    let last = r.measurements.last().unwrap_or(main);
    let _ = writeln!(
        out,
        "<div class=\"cards\">\
         <div class=\"card\"><b>{}</b><span>trips answered</span></div>\
         <div class=\"card\"><b>{}</b><span>MAPE, {}</span></div>\
         <div class=\"card\"><b>{:.2}×</b><span>median estimate ÷ actual</span></div>\
         <div class=\"card\"><b>{:.3}</b><span>RMSLE</span></div>\
         <div class=\"card\"><b>{}</b><span>within ±20 %</span></div>{}</div>",
        last.overall.n,
        pct(last.overall.mape),
        estimate_name(last.estimate),
        last.overall.median_ratio,
        last.overall.rmsle,
        share(last.overall.within_20),
        last.overall
            .coverage
            .map(|c| format!(
                "<div class=\"card\"><b>{}</b><span>interval coverage</span></div>",
                share(c)
            ))
            .unwrap_or_default()
    );

    out.push_str("<h2>What was evaluated</h2><dl>");
    let i = &r.inputs;
    let _ = write!(
        out,
        "<dt>trips</dt><dd>{}</dd><dt>format</dt><dd>{}</dd><dt>artifact</dt><dd>{}</dd>\
         <dt>historical table</dt><dd>{}</dd><dt>model</dt><dd>{}</dd><dt>region time zone</dt><dd>{}</dd>\
         <dt>hodos</dt><dd>{}</dd>",
        esc(&i.trips.join(", ")),
        esc(&i.format),
        esc(&i.artifact),
        esc(i.historical.as_deref().unwrap_or("none (free-flow speeds)")),
        esc(i.model.as_deref().unwrap_or("none (uncorrected)")),
        esc(&i.time_zone),
        esc(&i.hodos_version)
    );
    out.push_str("</dl>\n");
    let _ = write!(
        out,
        "<p class=\"note\">{} rows read, {} accepted, {} refused",
        r.read.rows, r.read.accepted, r.read.refused
    );
    if !r.read.refused_by_kind.is_empty() {
        let kinds: Vec<String> = r
            .read
            .refused_by_kind
            .iter()
            .map(|(k, v)| format!("{} {}", v, k.replace('_', " ")))
            .collect();
        let _ = write!(out, " ({})", esc(&kinds.join(", ")));
    }
    out.push_str(".</p>\n");

    let coverage = r.measurements.iter().any(|m| m.overall.coverage.is_some());
    out.push_str("<h2>Error overall</h2>\n");
    head(&mut out, "estimate", coverage);
    for m in &r.measurements {
        row(&mut out, estimate_name(m.estimate), &m.overall, coverage);
    }
    out.push_str("</tbody></table>\n");
    for g in Grouping::ALL {
        if g == Grouping::HourOfWeek {
            continue;
        }
        for m in &r.measurements {
            let _ = writeln!(
                out,
                "<h3>{}: {}</h3>",
                esc(estimate_name(m.estimate)),
                g.title()
            );
            head(&mut out, g.as_str(), coverage);
            for grp in m.grouping(g) {
                row(&mut out, &grp.key, &grp.summary, coverage);
            }
            out.push_str("</tbody></table>\n");
        }
    }
    let _ = writeln!(
        out,
        "<p class=\"note\">APE: |estimate − actual| ÷ actual. MAPE: its mean; median and p90: its quantiles \
         (linear interpolation between order statistics, numpy's default). Median ratio: the median of \
         estimate ÷ actual (below 1: too fast). RMSLE: √mean((ln(1+estimate) − ln(1+actual))²). MAE: mean \
         |estimate − actual| in seconds. Distance bands are great-circle ({}, …, {}); duration bands are the \
         trip's actual duration. Per-hour figures are in report.json.</p>",
        band_label(DISTANCE_BANDS_KM[0], "km"),
        band_label(DISTANCE_BANDS_KM[DISTANCE_BANDS_KM.len() - 1], "km")
    );
    for f in &r.figures {
        figures_section(&mut out, r, f)?;
    }
    out.push_str("</main></body></html>\n");
    Ok(out)
}
