#!/usr/bin/env bash
# Builds and runs the soft-sensor demo (invented plant, simulated data).
# Usage: ./scripts/demo.sh   (from any directory)
set -euo pipefail

cd "$(dirname "${BASH_SOURCE[0]}")/.."
# shellcheck source=scripts/common.sh
source scripts/common.sh

rowfold_need_packages cmake g++ "$(rowfold_build_tool)" libeigen3-dev doctest-dev
rowfold_configure
cmake --build build --target soft_sensor_demo -j2
./build/examples/soft_sensor_demo
