#!/usr/bin/env bash
# CI smoke of the load generator: builds it, then runs `hodos-load smoke`,
# which builds a small synthetic city, serves it in this process on
# 127.0.0.1 port 0 (nothing to clean up afterwards), sends a few seconds of
# low-rate traffic of every kind plus one admin round trip, and exits
# non-zero only if a request went unanswered or the tool itself failed.
# Asserts nothing about speed.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release -p hodos-loadtest
exec target/release/hodos-load smoke --per-second 50 --seconds 3 --out target/hodos-load/smoke "$@"
