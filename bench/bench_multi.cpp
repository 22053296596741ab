// Several responses on one set of regressors: one MultiResponse state against M separate
// single-response estimators fed the same samples. ns per sample (all M responses together).
// Names: multi/<estimator>/<shared|separate>/double/<K>/<M>; lambda = 1 (the bare update).
#include <array>

#include <rowfold/rowfold.hpp>

#include "common.hpp"

namespace rowfold_bench {
namespace {

template <int K, int M, class Step>
void timeResponses(benchmark::State& st, Step&& step) {
  const Samples<double>& d = ring<double>(K);
  Eigen::Matrix<double, M, 1> y;
  const auto sample = [&](Eigen::Index i) {
    const Eigen::Map<const Eigen::Matrix<double, K, 1>> x(d.row(i));
    for (int j = 0; j < M; ++j) y(j) = d.y(i) + double(j) * d.row(i)[0];  // M invented responses
    return step(x, y);
  };
  for (Eigen::Index i = 0; i < 2 * K + 16; ++i) sample(i);  // past ForgettingRls's exact start
  Eigen::Index i = 0;
  for (auto _ : st) {
    benchmark::DoNotOptimize(sample(i));
    benchmark::ClobberMemory();
    if (++i == kRing) i = 0;
  }
}

template <class E, int M>
void shared(benchmark::State& st) {
  rowfold::MultiResponse<E, M> fit;
  benchmark::DoNotOptimize(&fit);
  timeResponses<E::K, M>(st, [&](const auto& x, const auto& y) { return fit.add(x, y); });
}

template <class E, int M>
void separate(benchmark::State& st) {
  std::array<E, M> fits;
  benchmark::DoNotOptimize(&fits);
  timeResponses<E::K, M>(st, [&](const auto& x, const auto& y) {
    rowfold::Status s = rowfold::Status::ok;
    for (int j = 0; j < M; ++j) s = fits[static_cast<std::size_t>(j)].add(x, y(j));
    return s;
  });
}

template <int K, int M>
void registerKM() {
  const std::string tail = "/double/" + std::to_string(K) + "/" + std::to_string(M);
  add("multi/GivensQr/shared" + tail, shared<rowfold::GivensQr<double, K>, M>);
  add("multi/GivensQr/separate" + tail, separate<rowfold::GivensQr<double, K>, M>);
  add("multi/NormalEquations/shared" + tail, shared<rowfold::NormalEquations<double, K>, M>);
  add("multi/NormalEquations/separate" + tail, separate<rowfold::NormalEquations<double, K>, M>);
  add("multi/ForgettingRls/shared" + tail, shared<rowfold::ForgettingRls<double, K>, M>);
  add("multi/ForgettingRls/separate" + tail, separate<rowfold::ForgettingRls<double, K>, M>);
}

const bool registered = [] {
  registerKM<4, 2>();
#ifndef ROWFOLD_BENCH_SMOKE
  registerKM<4, 8>();
  registerKM<16, 2>();
  registerKM<16, 8>();
#endif
  return true;
}();

}  // namespace
}  // namespace rowfold_bench
