// The queries alone on an estimator holding 1000 samples (dynamic K: one instantiation per
// estimator keeps the compile short). Names: solve|summary|predict/<method>/<scalar>/dyn/<K>,
// and BatchQr's solve against the number of rows it holds (.../rows:<n>).
#include <rowfold/rowfold.hpp>

#include "common.hpp"

namespace rowfold_bench {
namespace {

constexpr Eigen::Index kRows = 1000;
constexpr int D = Eigen::Dynamic;

template <class E>
struct Filled {
  E est;
  Filled(int k, Eigen::Index rows) : est(k, options(rows)) {
    using S = typename E::Scalar;
    const Samples<S>& d = ring<S>(k);
    for (Eigen::Index i = 0; i < rows; ++i) est.add(d.row(i % kRing), d.y(i % kRing));
  }
  static typename E::Options options(Eigen::Index rows) {
    typename E::Options o;
    if constexpr (std::is_same<typename E::Options, rowfold::BatchQrOptions>::value) o.capacity = rows;
    return o;
  }
};

template <class E>
void solve(benchmark::State& st, int k, Eigen::Index rows) {
  Filled<E> f(k, rows);
  typename E::SolutionType sol(k);
  for (auto _ : st) {
    f.est.solveInto(sol);
    benchmark::DoNotOptimize(sol.coefficients.data());
  }
}

template <class E>
void summary(benchmark::State& st, int k) {
  Filled<E> f(k, kRows);
  typename E::SummaryType sum(k);
  for (auto _ : st) {
    f.est.summarizeInto(sum, 0.95);
    benchmark::DoNotOptimize(sum.status);
  }
}

template <class E>
void predict(benchmark::State& st, int k) {
  Filled<E> f(k, kRows);
  const Eigen::VectorXd x0 = Eigen::VectorXd::Constant(k, 1.5);
  for (auto _ : st) benchmark::DoNotOptimize(f.est.predictionInterval(x0, 0.95).value);
}

template <class E>
void registerEstimator(const char* name) {
  using S = typename E::Scalar;
  forEachK(AllKs{}, [&](auto kc) {
    constexpr int K = decltype(kc)::value;
    const std::string tail = std::string(name) + "/" + scalarName<S>() + "/dyn/" + std::to_string(K) +
                             (E::kind == rowfold::EstimatorKind::batch_qr ? "/rows:1000" : "");
    add("solve/" + tail, [](benchmark::State& st) { solve<E>(st, K, kRows); });
    if constexpr (std::is_same<S, double>::value) {
      add("summary/" + tail, [](benchmark::State& st) { summary<E>(st, K); });
      if (K == 8) add("predict/" + tail, [](benchmark::State& st) { predict<E>(st, K); });
    }
  });
}

const bool registered = [] {
  registerEstimator<rowfold::NormalEquations<double, D>>("NormalEquations");
  registerEstimator<rowfold::GivensQr<double, D>>("GivensQr");
  registerEstimator<rowfold::ForgettingRls<double, D>>("ForgettingRls");
  registerEstimator<rowfold::BatchQr<double, D>>("BatchQr");
  registerEstimator<rowfold::NormalEquations<float, D>>("NormalEquations");
  registerEstimator<rowfold::GivensQr<float, D>>("GivensQr");
  registerEstimator<rowfold::ForgettingRls<float, D>>("ForgettingRls");
  registerEstimator<rowfold::BatchQr<float, D>>("BatchQr");
  for (const Eigen::Index rows : {100, 10000, 100000}) {
    add("solve/BatchQr/double/dyn/8/rows:" + std::to_string(rows),
        [rows](benchmark::State& st) { solve<rowfold::BatchQr<double, D>>(st, 8, rows); });
  }
  return true;
}();

}  // namespace
}  // namespace rowfold_bench
