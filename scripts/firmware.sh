#!/usr/bin/env bash
# Builds the bare-metal firmware examples (examples/firmware) for Cortex-M4F (Scalar float, QEMU
# board mps2-an386) and Cortex-M7 (Scalar double, mps2-an500), prints their sizes, and runs every
# image under qemu-system-arm through ctest (self-checks, injected failure, fault and heap-gate
# demonstrations, size probes). Ends with the size table of the per-estimator probes (M4F).
# Usage: ./scripts/firmware.sh [m4|m7]   (from any directory; default: both)
#   build trees: build-firmware-m4/, build-firmware-m7/
# ROWFOLD_FW_JOBS (default 1) sets the build parallelism. Exit status non-zero if anything failed.
set -euo pipefail

cd "$(dirname "${BASH_SOURCE[0]}")/.."
# shellcheck source=scripts/common.sh
source scripts/common.sh

jobs="${ROWFOLD_FW_JOBS:-1}"

case "${1:-all}" in
  all) targets=(m4 m7) ;;
  m4 | m7) targets=("$1") ;;
  *)
    echo "usage: $0 [m4|m7]" >&2
    exit 2
    ;;
esac

rowfold_need_packages cmake "$(rowfold_build_tool)" libeigen3-dev gcc-arm-none-eabi libnewlib-arm-none-eabi \
  libstdc++-arm-none-eabi-newlib qemu-system-arm

# size_table DIR: markdown table of the size probes in DIR (text/data/bss from arm-none-eabi-size,
# the rest from the PROBE line each image prints when run).
size_table() {
  local dir=$1 elf line base_text=""
  [ -f "$dir/size_baseline.elf" ] || return 0
  echo
  echo "Size probes (Cortex-M4F, float, -O2, newlib-nano; bytes; 'over baseline' = text minus the"
  echo "estimator-free image; scratch = query workspace inside the object; minimum = smallest state):"
  echo
  echo "| estimator | K | text | data | bss | text over baseline | sizeof | of which scratch | minimum state | stack |"
  echo "|---|---|---|---|---|---|---|---|---|---|"
  for elf in "$dir"/size_baseline.elf "$dir"/size_*_k4.elf "$dir"/size_*_k8.elf "$dir"/size_*_nosummary.elf; do
    [ -f "$elf" ] || continue
    line=$(timeout 60 "$qemu" -M mps2-an386 -cpu cortex-m4 -nographic -monitor none -serial none \
      -semihosting-config enable=on,target=native -kernel "$elf" 2>&1 | grep '^PROBE' || true)
    read -r text data bss _ < <(arm-none-eabi-size "$elf" | tail -n 1)
    [ -n "$base_text" ] || base_text=$text
    awk -v line="$line" -v text="$text" -v data="$data" -v bss="$bss" -v base="$base_text" 'BEGIN {
      n = split(line, f, " ")
      for (i = 2; i <= n; ++i) { split(f[i], kv, "="); v[kv[1]] = kv[2] }
      if (v["name"] == "baseline") k = "-"; else k = v["K"]
      printf "| %s | %s | %d | %d | %d | %d | %d | %d | %d | %d |\n", v["name"], k, text, data, bss,
             text - base, v["sizeof"], v["workspace"], v["minimum"], v["stack"]
    }'
  done
}

qemu=$(command -v qemu-system-arm)

# firmware_one TARGET: configure, build, print sizes, run ctest in build-firmware-TARGET/.
firmware_one() {
  local target=$1 dir=build-firmware-$1 generator=() t0 t1 t2 t3
  if [ ! -f "$dir/CMakeCache.txt" ] && [ "$(rowfold_build_tool)" = ninja-build ]; then
    generator=(-G Ninja)
  fi
  t0=$(date +%s)
  cmake -S examples/firmware -B "$dir" "${generator[@]}" \
    --toolchain "$PWD/cmake/toolchains/cortex-$target.cmake" || return 1
  t1=$(date +%s)
  cmake --build "$dir" -j"$jobs" || return 1
  t2=$(date +%s)
  echo "rowfold firmware $target: sizes (bytes)"
  (cd "$dir" && arm-none-eabi-size ./*.elf)
  ctest --test-dir "$dir" --output-on-failure --no-tests=error -j1 || {
    echo "rowfold firmware $target: ctest failed (build $((t2 - t1)) s)"
    return 1
  }
  t3=$(date +%s)
  if [ "$target" = m4 ]; then
    size_table "$dir"
  fi
  echo "rowfold firmware $target: configure $((t1 - t0)) s, build $((t2 - t1)) s, tests $((t3 - t2)) s"
}

failed=()
for target in "${targets[@]}"; do
  echo "rowfold firmware: === cortex-$target ==="
  if ! firmware_one "$target"; then
    failed+=("$target")
  fi
done

if [ "${#failed[@]}" -ne 0 ]; then
  echo "rowfold firmware: FAILED: ${failed[*]}" >&2
  exit 1
fi
echo "rowfold firmware: all passed (${targets[*]})"
