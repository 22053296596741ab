// Shared pieces of the rowfold benchmarks: invented data, measured machine limits, counters.
#pragma once

#include <benchmark/benchmark.h>

#include <Eigen/Core>
#include <cstdint>
#include <cstdlib>
#include <map>
#include <random>
#include <string>
#include <type_traits>
#include <utility>

namespace rowfold_bench {

// ---- Machine limits (measured once in main, before any benchmark runs; see limits.cpp) ----
struct Limits {
  double peakDouble = 0;      // flop/s of one core, register-resident FMA chains, double
  double peakFloat = 0;       // same in float
  double readBandwidth = 0;   // bytes/s, one core streaming a buffer much larger than L3
  const char* isa = "";       // instruction set of the peak kernel
};
Limits& limits();
void measureLimits();
// Reads a buffer much larger than the last-level cache, so the next timed pass starts cold.
void evictCaches();

template <typename S>
double peakFlops() { return std::is_same<S, float>::value ? limits().peakFloat : limits().peakDouble; }

template <typename S>
const char* scalarName() { return std::is_same<S, float>::value ? "float" : "double"; }

// ---- Flop models: useful flops per row folded, for the flop-bound fraction ----
// Symmetric rank-1 update of an n x n triangle: n(n+1)/2 multiply-adds.
inline double rank1Flops(int n) { return double(n) * (n + 1); }
// Givens row fold into an n-column triangle: 6 flops per rotated pair (sqrt/div not counted).
inline double givensFlops(int n) { return 3.0 * n * (n - 1); }
// P-form RLS with n parameters: symmetric P phi (2n^2), rank-1 of the triangle (n(n+1)), dots.
inline double rlsFlops(int n) { return 3.0 * n * n + 7.0 * n; }
// Householder QR of m x p plus Q'y, per row: ~2p^2 + 4p.
inline double householderFlopsPerRow(int p) { return 2.0 * p * p + 4.0 * p; }

// rows/s plus the fractions of the flop bound and of the bandwidth bound, where the bandwidth
// bound reads K+1 scalars per row once from DRAM.
template <typename S>
void setRowCounters(benchmark::State& st, double rows, double flopsPerRow, int k) {
  using C = benchmark::Counter;
  st.counters["rows/s"] = C(rows, C::kIsRate);
  if (peakFlops<S>() > 0) st.counters["flop_frac"] = C(rows * flopsPerRow / peakFlops<S>(), C::kIsRate);
  if (limits().readBandwidth > 0)
    st.counters["bw_frac"] = C(rows * double(k + 1) * sizeof(S) / limits().readBandwidth, C::kIsRate);
}

// ---- Invented data: x_j = 1 + j/K + N(0,1), y = 2 + sum_j x_j/(1+j) + 0.1 N(0,1) ----
template <typename S, int Cols = Eigen::Dynamic>
struct Samples {
  Eigen::Matrix<S, Eigen::Dynamic, Cols, (Cols == 1 ? Eigen::ColMajor : Eigen::RowMajor)> X;
  Eigen::Matrix<S, Eigen::Dynamic, 1> y;
  Samples(Eigen::Index n, int k, std::uint64_t seed = 7) : X(n, k), y(n) {
    std::mt19937_64 gen(seed + 1000u * unsigned(k));
    std::normal_distribution<double> nd;
    for (Eigen::Index i = 0; i < n; ++i) {
      double yi = 2.0 + 0.1 * nd(gen);
      for (int j = 0; j < k; ++j) {
        const double x = 1.0 + double(j) / k + nd(gen);
        X(i, j) = S(x);
        yi += x / (1.0 + j);
      }
      y(i) = S(yi);
    }
  }
  const S* row(Eigen::Index i) const { return X.data() + i * X.cols(); }
  Eigen::Index rows() const { return X.rows(); }
};

// A small ring of samples (stays in L1/L2) that the per-sample benchmarks cycle through.
constexpr Eigen::Index kRing = 1024;
template <typename S>
const Samples<S>& ring(int k) {
  static std::map<int, Samples<S>> cache;
  auto it = cache.find(k);
  if (it == cache.end()) it = cache.emplace(k, Samples<S>(kRing, k)).first;
  return it->second;
}

// ---- Registration helpers ----
template <class T>
struct Tag {
  using type = T;
};
#ifdef ROWFOLD_BENCH_SMOKE  // the CI smoke build: one K (8, where the Givens goal starts)
using AllKs = std::integer_sequence<int, 8>;
using SmallKs = std::integer_sequence<int, 8>;
#else
using AllKs = std::integer_sequence<int, 2, 4, 8, 16, 32, 64>;
using SmallKs = std::integer_sequence<int, 2, 4, 8>;  // the refit-per-sample baselines
#endif
template <int... Ks, class F>
void forEachK(std::integer_sequence<int, Ks...>, F&& f) {
  (f(std::integral_constant<int, Ks>{}), ...);
}

template <class Fn>
benchmark::internal::Benchmark* add(const std::string& name, Fn&& fn, double minTime = 0.1) {
  return benchmark::RegisterBenchmark(name.c_str(), std::forward<Fn>(fn))->MinTime(minTime);
}

}  // namespace rowfold_bench
