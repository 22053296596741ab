// Batch ingestion (rows/s): n rows through addRows (+ solve) against whole-matrix fits, double,
// caches evicted before every pass. Names: batch/<method>/double/fixed/<K>/rows:<n>.
// n = ROWFOLD_BENCH_ROWS (default 1e6).
#include <lapacke.h>

#include <Eigen/Cholesky>
#include <Eigen/QR>
#include <cstdlib>
#include <memory>
#include <rowfold/rowfold.hpp>

#include "common.hpp"

namespace rowfold_bench {
namespace {

using MatrixXd = Eigen::MatrixXd;
using VectorXd = Eigen::VectorXd;
#ifdef ROWFOLD_BENCH_SMOKE
using BatchKs = std::integer_sequence<int, 8>;
#else
using BatchKs = std::integer_sequence<int, 4, 8, 16, 64>;
#endif

Eigen::Index batchRows() {
  const char* env = std::getenv("ROWFOLD_BENCH_ROWS");
  const long n = env != nullptr ? std::atol(env) : 1000000L;
  return n > 0 ? n : 1000000L;
}

// Row-major X (n x K, rows read once by addRows) and the column-major design [1 X] that the
// whole-matrix methods take.
template <int K>
struct BatchData {
  Samples<double, K> s{batchRows(), K};
  MatrixXd A{s.rows(), K + 1};
  BatchData() {
    A.col(0).setOnes();
    A.rightCols(K) = s.X;
  }
};
template <int K>
const BatchData<K>& batchData() {
  static std::unique_ptr<BatchData<K>> d;
  if (!d) d = std::make_unique<BatchData<K>>();
  return *d;
}

// Times `pass()` with every cache evicted (and `prepare()` done) before each pass, untimed.
template <int K, class Prepare, class Pass>
void timePasses(benchmark::State& st, double flopsPerRow, Prepare prepare, Pass pass) {
  const Eigen::Index n = batchData<K>().s.rows();
  for (auto _ : st) {
    st.PauseTiming();
    prepare();
    evictCaches();
    st.ResumeTiming();
    if (!pass()) {
      st.SkipWithError("fit failed");
      break;
    }
  }
  setRowCounters<double>(st, double(st.iterations()) * double(n), flopsPerRow, K);
}

template <class E, bool Solve>
void rowfoldBatch(benchmark::State& st, double flopsPerRow) {
  constexpr int K = E::K;
  const BatchData<K>& d = batchData<K>();
  typename E::Options o;
  if constexpr (std::is_same<typename E::Options, rowfold::BatchQrOptions>::value) o.capacity = d.s.rows();
  auto est = std::make_unique<E>(K, o);
  typename E::SolutionType sol(K);
  timePasses<K>(st, flopsPerRow, [&] { est->reset(); }, [&] {
    if (est->addRows(d.s.X, d.s.y) != rowfold::Status::ok) return false;
    if constexpr (Solve) {
      est->solveInto(sol);
      benchmark::DoNotOptimize(sol.coefficients.data());
    }
    return true;
  });
}

template <int K>
void registerK() {
  const std::string tail = "/double/fixed/" + std::to_string(K) + "/rows:" + std::to_string(batchRows());
  const double qr = householderFlopsPerRow(K + 1);
  auto reg = [&](const std::string& name, auto fn) { add("batch/" + name + tail, fn, 0.3)->Unit(benchmark::kMillisecond); };
  reg("NormalEquations", [](benchmark::State& st) { rowfoldBatch<rowfold::NormalEquations<double, K>, true>(st, rank1Flops(K + 1)); });
  reg("GivensQr", [](benchmark::State& st) { rowfoldBatch<rowfold::GivensQr<double, K>, true>(st, givensFlops(K + 1)); });
  reg("ForgettingRls", [](benchmark::State& st) { rowfoldBatch<rowfold::ForgettingRls<double, K>, true>(st, rlsFlops(K)); });
  reg("BatchQr:store", [](benchmark::State& st) { rowfoldBatch<rowfold::BatchQr<double, K>, false>(st, 0.0); });
  reg("BatchQr", [=](benchmark::State& st) { rowfoldBatch<rowfold::BatchQr<double, K>, true>(st, qr); });

  reg("base:HouseholderQR", [=](benchmark::State& st) {
    const BatchData<K>& d = batchData<K>();
    Eigen::HouseholderQR<MatrixXd> f(d.A.rows(), K + 1);
    VectorXd b(K + 1);
    timePasses<K>(st, qr, [] {}, [&] {
      f.compute(d.A);
      b = f.solve(d.s.y);
      return b.allFinite();
    });
  });
  reg("base:ColPivHouseholderQR", [=](benchmark::State& st) {
    const BatchData<K>& d = batchData<K>();
    Eigen::ColPivHouseholderQR<MatrixXd> f(d.A.rows(), K + 1);
    VectorXd b(K + 1);
    timePasses<K>(st, qr, [] {}, [&] {
      f.compute(d.A);
      b = f.solve(d.s.y);
      return b.allFinite();
    });
  });
  reg("base:NormalLDLT", [](benchmark::State& st) {
    const BatchData<K>& d = batchData<K>();
    MatrixXd G(K + 1, K + 1);
    VectorXd rhs(K + 1), b(K + 1);
    timePasses<K>(st, rank1Flops(K + 2), [] {}, [&] {
      G.noalias() = d.A.transpose() * d.A;
      rhs.noalias() = d.A.transpose() * d.s.y;
      b = G.ldlt().solve(rhs);
      return b.allFinite();
    });
  });
  // dgels overwrites its input, so the copy a caller needs is part of the pass (as it is inside
  // Eigen's compute()).
  reg("base:dgels", [=](benchmark::State& st) {
    const BatchData<K>& d = batchData<K>();
    MatrixXd work(d.A.rows(), K + 1);
    VectorXd yw(d.A.rows());
    timePasses<K>(st, qr, [] {}, [&] {
      work = d.A;
      yw = d.s.y;
      const lapack_int n = static_cast<lapack_int>(work.rows());
      return LAPACKE_dgels(LAPACK_COL_MAJOR, 'N', n, K + 1, 1, work.data(), n, yw.data(), n) == 0;
    });
  });
}

const bool registered = [] {
  forEachK(BatchKs{}, [](auto kc) { registerK<decltype(kc)::value>(); });
  return true;
}();

}  // namespace
}  // namespace rowfold_bench
