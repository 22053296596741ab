#!/usr/bin/env bash
# Static analysis of the public headers: clang-tidy (.clang-tidy) on a translation unit that
# instantiates every estimator, and cppcheck. Exits non-zero on any finding.
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."
# shellcheck source=scripts/common.sh
source scripts/common.sh
rowfold_need_packages clang-tidy cppcheck libeigen3-dev
tu=tests/analysis/instantiate_all.cpp
echo "== clang-tidy"
clang-tidy --quiet "$tu" -- -std=c++17 -Iinclude -isystem /usr/include/eigen3
echo "== cppcheck"
cppcheck --std=c++17 --language=c++ --enable=warning,performance,portability --inline-suppr \
  --error-exitcode=1 -Iinclude --suppress=missingIncludeSystem --quiet \
  include/rowfold/*.hpp include/rowfold/detail/*.hpp
echo "static analysis: clean"
