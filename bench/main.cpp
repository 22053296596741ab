// rowfold_bench: measures the machine limits first, then runs the registered benchmarks.
#include <cstdio>
#include <string>

#include "common.hpp"

#ifndef ROWFOLD_BENCH_FLAGS
#define ROWFOLD_BENCH_FLAGS "unknown"
#endif

int main(int argc, char** argv) {
  benchmark::Initialize(&argc, argv);
  if (benchmark::ReportUnrecognizedArguments(argc, argv)) return 1;
  rowfold_bench::measureLimits();
  const rowfold_bench::Limits& l = rowfold_bench::limits();
  char line[256];
  std::snprintf(line, sizeof line, "%.1f GFLOP/s double, %.1f GFLOP/s float (%s, one core)", l.peakDouble * 1e-9,
                l.peakFloat * 1e-9, l.isa);
  benchmark::AddCustomContext("rowfold_fma_peak", line);
  std::snprintf(line, sizeof line, "%.2f GB/s (one core)", l.readBandwidth * 1e-9);
  benchmark::AddCustomContext("rowfold_dram_read", line);
  benchmark::AddCustomContext("rowfold_flags", ROWFOLD_BENCH_FLAGS);
  benchmark::AddCustomContext("rowfold_compiler", __VERSION__);
  benchmark::RunSpecifiedBenchmarks();
  benchmark::Shutdown();
  return 0;
}
