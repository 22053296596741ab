// Coefficients needed after every sample: add + solve per sample (ns/sample).
// Names: usolve/<method>/<scalar>/<fixed|dyn>/<K>. Fixed K in double, dynamic K in float (the
// float fixed-K grid would double an already long compile for little news).
#include <rowfold/rowfold.hpp>

#include "baselines.hpp"
#include "common.hpp"

namespace rowfold_bench {
namespace {

constexpr Eigen::Index kWindow = 1000;  // rows behind BatchQr's and HouseholderQR's refits
constexpr double kRlsLambda = 0.999;

template <class E>
E makeEstimator(int k, double lambda, Eigen::Index capacity) {
  typename E::Options o;
  o.forgetting = lambda;
  if constexpr (std::is_same<typename E::Options, rowfold::BatchQrOptions>::value) o.capacity = capacity;
  return E(k, o);
}

template <class E>
void rowfoldUpdateSolve(benchmark::State& st, int k, double lambda, double flops) {
  using S = typename E::Scalar;
  E est = makeEstimator<E>(k, lambda, kWindow);
  typename E::SolutionType sol(k);
  const Samples<S>& d = ring<S>(k);
  for (Eigen::Index i = 0; i < 2 * k + 16; ++i) est.add(d.row(i), d.y(i));
  Eigen::Index i = 0;
  for (auto _ : st) {
    est.add(d.row(i), d.y(i));
    est.solveInto(sol);
    benchmark::DoNotOptimize(sol.coefficients.data());
    benchmark::ClobberMemory();
    if (++i == kRing) i = 0;
  }
  setRowCounters<S>(st, double(st.iterations()), flops, k);
}

// BatchQr holding kWindow - 1 rows (stored untimed), then one add + solve (timed).
template <int K>
void batchQrUpdateSolve(benchmark::State& st) {
  auto est = makeEstimator<rowfold::BatchQr<double, K>>(K, 1.0, kWindow);
  typename rowfold::BatchQr<double, K>::SolutionType sol(K);
  const Samples<double>& d = ring<double>(K);
  Eigen::Index i = kWindow - 1;
  for (auto _ : st) {
    st.PauseTiming();
    est.reset();
    est.addRows(d.X.topRows(kWindow - 1), d.y.head(kWindow - 1));
    st.ResumeTiming();
    est.add(d.row(i), d.y(i));
    est.solveInto(sol);
    benchmark::DoNotOptimize(sol.coefficients.data());
    if (++i == kRing) i = kWindow - 1;
  }
  setRowCounters<double>(st, double(st.iterations()), kWindow * householderFlopsPerRow(K + 1), K);
}

template <typename S, int K, class B, class Solve>
void baselineUpdateSolve(benchmark::State& st, B est, double flops, Solve solve) {
  Eigen::Matrix<S, K + 1, 1> b;
  const Samples<S>& d = ring<S>(K);
  for (Eigen::Index i = 0; i < 2 * K + 16; ++i) est.add(d.row(i), d.y(i));
  Eigen::Index i = 0;
  for (auto _ : st) {
    est.add(d.row(i), d.y(i));
    solve(est, b);
    benchmark::DoNotOptimize(b.data());
    benchmark::ClobberMemory();
    if (++i == kRing) i = 0;
  }
  setRowCounters<S>(st, double(st.iterations()), flops, K);
}

template <typename S, int K>
void registerK() {
  const std::string tail = std::string("/") + scalarName<S>() + "/fixed/" + std::to_string(K);
  if constexpr (std::is_same<S, double>::value) {
    add("usolve/NormalEquations" + tail,
        [](benchmark::State& st) { rowfoldUpdateSolve<rowfold::NormalEquations<S, K>>(st, K, 1.0, rank1Flops(K + 1)); });
    add("usolve/GivensQr" + tail,
        [](benchmark::State& st) { rowfoldUpdateSolve<rowfold::GivensQr<S, K>>(st, K, 1.0, givensFlops(K + 1)); });
    add("usolve/ForgettingRls" + tail,
        [](benchmark::State& st) { rowfoldUpdateSolve<rowfold::ForgettingRls<S, K>>(st, K, kRlsLambda, rlsFlops(K)); });
  } else {
    const std::string dyn = std::string("/") + scalarName<S>() + "/dyn/" + std::to_string(K);
    add("usolve/NormalEquations" + dyn, [](benchmark::State& st) {
      rowfoldUpdateSolve<rowfold::NormalEquations<S, Eigen::Dynamic>>(st, K, 1.0, rank1Flops(K + 1));
    });
    add("usolve/GivensQr" + dyn, [](benchmark::State& st) {
      rowfoldUpdateSolve<rowfold::GivensQr<S, Eigen::Dynamic>>(st, K, 1.0, givensFlops(K + 1));
    });
    add("usolve/ForgettingRls" + dyn, [](benchmark::State& st) {
      rowfoldUpdateSolve<rowfold::ForgettingRls<S, Eigen::Dynamic>>(st, K, kRlsLambda, rlsFlops(K));
    });
  }
  add("usolve/base:PlainRls" + tail, [](benchmark::State& st) {
    baselineUpdateSolve<S, K>(st, PlainRls<S, K>(K, S(kRlsLambda)), rlsFlops(K + 1), [](auto& e, auto& b) { b = e.theta(); });
  });
  add("usolve/base:PlainGivens" + tail, [](benchmark::State& st) {
    baselineUpdateSolve<S, K>(st, PlainGivens<S, K>(K), givensFlops(K + 2), [](auto& e, auto& b) { e.solve(b); });
  });
  add("usolve/base:Rank1Lower+LDLT" + tail, [](benchmark::State& st) {
    baselineUpdateSolve<S, K>(st, PlainRank1<S, K, true>(K), rank1Flops(K + 2), [](auto& e, auto& b) { e.solve(b); });
  });
}

// Refits on a 1000-row window (K <= 8: these cost O(1000 K^2) per sample).
template <int K>
void registerWindow() {
  const std::string tail = "/double/fixed/" + std::to_string(K) + "/rows:1000";
  add("usolve/BatchQr" + tail, batchQrUpdateSolve<K>);
  add("usolve/base:WindowHouseholderQR" + tail, [](benchmark::State& st) {
    baselineUpdateSolve<double, K>(st, WindowRefit<double>(K, kWindow), kWindow * householderFlopsPerRow(K + 1),
                                   [](auto& e, auto& b) { b = e.coefficients(); });
  });
}

const bool registered = [] {
  forEachK(AllKs{}, [](auto kc) {
    registerK<double, decltype(kc)::value>();
    registerK<float, decltype(kc)::value>();
  });
  forEachK(SmallKs{}, [](auto kc) { registerWindow<decltype(kc)::value>(); });
  return true;
}();

}  // namespace
}  // namespace rowfold_bench
