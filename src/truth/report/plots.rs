//! The report's plots as SVG text (plotters, SVG backend), to be inlined
//! in the HTML page. Each function draws one figure of
//! [`super::figures`]; none computes a statistic of its own.

use super::figures::{CoverageBar, Densities, Grid2d, HourPoint};
use crate::measure::Decile;
use plotters::prelude::*;

/// Line colours, in order (a palette of our own, distinct in print and for
/// the common colour-vision deficiencies as far as six hues allow).
const PALETTE: [RGBColor; 7] = [
    RGBColor(0, 94, 130),
    RGBColor(214, 96, 28),
    RGBColor(60, 150, 60),
    RGBColor(150, 60, 150),
    RGBColor(190, 40, 50),
    RGBColor(110, 110, 110),
    RGBColor(180, 150, 20),
];

const W: u32 = 760;
const H: u32 = 400;
const FONT: &str = "sans-serif";

/// Why a plot could not be drawn: the drawing backend's message (its
/// error types are generic over the backend, so the text is kept).
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("{0}")]
pub struct PlotError(String);

fn e(x: impl std::fmt::Display) -> PlotError {
    PlotError(x.to_string())
}

pub fn colour(i: usize) -> RGBColor {
    PALETTE[i % PALETTE.len()]
}

/// Density curves of the log ratio, one per group.
pub fn density(d: &Densities, title: &str) -> Result<String, PlotError> {
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (W, H)).into_drawing_area();
        root.fill(&WHITE).map_err(e)?;
        let top = d
            .curves
            .iter()
            .flat_map(|c| c.density.iter().copied())
            .fold(0.0, f64::max)
            .max(0.1)
            * 1.08;
        let (x0, x1) = (-3.0, 3.0);
        let mut chart = ChartBuilder::on(&root)
            .caption(title, (FONT, 17))
            .margin(12)
            .x_label_area_size(42)
            .y_label_area_size(52)
            .build_cartesian_2d(x0..x1, 0.0..top)
            .map_err(e)?;
        chart
            .configure_mesh()
            .x_desc("ln(estimate / actual): 0 exact, −0.69 twice too fast, +0.69 twice too slow")
            .y_desc("density")
            .light_line_style(RGBColor(235, 235, 235))
            .draw()
            .map_err(e)?;
        chart
            .draw_series(LineSeries::new(
                [(0.0, 0.0), (0.0, top)],
                BLACK.mix(0.4).stroke_width(1),
            ))
            .map_err(e)?;
        for (i, c) in d.curves.iter().enumerate() {
            let col = colour(i);
            let pts: Vec<(f64, f64)> = c
                .bin_lo
                .iter()
                .zip(&c.density)
                .map(|(&lo, &v)| (lo + super::figures::LOG_RATIO_STEP / 2.0, v))
                .collect();
            chart
                .draw_series(LineSeries::new(pts, col.stroke_width(2)))
                .map_err(e)?
                .label(format!("{} (n={})", c.key, c.n))
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 18, y)], col.stroke_width(2))
                });
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperRight)
            .background_style(WHITE.mix(0.85))
            .border_style(RGBColor(200, 200, 200))
            .label_font((FONT, 13))
            .draw()
            .map_err(e)?;
        root.present().map_err(e)?;
    }
    Ok(buf)
}

/// The estimate-vs-actual histogram on log axes, with the diagonal.
pub fn grid(g: &Grid2d, title: &str) -> Result<String, PlotError> {
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (560, 520)).into_drawing_area();
        root.fill(&WHITE).map_err(e)?;
        let mut chart = ChartBuilder::on(&root)
            .caption(title, (FONT, 17))
            .margin(12)
            .x_label_area_size(42)
            .y_label_area_size(56)
            .build_cartesian_2d(g.lo..g.hi, g.lo..g.hi)
            .map_err(e)?;
        let secs = |v: &f64| {
            let s = 10f64.powf(*v);
            if s >= 600.0 {
                format!("{:.0} min", s / 60.0)
            } else {
                format!("{s:.0} s")
            }
        };
        chart
            .configure_mesh()
            .x_desc("estimate (log scale)")
            .y_desc("actual (log scale)")
            .x_label_formatter(&secs)
            .y_label_formatter(&secs)
            .disable_mesh()
            .draw()
            .map_err(e)?;
        let max = g.counts.iter().flatten().copied().max().unwrap_or(0).max(1);
        let w = (g.hi - g.lo) / g.cells as f64;
        let cells = g.counts.iter().enumerate().flat_map(|(r, row)| {
            row.iter()
                .enumerate()
                .filter(|(_, &c)| c > 0)
                .map(move |(c, &k)| {
                    let t = (f64::from(k) + 1.0).ln() / (f64::from(max) + 1.0).ln();
                    let mix =
                        |a: u8, b: u8| (f64::from(a) + (f64::from(b) - f64::from(a)) * t) as u8;
                    let col = RGBColor(mix(222, 0), mix(238, 60), mix(246, 100));
                    let (x0, y0) = (g.lo + c as f64 * w, g.lo + r as f64 * w);
                    Rectangle::new([(x0, y0), (x0 + w, y0 + w)], col.filled())
                })
        });
        chart.draw_series(cells).map_err(e)?;
        chart
            .draw_series(LineSeries::new(
                [(g.lo, g.lo), (g.hi, g.hi)],
                RGBColor(214, 96, 28).stroke_width(2),
            ))
            .map_err(e)?
            .label("estimate = actual")
            .legend(|(x, y)| {
                PathElement::new(
                    vec![(x, y), (x + 18, y)],
                    RGBColor(214, 96, 28).stroke_width(2),
                )
            });
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperLeft)
            .background_style(WHITE.mix(0.85))
            .border_style(RGBColor(200, 200, 200))
            .label_font((FONT, 13))
            .draw()
            .map_err(e)?;
        root.present().map_err(e)?;
    }
    Ok(buf)
}

/// Mean actual against mean estimate per decile, one line per estimate.
pub fn calibration(lines: &[(&str, &[Decile])], title: &str) -> Result<String, PlotError> {
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (560, 520)).into_drawing_area();
        root.fill(&WHITE).map_err(e)?;
        let top = lines
            .iter()
            .flat_map(|(_, d)| d.iter().flat_map(|x| [x.mean_estimate_s, x.mean_actual_s]))
            .fold(0.0, f64::max)
            .max(60.0)
            / 60.0
            * 1.05;
        let mut chart = ChartBuilder::on(&root)
            .caption(title, (FONT, 17))
            .margin(12)
            .x_label_area_size(42)
            .y_label_area_size(52)
            .build_cartesian_2d(0.0..top, 0.0..top)
            .map_err(e)?;
        chart
            .configure_mesh()
            .x_desc("mean estimate in the decile (min)")
            .y_desc("mean actual (min)")
            .light_line_style(RGBColor(235, 235, 235))
            .draw()
            .map_err(e)?;
        chart
            .draw_series(LineSeries::new(
                [(0.0, 0.0), (top, top)],
                BLACK.mix(0.35).stroke_width(1),
            ))
            .map_err(e)?
            .label("perfectly calibrated")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], BLACK.mix(0.35)));
        for (i, (name, d)) in lines.iter().enumerate() {
            let col = colour(i);
            let pts: Vec<(f64, f64)> = d
                .iter()
                .map(|x| (x.mean_estimate_s / 60.0, x.mean_actual_s / 60.0))
                .collect();
            chart
                .draw_series(LineSeries::new(pts.clone(), col.stroke_width(2)))
                .map_err(e)?
                .label(*name)
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 18, y)], col.stroke_width(2))
                });
            chart
                .draw_series(pts.into_iter().map(|p| Circle::new(p, 4, col.filled())))
                .map_err(e)?;
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperLeft)
            .background_style(WHITE.mix(0.85))
            .border_style(RGBColor(200, 200, 200))
            .label_font((FONT, 13))
            .draw()
            .map_err(e)?;
        root.present().map_err(e)?;
    }
    Ok(buf)
}

/// Median ratio per hour of week, one line per estimate, days marked.
pub fn by_hour(lines: &[(&str, &[HourPoint])], title: &str) -> Result<String, PlotError> {
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (W, H)).into_drawing_area();
        root.fill(&WHITE).map_err(e)?;
        let top = lines
            .iter()
            .flat_map(|(_, h)| h.iter().map(|p| p.median_ratio))
            .fold(1.0, f64::max)
            * 1.1;
        let mut chart = ChartBuilder::on(&root)
            .caption(title, (FONT, 17))
            .margin(12)
            .x_label_area_size(42)
            .y_label_area_size(52)
            .build_cartesian_2d(0.0..168.0, 0.0..top)
            .map_err(e)?;
        const DAYS: [&str; 7] = ["Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun"];
        chart
            .configure_mesh()
            .x_labels(15)
            .x_label_formatter(&|x: &f64| {
                let h = x.round() as i64;
                if h % 24 == 12 {
                    DAYS[(h / 24).clamp(0, 6) as usize].to_string()
                } else {
                    String::new()
                }
            })
            .x_desc("hour of week (local), days centred at noon")
            .y_desc("median estimate / actual")
            .light_line_style(RGBColor(235, 235, 235))
            .draw()
            .map_err(e)?;
        for d in 1..7 {
            let x = f64::from(d) * 24.0;
            chart
                .draw_series(LineSeries::new(
                    [(x, 0.0), (x, top)],
                    RGBColor(200, 200, 200).stroke_width(1),
                ))
                .map_err(e)?;
        }
        chart
            .draw_series(LineSeries::new(
                [(0.0, 1.0), (168.0, 1.0)],
                BLACK.mix(0.4).stroke_width(1),
            ))
            .map_err(e)?;
        for (i, (name, h)) in lines.iter().enumerate() {
            let col = colour(i);
            let pts: Vec<(f64, f64)> = h
                .iter()
                .map(|p| (f64::from(p.hour) + 0.5, p.median_ratio))
                .collect();
            chart
                .draw_series(pts.iter().map(|&p| Circle::new(p, 2, col.filled())))
                .map_err(e)?
                .label(*name)
                .legend(move |(x, y)| Circle::new((x + 9, y), 4, col.filled()));
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperRight)
            .background_style(WHITE.mix(0.85))
            .border_style(RGBColor(200, 200, 200))
            .label_font((FONT, 13))
            .draw()
            .map_err(e)?;
        root.present().map_err(e)?;
    }
    Ok(buf)
}

/// Interval coverage per group as bars, with the nominal level.
pub fn coverage(bars: &[CoverageBar], nominal: f64, title: &str) -> Result<String, PlotError> {
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (W, H)).into_drawing_area();
        root.fill(&WHITE).map_err(e)?;
        let n = bars.len().max(1);
        let mut chart = ChartBuilder::on(&root)
            .caption(title, (FONT, 17))
            .margin(12)
            .x_label_area_size(60)
            .y_label_area_size(52)
            .build_cartesian_2d(0.0..n as f64, 0.0..1.0)
            .map_err(e)?;
        let keys: Vec<String> = bars.iter().map(|b| b.key.clone()).collect();
        chart
            .configure_mesh()
            .x_labels(n * 2 + 1)
            .x_label_formatter(&|x: &f64| {
                let f = x - x.floor();
                if (f - 0.5).abs() < 1e-6 {
                    keys.get(x.floor() as usize).cloned().unwrap_or_default()
                } else {
                    String::new()
                }
            })
            .y_desc("share of actual durations inside the interval")
            .light_line_style(RGBColor(235, 235, 235))
            .draw()
            .map_err(e)?;
        chart
            .draw_series(bars.iter().enumerate().map(|(i, b)| {
                let x = i as f64;
                Rectangle::new(
                    [(x + 0.15, 0.0), (x + 0.85, b.coverage)],
                    colour(usize::from(b.grouping != bars[0].grouping)).filled(),
                )
            }))
            .map_err(e)?;
        chart
            .draw_series(LineSeries::new(
                [(0.0, nominal), (n as f64, nominal)],
                RGBColor(190, 40, 50).stroke_width(2),
            ))
            .map_err(e)?
            .label(format!("nominal {:.0} %", nominal * 100.0))
            .legend(|(x, y)| {
                PathElement::new(
                    vec![(x, y), (x + 18, y)],
                    RGBColor(190, 40, 50).stroke_width(2),
                )
            });
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::LowerRight)
            .background_style(WHITE.mix(0.85))
            .border_style(RGBColor(200, 200, 200))
            .label_font((FONT, 13))
            .draw()
            .map_err(e)?;
        root.present().map_err(e)?;
    }
    Ok(buf)
}
