//! SVG plots (plotters, SVG backend only): latency by percentile for a set
//! of scenarios in one chart, and latency over time for one scenario.
//!
//! The percentile axis is in "nines": x = −log10(1 − q), so p90 is 1, p99
//! is 2 and p99.9 is 3, which spreads the tail out where it matters (the
//! curves themselves are computed in `model::latency`).

use crate::model::{Summary, Window};
use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;
use std::path::Path;

/// A chart with a linear x axis and a logarithmic latency axis.
type Chart<'a, 'b> = ChartContext<'a, SVGBackend<'b>, Cartesian2d<RangedCoordf64, LogCoord<f64>>>;

fn y_range(max: f64, min: f64) -> (f64, f64) {
    let lo = 10f64.powf(min.max(0.001).log10().floor());
    let hi = 10f64.powf(max.max(lo * 10.0).log10().ceil());
    (lo, hi)
}

/// Draws one line, 2 px wide, with its entry in the legend.
fn line(
    chart: &mut Chart<'_, '_>,
    points: impl IntoIterator<Item = (f64, f64)>,
    color: RGBAColor,
    label: impl Into<String>,
) -> Result<(), String> {
    chart
        .draw_series(LineSeries::new(points, color.stroke_width(2)))
        .map_err(|x| x.to_string())?
        .label(label)
        .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], color.stroke_width(2)));
    Ok(())
}

/// Draws the legend (on white at 85%, black border) at `at`.
fn legend<'a, 'b: 'a>(chart: &mut Chart<'a, 'b>, at: SeriesLabelPosition) -> Result<(), String> {
    chart
        .configure_series_labels()
        .position(at)
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .draw()
        .map_err(|x| x.to_string())
}

/// One chart of latency by percentile, one line per (label, curve).
pub fn percentiles(
    path: &Path,
    title: &str,
    lines: &[(String, Vec<(f64, f64)>)],
) -> Result<(), String> {
    let e = |x: &dyn std::fmt::Display| x.to_string();
    let all: Vec<f64> = lines
        .iter()
        .flat_map(|(_, c)| c.iter().map(|p| p.1))
        .collect();
    if all.is_empty() {
        return Ok(());
    }
    let (lo, hi) = y_range(
        all.iter().cloned().fold(0.0, f64::max),
        all.iter().cloned().fold(f64::INFINITY, f64::min),
    );
    let root = SVGBackend::new(path, (1000, 620)).into_drawing_area();
    root.fill(&WHITE).map_err(|x| e(&x))?;
    let mut chart = ChartBuilder::on(&root)
        .caption(title, ("sans-serif", 20))
        .margin(12)
        .x_label_area_size(44)
        .y_label_area_size(64)
        .build_cartesian_2d(0f64..4f64, (lo..hi).log_scale())
        .map_err(|x| e(&x))?;
    chart
        .configure_mesh()
        .x_desc("percentile")
        .y_desc("latency from scheduled send (ms)")
        .x_labels(5)
        .x_label_formatter(&|x| match x.round() as i32 {
            0 => "p0".into(),
            1 => "p90".into(),
            2 => "p99".into(),
            3 => "p99.9".into(),
            4 => "p99.99".into(),
            _ => String::new(),
        })
        .y_label_formatter(&|y| format!("{y}"))
        .draw()
        .map_err(|x| e(&x))?;
    for (i, (label, c)) in lines.iter().enumerate() {
        let color = Palette99::pick(i).to_rgba();
        line(&mut chart, c.iter().cloned(), color, label.clone())?;
    }
    legend(&mut chart, SeriesLabelPosition::UpperLeft)?;
    root.present().map_err(|x| e(&x))?;
    Ok(())
}

/// Latency over time (p50, p99, max per window) of one scenario.
pub fn timeline(path: &Path, s: &Summary) -> Result<(), String> {
    let e = |x: &dyn std::fmt::Display| x.to_string();
    let w: &[Window] = &s.timeline;
    if w.is_empty() {
        return Ok(());
    }
    let t_max = w
        .last()
        .map(|x| x.t_s + 0.25)
        .unwrap_or(1.0)
        .max(s.duration_s);
    let (lo, hi) = y_range(
        w.iter().map(|x| x.max_ms).fold(0.0, f64::max),
        w.iter().map(|x| x.p50_ms).fold(f64::INFINITY, f64::min),
    );
    let root = SVGBackend::new(path, (1000, 520)).into_drawing_area();
    root.fill(&WHITE).map_err(|x| e(&x))?;
    let title = format!(
        "{} ({}, {:.0}/s target, {:.0}/s achieved)",
        s.scenario, s.system, s.target_rate, s.achieved_rate
    );
    let mut chart = ChartBuilder::on(&root)
        .caption(title, ("sans-serif", 18))
        .margin(12)
        .x_label_area_size(40)
        .y_label_area_size(64)
        .build_cartesian_2d(0f64..t_max, (lo..hi).log_scale())
        .map_err(|x| e(&x))?;
    chart
        .configure_mesh()
        .x_desc("scheduled time (s)")
        .y_desc("latency per 250 ms window (ms)")
        .y_label_formatter(&|y| format!("{y}"))
        .draw()
        .map_err(|x| e(&x))?;
    type Pick = fn(&Window) -> f64;
    let series: [(&str, Pick, RGBAColor); 3] = [
        ("p50", |x| x.p50_ms, BLUE.to_rgba()),
        ("p99", |x| x.p99_ms, RED.to_rgba()),
        ("max", |x| x.max_ms, BLACK.mix(0.5)),
    ];
    for (label, f, color) in series {
        let points = w.iter().map(|x| (x.t_s, f(x).max(lo)));
        line(&mut chart, points, color, label)?;
    }
    legend(&mut chart, SeriesLabelPosition::UpperRight)?;
    root.present().map_err(|x| e(&x))?;
    Ok(())
}
