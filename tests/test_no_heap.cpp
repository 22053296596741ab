// Proof that the hot path never touches the heap: every estimator x Scalar x fixed/dynamic K
// (dynamic: after construction) runs add / addRows / solveInto / summarizeInto /
// conditioningInto / predict / predictionInterval / snapshot / restore with
//  - Eigen's runtime allocation fence (EIGEN_RUNTIME_NO_MALLOC + set_is_malloc_allowed(false)),
//    with EIGEN_STACK_ALLOCATION_LIMIT = 0 so Eigen's hidden stack temporaries count as heap
//    (the method of Eigen's own test/nomalloc.cpp), and eigen_assert redirected to a counter;
//  - a counting global operator new/delete (any C++ allocation).
#define EIGEN_STACK_ALLOCATION_LIMIT 0
#include "support/alloc_fence.hpp"

#include <doctest/doctest.h>

#include <vector>

#include "rowfold/rowfold.hpp"
#include "support/doctest_rowfold.hpp"

namespace {

using rowfold::Status;

template <template <typename, int, int> class E, typename S, bool Dyn>
struct Make {
  using Type = E<S, Dyn ? Eigen::Dynamic : 4, Dyn ? Eigen::Dynamic : 4>;
  using Scalar = S;
  static Type make() {
    typename Type::Options o;
    o.forgetting = 0.995;  // windup guard active on the factor estimators
    if constexpr (Type::guardable) {  // every guard path: outlier gate, Huber, regularization, VFF, CUSUM
      o.outliers.enabled = true;
      o.outliers.warmup = 5;
      o.outliers.huber = true;
      o.windup.regularization = 1e-3;
      o.windup.variableForgetting = true;
      o.windup.changeThreshold = 5;
    }
    return Type(4, o);
  }
};
template <typename S, int K, int M>
using Batch = rowfold::BatchQr<S, K, 128, M>;

#define ROWFOLD_NOHEAP_TYPES(S)                                                                        \
  Make<Batch, S, false>, Make<rowfold::GivensQr, S, false>, Make<rowfold::NormalEquations, S, false>, \
      Make<rowfold::ForgettingRls, S, false>, Make<Batch, S, true>, Make<rowfold::GivensQr, S, true>,   \
      Make<rowfold::NormalEquations, S, true>, Make<rowfold::ForgettingRls, S, true>

// Deterministic invented data without <random> (a 64-bit LCG, Knuth MMIX constants).
struct Lcg {
  unsigned long long s = 12345;
  double next() {
    s = s * 6364136223846793005ULL + 1442695040888963407ULL;
    return double(s >> 11) / double(1ULL << 53) - 0.5;
  }
};

}  // namespace

TEST_CASE_TEMPLATE_DEFINE("no heap in the hot path", F, noheap_id) {
  using Est = typename F::Type;
  using Scalar = typename F::Scalar;
  // Construction and output objects may allocate (dynamic K); nothing after that.
  Est est = F::make();
  Est other = F::make();
  Est part = F::make();
  typename Est::SolutionType sol(4);
  typename Est::SummaryType sum(4);
  typename Est::ConditioningType cond(4);
  typename Est::Matrix cov(4, 4), corr(4, 4);
  Eigen::Matrix<Scalar, Eigen::Dynamic, Eigen::Dynamic> X(8, 4);
  Eigen::Matrix<Scalar, Eigen::Dynamic, 1> y(8), x0(4);
  Lcg g;
  for (int i = 0; i < 8; ++i) {
    for (int j = 0; j < 4; ++j) X(i, j) = Scalar(g.next() + j);
    y(i) = Scalar(g.next());
  }
  x0.setConstant(Scalar(0.5));
  for (int i = 0; i < 8; ++i) REQUIRE(part.add(Eigen::Matrix<Scalar, 4, 1>(X.row(i).transpose()), y(i)) == Status::ok);
  std::vector<unsigned char> image(est.snapshotSize() + 64 * 4 * 8 * sizeof(Scalar));

  rowfold_test::eigenAssertHits = 0;
  rowfold_test::newCalls = 0;
  Eigen::internal::set_is_malloc_allowed(false);
  rowfold_test::countNew = true;

  Eigen::Matrix<Scalar, 4, 1> x;
  for (int i = 0; i < 60; ++i) {
    for (int j = 0; j < 4; ++j) x(j) = Scalar(g.next() + j);
    const Scalar yy = Scalar(1) + x(0) - Scalar(2) * x(2) + Scalar(0.01) * Scalar(g.next());
    (void)est.add(x, yy);
  }
  const Status rows = est.addRows(X, y);
  const Status merged = est.merge(part);
  (void)est.relax(Scalar(0.9));
  (void)est.advance(2);
  (void)est.addDelayed(x, Scalar(1), 3);
  (void)est.solveInto(sol);
  (void)est.summarizeInto(sum, Scalar(0.95));
  (void)est.conditioningInto(cond);
  const Status covStatus = est.covariance(cov);
  (void)est.correlation(corr);
  const Scalar p = est.predict(x0);
  const auto pi = est.predictionInterval(x0, Scalar(0.9));
  std::size_t written = 0;
  const Status snap = est.snapshot(image.data(), image.size(), written);
  const Status back = other.restore(image.data(), written);
  (void)other.add(x, Scalar(1));

  rowfold_test::countNew = false;
  Eigen::internal::set_is_malloc_allowed(true);

  CHECK(rowfold_test::eigenAssertHits.load() == 0);
  CHECK(rowfold_test::newCalls.load() == 0);
  // The calls did real work (a fence around nothing would prove nothing).
  CHECK(rows == Status::ok);
  CHECK(merged == Status::ok);
  CHECK(covStatus == Status::ok);
  CHECK(sol.status == Status::ok);
  CHECK(sum.status == Status::ok);
  CHECK(cond.status == Status::ok);
  CHECK(pi.status == Status::ok);
  CHECK(std::isfinite(double(p)));
  CHECK(snap == Status::ok);
  CHECK(back == Status::ok);
  CHECK(sol.coefficients.allFinite());
  CHECK(sol.rank == 4);
}

TEST_CASE_TEMPLATE_INVOKE(noheap_id, ROWFOLD_WITH_FLOAT(ROWFOLD_NOHEAP_TYPES(float)) ROWFOLD_NOHEAP_TYPES(double)
                          ROWFOLD_WITH_LONG_DOUBLE(ROWFOLD_NOHEAP_TYPES(long double)));

TEST_CASE("the fence itself works: a dynamic Eigen allocation is caught") {
  rowfold_test::eigenAssertHits = 0;
  Eigen::internal::set_is_malloc_allowed(false);
  Eigen::VectorXd v(16);  // must trip the fence
  Eigen::internal::set_is_malloc_allowed(true);
  CHECK(rowfold_test::eigenAssertHits.load() > 0);
  v.setZero();
}
