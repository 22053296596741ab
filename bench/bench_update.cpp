// Per-sample cost (ns/sample) of folding one sample into each estimator and baseline, for
// float and double, fixed and dynamic K. Names: update/<method>/<scalar>/<fixed|dyn>/<K>.
#include <rowfold/rowfold.hpp>

#include "baselines.hpp"
#include "common.hpp"

namespace rowfold_bench {
namespace {

// BatchQr's store cost is measured with this capacity, starting over (reset) when full.
constexpr Eigen::Index kStoreCapacity = 4096;
// Forgetting factor of every P-form RLS (rowfold's and the baselines).
constexpr double kRlsLambda = 0.999;

template <class E>
E makeEstimator(int k, double lambda, bool guard = true) {
  typename E::Options o;
  o.forgetting = lambda;
  o.windup.enabled = guard;
  if constexpr (std::is_same<typename E::Options, rowfold::BatchQrOptions>::value) o.capacity = kStoreCapacity;
  return E(k, o);
}

// Times `step(row)` once per sample over the ring, after a warm-up that takes every
// estimator past its start-up phase. The state is forced to memory between samples.
template <typename S, class Step>
void timeSamples(benchmark::State& st, int k, double flopsPerRow, Step&& step) {
  const Samples<S>& d = ring<S>(k);
  for (Eigen::Index i = 0; i < 2 * k + 16; ++i) step(d, i % kRing);
  Eigen::Index i = 0;
  for (auto _ : st) {
    benchmark::DoNotOptimize(step(d, i));
    benchmark::ClobberMemory();
    if (++i == kRing) i = 0;
  }
  setRowCounters<S>(st, double(st.iterations()), flopsPerRow, k);
}

template <class E>
void rowfoldUpdate(benchmark::State& st, int k, double lambda, double flops, bool guard = true) {
  using S = typename E::Scalar;
  E est = makeEstimator<E>(k, lambda, guard);
  benchmark::DoNotOptimize(&est);
  timeSamples<S>(st, k, flops, [&](const Samples<S>& d, Eigen::Index i) {
    if constexpr (E::kind == rowfold::EstimatorKind::batch_qr)
      if (est.rows() == est.capacity()) est.reset();
    return est.add(d.row(i), d.y(i));
  });
}

template <typename S, class B>
void baselineUpdate(benchmark::State& st, B est, int k, double flops) {
  benchmark::DoNotOptimize(&est);
  timeSamples<S>(st, k, flops, [&](const Samples<S>& d, Eigen::Index i) { return est.add(d.row(i), d.y(i)); });
}

template <typename S, int K>
void registerRowfold(const std::string& kind) {
  const int k = K == Eigen::Dynamic ? 0 : K;
  auto reg = [&](const char* name, auto tag, double lambda, double flops, int kk, bool guard = true) {
    using E = typename decltype(tag)::type;
    add(std::string("update/") + name + "/" + scalarName<S>() + "/" + kind + "/" + std::to_string(kk),
        [=](benchmark::State& st) { rowfoldUpdate<E>(st, kk, lambda, flops, guard); });
  };
  auto each = [&](int kk) {
    const int n = kk + 1;  // centered state width
    reg("NormalEquations", Tag<rowfold::NormalEquations<S, K>>{}, 1.0, rank1Flops(n), kk);
    reg("GivensQr", Tag<rowfold::GivensQr<S, K>>{}, 1.0, givensFlops(n), kk);
    reg("ForgettingRls", Tag<rowfold::ForgettingRls<S, K>>{}, kRlsLambda, rlsFlops(n - 1), kk);
    // Like for like with the P-form baselines, which have no windup guard.
    reg("ForgettingRls:noguard", Tag<rowfold::ForgettingRls<S, K>>{}, kRlsLambda, rlsFlops(n - 1), kk, false);
    reg("BatchQr", Tag<rowfold::BatchQr<S, K>>{}, 1.0, 0.0, kk);
  };
  if (K != Eigen::Dynamic) {
    each(k);
  } else {
    forEachK(AllKs{}, [&](auto kc) { each(decltype(kc)::value); });
  }
}

template <typename S, int K>
void registerBaselines() {
  const std::string tail = std::string("/") + scalarName<S>() + "/fixed/" + std::to_string(K);
  auto reg = [&](const char* name, auto make, double flops) {
    add(std::string("update/") + name + tail,
        [=](benchmark::State& st) { baselineUpdate<S>(st, make(), K, flops); });
  };
  reg("base:TextbookRls", [] { return TextbookRls<S>(K, S(kRlsLambda)); }, rlsFlops(K + 1));
  reg("base:PlainRls", [] { return PlainRls<S, K>(K, S(kRlsLambda)); }, rlsFlops(K + 1));
  reg("base:PlainGivens", [] { return PlainGivens<S, K>(K); }, givensFlops(K + 2));
  reg("base:Rank1Full", [] { return PlainRank1<S, K, false>(K); }, rank1Flops(K + 2));
  reg("base:Rank1Lower", [] { return PlainRank1<S, K, true>(K); }, rank1Flops(K + 2));
  reg("base:PlainStore", [] { return PlainStore<S, K>(K, kStoreCapacity); }, 0.0);
  add(std::string("update/base:PlainGivens/") + scalarName<S>() + "/dyn/" + std::to_string(K), [](benchmark::State& st) {
    baselineUpdate<S>(st, PlainGivens<S, Eigen::Dynamic>(K), K, givensFlops(K + 2));
  });
}

// Forgetting (lambda = 0.999) on the estimators that default to lambda = 1: double, fixed K.
template <int K>
void registerForgetting() {
  const std::string tail = "/double/fixed/" + std::to_string(K);
  add("update/NormalEquations:lambda" + tail,
      [](benchmark::State& st) { rowfoldUpdate<rowfold::NormalEquations<double, K>>(st, K, kRlsLambda, rank1Flops(K + 1)); });
  add("update/GivensQr:lambda" + tail,
      [](benchmark::State& st) { rowfoldUpdate<rowfold::GivensQr<double, K>>(st, K, kRlsLambda, givensFlops(K + 1)); });
}

template <typename S>
void registerScalar() {
  forEachK(AllKs{}, [](auto kc) {
    constexpr int K = decltype(kc)::value;
    registerRowfold<S, K>("fixed");
    registerBaselines<S, K>();
  });
  registerRowfold<S, Eigen::Dynamic>("dyn");
}

const bool registered = [] {
  registerScalar<double>();
  registerScalar<float>();
  forEachK(AllKs{}, [](auto kc) { registerForgetting<decltype(kc)::value>(); });
  return true;
}();

}  // namespace
}  // namespace rowfold_bench
