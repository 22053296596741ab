// Regression statistics against an independent worked example.
// Reference: NUMERICS.md §7.1 check vector (shared project reference; values computed in exact
// rational arithmetic with Python `fractions`, tagged [H] there): x = 1..8,
// y = (1.5, 3.1, 4.4, 6.2, 7.4, 9.1, 10.4, 12.3). The t quantile t(0.975, 6) = 2.44691185114497
// is the same source's 50-digit mpmath value (NIST/SEMATECH e-Handbook §1.3.6.7.2 prints 2.447).
#include <doctest/doctest.h>

#include "rowfold/rowfold.hpp"
#include "support/doctest_rowfold.hpp"

namespace {

template <typename Est>
void checkWorkedExample(Est& est, double tol) {
  const double ys[] = {1.5, 3.1, 4.4, 6.2, 7.4, 9.1, 10.4, 12.3};
  for (int i = 0; i < 8; ++i) {
    Eigen::Matrix<double, 1, 1> x;
    x << double(i + 1);
    REQUIRE(est.add(x, ys[i]) == rowfold::Status::ok);
  }
  const auto s = est.summarize(0.95);
  REQUIRE(s.status == rowfold::Status::ok);
  CHECK(s.intercept == doctest::Approx(-0.025).epsilon(tol * 100));  // b0 is a small difference
  CHECK(s.coefficients(0) == doctest::Approx(1.51666666666667).epsilon(tol));
  CHECK(s.sse == doctest::Approx(0.148333333333333).epsilon(tol * 100));
  CHECK(s.residualStandardError == doctest::Approx(0.157233018867610).epsilon(tol * 100));
  CHECK(s.interceptStandardError == doctest::Approx(0.122514981267275).epsilon(tol * 100));
  CHECK(s.standardErrors(0) == doctest::Approx(0.0242615815359250).epsilon(tol * 100));
  CHECK(s.tValues(0) == doctest::Approx(62.5130997507677).epsilon(tol * 100));
  CHECK(s.rSquared == doctest::Approx(0.998466997381838).epsilon(tol));
  CHECK(s.adjustedRSquared == doctest::Approx(0.998211496945478).epsilon(tol));
  CHECK(s.fStatistic == doctest::Approx(3907.88764044944).epsilon(tol * 100));
  CHECK(s.residualDof == doctest::Approx(6.0));
  CHECK(s.tQuantile == doctest::Approx(2.44691185114497).epsilon(1e-12));
  // Confidence interval of the slope: b1 +- t(0.975, 6) SE(b1).
  CHECK(s.upper(0) - s.lower(0) == doctest::Approx(2 * 2.44691185114497 * 0.0242615815359250).epsilon(tol * 100));

  Eigen::Matrix<double, 1, 1> x0;
  x0 << 10.0;
  const auto p = est.predictionInterval(x0, 0.95);
  REQUIRE(p.status == rowfold::Status::ok);
  CHECK(p.value == doctest::Approx(15.1416666666667).epsilon(tol));
  CHECK(p.leverage == doctest::Approx(71.0 / 84.0).epsilon(tol * 100));
  CHECK(p.predictionUpper - p.value == doctest::Approx(0.522622716951).epsilon(1e-10));
  CHECK(p.confidenceUpper - p.value == doctest::Approx(0.353713478027).epsilon(1e-10));
  CHECK(est.predict(x0) == doctest::Approx(15.1416666666667).epsilon(tol));
}

}  // namespace

TEST_CASE("Worked example (NUMERICS §7.1): every estimator reproduces the exact statistics") {
  SUBCASE("BatchQr") {
    rowfold::BatchQr<double, 1, 16> est;
    checkWorkedExample(est, 1e-13);
  }
  SUBCASE("GivensQr") {
    rowfold::GivensQr<double, 1> est;
    checkWorkedExample(est, 1e-13);
  }
  SUBCASE("NormalEquations") {
    rowfold::NormalEquations<double, 1> est;
    checkWorkedExample(est, 1e-12);
  }
  SUBCASE("ForgettingRls") {
    rowfold::ForgettingRls<double, 1> est;
    checkWorkedExample(est, 1e-12);
  }
  SUBCASE("GivensQr, dynamic K") {
    rowfold::GivensQr<double, Eigen::Dynamic> est(1, rowfold::GivensQrOptions{});
    checkWorkedExample(est, 1e-13);
  }
}

TEST_CASE("Pairwise merge check values (NUMERICS §5): centered cross-products and means") {
  // Same data; exact rational values Sxx = 42, Sxy = 63.7, Syy = 96.76, xbar = 4.5, ybar = 6.8.
  const double ys[] = {1.5, 3.1, 4.4, 6.2, 7.4, 9.1, 10.4, 12.3};
  rowfold::GivensQr<double, 1> est;
  for (int i = 0; i < 8; ++i) REQUIRE(est.add(Eigen::Matrix<double, 1, 1>::Constant(i + 1.0), ys[i]) == rowfold::Status::ok);
  Eigen::Matrix<double, 1, 1> M, m;
  double syy = 0;
  REQUIRE(est.crossProducts(M, m, syy) == rowfold::Status::ok);
  CHECK(M(0, 0) == doctest::Approx(42.0).epsilon(1e-14));
  CHECK(m(0) == doctest::Approx(63.7).epsilon(1e-14));
  CHECK(syy == doctest::Approx(96.76).epsilon(1e-14));
  CHECK(est.centering().xMean()(0) == doctest::Approx(4.5).epsilon(1e-15));
  CHECK(est.centering().yMean() == doctest::Approx(6.8).epsilon(1e-15));
  Eigen::Matrix<double, 1, 1> C;
  REQUIRE(est.correlation(C) == rowfold::Status::ok);
  CHECK(C(0, 0) == doctest::Approx(1.0));
}

namespace {

template <typename Est>
void checkCollinear() {
  // Invented data with b = 2 a exactly: a = 1..5, y = (3, 5, 4, 1, 2). The basic solution
  // regresses y on a alone; by hand: a-bar = 3, y-bar = 3, Saa = 10, Say = -6, so b_a = -0.6,
  // b_b = 0, b0 = 3 + 1.8 = 4.8, SST = 10, SSE = 10 - 36/10 = 6.4, R^2 = 0.36.
  Est est(2, typename Est::Options{});
  const double y[] = {3, 5, 4, 1, 2};
  for (int i = 0; i < 5; ++i) REQUIRE(est.add(Eigen::Vector2d(i + 1.0, 2.0 * (i + 1.0)), y[i]) == rowfold::Status::ok);
  const auto s = est.summarize();
  REQUIRE(s.status == rowfold::Status::ok);
  CHECK(s.flags.has(rowfold::Flag::rank_deficient));
  CHECK(s.coefficients(0) == doctest::Approx(-0.6).epsilon(1e-9));
  CHECK(s.coefficients(1) == doctest::Approx(0.0).scale(1.0).epsilon(1e-9));
  CHECK(s.intercept == doctest::Approx(4.8).epsilon(1e-9));
  CHECK(s.sse == doctest::Approx(6.4).epsilon(1e-9));
  CHECK(s.rSquared == doctest::Approx(0.36).epsilon(1e-9));
}

}  // namespace

TEST_CASE("Exactly collinear inputs: the basic solution's residual (hand-computed) for every estimator") {
  // GivensQr once reported R^2 0.536: the residual left in a rounding-level dependent row of
  // its factor was missing from the SSE (found by the rowfold-compare tests).
  checkCollinear<rowfold::GivensQr<double, Eigen::Dynamic>>();
  checkCollinear<rowfold::NormalEquations<double, Eigen::Dynamic>>();
  checkCollinear<rowfold::ForgettingRls<double, Eigen::Dynamic>>();
  checkCollinear<rowfold::BatchQr<double, Eigen::Dynamic>>();
}
