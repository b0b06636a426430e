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

/// Why a model may not serve: a structural fault of its trees or its
/// interval, or features other than the ones this hodos computes.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ModelCheckError {
    #[error("the base score is not finite")]
    BaseNotFinite,
    #[error("tree {tree} has no nodes or lies outside the node array")]
    TreeOutside { tree: usize },
    #[error("tree {tree}: leaf {node} is not finite")]
    LeafNotFinite { tree: usize, node: usize },
    #[error("tree {tree}: node {node} splits on unknown feature {feature}")]
    UnknownFeature {
        tree: usize,
        node: usize,
        feature: u16,
    },
    #[error("tree {tree}: node {node} has a NaN threshold")]
    NanThreshold { tree: usize, node: usize },
    #[error("tree {tree}: node {node} points at node {child}, outside its subtree order")]
    ChildOutOfOrder {
        tree: usize,
        node: usize,
        child: usize,
    },
    #[error("interval bands and offsets disagree in number")]
    BandCount,
    #[error("interval band edges are not ascending")]
    BandEdges,
    #[error("interval levels {lo}..{hi} are not 0 < low < high < 1")]
    Levels { lo: f64, hi: f64 },
    #[error("interval offsets are not finite and ordered")]
    Offsets,
    #[error("the model expects features {found:?}; this hodos computes {NAMES:?}")]
    Features { found: Vec<String> },
}

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
    pub fn check(&self) -> Result<(), ModelCheckError> {
        if !self.base.is_finite() {
            return Err(ModelCheckError::BaseNotFinite);
        }
        let total = self.nodes.len();
        for (t, &root) in self.roots.iter().enumerate() {
            let start = root as usize;
            let end = self.roots.get(t + 1).map_or(total, |&r| r as usize);
            if start >= end || end > total {
                return Err(ModelCheckError::TreeOutside { tree: t });
            }
            for i in start..end {
                let n = &self.nodes[i];
                if n.leaf {
                    if !n.value.is_finite() {
                        return Err(ModelCheckError::LeafNotFinite { tree: t, node: i });
                    }
                    continue;
                }
                if usize::from(n.feature) >= N {
                    return Err(ModelCheckError::UnknownFeature {
                        tree: t,
                        node: i,
                        feature: n.feature,
                    });
                }
                if n.threshold.is_nan() {
                    return Err(ModelCheckError::NanThreshold { tree: t, node: i });
                }
                for c in [n.left, n.right, n.missing] {
                    let c = c as usize;
                    if c <= i || c >= end {
                        return Err(ModelCheckError::ChildOutOfOrder {
                            tree: t,
                            node: i,
                            child: c,
                        });
                    }
                }
            }
        }
        Ok(())
    }
}

/// The trees laid out for speed: each tree as a complete binary tree of
/// the forest's depth `D` (`2^D − 1` splits in breadth-first order, `2^D`
/// leaves; a leaf above depth `D` is copied to every leaf below it), so a
/// walk is `D` steps of index arithmetic with no branch on the outcome
/// (`i = 2i + 1 + right`). Thresholds are `f32`: the smallest `f32` not
/// below the `f64` threshold, so `x < t32` exactly when `x < t` for every
/// `f32` feature value. Predicts what [`Forest::predict`] predicts.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Compiled {
    depth: u32,
    /// Per split: threshold, feature, whether a missing value goes right.
    splits: Vec<(f32, u16, bool)>,
    leaves: Vec<f32>,
}

/// Deeper forests are walked node by node instead (`2^D` leaves per tree).
const MAX_COMPILED_DEPTH: u32 = 10;

/// The smallest `f32` that is not below `t`.
fn f32_at_or_above(t: f64) -> f32 {
    let f = t as f32;
    if f64::from(f) >= t || !f.is_finite() {
        return f;
    }
    // Next representable f32 upwards.
    let b = f.to_bits();
    if f == 0.0 {
        f32::from_bits(1)
    } else if f > 0.0 {
        f32::from_bits(b + 1)
    } else {
        f32::from_bits(b - 1)
    }
}

impl Compiled {
    /// The layout of `f`, or `None` when a tree is deeper than
    /// [`MAX_COMPILED_DEPTH`] or has a missing branch of its own.
    pub fn of(f: &Forest) -> Option<Compiled> {
        let total = f.nodes.len();
        let mut depth = 0u32;
        for (t, &root) in f.roots.iter().enumerate() {
            let end = f.roots.get(t + 1).map_or(total, |&r| r as usize);
            let d = Self::tree_depth(&f.nodes[..end], root as usize)?;
            depth = depth.max(d);
        }
        if depth > MAX_COMPILED_DEPTH {
            return None;
        }
        let n_splits = (1usize << depth) - 1;
        let mut c = Compiled {
            depth,
            splits: vec![(f32::INFINITY, 0, false); n_splits * f.roots.len()],
            leaves: vec![0.0; (n_splits + 1) * f.roots.len()],
        };
        for (t, &root) in f.roots.iter().enumerate() {
            c.fill(f, t, root as usize, 0, 0);
        }
        Some(c)
    }

    fn tree_depth(nodes: &[Node], i: usize) -> Option<u32> {
        let n = nodes.get(i)?;
        if n.leaf {
            return Some(0);
        }
        if n.missing != n.left && n.missing != n.right {
            return None;
        }
        let l = Self::tree_depth(nodes, n.left as usize)?;
        let r = Self::tree_depth(nodes, n.right as usize)?;
        Some(1 + l.max(r))
    }

    /// Writes node `i` of tree `t` at breadth-first position `pos` of
    /// level `level`.
    fn fill(&mut self, f: &Forest, t: usize, i: usize, level: u32, pos: usize) {
        let n = &f.nodes[i];
        let d = self.depth;
        let n_splits = (1usize << d) - 1;
        if level == d || n.leaf {
            // Every leaf under `pos` at depth d carries the value.
            let span = 1usize << (d - level);
            let first = ((pos + 1) << (d - level)) - 1 - n_splits;
            let leaves = &mut self.leaves[t * (n_splits + 1)..(t + 1) * (n_splits + 1)];
            leaves[first..first + span].fill(n.value);
            return;
        }
        self.splits[t * n_splits + pos] = (
            f32_at_or_above(n.threshold),
            n.feature,
            n.missing == n.right,
        );
        self.fill(f, t, n.left as usize, level + 1, 2 * pos + 1);
        self.fill(f, t, n.right as usize, level + 1, 2 * pos + 2);
    }

    /// The sum of the trees' leaves for `x` (without the base score).
    /// Eight trees are walked side by side: each step of a walk waits for
    /// the load before it, and eight independent walks keep the core busy
    /// meanwhile (about 3× faster than one at a time: benches/correction.rs).
    #[inline]
    pub fn sum(&self, x: &Features) -> f64 {
        let d = self.depth;
        let ns = (1usize << d) - 1;
        let nl = ns + 1;
        let trees = self.leaves.len() / nl;
        let step = |base: usize, i: usize| -> usize {
            let (t, feat, missing_right) = self.splits[base + i];
            let v = x[usize::from(feat)];
            let right = (v >= t) | (v.is_nan() & missing_right);
            2 * i + 1 + usize::from(right)
        };
        let mut s = 0.0f64;
        let mut t = 0;
        const W: usize = 8;
        while t + W <= trees {
            let mut at = [0usize; W];
            for _ in 0..d {
                for (k, i) in at.iter_mut().enumerate() {
                    *i = step((t + k) * ns, *i);
                }
            }
            for (k, i) in at.iter().enumerate() {
                s += f64::from(self.leaves[(t + k) * nl + i - ns]);
            }
            t += W;
        }
        while t < trees {
            let mut a = 0usize;
            for _ in 0..d {
                a = step(t * ns, a);
            }
            s += f64::from(self.leaves[t * nl + a - ns]);
            t += 1;
        }
        s
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

    pub fn check(&self) -> Result<(), ModelCheckError> {
        if self.offsets.len() != self.edges.len() + 1 || self.counts.len() != self.offsets.len() {
            return Err(ModelCheckError::BandCount);
        }
        if !self.edges.windows(2).all(|w| w[0] < w[1]) || self.edges.iter().any(|e| !e.is_finite())
        {
            return Err(ModelCheckError::BandEdges);
        }
        let [lo, hi] = self.levels;
        if !(0.0 < lo && lo < hi && hi < 1.0) {
            return Err(ModelCheckError::Levels { lo, hi });
        }
        if self
            .offsets
            .iter()
            .any(|[a, b]| !a.is_finite() || !b.is_finite() || a > b)
        {
            return Err(ModelCheckError::Offsets);
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
    /// The trees laid out for speed, built on first use (not in the file).
    #[serde(skip)]
    pub compiled: std::sync::OnceLock<Option<Compiled>>,
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
    pub fn check(&self) -> Result<(), ModelCheckError> {
        if self.meta.features.len() != N
            || self.meta.features.iter().zip(NAMES).any(|(a, b)| a != b)
        {
            return Err(ModelCheckError::Features {
                found: self.meta.features.clone(),
            });
        }
        self.forest.check()?;
        self.interval.check()
    }

    /// Corrects an answer of `graph_s` seconds with features `x`.
    /// Lays the trees out for speed now (done before a model serves, so no
    /// answer pays for it; [`Self::apply`] does it itself otherwise).
    pub fn compile(&self) -> &Option<Compiled> {
        self.compiled.get_or_init(|| Compiled::of(&self.forest))
    }

    #[inline]
    pub fn apply(&self, graph_s: f64, x: &Features) -> Corrected {
        let lim = MAX_FACTOR.ln();
        let raw = match self.compile() {
            Some(c) => self.forest.base + c.sum(x),
            None => self.forest.predict(x),
        };
        let log_ratio = raw.clamp(-lim, lim);
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
            compiled: Default::default(),
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

    /// The smallest f32 not below a threshold keeps `x < t` exact.
    #[test]
    fn f32_thresholds_keep_the_comparison() {
        for t in [
            0.1f64,
            -0.1,
            1.0 / 3.0,
            1e-40,
            -1e-40,
            0.0,
            123456.789,
            -7.5,
        ] {
            let t32 = f32_at_or_above(t);
            assert!(f64::from(t32) >= t);
            let below = f32::from_bits(t32.to_bits().wrapping_sub(if t32 > 0.0 { 1 } else { 0 }));
            for v in [t32, below, t as f32, -t32, 0.0, f32::MIN_POSITIVE] {
                assert_eq!(v < t32, f64::from(v) < t, "v {v} t {t} t32 {t32}");
            }
        }
    }

    #[test]
    fn compiled_layout_predicts_what_the_walk_predicts() {
        let mut m = stump_model();
        // A missing branch of its own is walked, not compiled.
        assert!(Compiled::of(&m.forest).is_none());
        m.forest.nodes[0].missing = 1;
        let c = Compiled::of(&m.forest).unwrap();
        for v in [0.0f32, 50.0, 99.99, 100.0, 1e6, f32::NAN] {
            let mut x = [0.0f32; N];
            x[0] = v;
            assert_eq!(m.forest.base + c.sum(&x), m.forest.predict(&x), "x0 = {v}");
        }
    }

    #[test]
    fn a_child_before_its_node_is_refused() {
        let mut m = stump_model();
        m.forest.nodes[0].right = 0;
        assert!(m
            .check()
            .unwrap_err()
            .to_string()
            .contains("points at node 0"));
        let mut m = stump_model();
        m.meta.features[3] = "other".into();
        assert!(m
            .check()
            .unwrap_err()
            .to_string()
            .contains("expects features"));
        let mut m = stump_model();
        m.interval.offsets[0] = [0.5, -0.5];
        assert!(m.check().is_err());
    }
}
