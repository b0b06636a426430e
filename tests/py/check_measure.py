#!/usr/bin/env python3
"""Checks hodos's accuracy metrics against numpy on a fixed sample.

Reads the JSON written by src/truth/tests/truth_numpy.rs: the sample (estimates,
actual durations, interval ends) and hodos's figures for it (quantiles of
the absolute percentage error at several levels, and the summary), and
recomputes each with numpy: np.quantile's default method ("linear",
Hyndman & Fan type 7), np.mean, np.median, np.log1p. Exits 0 when every
figure agrees to 1e-9 relative, 1 on any difference, 3 when numpy is
missing (the Rust side prints SKIPPED then).
"""
import json
import sys

try:
    import numpy as np
except ImportError:
    print("numpy not installed", file=sys.stderr)
    sys.exit(3)


def main(path):
    with open(path) as f:
        d = json.load(f)
    e = np.array(d["estimate_s"], dtype=float)
    a = np.array(d["actual_s"], dtype=float)
    has = np.array([x is not None for x in d["low_s"]])
    lo = np.array([x if x is not None else np.nan for x in d["low_s"]], dtype=float)
    hi = np.array([x if x is not None else np.nan for x in d["high_s"]], dtype=float)
    ape = np.abs(e - a) / a
    want = {}
    for q, v in d["ape_quantiles"]:
        want[f"ape quantile {q}"] = (v, float(np.quantile(ape, q)))
    for q, v in d["ratio_quantiles"]:
        want[f"ratio quantile {q}"] = (v, float(np.quantile(e / a, q)))
    s = d["summary"]
    covered = (lo[has] <= a[has]) & (a[has] <= hi[has])
    want.update(
        {
            "n": (s["n"], float(len(a))),
            "mape": (s["mape"], float(np.mean(ape) * 100)),
            "median_ape": (s["median_ape"], float(np.median(ape) * 100)),
            "p90_ape": (s["p90_ape"], float(np.quantile(ape, 0.9) * 100)),
            "median_ratio": (s["median_ratio"], float(np.median(e / a))),
            "rmsle": (s["rmsle"], float(np.sqrt(np.mean((np.log1p(e) - np.log1p(a)) ** 2)))),
            "mae_s": (s["mae_s"], float(np.mean(np.abs(e - a)))),
            "within_10": (s["within_10"], float(np.mean(ape <= 0.10))),
            "within_20": (s["within_20"], float(np.mean(ape <= 0.20))),
            "with_interval": (s["with_interval"], float(has.sum())),
            "coverage": (s["coverage"], float(np.mean(covered))),
        }
    )
    bad = 0
    for name, (ours, theirs) in want.items():
        ok = abs(ours - theirs) <= 1e-9 * max(1.0, abs(theirs))
        if not ok:
            bad += 1
        print(f"{'ok ' if ok else 'BAD'} {name}: hodos {ours!r} numpy {theirs!r}")
    print(f"{len(want) - bad} of {len(want)} figures agree with numpy {np.__version__}")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1]))
