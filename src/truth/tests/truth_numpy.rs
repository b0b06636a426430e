//! The accuracy metrics of `truth::measure` against numpy on a fixed
//! sample: this test writes 1,001 trips (deterministic SplitMix64 draws:
//! actual durations 60..3,600 s, estimates off by a log-normal-like
//! factor, an interval on two trips in three) with hodos's quantiles and
//! summary, then runs `tests/py/check_measure.py`, which recomputes every
//! figure with numpy (np.quantile default "linear" method = Hyndman & Fan
//! type 7; np.mean, np.median, np.log1p) and fails on any difference
//! beyond 1e-9 relative.
//!
//! Without python3 or numpy it prints SKIPPED, unless
//! `HODOS_REQUIRE_NUMPY=1` (set by `.ci/run`, which installs numpy), when
//! it fails instead.

use hodos_testkit::SplitMix64;
use hodos_truth::measure::{quantile, summarize, Pair};
use std::process::Command;

/// Set to `1` by `.ci/run`: a missing numpy fails instead of skipping.
const NUMPY: &str = "HODOS_REQUIRE_NUMPY";

#[test]
fn metrics_agree_with_numpy() {
    let mut rng = SplitMix64::new(20_261_203);
    let mut u = || rng.next_u64() as f64 / u64::MAX as f64;
    let pairs: Vec<Pair> = (0..1001)
        .map(|i| {
            let actual = 60.0 + 3540.0 * u();
            // Sum of three uniforms: a bell-shaped log error around −0.4.
            let log_err = (u() + u() + u() - 1.5) * 0.8 - 0.4;
            let est = (actual * log_err.exp()).round();
            let interval = (i % 3 != 0).then(|| (est * 0.75, est * (1.1 + u())));
            Pair {
                estimate_s: est,
                actual_s: actual,
                interval_s: interval,
            }
        })
        .collect();
    let ape: Vec<f64> = pairs
        .iter()
        .map(|p| (p.estimate_s - p.actual_s).abs() / p.actual_s)
        .collect();
    let ratio: Vec<f64> = pairs.iter().map(|p| p.estimate_s / p.actual_s).collect();
    let qs = [0.0, 0.1, 0.25, 0.333, 0.5, 0.9, 0.95, 0.99, 1.0];
    let summary = summarize(&pairs).unwrap();
    let doc = serde_json::json!({
        "estimate_s": pairs.iter().map(|p| p.estimate_s).collect::<Vec<_>>(),
        "actual_s": pairs.iter().map(|p| p.actual_s).collect::<Vec<_>>(),
        "low_s": pairs.iter().map(|p| p.interval_s.map(|i| i.0)).collect::<Vec<_>>(),
        "high_s": pairs.iter().map(|p| p.interval_s.map(|i| i.1)).collect::<Vec<_>>(),
        "ape_quantiles": qs.iter().map(|&q| (q, quantile(&ape, q))).collect::<Vec<_>>(),
        "ratio_quantiles": qs.iter().map(|&q| (q, quantile(&ratio, q))).collect::<Vec<_>>(),
        "summary": summary,
    });
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("sample.json");
    std::fs::write(&path, serde_json::to_vec(&doc).unwrap()).unwrap();
    let script = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../tests/py/check_measure.py"
    );
    let out = match Command::new("python3").arg(script).arg(&path).output() {
        Ok(o) => o,
        Err(e) => {
            let why = format!("python3 not runnable: {e}");
            return hodos_testkit::skipped_unless_required(NUMPY, why);
        }
    };
    let text = String::from_utf8_lossy(&out.stdout);
    let err = String::from_utf8_lossy(&out.stderr);
    if out.status.code() == Some(3) {
        let why = format!("numpy not installed ({})", err.trim());
        return hodos_testkit::skipped_unless_required(NUMPY, why);
    }
    eprintln!("{text}{err}");
    assert!(out.status.success(), "numpy disagrees:\n{text}{err}");
    assert!(text.contains("figures agree with numpy"), "{text}");
}
