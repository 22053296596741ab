#!/usr/bin/env bash
# Instructions per sample of the per-sample update, or per row of one addRows call (what =
# givensrows | normalrows), from bench/icount.cpp under valgrind's cachegrind:
# a load-independent complement to the Google Benchmark timings, for comparing two versions of a
# hot path on a shared machine. Portable -O3 build. Each figure is
# (I refs at 60000 samples - I refs at 20000 samples) / 40000, so start-up and the exact start
# cancel out.
# Usage: ./scripts/icount.sh [what K scalar guard]...   (default: a small table, see below)
# ROWFOLD_ICOUNT_INCLUDE=/other/checkout/include compares another version of the headers.
set -euo pipefail

cd "$(dirname "${BASH_SOURCE[0]}")/.."
# shellcheck source=scripts/common.sh
source scripts/common.sh
rowfold_need_packages g++ libeigen3-dev valgrind bc

inc="${ROWFOLD_ICOUNT_INCLUDE:-$PWD/include}"
mkdir -p build-icount
bin=build-icount/rowfold_icount
g++ -std=c++17 -O3 -DNDEBUG -I "$inc" -I bench -isystem /usr/include/eigen3 bench/icount.cpp -o "$bin"

refs() {
  valgrind --tool=cachegrind --cache-sim=no --cachegrind-out-file=/dev/null "$bin" "$@" 2>&1 >/dev/null |
    awk '/I *refs/ {gsub(",", "", $NF); print $NF}'
}

if [ "$#" -eq 0 ]; then
  set -- forgetting 2 double 1  forgetting 8 double 1  forgetting 2 float 1  forgetting 8 float 1 \
         forgetting 2 double 0  forgetting dyn8 double 1  plainrls 2 double 0  plainrls 8 double 0 \
         normal 2 double 0  normal 8 double 0  rank1 8 double 0  givens 8 double 1  plaingivens 8 double 0
fi
echo "| what | K | scalar | guard | instructions / sample |"
echo "|---|---|---|---|---|"
while [ "$#" -ge 4 ]; do
  a=$(refs "$1" "$2" "$3" "$4" 20000)
  b=$(refs "$1" "$2" "$3" "$4" 60000)
  echo "| $1 | $2 | $3 | $4 | $(echo "scale=1; ($b - $a) / 40000" | bc) |"
  shift 4
done
