// Instruction-count driver: folds n invented samples (a fixed ring of 256 rows, y = 1 + sum (j+1) x_j
// + noise) into one estimator or baseline, for scripts/icount.sh, which runs it under valgrind's
// cachegrind twice and reports instructions per sample. Unlike ns/sample, the count does not move
// with the load of a shared machine; it does not see latency chains, so it complements the
// Google Benchmark timings (bench_update.cpp), never replaces them.
//
// Usage: rowfold_icount <what> <K> <float|double> <guard 0|1> <samples>
//   what: forgetting | normal | givens | plainrls | rank1 | plaingivens; K: 2, 4, 8, 16 or 32
//   (fixed), or dyn2, dyn4, dyn8, dyn16, dyn32 (Eigen::Dynamic; rowfold estimators only).
//   what: givensrows | normalrows (one unguarded addRows call of all the samples, the ring tiled
//   into a row-major X; the count includes filling X, K copies per row); K: 8, 16 or 64.
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <random>
#include <string>
#include <vector>

#include "baselines.hpp"
#include "rowfold/rowfold.hpp"

namespace {

constexpr int kRing = 256;

template <typename S>
struct Ring {
  std::vector<S> x, y;
  Ring(int k) : x(static_cast<std::size_t>(kRing * k)), y(kRing) {
    std::mt19937 gen(7);
    std::normal_distribution<double> nd;
    for (int i = 0; i < kRing; ++i) {
      double v = 1;
      for (int j = 0; j < k; ++j) {
        const double xj = nd(gen);
        x[static_cast<std::size_t>(i * k + j)] = static_cast<S>(xj);
        v += (j + 1) * xj;
      }
      y[static_cast<std::size_t>(i)] = static_cast<S>(v + 0.1 * nd(gen));
    }
  }
};

// The same options as bench_update.cpp: lambda 0.99 for the forgetting estimators, 1 for NE.
template <typename E, typename S, int K>
double foldEstimator(int k, double lambda, bool guard, long n) {
  typename E::Options o;
  o.forgetting = lambda;
  o.windup.enabled = guard;
  E est(k, o);
  const Ring<S> r(k);
  for (long t = 0; t < n; ++t) {
    const auto i = static_cast<std::size_t>(t % kRing);
    est.add(Eigen::Map<const Eigen::Matrix<S, K, 1>>(&r.x[i * static_cast<std::size_t>(k)], k), r.y[i]);
  }
  return static_cast<double>(est.solve().coefficients(0));
}

// One addRows call of n rows (the ring tiled), lambda 1, guards off.
template <typename E, typename S, int K>
double foldRows(int k, long n) {
  E est(k, typename E::Options());
  const Ring<S> r(k);
  Eigen::Matrix<S, Eigen::Dynamic, K, Eigen::RowMajor> X(n, k);
  Eigen::Matrix<S, Eigen::Dynamic, 1> y(n);
  for (long t = 0; t < n; ++t) {
    const auto i = static_cast<std::size_t>(t % kRing);
    X.row(t) = Eigen::Map<const Eigen::Matrix<S, 1, K>>(&r.x[i * static_cast<std::size_t>(k)], k);
    y(t) = r.y[i];
  }
  if (est.addRows(X, y) != rowfold::Status::ok) return -1.0;
  return static_cast<double>(est.solve().coefficients(0));
}

template <typename S, int K>
bool dispatchRows(const std::string& what, int k, long n, double& out) {
  if (what == "givensrows") out = foldRows<rowfold::GivensQr<S, K>, S, K>(k, n);
  else if (what == "normalrows") out = foldRows<rowfold::NormalEquations<S, K>, S, K>(k, n);
  else return false;
  return true;
}

// The baselines expose no result, so each fold is kept observable as Google Benchmark's
// ClobberMemory does (without it g++ dropped whole baseline loops).
template <typename B, typename S>
double foldBaseline(B b, int k, long n) {
  const Ring<S> r(k);
  for (long t = 0; t < n; ++t) {
    const auto i = static_cast<std::size_t>(t % kRing);
    b.add(&r.x[i * static_cast<std::size_t>(k)], r.y[i]);
    asm volatile("" : : "r"(&b) : "memory");
  }
  return 0.0;
}

template <typename S, int K>
bool dispatch(const std::string& what, int k, bool guard, long n, double& out) {
  if (what == "forgetting") out = foldEstimator<rowfold::ForgettingRls<S, K>, S, K>(k, 0.99, guard, n);
  else if (what == "normal") out = foldEstimator<rowfold::NormalEquations<S, K>, S, K>(k, 1.0, guard, n);
  else if (what == "givens") out = foldEstimator<rowfold::GivensQr<S, K>, S, K>(k, 0.99, guard, n);
  else if constexpr (K != Eigen::Dynamic) {
    if (what == "plainrls") out = foldBaseline<rowfold_bench::PlainRls<S, K>, S>(rowfold_bench::PlainRls<S, K>(K, S(0.99)), k, n);
    else if (what == "rank1") out = foldBaseline<rowfold_bench::PlainRank1<S, K, true>, S>(rowfold_bench::PlainRank1<S, K, true>(K), k, n);
    else if (what == "plaingivens") out = foldBaseline<rowfold_bench::PlainGivens<S, K>, S>(rowfold_bench::PlainGivens<S, K>(K), k, n);
    else return false;
  } else {
    return false;
  }
  return true;
}

template <typename S>
bool byK(const std::string& what, const std::string& ks, bool guard, long n, double& out) {
  if (what.size() > 4 && what.compare(what.size() - 4, 4, "rows") == 0) {
    switch (std::atoi(ks.c_str())) {
      case 8: return dispatchRows<S, 8>(what, 8, n, out);
      case 16: return dispatchRows<S, 16>(what, 16, n, out);
      case 64: return dispatchRows<S, 64>(what, 64, n, out);
      default: return false;
    }
  }
  const bool dyn = ks.rfind("dyn", 0) == 0;
  const int k = std::atoi(ks.c_str() + (dyn ? 3 : 0));
  if (dyn) return k > 0 && dispatch<S, Eigen::Dynamic>(what, k, guard, n, out);
  switch (k) {
    case 2: return dispatch<S, 2>(what, k, guard, n, out);
    case 4: return dispatch<S, 4>(what, k, guard, n, out);
    case 8: return dispatch<S, 8>(what, k, guard, n, out);
    case 16: return dispatch<S, 16>(what, k, guard, n, out);
    case 32: return dispatch<S, 32>(what, k, guard, n, out);
    default: return false;
  }
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 6) {
    std::fprintf(stderr, "usage: %s <what> <K|dynK> <float|double> <guard 0|1> <samples>\n", argv[0]);
    return 2;
  }
  const std::string what = argv[1], ks = argv[2], scalar = argv[3];
  const bool guard = std::atoi(argv[4]) != 0;
  const long n = std::atol(argv[5]);
  double out = 0;
  const bool ok = scalar == "float" ? byK<float>(what, ks, guard, n, out)
                  : scalar == "double" ? byK<double>(what, ks, guard, n, out) : false;
  if (!ok) {
    std::fprintf(stderr, "%s: unknown configuration %s %s %s\n", argv[0], argv[1], argv[2], argv[3]);
    return 2;
  }
  std::printf("%.17g\n", out);  // keeps the fold observable
  return 0;
}
