#!/usr/bin/env bash
# Builds everything and runs the whole test suite (including the demo smoke test).
# Usage: ./scripts/test.sh   (from any directory)
set -euo pipefail

cd "$(dirname "${BASH_SOURCE[0]}")/.."
# shellcheck source=scripts/common.sh
source scripts/common.sh

rowfold_need_packages cmake g++ clang pkg-config "$(rowfold_build_tool)" libeigen3-dev doctest-dev liblapacke-dev liblapack-dev \
  libcli11-dev nlohmann-json3-dev openmpi-bin libopenmpi-dev
rowfold_configure
cmake --build build -j2
ctest --test-dir build --output-on-failure -j2
