//! Fitting a correction model on completed trips: a time split, gradient-
//! boosted trees on the log ratio of actual to graph time, split-conformal
//! intervals on held-out trips, and the figures that say whether it helps.
//!
//! # Why gradient-boosted trees, and which crate
//!
//! The error of a graph answer depends on where, when and how far a trip
//! goes in ways no formula states (short trips in a dense centre are the
//! slowest against free flow, rush hours differ by weekday): a
//! nonparametric regression fits that without a chosen form. Boosted
//! trees (Friedman, "Greedy function approximation: a gradient boosting
//! machine", Ann. Statist. 2001) take features of any scale, need no
//! normalization, route missing values down a learned branch, and cost a
//! few hundred comparisons to apply, which the serving path can afford
//! per answer. `forust-ml` is a pure-Rust histogram booster (no C++
//! toolchain, no system library), with its trees in public fields, so
//! hodos copies them into its own flat format ([`hodos_serving::correction`])
//! and the service never depends on the training library's layout. Cost:
//! training on 6,000 trips takes well under a second on one core. The
//! default size (120 trees of depth 5) was set before any test figure was
//! seen; `examples/train_sweep.rs` compares others on a validation split
//! inside the training window (30 trees of depth 3 cost a seventh per
//! answer, which matrices pay per cell, for about a point of MAPE).
//!
//! # The split
//!
//! Trips are ordered by departure. The latest `test_share` are the test
//! set, never seen in training; of the earlier ones the latest
//! `calibration_share` calibrate the intervals (and are not fitted on), the
//! rest fit the trees. A random split would let the model learn from days
//! it is then tested on.
//!
//! # Layout
//!
//! - [`TrainOptions`], [`split_by_time`], [`fit_booster`] and
//!   [`forest_of`] (the trees in hodos's format), [`conformal`] (the
//!   interval), [`best_constant`] (the baseline to beat), and [`train`]
//!   that runs them all into a [`CorrectionModel`] and a [`TrainReport`]
//!   (with its text for a terminal, [`TrainReport::summary_text`]).

use forust_ml::objective::ObjectiveType;
use forust_ml::{GradientBooster, Matrix};
use hodos_serving::correction::features::{N, NAMES};
use hodos_serving::correction::model::{
    CorrectionModel, Figure, Forest, Interval, ModelMeta, Node,
};
use hodos_truth::measure::{summarize, Pair};
use hodos_truth::outcome::TripOutcome;
use serde::Serialize;

/// How to train.
#[derive(Debug, Clone, PartialEq)]
pub struct TrainOptions {
    /// Share of the latest trips held out as the test set (0 keeps none).
    pub test_share: f64,
    /// Share of the remaining (training-window) trips, the latest, that
    /// calibrate the intervals.
    pub calibration_share: f64,
    pub iterations: usize,
    pub learning_rate: f32,
    pub max_depth: usize,
    /// Minimum hessian sum (trips, for squared loss) in a leaf.
    pub min_leaf_weight: f32,
    /// Quantile levels of the interval.
    pub interval: [f64; 2],
    /// Bands of graph time for the intervals (fewer when the calibration
    /// set is small: each band keeps at least [`MIN_BAND`] trips).
    pub bands: usize,
    pub model_version: u64,
    pub seed: u64,
}

impl Default for TrainOptions {
    fn default() -> Self {
        TrainOptions {
            test_share: 0.25,
            calibration_share: 0.2,
            iterations: 120,
            learning_rate: 0.08,
            max_depth: 5,
            min_leaf_weight: 20.0,
            interval: [0.1, 0.9],
            bands: 4,
            model_version: 1,
            seed: 1,
        }
    }
}

/// Calibration trips a band needs.
pub const MIN_BAND: usize = 50;

/// Why a model could not be trained.
#[derive(Debug, thiserror::Error)]
pub enum TrainError {
    #[error("{0}")]
    Options(String),
    #[error(
        "only {usable} trips have a positive graph time and actual duration; {need} are needed"
    )]
    TooFew { usable: usize, need: usize },
    #[error("the booster failed: {0}")]
    Booster(String),
    #[error("the fitted trees cannot be converted: {0}")]
    Convert(String),
}

/// Indices into the outcomes, per set, each in departure order.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Split {
    pub fit: Vec<usize>,
    pub calibration: Vec<usize>,
    pub test: Vec<usize>,
}

/// Whether an outcome can be trained or measured on.
pub fn usable(o: &TripOutcome) -> bool {
    o.graph_s.is_finite() && o.graph_s > 0.0 && o.actual_s > 0.0 && o.features.len() == N
}

/// The time split described in the module docs.
pub fn split_by_time(outcomes: &[TripOutcome], test_share: f64, calibration_share: f64) -> Split {
    let mut idx: Vec<usize> = (0..outcomes.len())
        .filter(|&i| usable(&outcomes[i]))
        .collect();
    idx.sort_by_key(|&i| (outcomes[i].leaving.timestamp_millis(), i));
    let n = idx.len();
    let n_test = ((n as f64) * test_share).round() as usize;
    let window = n - n_test.min(n);
    let n_cal = ((window as f64) * calibration_share).round() as usize;
    let test = idx.split_off(window);
    let calibration = idx.split_off(window - n_cal.min(window));
    Split {
        fit: idx,
        calibration,
        test,
    }
}

/// `ln(actual / graph)`, the trees' target.
pub fn target(o: &TripOutcome) -> f64 {
    (o.actual_s / o.graph_s).ln()
}

/// Fits the booster on `rows` (feature vectors) and `y`.
pub fn fit_booster(
    rows: &[&[f32]],
    y: &[f64],
    opts: &TrainOptions,
) -> Result<GradientBooster, TrainError> {
    let n = rows.len();
    // forust-ml's matrices are column-major.
    let mut data = vec![0.0f64; n * N];
    for (i, r) in rows.iter().enumerate() {
        for (j, &v) in r.iter().enumerate() {
            data[j * n + i] = f64::from(v);
        }
    }
    let m = Matrix::new(&data, n, N);
    let mut b = GradientBooster::default()
        .set_objective_type(ObjectiveType::SquaredLoss)
        .set_iterations(opts.iterations)
        .set_learning_rate(opts.learning_rate)
        .set_max_depth(opts.max_depth)
        .set_min_leaf_weight(opts.min_leaf_weight)
        .set_l2(1.0)
        .set_seed(opts.seed)
        .set_parallel(false);
    b.fit_unweighted(&m, y, None)
        .map_err(|e| TrainError::Booster(e.to_string()))?;
    Ok(b)
}

/// The booster's predictions for `rows`, by forust-ml itself (to check
/// [`forest_of`] against).
pub fn booster_predict(b: &GradientBooster, rows: &[&[f32]]) -> Vec<f64> {
    let n = rows.len();
    let mut data = vec![0.0f64; n * N];
    for (i, r) in rows.iter().enumerate() {
        for (j, &v) in r.iter().enumerate() {
            data[j * n + i] = f64::from(v);
        }
    }
    b.predict(&Matrix::new(&data, n, N), false)
}

/// The booster's trees in hodos's flat format.
pub fn forest_of(b: &GradientBooster) -> Result<Forest, TrainError> {
    let mut nodes = Vec::new();
    let mut roots = Vec::with_capacity(b.trees.len());
    for (t, tree) in b.trees.iter().enumerate() {
        let off = nodes.len();
        roots.push(u32::try_from(off).map_err(|_| TrainError::Convert("too many nodes".into()))?);
        for (i, n) in tree.nodes.iter().enumerate() {
            if !n.is_leaf && n.split_feature >= N {
                return Err(TrainError::Convert(format!(
                    "tree {t} node {i} splits on feature {}",
                    n.split_feature
                )));
            }
            let at = |c: usize| (off + c) as u32;
            nodes.push(Node {
                threshold: n.split_value,
                value: n.weight_value,
                feature: n.split_feature as u16,
                leaf: n.is_leaf,
                left: at(n.left_child),
                right: at(n.right_child),
                missing: at(n.missing_node),
            });
        }
    }
    let f = Forest {
        base: b.base_score,
        roots,
        nodes,
    };
    f.check().map_err(|e| TrainError::Convert(e.to_string()))?;
    Ok(f)
}

/// The `k`-th smallest (1-based, clamped to `1..=n`) of sorted values.
fn order_stat(sorted: &[f64], k: i64) -> f64 {
    let k = k.clamp(1, sorted.len() as i64) as usize;
    sorted[k - 1]
}

/// Mondrian split-conformal residual quantiles (the rule in
/// [`hodos_serving::correction::model`]): `graph_s`, the log residuals
/// `ln(actual) − ln(eta)` of the calibration trips, the levels and the
/// wanted number of bands.
pub fn conformal(graph_s: &[f64], residuals: &[f64], levels: [f64; 2], bands: usize) -> Interval {
    let n = graph_s.len();
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| graph_s[a].total_cmp(&graph_s[b]));
    let bands = bands.clamp(1, (n / MIN_BAND).max(1));
    // Edges at equal-count cuts of the calibration graph times.
    let mut edges: Vec<f64> = (1..bands).map(|k| graph_s[order[k * n / bands]]).collect();
    edges.dedup();
    let band_of = |g: f64| edges.partition_point(|&e| g >= e);
    let mut per: Vec<Vec<f64>> = vec![Vec::new(); edges.len() + 1];
    for i in 0..n {
        per[band_of(graph_s[i])].push(residuals[i]);
    }
    let [lo, hi] = levels;
    let mut offsets = Vec::with_capacity(per.len());
    let mut counts = Vec::with_capacity(per.len());
    for r in &mut per {
        r.sort_by(f64::total_cmp);
        let m = r.len();
        counts.push(m as u64);
        if m == 0 {
            offsets.push([0.0, 0.0]);
            continue;
        }
        let k_lo = ((m as f64 + 1.0) * lo).floor() as i64;
        let k_hi = ((m as f64 + 1.0) * hi).ceil() as i64;
        offsets.push([order_stat(r, k_lo), order_stat(r, k_hi)]);
    }
    Interval {
        edges,
        counts,
        levels,
        offsets,
    }
}

/// What a constant factor is best for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ConstantFor {
    Mape,
    Rmsle,
}

/// The single factor `c` minimizing MAPE or RMSLE of `c · graph` over
/// `(graph, actual)` (golden-section search over `ln c` in `[-4, 4]`; both
/// losses are unimodal in `c`).
pub fn best_constant(pairs: &[(f64, f64)], goal: ConstantFor) -> f64 {
    let loss = |lc: f64| {
        let c = lc.exp();
        pairs
            .iter()
            .map(|&(g, a)| match goal {
                ConstantFor::Mape => (c * g - a).abs() / a,
                ConstantFor::Rmsle => ((c * g).ln_1p() - a.ln_1p()).powi(2),
            })
            .sum::<f64>()
    };
    let phi = (5f64.sqrt() - 1.0) / 2.0;
    let (mut a, mut b) = (-4.0f64, 4.0f64);
    let mut c = b - phi * (b - a);
    let mut d = a + phi * (b - a);
    let (mut fc, mut fd) = (loss(c), loss(d));
    for _ in 0..100 {
        if fc < fd {
            b = d;
            d = c;
            fd = fc;
            c = b - phi * (b - a);
            fc = loss(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + phi * (b - a);
            fd = loss(d);
        }
    }
    ((a + b) / 2.0).exp()
}

/// What training measured.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TrainReport {
    pub trips_usable: usize,
    pub n_fit: usize,
    pub n_calibration: usize,
    pub n_test: usize,
    /// The best constant factors, fitted on the training window (fit and
    /// calibration trips).
    pub constant_mape: f64,
    pub constant_rmsle: f64,
    pub figures: Vec<Figure>,
    pub trees: usize,
    pub nodes: usize,
    pub fit_seconds: f64,
    /// Which outcomes went to which set.
    #[serde(skip)]
    pub split: Split,
}

impl TrainReport {
    /// The figure of `set` and `estimate`.
    pub fn figure(&self, set: &str, estimate: &str) -> Option<&Figure> {
        self.figures
            .iter()
            .find(|f| f.set == set && f.estimate == estimate)
    }
    /// The report as text for a terminal: the split, the constant
    /// baselines, the trees, a blank line, then one row per set and
    /// estimate (MAPE, RMSLE, interval coverage).
    pub fn summary_text(&self) -> String {
        use std::fmt::Write as _;
        let mut out = String::new();
        let _ = writeln!(
            out,
            "{} usable trips: {} fit the trees, {} calibrate the intervals, {} test (latest)",
            self.trips_usable, self.n_fit, self.n_calibration, self.n_test
        );
        let _ = writeln!(
            out,
            "best constant factors on the training window: {:.3} (MAPE), {:.3} (RMSLE)",
            self.constant_mape, self.constant_rmsle
        );
        let _ = writeln!(
            out,
            "{} trees, {} nodes, fitted in {:.2} s",
            self.trees, self.nodes, self.fit_seconds
        );
        let _ = writeln!(out);
        let _ = writeln!(
            out,
            "{:<12} {:<15} {:>6} {:>8} {:>7} {:>9}",
            "set", "estimate", "n", "MAPE", "RMSLE", "coverage"
        );
        for f in &self.figures {
            let _ = writeln!(
                out,
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
        out
    }
}

fn window(outcomes: &[TripOutcome], idx: &[usize]) -> [String; 2] {
    let at = |i: usize| outcomes[i].leaving.to_rfc3339();
    match (idx.first(), idx.last()) {
        (Some(&a), Some(&b)) => [at(a), at(b)],
        _ => [String::new(), String::new()],
    }
}

fn features_of(o: &TripOutcome) -> [f32; N] {
    let mut x = [f32::NAN; N];
    x.copy_from_slice(&o.features);
    x
}

/// Trains a model on `outcomes` (uncorrected replays with their feature
/// vectors) and measures it on each set.
pub fn train(
    outcomes: &[TripOutcome],
    opts: &TrainOptions,
) -> Result<(CorrectionModel, TrainReport), TrainError> {
    let ok = |x: f64| (0.0..1.0).contains(&x);
    if !ok(opts.test_share) || !ok(opts.calibration_share) || opts.calibration_share == 0.0 {
        return Err(TrainError::Options(
            "test and calibration shares must lie in [0, 1) and (0, 1)".into(),
        ));
    }
    let [lo, hi] = opts.interval;
    if !(0.0 < lo && lo < hi && hi < 1.0) {
        return Err(TrainError::Options(format!(
            "interval levels {lo},{hi} must satisfy 0 < low < high < 1"
        )));
    }
    let split = split_by_time(outcomes, opts.test_share, opts.calibration_share);
    let usable_n = split.fit.len() + split.calibration.len() + split.test.len();
    let need = 4 * MIN_BAND;
    if split.fit.len() < need || split.calibration.len() < MIN_BAND {
        return Err(TrainError::TooFew {
            usable: usable_n,
            need: ((need as f64 / (1.0 - opts.calibration_share)) / (1.0 - opts.test_share)).ceil()
                as usize,
        });
    }
    let started = std::time::Instant::now();
    let rows: Vec<&[f32]> = split
        .fit
        .iter()
        .map(|&i| &outcomes[i].features[..])
        .collect();
    let y: Vec<f64> = split.fit.iter().map(|&i| target(&outcomes[i])).collect();
    let booster = fit_booster(&rows, &y, opts)?;
    let forest = forest_of(&booster)?;
    let fit_seconds = started.elapsed().as_secs_f64();

    let cal = &split.calibration;
    let cal_graph: Vec<f64> = cal.iter().map(|&i| outcomes[i].graph_s).collect();
    let cal_res: Vec<f64> = cal
        .iter()
        .map(|&i| target(&outcomes[i]) - forest.predict(&features_of(&outcomes[i])))
        .collect();
    let interval = conformal(&cal_graph, &cal_res, opts.interval, opts.bands);

    let window_pairs: Vec<(f64, f64)> = split
        .fit
        .iter()
        .chain(cal)
        .map(|&i| (outcomes[i].graph_s, outcomes[i].actual_s))
        .collect();
    let constant_mape = best_constant(&window_pairs, ConstantFor::Mape);
    let constant_rmsle = best_constant(&window_pairs, ConstantFor::Rmsle);

    let mut model = CorrectionModel {
        meta: ModelMeta {
            model_version: opts.model_version,
            trained_at: chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true),
            features: NAMES.iter().map(|s| s.to_string()).collect(),
            target: "ln(actual_s / graph_s)".into(),
            method: format!(
                "gradient-boosted regression trees (forust-ml, squared loss, {} trees, depth {}, learning rate {}), Mondrian split-conformal intervals over {} graph-time bands",
                opts.iterations,
                opts.max_depth,
                opts.learning_rate,
                interval.offsets.len()
            ),
            train_window: window(outcomes, &split.fit),
            calibration_window: window(outcomes, cal),
            test_window: (!split.test.is_empty()).then(|| window(outcomes, &split.test)),
            figures: vec![],
        },
        forest,
        interval,
        compiled: Default::default(),
    };
    let mut figures = Vec::new();
    for (set, idx) in [
        ("train", &split.fit),
        ("calibration", &split.calibration),
        ("test", &split.test),
    ] {
        if idx.is_empty() {
            continue;
        }
        let mut push = |estimate: &str, pairs: Vec<Pair>| {
            let s = summarize(&pairs).expect("a non-empty set");
            figures.push(Figure {
                set: set.into(),
                estimate: estimate.into(),
                n: s.n as u64,
                mape: s.mape,
                rmsle: s.rmsle,
                coverage: s.coverage,
            });
        };
        let base = |f: &dyn Fn(&TripOutcome) -> f64| -> Vec<Pair> {
            idx.iter()
                .map(|&i| Pair {
                    estimate_s: f(&outcomes[i]),
                    actual_s: outcomes[i].actual_s,
                    interval_s: None,
                })
                .collect()
        };
        push("graph", base(&|o| o.graph_s));
        push("constant_mape", base(&|o| o.graph_s * constant_mape));
        push("constant_rmsle", base(&|o| o.graph_s * constant_rmsle));
        push(
            "corrected",
            idx.iter()
                .map(|&i| {
                    let o = &outcomes[i];
                    let c = model.apply(o.graph_s, &features_of(o));
                    Pair {
                        estimate_s: c.eta_s,
                        actual_s: o.actual_s,
                        interval_s: Some((c.low_s, c.high_s)),
                    }
                })
                .collect(),
        );
    }
    model.meta.figures = figures.clone();
    let report = TrainReport {
        trips_usable: usable_n,
        n_fit: split.fit.len(),
        n_calibration: split.calibration.len(),
        n_test: split.test.len(),
        constant_mape,
        constant_rmsle,
        figures,
        trees: model.forest.roots.len(),
        nodes: model.forest.nodes.len(),
        fit_seconds,
        split,
    };
    Ok((model, report))
}

/// `outcome` with `model` applied, as the service would answer it.
pub fn corrected(outcome: &TripOutcome, model: &CorrectionModel) -> TripOutcome {
    let c = model.apply(outcome.graph_s, &features_of(outcome));
    TripOutcome {
        eta_s: c.eta_s,
        interval_s: Some((c.low_s, c.high_s)),
        model_version: Some(c.model_version),
        ..outcome.clone()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Split conformal on a known sample: residuals 1..=99 in one band,
    /// levels 0.1/0.9: ranks ⌊100·0.1⌋ = 10 and ⌈100·0.9⌉ = 90 (Lei et
    /// al. 2018, §2.2), so the offsets are the values 10 and 90.
    #[test]
    fn conformal_ranks_follow_the_finite_sample_rule() {
        let r: Vec<f64> = (1..=99).map(f64::from).collect();
        let g = vec![100.0; 99];
        let iv = conformal(&g, &r, [0.1, 0.9], 1);
        assert_eq!(iv.offsets, vec![[10.0, 90.0]]);
        assert_eq!(iv.counts, vec![99]);
    }

    /// Bands split the calibration trips by graph time, each with its own
    /// spread; fewer bands when a band would hold under MIN_BAND trips.
    #[test]
    fn bands_hold_their_own_residuals() {
        let mut g = Vec::new();
        let mut r = Vec::new();
        for i in 0..200 {
            let short = i < 100;
            g.push(if short {
                100.0 + i as f64
            } else {
                1000.0 + i as f64
            });
            let spread = if short { 1.0 } else { 0.1 };
            r.push(spread * ((i % 100) as f64 - 49.5) / 49.5);
        }
        let iv = conformal(&g, &r, [0.1, 0.9], 2);
        assert_eq!(iv.edges, vec![1100.0]);
        assert!(iv.offsets[0][1] > 5.0 * iv.offsets[1][1]);
        assert_eq!(conformal(&g, &r, [0.1, 0.9], 10).offsets.len(), 4);
    }

    /// The MAPE-optimal factor is a weighted median of actual/graph with
    /// weights graph/actual (minimizing Σ (g/a)·|c − a/g|): for pairs
    /// (100, 200), (100, 300), (100, 400) the ratios 2, 3, 4 have weights
    /// 1/2, 1/3, 1/4 (total 13/12), and the weighted median is 3 (weight
    /// below it 1/2 < 13/24, up to it 5/6 ≥ 13/24).
    #[test]
    fn best_constant_matches_the_weighted_median() {
        let p = [(100.0, 200.0), (100.0, 300.0), (100.0, 400.0)];
        assert!((best_constant(&p, ConstantFor::Mape) - 3.0).abs() < 1e-6);
        // One pair: RMSLE is zero at c = a/g.
        let c = best_constant(&[(100.0, 250.0)], ConstantFor::Rmsle);
        assert!((c - 2.5).abs() < 1e-6, "{c}");
    }
}
