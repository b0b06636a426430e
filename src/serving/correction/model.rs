//! A correction model in memory: gradient-boosted regression trees that
//! predict `ln(actual / graph)` from an answer's [`Features`], and
//! split-conformal residual quantiles that turn the corrected ETA into an
//! interval.
//!
//! # How an answer is corrected
//!
//! `eta = graph · exp(base + Σ tree(x))`. The interval is Mondrian split
//! conformal prediction (Vovk et al., *Algorithmic Learning in a Random
//! World*, 2005; Lei et al., "Distribution-free predictive inference for
//! regression", JASA 2018): on trips held out from fitting (the
//! calibration set), the residuals `r = ln(actual) − ln(eta)` are sorted
//! per band of graph time, and the band's `q_lo` and `q_hi` residual
//! quantiles (finite-sample ranks: `⌊(n+1)·lo⌋` and `⌈(n+1)·hi⌉`) give
//! `[eta · e^q_lo, eta · e^q_hi]`. Bands keep a short trip's wide spread
//! from inflating a long trip's interval.
//!
//! Prediction walks each tree from its root: a NaN feature takes the
//! node's missing branch, otherwise `x < threshold` goes left. Node
//! indices only grow along a path (checked on load), so a walk ends.

use super::features::{Features, N, NAMES};
use serde::{Deserialize, Serialize};

/// One tree node (a split or a leaf), in a flat array.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Node {
    /// Split threshold (`x < threshold` goes left).
    pub threshold: f64,
    /// Leaf value (already scaled by the learning rate).
    pub value: f32,
    pub feature: u16,
    pub leaf: bool,
    pub left: u32,
    pub right: u32,
    pub missing: u32,
}

/// The trees, flattened: tree `t` holds `nodes[roots[t]..roots[t+1]]`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Forest {
    pub base: f64,
    pub roots: Vec<u32>,
    pub nodes: Vec<Node>,
}

impl Forest {
    /// The predicted log ratio for `x`.
    #[inline]
    pub fn predict(&self, x: &Features) -> f64 {
        let mut s = self.base;
        for &root in &self.roots {
            let mut i = root as usize;
            loop {
                let n = &self.nodes[i];
                if n.leaf {
                    s += f64::from(n.value);
                    break;
                }
                let v = x[usize::from(n.feature)];
                i = if v.is_nan() {
                    n.missing
                } else if f64::from(v) < n.threshold {
                    n.left
                } else {
                    n.right
                } as usize;
            }
        }
        s
    }

    /// Checks the structure: every child lies after its node and inside
    /// its tree, features are known, values finite.
    pub fn check(&self) -> Result<(), String> {
        if !self.base.is_finite() {
            return Err("the base score is not finite".into());
        }
        let total = self.nodes.len();
        for (t, &root) in self.roots.iter().enumerate() {
            let start = root as usize;
            let end = self.roots.get(t + 1).map_or(total, |&r| r as usize);
            if start >= end || end > total {
                return Err(format!(
                    "tree {t} has no nodes or lies outside the node array"
                ));
            }
            for i in start..end {
                let n = &self.nodes[i];
                if n.leaf {
                    if !n.value.is_finite() {
                        return Err(format!("tree {t}: leaf {i} is not finite"));
                    }
                    continue;
                }
                if usize::from(n.feature) >= N {
                    return Err(format!(
                        "tree {t}: node {i} splits on unknown feature {}",
                        n.feature
                    ));
                }
                if n.threshold.is_nan() {
                    return Err(format!("tree {t}: node {i} has a NaN threshold"));
                }
                for c in [n.left, n.right, n.missing] {
                    let c = c as usize;
                    if c <= i || c >= end {
                        return Err(format!(
                            "tree {t}: node {i} points at node {c}, outside its subtree order"
                        ));
                    }
                }
            }
        }
        Ok(())
    }
}

/// Calibration residual quantiles per band of graph time.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Interval {
    /// Graph-time band edges, seconds, ascending: band `b` holds graph
    /// times in `[edges[b-1], edges[b])`.
    pub edges: Vec<f64>,
    /// Calibration trips per band.
    pub counts: Vec<u64>,
    /// Nominal lower and upper quantile levels, e.g. `[0.1, 0.9]`.
    pub levels: [f64; 2],
    /// Per band, the `(low, high)` residual quantiles (log ratio).
    pub offsets: Vec<[f64; 2]>,
}

impl Interval {
    fn band(&self, graph_s: f64) -> usize {
        self.edges.partition_point(|&e| graph_s >= e)
    }

    pub fn check(&self) -> Result<(), String> {
        if self.offsets.len() != self.edges.len() + 1 || self.counts.len() != self.offsets.len() {
            return Err("interval bands and offsets disagree in number".into());
        }
        if !self.edges.windows(2).all(|w| w[0] < w[1]) || self.edges.iter().any(|e| !e.is_finite())
        {
            return Err("interval band edges are not ascending".into());
        }
        let [lo, hi] = self.levels;
        if !(0.0 < lo && lo < hi && hi < 1.0) {
            return Err(format!(
                "interval levels {lo}..{hi} are not 0 < low < high < 1"
            ));
        }
        if self
            .offsets
            .iter()
            .any(|[a, b]| !a.is_finite() || !b.is_finite() || a > b)
        {
            return Err("interval offsets are not finite and ordered".into());
        }
        Ok(())
    }
}

/// One set of validation figures (what `hodos train` measured).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Figure {
    /// `train` (the trips the trees were fitted on), `calibration` or
    /// `test` (the latest trips, never seen in training).
    pub set: String,
    /// `graph`, `constant` (best single factor), `corrected`.
    pub estimate: String,
    pub n: u64,
    /// Percent.
    pub mape: f64,
    pub rmsle: f64,
    /// Share of trips inside the interval (corrected only).
    pub coverage: Option<f64>,
}

/// What a model says about itself.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModelMeta {
    /// Reported with every corrected answer.
    pub model_version: u64,
    /// RFC 3339, UTC.
    pub trained_at: String,
    /// The feature names, in order; must be [`NAMES`].
    pub features: Vec<String>,
    /// What the trees predict.
    pub target: String,
    /// Method and library.
    pub method: String,
    /// First and last departure (RFC 3339) of the fitted trips.
    pub train_window: [String; 2],
    /// Of the calibration trips (the intervals).
    pub calibration_window: [String; 2],
    /// Of the test trips, when any were held out.
    pub test_window: Option<[String; 2]>,
    pub figures: Vec<Figure>,
}

/// A loaded model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CorrectionModel {
    pub meta: ModelMeta,
    pub forest: Forest,
    pub interval: Interval,
}

/// A corrected answer.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Corrected {
    pub eta_s: f64,
    /// The uncorrected answer of the tier.
    pub graph_s: f64,
    pub low_s: f64,
    pub high_s: f64,
    pub model_version: u64,
}

/// Corrections never move an answer by more than this factor either way:
/// a guard against a model extrapolating far outside its trips.
pub const MAX_FACTOR: f64 = 20.0;

impl CorrectionModel {
    /// Checks what a loaded model must satisfy before it may serve.
    pub fn check(&self) -> Result<(), String> {
        if self.meta.features.len() != N
            || self.meta.features.iter().zip(NAMES).any(|(a, b)| a != b)
        {
            return Err(format!(
                "the model expects features {:?}; this hodos computes {:?}",
                self.meta.features, NAMES
            ));
        }
        self.forest.check()?;
        self.interval.check()
    }

    /// Corrects an answer of `graph_s` seconds with features `x`.
    #[inline]
    pub fn apply(&self, graph_s: f64, x: &Features) -> Corrected {
        let lim = MAX_FACTOR.ln();
        let log_ratio = self.forest.predict(x).clamp(-lim, lim);
        let eta_s = graph_s * log_ratio.exp();
        let [lo, hi] = self.interval.offsets[self.interval.band(graph_s)];
        Corrected {
            eta_s,
            graph_s,
            low_s: eta_s * lo.exp(),
            high_s: eta_s * hi.exp(),
            model_version: self.meta.model_version,
        }
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;

    /// One stump on feature 0 (`graph_s < 100` → +ln 2, else 0; NaN → −ln 2)
    /// and one interval band split at 100 s.
    pub fn stump_model() -> CorrectionModel {
        let ln2 = std::f64::consts::LN_2;
        let leaf = |v: f64| Node {
            threshold: 0.0,
            value: v as f32,
            feature: 0,
            leaf: true,
            left: 0,
            right: 0,
            missing: 0,
        };
        CorrectionModel {
            meta: ModelMeta {
                model_version: 7,
                trained_at: "2026-12-04T00:00:00Z".into(),
                features: NAMES.iter().map(|s| s.to_string()).collect(),
                target: "ln(actual_s / graph_s)".into(),
                method: "test stump".into(),
                train_window: ["a".into(), "b".into()],
                calibration_window: ["b".into(), "c".into()],
                test_window: None,
                figures: vec![],
            },
            forest: Forest {
                base: 0.0,
                roots: vec![0],
                nodes: vec![
                    Node {
                        threshold: 100.0,
                        value: 0.0,
                        feature: 0,
                        leaf: false,
                        left: 1,
                        right: 2,
                        missing: 3,
                    },
                    leaf(ln2),
                    leaf(0.0),
                    leaf(-ln2),
                ],
            },
            interval: Interval {
                edges: vec![100.0],
                counts: vec![10, 10],
                levels: [0.1, 0.9],
                offsets: vec![[-0.5, 0.5], [-0.1, 0.2]],
            },
        }
    }

    #[test]
    fn apply_walks_the_tree_and_its_band() {
        let m = stump_model();
        m.check().unwrap();
        let mut x = [0.0f32; N];
        x[0] = 50.0;
        let c = m.apply(50.0, &x);
        assert!((c.eta_s - 100.0).abs() < 1e-4, "{c:?}");
        assert!((c.low_s - 100.0 * (-0.5f64).exp()).abs() < 1e-3);
        assert!((c.high_s - 100.0 * 0.5f64.exp()).abs() < 1e-3);
        assert_eq!(c.model_version, 7);
        x[0] = 100.0; // not < 100: right
        let c = m.apply(100.0, &x);
        assert!((c.eta_s - 100.0).abs() < 1e-9);
        assert!((c.high_s - 100.0 * 0.2f64.exp()).abs() < 1e-9);
        x[0] = f32::NAN;
        assert!((m.apply(100.0, &x).eta_s - 50.0).abs() < 1e-4);
    }

    #[test]
    fn a_child_before_its_node_is_refused() {
        let mut m = stump_model();
        m.forest.nodes[0].right = 0;
        assert!(m.check().unwrap_err().contains("points at node 0"));
        let mut m = stump_model();
        m.meta.features[3] = "other".into();
        assert!(m.check().unwrap_err().contains("expects features"));
        let mut m = stump_model();
        m.interval.offsets[0] = [0.5, -0.5];
        assert!(m.check().is_err());
    }
}
