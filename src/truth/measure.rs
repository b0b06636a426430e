//! Error metrics of ETAs against completed trips, overall and per group.
//!
//! For trip `i` with estimate `e_i` and actual duration `a_i` (seconds,
//! `a_i > 0`; the readers refuse other trips), over `n` trips:
//!
//! - absolute percentage error `APE_i = |e_i − a_i| / a_i`; **MAPE** =
//!   100 · mean(APE) (Hyndman & Koehler 2006, "Another look at measures of
//!   forecast accuracy", Int. J. Forecasting 22(4), eq. for MAPE);
//! - **median APE** and **p90 APE**: the 0.5 and 0.9 quantiles of APE, in
//!   percent;
//! - **median ratio** (bias): the median of `e_i / a_i`; below 1 the
//!   estimates run fast (too short), above 1 slow;
//! - **RMSLE** = sqrt(mean((ln(1 + e_i) − ln(1 + a_i))²)): the square root
//!   of scikit-learn's `mean_squared_log_error` (its documented formula,
//!   natural logarithm);
//! - **MAE** = mean(|e_i − a_i|), seconds (Hyndman & Koehler 2006);
//! - **within ±10 % / ±20 %**: the share of trips with `APE_i ≤ 0.10` /
//!   `≤ 0.20` (ends included);
//! - **interval coverage**: among trips whose answer carried an interval
//!   `[lo_i, hi_i]`, the share with `lo_i ≤ a_i ≤ hi_i` (ends included).
//!
//! Quantiles are numpy's default (`method="linear"`, Hyndman & Fan 1996
//! type 7): on the sorted values `x_0 ≤ … ≤ x_{n−1}`,
//! `h = (n − 1) q`, `Q(q) = x_⌊h⌋ + (h − ⌊h⌋)(x_⌊h⌋+1 − x_⌊h⌋)`.
//! Checked against numpy by `src/truth/tests/truth_numpy.rs`.
//!
//! # Groups
//!
//! Tier and region of the answer; hour of week (0 = Monday 00:00, on the
//! trip's local clock) and day type (weekday / weekend); great-circle
//! distance band ([`DISTANCE_BANDS_KM`]); actual duration band
//! ([`DURATION_BANDS_MIN`]). Every group reports the same metrics.

use super::outcome::TripOutcome;
use serde::Serialize;

/// Great-circle distance bands, kilometres: `[lo, hi)`.
pub const DISTANCE_BANDS_KM: [(f64, f64); 6] = [
    (0.0, 1.0),
    (1.0, 2.0),
    (2.0, 5.0),
    (5.0, 10.0),
    (10.0, 20.0),
    (20.0, f64::INFINITY),
];

/// Actual duration bands, minutes: `[lo, hi)`.
pub const DURATION_BANDS_MIN: [(f64, f64); 5] = [
    (0.0, 5.0),
    (5.0, 10.0),
    (10.0, 20.0),
    (20.0, 40.0),
    (40.0, f64::INFINITY),
];

/// Which estimate of an outcome is measured.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Estimate {
    /// The uncorrected answer of the outcome's tier (`graph_s`).
    Graph,
    /// The ETA served (`eta_s`; corrected when a model applied).
    Served,
}

impl Estimate {
    pub fn of(self, o: &TripOutcome) -> f64 {
        match self {
            Estimate::Graph => o.graph_s,
            Estimate::Served => o.eta_s,
        }
    }

    pub fn as_str(self) -> &'static str {
        match self {
            Estimate::Graph => "graph",
            Estimate::Served => "served",
        }
    }
}

/// The type-7 quantile (numpy's default) of already sorted values; NaN
/// for an empty slice. `q` is clamped to `0..=1`.
pub fn quantile_sorted(sorted: &[f64], q: f64) -> f64 {
    let n = sorted.len();
    if n == 0 {
        return f64::NAN;
    }
    let h = (n - 1) as f64 * q.clamp(0.0, 1.0);
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(n - 1);
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

/// The type-7 quantile of unsorted values.
pub fn quantile(values: &[f64], q: f64) -> f64 {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    quantile_sorted(&v, q)
}

/// The metrics of one set of trips.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ErrorSummary {
    pub n: usize,
    /// Percent.
    pub mape: f64,
    /// Percent.
    pub median_ape: f64,
    /// Percent.
    pub p90_ape: f64,
    /// Median of estimate ÷ actual.
    pub median_ratio: f64,
    pub rmsle: f64,
    /// Seconds.
    pub mae_s: f64,
    /// Share (0..1) with APE ≤ 10 %.
    pub within_10: f64,
    /// Share (0..1) with APE ≤ 20 %.
    pub within_20: f64,
    /// Trips whose answer carried an interval.
    pub with_interval: usize,
    /// Share (0..1) of those whose actual duration lies inside it.
    pub coverage: Option<f64>,
}

/// One trip as the metrics see it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Pair {
    pub estimate_s: f64,
    pub actual_s: f64,
    pub interval_s: Option<(f64, f64)>,
}

/// The metrics of `pairs`; `None` when empty.
pub fn summarize(pairs: &[Pair]) -> Option<ErrorSummary> {
    let n = pairs.len();
    if n == 0 {
        return None;
    }
    let nf = n as f64;
    let mut ape: Vec<f64> = pairs
        .iter()
        .map(|p| (p.estimate_s - p.actual_s).abs() / p.actual_s)
        .collect();
    let mut ratio: Vec<f64> = pairs.iter().map(|p| p.estimate_s / p.actual_s).collect();
    let mape = ape.iter().sum::<f64>() / nf * 100.0;
    let within = |lim: f64| ape.iter().filter(|&&x| x <= lim).count() as f64 / nf;
    let (within_10, within_20) = (within(0.10), within(0.20));
    ape.sort_by(f64::total_cmp);
    ratio.sort_by(f64::total_cmp);
    let msle = pairs
        .iter()
        .map(|p| (p.estimate_s.ln_1p() - p.actual_s.ln_1p()).powi(2))
        .sum::<f64>()
        / nf;
    let mae_s = pairs
        .iter()
        .map(|p| (p.estimate_s - p.actual_s).abs())
        .sum::<f64>()
        / nf;
    let with: Vec<bool> = pairs
        .iter()
        .filter_map(|p| {
            p.interval_s
                .map(|(lo, hi)| lo <= p.actual_s && p.actual_s <= hi)
        })
        .collect();
    Some(ErrorSummary {
        n,
        mape,
        median_ape: quantile_sorted(&ape, 0.5) * 100.0,
        p90_ape: quantile_sorted(&ape, 0.9) * 100.0,
        median_ratio: quantile_sorted(&ratio, 0.5),
        rmsle: msle.sqrt(),
        mae_s,
        within_10,
        within_20,
        with_interval: with.len(),
        coverage: (!with.is_empty())
            .then(|| with.iter().filter(|&&c| c).count() as f64 / with.len() as f64),
    })
}

/// One group's metrics.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Group {
    /// The group's key (`historical`, `2-5 km`, `hour 17`, ...).
    pub key: String,
    #[serde(flatten)]
    pub summary: ErrorSummary,
}

/// The groupings, in the order they are reported.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Grouping {
    Tier,
    Region,
    DayType,
    DistanceBand,
    DurationBand,
    HourOfWeek,
}

impl Grouping {
    pub const ALL: [Grouping; 6] = [
        Grouping::Tier,
        Grouping::Region,
        Grouping::DayType,
        Grouping::DistanceBand,
        Grouping::DurationBand,
        Grouping::HourOfWeek,
    ];

    pub fn as_str(self) -> &'static str {
        match self {
            Grouping::Tier => "tier",
            Grouping::Region => "region",
            Grouping::DayType => "day_type",
            Grouping::DistanceBand => "distance_band",
            Grouping::DurationBand => "duration_band",
            Grouping::HourOfWeek => "hour_of_week",
        }
    }

    /// Heading for people.
    pub fn title(self) -> &'static str {
        match self {
            Grouping::Tier => "by tier",
            Grouping::Region => "by region",
            Grouping::DayType => "by day type",
            Grouping::DistanceBand => "by great-circle distance",
            Grouping::DurationBand => "by actual duration",
            Grouping::HourOfWeek => "by hour of week",
        }
    }

    /// The group of an outcome, as `(order, key)`: groups sort by order.
    pub fn key(self, o: &TripOutcome) -> (u32, String) {
        match self {
            Grouping::Tier => (o.tier as u32, o.tier.as_str().to_string()),
            Grouping::Region => (0, o.region.clone().unwrap_or_else(|| "none".into())),
            Grouping::DayType => {
                if o.weekend {
                    (1, "weekend".into())
                } else {
                    (0, "weekday".into())
                }
            }
            Grouping::DistanceBand => band(&DISTANCE_BANDS_KM, o.great_circle_m / 1000.0, "km"),
            Grouping::DurationBand => band(&DURATION_BANDS_MIN, o.actual_s / 60.0, "min"),
            Grouping::HourOfWeek => (u32::from(o.hour_of_week), format!("{:03}", o.hour_of_week)),
        }
    }
}

/// `(index, "lo-hi unit")` of the band holding `x`.
fn band(bands: &[(f64, f64)], x: f64, unit: &str) -> (u32, String) {
    let i = bands
        .iter()
        .position(|&(lo, hi)| x >= lo && x < hi)
        .unwrap_or(bands.len() - 1);
    (i as u32, band_label(bands[i], unit))
}

/// `"2-5 km"`, `"20+ km"`.
pub fn band_label((lo, hi): (f64, f64), unit: &str) -> String {
    if hi.is_finite() {
        format!("{lo}-{hi} {unit}")
    } else {
        format!("{lo}+ {unit}")
    }
}

/// All metrics of one estimate over a set of outcomes.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Measurement {
    pub estimate: Estimate,
    pub overall: ErrorSummary,
    /// Per grouping (in [`Grouping::ALL`] order), its groups in order.
    pub groups: Vec<(Grouping, Vec<Group>)>,
}

impl Measurement {
    pub fn grouping(&self, g: Grouping) -> &[Group] {
        self.groups
            .iter()
            .find(|(k, _)| *k == g)
            .map(|(_, v)| v.as_slice())
            .unwrap_or(&[])
    }
}

fn pair(o: &TripOutcome, e: Estimate) -> Pair {
    Pair {
        estimate_s: e.of(o),
        actual_s: o.actual_s,
        // An interval lies around the served ETA, not the graph answer.
        interval_s: match e {
            Estimate::Served => o.interval_s,
            Estimate::Graph => None,
        },
    }
}

/// Measures `estimate` over `outcomes`; `None` when there are none.
pub fn measure(outcomes: &[TripOutcome], estimate: Estimate) -> Option<Measurement> {
    let all: Vec<Pair> = outcomes.iter().map(|o| pair(o, estimate)).collect();
    let overall = summarize(&all)?;
    let groups = Grouping::ALL
        .iter()
        .map(|&g| {
            let mut by: std::collections::BTreeMap<(u32, String), Vec<Pair>> = Default::default();
            for o in outcomes {
                by.entry(g.key(o)).or_default().push(pair(o, estimate));
            }
            let list = by
                .into_iter()
                .filter_map(|((_, key), pairs)| {
                    summarize(&pairs).map(|summary| Group { key, summary })
                })
                .collect();
            (g, list)
        })
        .collect();
    Some(Measurement {
        estimate,
        overall,
        groups,
    })
}

/// One decile of the estimate: the trips whose estimate ranks in it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Decile {
    pub n: usize,
    pub mean_estimate_s: f64,
    pub mean_actual_s: f64,
    pub median_actual_s: f64,
}

/// Calibration by decile: trips sorted by estimate, cut into ten groups of
/// equal count (trip `k` of `n`, 0-based, falls in decile ⌊10k/n⌋).
pub fn calibration_deciles(pairs: &[Pair]) -> Vec<Decile> {
    let mut v: Vec<(f64, f64)> = pairs.iter().map(|p| (p.estimate_s, p.actual_s)).collect();
    v.sort_by(|a, b| a.0.total_cmp(&b.0));
    let n = v.len();
    let mut out = Vec::new();
    for d in 0..10 {
        let slice: Vec<(f64, f64)> = v
            .iter()
            .enumerate()
            .filter(|(k, _)| 10 * k / n.max(1) == d)
            .map(|(_, p)| *p)
            .collect();
        if slice.is_empty() {
            continue;
        }
        let m = slice.len() as f64;
        let actual: Vec<f64> = slice.iter().map(|p| p.1).collect();
        out.push(Decile {
            n: slice.len(),
            mean_estimate_s: slice.iter().map(|p| p.0).sum::<f64>() / m,
            mean_actual_s: actual.iter().sum::<f64>() / m,
            median_actual_s: quantile(&actual, 0.5),
        });
    }
    out
}

/// `pairs` of `outcomes` for `estimate`.
pub fn pairs(outcomes: &[TripOutcome], estimate: Estimate) -> Vec<Pair> {
    outcomes.iter().map(|o| pair(o, estimate)).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn p(e: f64, a: f64, i: Option<(f64, f64)>) -> Pair {
        Pair {
            estimate_s: e,
            actual_s: a,
            interval_s: i,
        }
    }

    /// Worked by hand from the definitions in the module header.
    ///
    /// | trip | e | a | APE | e/a | ln(1+e) − ln(1+a) | interval | covers |
    /// |---|---|---|---|---|---|---|---|
    /// | 1 | 91 | 100 | 0.09 | 0.91 | ln(92/101) = −0.093332 | 80..120 | yes |
    /// | 2 | 150 | 100 | 0.50 | 1.50 | ln(151/101) = 0.402159 | 100..140 | yes (end) |
    /// | 3 | 200 | 250 | 0.20 | 0.80 | ln(201/251) = −0.222148 | 150..240 | no |
    /// | 4 | 400 | 400 | 0 | 1.00 | 0 | — | — |
    /// | 5 | 60 | 100 | 0.40 | 0.60 | ln(61/101) = −0.504247 | 50..90 | no |
    ///
    /// - MAPE = 100 · (0.09 + 0.5 + 0.2 + 0 + 0.4) / 5 = 23.8 %.
    /// - sorted APE 0, 0.09, 0.2, 0.4, 0.5: median (h = 2) 0.2 → 20 %;
    ///   p90: h = 4 · 0.9 = 3.6 → 0.4 + 0.6 · (0.5 − 0.4) = 0.46 → 46 %.
    /// - sorted ratios 0.6, 0.8, 0.91, 1.0, 1.5: median 0.91.
    /// - RMSLE: squares 0.0087109, 0.1617321, 0.0493497, 0, 0.2542647;
    ///   mean 0.0948115; root 0.307915.
    /// - MAE = (9 + 50 + 50 + 0 + 40) / 5 = 29.8 s.
    /// - within ±10 %: APE ≤ 0.1 for trips 1, 4 → 2/5 = 0.4; ±20 %:
    ///   trips 1, 3, 4 → 0.6.
    /// - coverage: 4 trips with an interval, 2 covered → 0.5.
    #[test]
    fn metrics_match_a_hand_worked_example() {
        let s = summarize(&[
            p(91.0, 100.0, Some((80.0, 120.0))),
            p(150.0, 100.0, Some((100.0, 140.0))),
            p(200.0, 250.0, Some((150.0, 240.0))),
            p(400.0, 400.0, None),
            p(60.0, 100.0, Some((50.0, 90.0))),
        ])
        .unwrap();
        let close = |a: f64, b: f64, tol: f64| assert!((a - b).abs() <= tol, "{a} vs {b}");
        assert_eq!(s.n, 5);
        close(s.mape, 23.8, 1e-9);
        close(s.median_ape, 20.0, 1e-9);
        close(s.p90_ape, 46.0, 1e-9);
        close(s.median_ratio, 0.91, 1e-12);
        close(s.rmsle, 0.307915, 1e-6);
        close(s.mae_s, 29.8, 1e-9);
        close(s.within_10, 0.4, 0.0);
        close(s.within_20, 0.6, 0.0);
        assert_eq!(s.with_interval, 4);
        assert_eq!(s.coverage, Some(0.5));
    }

    /// numpy's documented examples of `np.quantile` (linear method):
    /// `a = [[10, 7, 4], [3, 2, 1]]` flattened, `np.quantile(a, 0.5)` =
    /// 3.5; and `np.percentile` of the same at 50 = 3.5 (numpy docs,
    /// numpy.quantile "Examples"). Small cases worked by the type-7 rule:
    /// `[1, 2, 3, 4]` at 0.25 → h = 0.75 → 1.75.
    #[test]
    fn quantiles_follow_type_7() {
        assert_eq!(quantile(&[10.0, 7.0, 4.0, 3.0, 2.0, 1.0], 0.5), 3.5);
        assert_eq!(quantile(&[1.0, 2.0, 3.0, 4.0], 0.25), 1.75);
        assert_eq!(quantile(&[5.0], 0.9), 5.0);
        assert_eq!(quantile(&[1.0, 2.0], 1.0), 2.0);
        assert!(quantile(&[], 0.5).is_nan());
    }

    #[test]
    fn deciles_split_by_estimate_rank() {
        let pairs: Vec<Pair> = (0..20)
            .map(|k| p(f64::from(k), f64::from(k) * 2.0 + 1.0, None))
            .collect();
        let d = calibration_deciles(&pairs);
        assert_eq!(d.len(), 10);
        assert!(d.iter().all(|x| x.n == 2));
        // Decile 0 holds estimates 0 and 1 (actuals 1 and 3).
        assert_eq!(d[0].mean_estimate_s, 0.5);
        assert_eq!(d[0].mean_actual_s, 2.0);
        assert_eq!(d[9].mean_estimate_s, 18.5);
    }

    #[test]
    fn bands_are_half_open() {
        assert_eq!(band(&DISTANCE_BANDS_KM, 0.999, "km").1, "0-1 km");
        assert_eq!(band(&DISTANCE_BANDS_KM, 1.0, "km").1, "1-2 km");
        assert_eq!(band(&DISTANCE_BANDS_KM, 250.0, "km").1, "20+ km");
        assert_eq!(band(&DURATION_BANDS_MIN, 40.0, "min").1, "40+ min");
    }
}
