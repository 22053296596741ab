// The shared contract, written once and run over every estimator x Scalar x fixed/dynamic K.
// References: exact-model recovery (data generated from known coefficients, invented here);
// weighted and exponentially weighted least squares definitions (Björck 1996 §4.4; NUMERICS §1.1)
// checked across estimators against BatchQr, which applies the weights lambda^age explicitly.
//
// The same types also prove that the hot path never touches the heap (last section). Both halves
// share one translation unit so that the 24 estimator types are compiled once for both: the
// allocation fence (support/alloc_fence.hpp) must then come first, with
// EIGEN_STACK_ALLOCATION_LIMIT = 0 so that Eigen's hidden stack temporaries count as heap (the
// method of Eigen's own test/nomalloc.cpp). Outside the fenced calls it only counts: the contract
// cases run as they would without it, with Eigen's assertions counted instead of ignored.
#define EIGEN_STACK_ALLOCATION_LIMIT 0
#include "support/alloc_fence.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <cstring>
#include <limits>
#include <random>
#include <vector>

#include "rowfold/rowfold.hpp"
#include "support/doctest_rowfold.hpp"

namespace {

using rowfold::Flag;
using rowfold::Status;

template <typename Scalar>
Scalar tolerance() {
  return std::is_same<Scalar, float>::value ? Scalar(2e-3) : Scalar(1e-9);
}

// Factories give every estimator the same construction syntax for fixed and dynamic K.
template <template <typename, int, int> class E, typename S, int K, bool Dyn>
struct Make {
  using Type = E<S, Dyn ? Eigen::Dynamic : K, Dyn ? Eigen::Dynamic : K>;
  using Scalar = S;
  static constexpr int k = K;
  static Type make(rowfold::FitOptions fit = {}) {
    typename Type::Options o;
    static_cast<rowfold::FitOptions&>(o) = fit;
    return Type(k, o);
  }
};
template <typename S, int K, int M>
using Batch = rowfold::BatchQr<S, K, 256, M>;

#define ROWFOLD_CONTRACT_TYPES(S)                                                              \
  Make<Batch, S, 3, false>, Make<rowfold::GivensQr, S, 3, false>,                              \
      Make<rowfold::NormalEquations, S, 3, false>, Make<rowfold::ForgettingRls, S, 3, false>,  \
      Make<Batch, S, 3, true>, Make<rowfold::GivensQr, S, 3, true>,                            \
      Make<rowfold::NormalEquations, S, 3, true>, Make<rowfold::ForgettingRls, S, 3, true>

template <typename Scalar>
Eigen::Matrix<Scalar, 3, 1> randomRow(std::mt19937_64& rng) {
  std::normal_distribution<double> n(0.0, 1.0);
  Eigen::Matrix<Scalar, 3, 1> x;
  x << Scalar(10 + n(rng)), Scalar(-5 + 2 * n(rng)), Scalar(n(rng) * 0.5 + 3 * n(rng));
  return x;
}

template <typename Scalar>
Scalar truth(const Eigen::Matrix<Scalar, 3, 1>& x) {
  return Scalar(1.5) + Scalar(2) * x(0) - Scalar(3) * x(1) + Scalar(0.5) * x(2);
}

}  // namespace

TEST_CASE_TEMPLATE_DEFINE("contract", F, contract_id) {
  using Scalar = typename F::Scalar;
  using Vec = Eigen::Matrix<Scalar, 3, 1>;
  const Scalar tol = tolerance<Scalar>();
  std::mt19937_64 rng(2026);

  SUBCASE("empty estimator reports empty, never NaN coefficients") {
    auto est = F::make();
    CHECK(est.status() == Status::ok);
    const auto s = est.solve();
    CHECK(s.status == Status::empty);
    CHECK(s.coefficients.allFinite());
    CHECK(est.summarize().status == Status::empty);
  }

  SUBCASE("recovers an exact model, intercept included") {
    auto est = F::make();
    for (int i = 0; i < 50; ++i) {
      const Vec x = randomRow<Scalar>(rng);
      REQUIRE(est.add(x, truth(x)) == Status::ok);
    }
    const auto s = est.solve();
    REQUIRE(s.status == Status::ok);
    CHECK(s.rank == 3);
    CHECK(s.coefficients(0) == doctest::Approx(2).epsilon(tol));
    CHECK(s.coefficients(1) == doctest::Approx(-3).epsilon(tol));
    CHECK(s.coefficients(2) == doctest::Approx(0.5).epsilon(tol));
    CHECK(s.intercept == doctest::Approx(1.5).epsilon(tol * 10));
    CHECK_FALSE(s.flags.any());
    const Vec x0(Scalar(1), Scalar(2), Scalar(3));
    CHECK(est.predict(x0) == doctest::Approx(double(truth(x0))).epsilon(tol * 10));
    const auto p = est.predictionInterval(x0);
    CHECK(p.status == Status::ok);
    CHECK(p.confidenceLower <= p.value);
    CHECK(p.predictionLower <= p.confidenceLower);
    // A confidence level outside (0, 1) has no t quantile: refused, not NaN intervals.
    for (const Scalar level : {Scalar(0), Scalar(1), Scalar(-0.5), Scalar(1.5), std::numeric_limits<Scalar>::quiet_NaN()}) {
      CAPTURE(level);
      CHECK(est.summarize(level).status == Status::invalid_argument);
      CHECK(est.predictionInterval(x0, level).status == Status::invalid_argument);
    }
    CHECK(est.summarize(Scalar(0.99)).status == Status::ok);
  }

  SUBCASE("bad input is refused with a distinct Status and leaves the state bit-identical") {
    auto est = F::make();
    for (int i = 0; i < 10; ++i) {
      const Vec x = randomRow<Scalar>(rng);
      REQUIRE(est.add(x, truth(x)) == Status::ok);
    }
    const auto before = est;
    static unsigned char snapshot[sizeof est];
    std::memcpy(snapshot, static_cast<const void*>(&est), sizeof est);
    const auto bytesEqual = [&]() {
      // Fixed-size estimators are plain values: compare every byte of the object. Dynamic ones
      // hold heap pointers, so compare what they report instead.
      if (F::Type::K != Eigen::Dynamic) return std::memcmp(snapshot, static_cast<const void*>(&est), sizeof est) == 0;
      return before.solve().coefficients == est.solve().coefficients && before.count() == est.count() &&
             before.weightSum() == est.weightSum();
    };
    const Scalar nan = std::numeric_limits<Scalar>::quiet_NaN();
    const Scalar inf = std::numeric_limits<Scalar>::infinity();
    Vec bad = randomRow<Scalar>(rng);
    bad(1) = nan;
    CHECK(est.add(bad, Scalar(1)) == Status::nonfinite_input);
    CHECK(bytesEqual());
    CHECK(est.add(randomRow<Scalar>(rng), inf) == Status::nonfinite_input);
    CHECK(bytesEqual());
    CHECK(est.add(randomRow<Scalar>(rng), Scalar(1), Scalar(-1)) == Status::negative_weight);
    CHECK(est.add(randomRow<Scalar>(rng), Scalar(1), nan) == Status::negative_weight);
    CHECK(bytesEqual());
    Eigen::Matrix<Scalar, Eigen::Dynamic, 1> wrong(4);
    wrong.setOnes();
    CHECK(est.add(wrong, Scalar(1)) == Status::wrong_size);
    CHECK(bytesEqual());
    // Zero weight: accepted, changes nothing.
    CHECK(est.add(randomRow<Scalar>(rng), Scalar(5), Scalar(0)) == Status::ok);
    CHECK(bytesEqual());
    // addRows is all-or-nothing. GivensQr's one-pass addRows folds into scratch (its explicit
    // factor and block buffers, formed again before every use), so for it the state is
    // compared through the snapshot image instead of every byte of the object.
    Eigen::Matrix<Scalar, Eigen::Dynamic, 3> X(3, 3);
    Eigen::Matrix<Scalar, Eigen::Dynamic, 1> y(3);
    X.setOnes();
    y.setOnes();
    X(2, 1) = nan;
    CHECK(est.addRows(X, y) == Status::nonfinite_input);
    if constexpr (decltype(est)::kind == rowfold::EstimatorKind::givens_qr) {
      std::vector<unsigned char> a(before.snapshotSize()), b(est.snapshotSize());
      std::size_t wa = 0, wb = 0;
      REQUIRE(before.snapshot(a.data(), a.size(), wa) == Status::ok);
      REQUIRE(est.snapshot(b.data(), b.size(), wb) == Status::ok);
      CHECK(a == b);
    } else {
      CHECK(bytesEqual());
    }
  }

  SUBCASE("a weight of 2 equals the sample folded twice") {
    auto a = F::make();
    auto b = F::make();
    for (int i = 0; i < 30; ++i) {
      const Vec x = randomRow<Scalar>(rng);
      const Scalar y = truth(x) + Scalar(std::normal_distribution<double>(0, 1)(rng));
      const Scalar w = (i % 3 == 0) ? Scalar(2) : Scalar(1);
      REQUIRE(a.add(x, y, w) == Status::ok);
      for (int r = 0; r < int(w); ++r) REQUIRE(b.add(x, y) == Status::ok);
    }
    const auto sa = a.solve();
    const auto sb = b.solve();
    for (int j = 0; j < 3; ++j) CHECK(sa.coefficients(j) == doctest::Approx(double(sb.coefficients(j))).epsilon(tol * 10));
    CHECK(sa.intercept == doctest::Approx(double(sb.intercept)).epsilon(tol * 10));
  }

  SUBCASE("forgetting: agrees with explicitly weighted BatchQr, and R'R/SSE stay consistent") {
    rowfold::FitOptions fit;
    fit.forgetting = 0.95;
    fit.windup.enabled = false;  // exact exponential weights (the guard holds uninformative steps)
    auto est = F::make(fit);
    typename Make<Batch, double, 3, false>::Type ref(3, [&] {
      rowfold::BatchQrOptions o;
      o.forgetting = 0.95;
      return o;
    }());
    for (int i = 0; i < 200; ++i) {
      Eigen::Matrix<double, 3, 1> xd = randomRow<double>(rng);
      // a drifting process: the first slope moves
      const double y = truth(xd) + 0.01 * i * xd(0) + std::normal_distribution<double>(0, 0.1)(rng);
      REQUIRE(est.add(Vec(xd.template cast<Scalar>()), Scalar(y)) == Status::ok);
      REQUIRE(ref.add(xd, y) == Status::ok);
    }
    const auto s = est.solve();
    const auto r = ref.solve();
    for (int j = 0; j < 3; ++j) CHECK(double(s.coefficients(j)) == doctest::Approx(r.coefficients(j)).epsilon(tol * 100));
    CHECK(est.effectiveCount() == doctest::Approx((1 + 0.95) / (1 - 0.95)).epsilon(1e-3));  // Kish, NUMERICS §7.2
  }

  SUBCASE("exactly collinear inputs give a defined answer with rank_deficient, never NaN") {
    auto est = F::make();
    for (int i = 0; i < 40; ++i) {
      Vec x = randomRow<Scalar>(rng);
      x(2) = x(0) + x(1);
      REQUIRE(est.add(x, truth(x)) == Status::ok);
    }
    const auto s = est.solve();
    CHECK(s.status == Status::ok);
    CHECK(s.coefficients.allFinite());
    CHECK(std::isfinite(s.intercept));
    CHECK(s.flags.has(Flag::rank_deficient));
    CHECK(s.rank == 2);
    const auto c = est.conditioning();
    CHECK(c.flags.has(Flag::rank_deficient));
    CHECK(c.flags.has(Flag::near_singular));
  }

  SUBCASE("too few samples is flagged") {
    auto est = F::make();
    for (int i = 0; i < 3; ++i) {
      const Vec x = randomRow<Scalar>(rng);
      REQUIRE(est.add(x, truth(x)) == Status::ok);
    }
    CHECK(est.solve().flags.has(Flag::too_few_samples));
  }

  SUBCASE("invalid options are refused with a Status, not an assert") {
    rowfold::FitOptions fit;
    fit.forgetting = 0.0;
    auto est = F::make(fit);
    CHECK(est.status() == Status::invalid_options);
    CHECK(est.add(randomRow<Scalar>(rng), Scalar(1)) == Status::invalid_options);
    CHECK(est.count() == 0);
  }

  SUBCASE("a size that does not fit is refused with a Status, not an assert") {
    // Fixed K = 3: any other k; runtime K: k <= 0. Eigen's assertions are counted (alloc fence).
    using Type = typename F::Type;
    for (const Eigen::Index k : {Eigen::Index(-3), Eigen::Index(0), Eigen::Index(Type::K == Eigen::Dynamic ? -1 : 4)}) {
      const long hitsBefore = rowfold_test::eigenAssertHits.load();
      Type est(k, typename Type::Options());
      CHECK(est.status() == Status::wrong_size);
      CHECK(est.add(randomRow<Scalar>(rng), Scalar(1)) == Status::wrong_size);
      CHECK(est.count() == 0);
      const auto s = est.solve();
      CHECK(s.status != Status::ok);
      CHECK(s.coefficients.allFinite());
      CHECK(rowfold_test::eigenAssertHits.load() == hitsBefore);
    }
  }

  SUBCASE("reset forgets everything") {
    auto est = F::make();
    for (int i = 0; i < 10; ++i) REQUIRE(est.add(randomRow<Scalar>(rng), Scalar(1)) == Status::ok);
    est.reset();
    CHECK(est.count() == 0);
    CHECK(est.solve().status == Status::empty);
  }
}

TEST_CASE_TEMPLATE_INVOKE(contract_id, ROWFOLD_WITH_FLOAT(ROWFOLD_CONTRACT_TYPES(float)) ROWFOLD_CONTRACT_TYPES(double)
                          ROWFOLD_WITH_LONG_DOUBLE(ROWFOLD_CONTRACT_TYPES(long double)));

TEST_CASE("a bounded MaxK and a runtime capacity that do not fit are refused with a Status, not an assert") {
  const long hitsBefore = rowfold_test::eigenAssertHits.load();
  rowfold::NormalEquations<double, Eigen::Dynamic, 4> over(6, {});
  CHECK(over.status() == Status::wrong_size);
  CHECK(over.add(Eigen::VectorXd::Ones(6), 1.0) == Status::wrong_size);
  rowfold::GivensQr<float, Eigen::Dynamic, 4> overFloat(5, {});
  CHECK(overFloat.status() == Status::wrong_size);
  rowfold::BatchQrOptions negative;
  negative.capacity = -5;
  rowfold::BatchQr<double, Eigen::Dynamic> batch(2, negative);
  CHECK(batch.status() == Status::invalid_options);
  CHECK(batch.add(Eigen::Vector2d(1, 2), 1.0) == Status::invalid_options);
  // g++ 12 -O2 once rejected a TU building these two with -Werror (-Walloc-size-larger-than on
  // the unchecked negative k); the tests build with -Werror.
  rowfold::NormalEquations<long double, Eigen::Dynamic> wide(-1, {});
  CHECK(wide.status() == Status::wrong_size);
  rowfold::NormalEquations<double, Eigen::Dynamic> fits(3, {});
  CHECK(fits.status() == Status::ok);
  CHECK(rowfold_test::eigenAssertHits.load() == hitsBefore);
}

TEST_CASE("collinear inputs raise the VIF flag (threshold 10 = common practice, Marquardt 1970)") {
  rowfold::GivensQr<double, 2> est;
  std::mt19937_64 rng(7);
  std::normal_distribution<double> n(0, 1);
  for (int i = 0; i < 500; ++i) {
    const double a = n(rng);
    Eigen::Vector2d x(a, a + 0.1 * n(rng));  // corr ~ 0.995 -> VIF ~ 100
    REQUIRE(est.add(x, a + n(rng)) == Status::ok);
  }
  const auto c = est.conditioning();
  CHECK(c.flags.has(Flag::collinear));
  CHECK(c.vif(0) > 10);
  CHECK_FALSE(c.flags.has(Flag::near_singular));
}

namespace {

// addRows with a bad row in a late block, after many clean blocks have been folded into the
// call's accumulator: the state (snapshot image, and for fixed K with `wholeObject` every byte
// of the object) is as before, and the Status is the one add() gives for the first bad row, in
// row order. GivensQr folds into its explicit factor and block buffers, scratch that is not
// state (formed again before every use), so only its snapshot image is compared.
template <typename E>
void lateBlockRefusal(E est, bool wholeObject = true) {
  using Mat = Eigen::Matrix<double, Eigen::Dynamic, 3, Eigen::RowMajor>;
  std::mt19937_64 rng(11);
  for (int i = 0; i < 20; ++i) REQUIRE(est.add(randomRow<double>(rng), double(i)) == Status::ok);
  const Eigen::Index n = 5000, bad = 4321;
  Mat X(n, 3);
  Eigen::VectorXd y(n), w = Eigen::VectorXd::Ones(n);
  for (Eigen::Index r = 0; r < n; ++r) {
    X.row(r) = randomRow<double>(rng).transpose();
    y(r) = truth<double>(X.row(r).transpose());
  }
  std::vector<unsigned char> image(est.snapshotSize()), after(est.snapshotSize());
  std::size_t written = 0;
  REQUIRE(est.snapshot(image.data(), image.size(), written) == Status::ok);
  static unsigned char bytes[sizeof(E)];
  std::memcpy(bytes, static_cast<const void*>(&est), sizeof(E));
  const double nan = std::numeric_limits<double>::quiet_NaN(), inf = std::numeric_limits<double>::infinity();
  const auto unchanged = [&]() {
    std::size_t wr = 0;
    REQUIRE(est.snapshot(after.data(), after.size(), wr) == Status::ok);
    const bool object =
        !wholeObject || E::K == Eigen::Dynamic || std::memcmp(bytes, static_cast<const void*>(&est), sizeof(E)) == 0;
    return object && after == image;
  };
  // Reference Status of a row: what add() on a copy says.
  const auto addStatus = [&](Eigen::Index r) {
    E copy = est;
    return copy.add(X.row(r).transpose(), y(r), w(r));
  };
  struct Case {
    const char* what;
    Eigen::Index row;
    int col;        // 0..2: x, 3: y, 4: w
    double value;
    Status expected;
  };
  const Case cases[] = {{"NaN in x", bad, 1, nan, Status::nonfinite_input},
                        {"Inf in y", bad, 3, inf, Status::nonfinite_input},
                        {"negative weight", bad, 4, -1.0, Status::negative_weight},
                        {"NaN weight", bad, 4, nan, Status::negative_weight},
                        {"NaN in the last row", n - 1, 0, nan, Status::nonfinite_input}};
  for (const bool weighted : {false, true}) {
    for (const Case& c : cases) {
      if (!weighted && c.col == 4) continue;
      CAPTURE(c.what);
      CAPTURE(weighted);
      Mat Xb = X;
      Eigen::VectorXd yb = y, wb = w;
      if (c.col < 3) Xb(c.row, c.col) = c.value;
      if (c.col == 3) yb(c.row) = c.value;
      if (c.col == 4) wb(c.row) = c.value;
      std::swap(X, Xb);
      std::swap(y, yb);
      std::swap(w, wb);
      CHECK(addStatus(c.row) == c.expected);
      std::swap(X, Xb);
      std::swap(y, yb);
      std::swap(w, wb);
      CHECK((weighted ? est.addRows(Xb, yb, wb) : est.addRows(Xb, yb)) == c.expected);
      CHECK(unchanged());
    }
  }
  // Two bad rows in one block: the first in row order decides; a zero-weight row is still checked.
  Mat Xb = X;
  Eigen::VectorXd wb = w;
  wb(bad) = -2;
  Xb(bad + 3, 0) = nan;
  CHECK(est.addRows(Xb, y, wb) == Status::negative_weight);
  CHECK(unchanged());
  wb(bad) = 0;
  Xb(bad, 2) = inf;
  CHECK(est.addRows(Xb, y, wb) == Status::nonfinite_input);
  CHECK(unchanged());
  // The clean call is accepted and recovers the exact model.
  REQUIRE(est.addRows(X, y) == Status::ok);
  CHECK(est.count() == 20u + static_cast<std::uint64_t>(n));
}

}  // namespace

TEST_CASE("NormalEquations and GivensQr addRows: a bad row in a late block leaves the state byte-identical") {
  lateBlockRefusal(rowfold::NormalEquations<double, 3>());
  lateBlockRefusal(rowfold::NormalEquations<double, Eigen::Dynamic>(3, rowfold::NormalEquationsOptions()));
  lateBlockRefusal(rowfold::GivensQr<double, 3>(), false);
  lateBlockRefusal(rowfold::GivensQr<double, Eigen::Dynamic>(3, rowfold::GivensQrOptions()), false);
}

// ---- No heap in the hot path ----
// Every estimator x Scalar x fixed/dynamic K (dynamic: after construction) runs add / addRows /
// merge / relax / advance / addDelayed / solveInto / summarizeInto / conditioningInto /
// covariance / correlation / predict / predictionInterval / snapshot / restore inside the fence:
// Eigen's runtime allocation check (EIGEN_RUNTIME_NO_MALLOC + set_is_malloc_allowed(false)) and
// a counting global operator new/delete (any C++ allocation).
namespace {

using rowfold::Status;

// The contract's types (K = 3, BatchQr capacity 256), with every guard path switched on.
template <template <typename, int, int> class E, typename S, bool Dyn>
struct GuardedMake {
  using Type = E<S, Dyn ? Eigen::Dynamic : 3, Dyn ? Eigen::Dynamic : 3>;
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
    return Type(3, o);
  }
};
#define ROWFOLD_NOHEAP_TYPES(S)                                                                \
  GuardedMake<Batch, S, false>, GuardedMake<rowfold::GivensQr, S, false>,                      \
      GuardedMake<rowfold::NormalEquations, S, false>, GuardedMake<rowfold::ForgettingRls, S, false>, \
      GuardedMake<Batch, S, true>, GuardedMake<rowfold::GivensQr, S, true>,                    \
      GuardedMake<rowfold::NormalEquations, S, true>, GuardedMake<rowfold::ForgettingRls, S, true>

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
  constexpr int k = 3;
  // Construction and output objects may allocate (dynamic K); nothing after that.
  Est est = F::make();
  Est other = F::make();
  Est part = F::make();
  typename Est::SolutionType sol(k);
  typename Est::SummaryType sum(k);
  typename Est::ConditioningType cond(k);
  typename Est::Matrix cov(k, k), corr(k, k);
  Eigen::Matrix<Scalar, Eigen::Dynamic, Eigen::Dynamic> X(8, k);
  Eigen::Matrix<Scalar, Eigen::Dynamic, 1> y(8), x0(k);
  Lcg g;
  for (int i = 0; i < 8; ++i) {
    for (int j = 0; j < k; ++j) X(i, j) = Scalar(g.next() + j);
    // the model of the fenced samples below, so that the outlier gate passes them
    y(i) = Scalar(1) + X(i, 0) - Scalar(2) * X(i, 2) + Scalar(0.01) * Scalar(g.next());
  }
  x0.setConstant(Scalar(0.5));
  for (int i = 0; i < 8; ++i) REQUIRE(part.add(Eigen::Matrix<Scalar, 3, 1>(X.row(i).transpose()), y(i)) == Status::ok);
  std::vector<unsigned char> image(est.snapshotSize() + 64 * k * 8 * sizeof(Scalar));

  rowfold_test::fenceOn();

  Eigen::Matrix<Scalar, 3, 1> x;
  for (int i = 0; i < 60; ++i) {
    for (int j = 0; j < k; ++j) x(j) = Scalar(g.next() + j);
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

  rowfold_test::fenceOff();

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
  CHECK(sol.rank == k);
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
