#!/usr/bin/env bash
# Builds the Google Benchmark suite (bench/) and runs its smoke test: a handful of benchmarks,
# briefly, proving the bench builds and runs (built with ROWFOLD_BENCH_SMOKE: K = 8 only).
# Full measurements are manual (bench/README.md).
# Usage: ./scripts/bench.sh   (from any directory; build tree build-bench-smoke/)
# ROWFOLD_BENCH_JOBS (default 2) sets the build parallelism.
set -euo pipefail

cd "$(dirname "${BASH_SOURCE[0]}")/.."
# shellcheck source=scripts/common.sh
source scripts/common.sh

rowfold_need_packages cmake g++ "$(rowfold_build_tool)" libeigen3-dev doctest-dev libbenchmark-dev liblapacke-dev \
  liblapack-dev
cmake -S . -B build-bench-smoke -DCMAKE_BUILD_TYPE=Release -DROWFOLD_BUILD_BENCH=ON -DROWFOLD_BUILD_TESTS=ON \
  -DROWFOLD_BUILD_EXAMPLES=OFF -DROWFOLD_BENCH_SMOKE=ON
cmake --build build-bench-smoke -j"${ROWFOLD_BENCH_JOBS:-2}" --target rowfold_bench
ctest --test-dir build-bench-smoke --output-on-failure -R '^bench_smoke$'
