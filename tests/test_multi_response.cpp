// Several responses on one set of regressors (MultiResponse). References:
//  - NIST StRD Wampler1-5: test_multi_response_nist.cpp (the second translation unit of this
//    executable);
//  - here, the single-response estimators of this library fed (x, y_j) (NIST-checked in
//    tests/test_nist.cpp) for what NIST does not cover: forgetting, late samples, relaxing.
// The allocation fence goes first (it replaces operator new for this executable).
#include "support/alloc_fence.hpp"

#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <ostream>
#include <random>
#include <string>
#include <vector>

#include "rowfold/rowfold.hpp"
#include "support/doctest_rowfold.hpp"
#include "support/snapshot_image.hpp"

namespace {

using rowfold::Flag;
using rowfold::Status;
using rowfold_test::image;
constexpr int Dyn = Eigen::Dynamic;

}  // namespace

namespace {

// Invented process: 3 inputs, 3 responses with their own slopes and noise; input 3 tracks input
// 1 closely (collinear), offsets far from zero.
struct Stream {
  std::mt19937 gen{20261202u};
  std::normal_distribution<double> n01{0.0, 1.0};
  Eigen::Vector3d x() {
    const double a = n01(gen), b = n01(gen), c = n01(gen);
    return Eigen::Vector3d(40.0 + a, 7.0 + 2.0 * b, 40.0 + a + 0.05 * c);
  }
  Eigen::Vector3d y(const Eigen::Vector3d& x) {
    const double e1 = n01(gen), e2 = n01(gen), e3 = n01(gen);
    return Eigen::Vector3d(3.0 + 0.5 * x(0) - 1.0 * x(1) + 0.2 * x(2) + 0.1 * e1, -20.0 + 2.0 * x(1) + 0.3 * e2,
                           1.0 * x(0) - 0.7 * x(2) + 0.05 * x(1) + 1e-3 * e3);
  }
};

// Every response's view against a single-response estimator fed (x, y_j) with the same
// options: slopes, intercept, SEs, residual SE, R^2 and effective count.
template <typename Single, typename Multi>
void compareViews(const Multi& multi, const std::vector<Single>& singles, double tol) {
  for (Eigen::Index j = 0; j < multi.responses(); ++j) {
    CAPTURE(j);
    const auto v = multi.response(j).summarize();
    const auto s = singles[static_cast<std::size_t>(j)].summarize();
    REQUIRE(v.status == Status::ok);
    REQUIRE(s.status == Status::ok);
    const double scale = 1.0 + s.coefficients.cwiseAbs().maxCoeff();
    CHECK((v.coefficients - s.coefficients).cwiseAbs().maxCoeff() <= tol * scale);
    CHECK(std::abs(v.intercept - s.intercept) <= tol * (scale + std::abs(s.intercept)) * 100.0);
    CHECK((v.standardErrors - s.standardErrors).cwiseAbs().maxCoeff() <= tol * 100.0 * s.standardErrors.maxCoeff());
    CHECK(std::abs(v.residualStandardError - s.residualStandardError) <= tol * 100.0 * s.residualStandardError);
    CHECK(std::abs(v.rSquared - s.rSquared) <= tol * 100.0);
    CHECK(std::abs(v.effectiveCount - s.effectiveCount) <= 1e-9 * s.effectiveCount);
    CHECK(v.count == s.count);
  }
}

template <typename Single>
void trackCase(typename Single::Options o, double tol) {
  using Multi = rowfold::MultiResponse<Single, 3>;
  o.windup.enabled = false;
  Multi multi(o);
  REQUIRE(multi.status() == Status::ok);
  std::vector<Single> singles(3, Single(o));
  Stream st;
  const auto feed = [&](int kind, std::uint64_t age) {
    const Eigen::Vector3d x = st.x(), y = st.y(x);
    if (kind == 0) {
      REQUIRE(multi.add(x, y) == Status::ok);
      for (int j = 0; j < 3; ++j) REQUIRE(singles[static_cast<std::size_t>(j)].add(x, y(j)) == Status::ok);
    } else {
      REQUIRE(multi.addDelayed(x, y, age, 0.5) == Status::ok);
      for (int j = 0; j < 3; ++j) REQUIRE(singles[static_cast<std::size_t>(j)].addDelayed(x, y(j), age, 0.5) == Status::ok);
    }
  };
  for (int i = 0; i < 2; ++i) feed(0, 0);  // before ForgettingRls's exact start
  feed(1, 1);                              // a late sample before the start
  for (int i = 0; i < 400; ++i) {
    feed(i % 7 == 3 ? 1 : 0, static_cast<std::uint64_t>(i % 5));
    if (i == 150) {
      REQUIRE(multi.advance(3) == Status::ok);
      for (auto& s : singles) REQUIRE(s.advance(3) == Status::ok);
    }
    if (i == 250) {
      REQUIRE(multi.relax(0.25) == Status::ok);
      for (auto& s : singles) REQUIRE(s.relax(0.25) == Status::ok);
    }
  }
  compareViews(multi, singles, tol);
  // solveInto / predict agree with the views.
  Eigen::Matrix3d B;
  Eigen::Vector3d b0, yhat;
  rowfold::Flags flags;
  REQUIRE(multi.solveInto(B, b0, flags) == Status::ok);
  const Eigen::Vector3d x0(41.0, 6.0, 41.2);
  REQUIRE(multi.predict(x0, yhat) == Status::ok);
  for (int j = 0; j < 3; ++j) {
    const auto sol = singles[static_cast<std::size_t>(j)].solve();
    CHECK((B.col(j) - sol.coefficients).cwiseAbs().maxCoeff() <= tol * (1.0 + sol.coefficients.cwiseAbs().maxCoeff()));
    CHECK(std::abs(yhat(j) - singles[static_cast<std::size_t>(j)].predict(x0)) <= tol * 1e3);
  }
}

}  // namespace

TEST_CASE("Forgetting, late samples, advance and relax: every response equals its own single-response fit") {
  // Tolerances: the collinear pair gives kappa_s ~ 1e2..1e3; the views differ from the single
  // fits by the rounding of the shared update only (cross-product forms square kappa).
  rowfold::GivensQrOptions g;
  g.forgetting = 0.98;
  trackCase<rowfold::GivensQr<double, 3>>(g, 1e-9);
  rowfold::NormalEquationsOptions n;
  n.forgetting = 0.98;
  trackCase<rowfold::NormalEquations<double, 3>>(n, 1e-8);
  rowfold::ForgettingRlsOptions r;
  r.forgetting = 0.98;
  trackCase<rowfold::ForgettingRls<double, 3>>(r, 1e-8);
  r.start = rowfold::RlsStart::prior;
  r.priorPrecision = 1e-3;
  trackCase<rowfold::ForgettingRls<double, 3>>(r, 1e-8);
  rowfold::BatchQrOptions b;
  b.forgetting = 0.98;
  b.capacity = 100;
  b.slide = true;
  using Batch = rowfold::BatchQr<double, 3>;
  using MultiB = rowfold::MultiResponse<Batch, 3>;
  b.windup.enabled = false;
  MultiB mb(b);
  std::vector<Batch> sb(3, Batch(b));
  Stream st;
  for (int i = 0; i < 250; ++i) {
    const Eigen::Vector3d x = st.x(), y = st.y(x);
    REQUIRE(mb.add(x, y) == Status::ok);
    for (int j = 0; j < 3; ++j) REQUIRE(sb[static_cast<std::size_t>(j)].add(x, y(j)) == Status::ok);
  }
  compareViews(mb, sb, 1e-12);  // the same rows, solved the same way
}

TEST_CASE("Contract: statuses, all-or-nothing, snapshot round trip") {
  using Multi = rowfold::MultiResponse<rowfold::GivensQr<double, 3>, 2>;
  Multi fit;
  REQUIRE(fit.status() == Status::ok);
  SUBCASE("the windup guard is supported; the guards that judge one response are refused") {
    rowfold::GivensQrOptions o;
    o.forgetting = 0.99;  // windup guard on by default
    CHECK(Multi(o).status() == Status::ok);
    o.windup.regularization = 1e-3;
    CHECK(Multi(o).status() == Status::invalid_options);
    o.windup.regularization = 0.0;
    o.windup.variableForgetting = true;
    CHECK(Multi(o).status() == Status::invalid_options);
    o.windup.variableForgetting = false;
    o.windup.changeThreshold = 20.0;
    CHECK(Multi(o).status() == Status::invalid_options);
    o.windup.enabled = false;
    CHECK(Multi(o).status() == Status::ok);  // those options only matter with the guard on
    o.outliers.enabled = true;
    CHECK(Multi(o).status() == Status::invalid_options);
    CHECK(Multi(o).add(Eigen::Vector3d(1, 2, 3), Eigen::Vector2d(1, 2)) == Status::invalid_options);
    using DynMulti = rowfold::MultiResponse<rowfold::GivensQr<double, Dyn>, Dyn>;
    CHECK(DynMulti(3, 0, rowfold::GivensQrOptions()).status() == Status::wrong_size);
    CHECK(DynMulti(0, 2, rowfold::GivensQrOptions()).status() == Status::wrong_size);
    // A K above a bounded MaxK: refused with a Status, not Eigen's assertion (counted by the fence).
    const long hitsBefore = rowfold_test::eigenAssertHits.load();
    using BoundedMulti = rowfold::MultiResponse<rowfold::GivensQr<double, Dyn, 4>, Dyn>;
    CHECK(BoundedMulti(6, 2, rowfold::GivensQrOptions()).status() == Status::wrong_size);
    CHECK(rowfold_test::eigenAssertHits.load() == hitsBefore);
  }
  Stream st;
  for (int i = 0; i < 20; ++i) {
    const Eigen::Vector3d x = st.x(), y = st.y(x);
    REQUIRE(fit.add(x, y.head<2>()) == Status::ok);
  }
  const auto before = image(fit);
  SUBCASE("rejected samples leave the image byte-identical") {
    const double nan = std::numeric_limits<double>::quiet_NaN();
    CHECK(fit.add(Eigen::Vector3d(1, 2, 3), Eigen::Vector2d(nan, 1)) == Status::nonfinite_input);
    CHECK(fit.add(Eigen::Vector3d(1, nan, 3), Eigen::Vector2d(1, 1)) == Status::nonfinite_input);
    CHECK(fit.add(Eigen::Vector3d(1, 2, 3), Eigen::Vector3d(1, 1, 1)) == Status::wrong_size);
    CHECK(fit.add(Eigen::Vector3d(1, 2, 3), Eigen::Vector2d(1, 1), -1.0) == Status::negative_weight);
    Eigen::Matrix<double, 4, 3> X = Eigen::Matrix<double, 4, 3>::Ones();
    Eigen::Matrix<double, 4, 2> Y = Eigen::Matrix<double, 4, 2>::Ones();
    Y(3, 1) = std::numeric_limits<double>::infinity();
    CHECK(fit.addRows(X, Y) == Status::nonfinite_input);
    CHECK(image(fit) == before);
    CHECK(fit.response(2).count() == 0);  // out of range: an empty view
  }
  SUBCASE("snapshot restores the same state; mismatches and corruption are refused") {
    Multi copy;
    REQUIRE(copy.restore(before.data(), before.size()) == Status::ok);
    CHECK(image(copy) == before);
    const Eigen::Vector3d x = st.x(), y = st.y(x);
    REQUIRE(fit.add(x, y.head<2>()) == Status::ok);
    REQUIRE(copy.add(x, y.head<2>()) == Status::ok);
    CHECK(image(copy) == image(fit));
    auto bad = before;
    bad[bad.size() / 2] ^= 1;
    CHECK(copy.restore(bad.data(), bad.size()) == Status::corrupt_image);
    // Same joint width K + M - 1 = 4, other split: refused.
    rowfold::MultiResponse<rowfold::GivensQr<double, 2>, 3> other;
    CHECK(other.restore(before.data(), before.size()) == Status::image_mismatch);
    // ForgettingRls carries per-response parts after the inner image.
    rowfold::ForgettingRlsOptions ro;
    rowfold::MultiResponse<rowfold::ForgettingRls<double, 3>, 3> r1(ro), r2(ro);
    for (int i = 0; i < 10; ++i) {
      const Eigen::Vector3d xr = st.x();
      REQUIRE(r1.add(xr, st.y(xr)) == Status::ok);
    }
    const auto ri = image(r1);
    REQUIRE(r2.restore(ri.data(), ri.size()) == Status::ok);
    CHECK(image(r2) == ri);
    CHECK(r2.response(2).solve().coefficients == r1.response(2).solve().coefficients);
  }
  SUBCASE("BatchQr: a batch that does not fit is refused whole") {
    rowfold::BatchQrOptions o;
    o.capacity = 5;
    rowfold::MultiResponse<rowfold::BatchQr<double, 3>, 2> b(o);
    Eigen::Matrix<double, 6, 3> X = Eigen::Matrix<double, 6, 3>::Random();
    Eigen::Matrix<double, 6, 2> Y = Eigen::Matrix<double, 6, 2>::Random();
    CHECK(b.addRows(X, Y) == Status::capacity_full);
    CHECK(b.count() == 0);
    CHECK(b.addRows(X.topRows(5), Y.topRows(5)) == Status::ok);
    CHECK(b.add(Eigen::Vector3d(1, 2, 3), Eigen::Vector2d(1, 2)) == Status::capacity_full);
  }
}

namespace {

// The windup guard decides on the regressors alone, so a guarded multi-response fit must equal
// the guarded single-response fit of each response, hold for hold and floor row for floor row.
// Invented scenario (as tests/test_tracking.cpp): y_j = a_j + t_j1 x1 + t_j2 x2 + noise, lambda
// 0.98; excited, then both inputs parked, then x2 parked while x1 moves, then excited again
// after a gain step.
template <typename Single>
void guardedCase() {
  using S = typename Single::Scalar;
  using Multi = rowfold::MultiResponse<Single, 3>;
  typename Single::Options o;
  o.forgetting = 0.98;  // the windup guard is on by default
  Multi multi(o);
  REQUIRE(multi.status() == Status::ok);
  std::vector<Single> singles(3, Single(o));
  std::mt19937_64 rng(7);
  std::normal_distribution<double> n01(0, 1);
  Eigen::Matrix<double, 3, 2> T;
  T << 0.8, -0.5, 2.0, 0.3, -1.0, 1.5;
  const Eigen::Vector3d a(1.0, -2.0, 5.0);
  Eigen::Matrix<S, 2, 1> x(S(0.3), S(-1.2));
  bool lowSeen = false, guardedSeen = false;
  const auto sample = [&](bool move1, bool move2) {
    if (move1) x(0) = S(n01(rng));
    if (move2) x(1) = S(n01(rng));
    Eigen::Matrix<S, 3, 1> y;
    for (int j = 0; j < 3; ++j) y(j) = S(a(j) + T.row(j).dot(x.template cast<double>()) + 0.01 * n01(rng));
    REQUIRE(multi.add(x, y) == Status::ok);
    for (int j = 0; j < 3; ++j) REQUIRE(singles[static_cast<std::size_t>(j)].add(x, y(j)) == Status::ok);
  };
  const auto compare = [&]() {
    for (Eigen::Index j = 0; j < 3; ++j) {
      CAPTURE(j);
      const auto v = multi.response(j).solve();
      const auto s = singles[static_cast<std::size_t>(j)].solve();
      REQUIRE(v.status == Status::ok);
      CHECK((v.coefficients - s.coefficients).cwiseAbs().maxCoeff() <= 1e-8);
      CHECK(std::abs(v.intercept - s.intercept) <= 1e-8);
      CHECK(v.flags == s.flags);
      // The statistics too: the hold forgets the residual part (T), not the slope information.
      const auto vs = multi.response(j).summarize(), ss = singles[static_cast<std::size_t>(j)].summarize();
      CHECK(std::abs(vs.residualStandardError - ss.residualStandardError) <= 1e-8 * ss.residualStandardError);
      CHECK((vs.standardErrors - ss.standardErrors).cwiseAbs().maxCoeff() <= 1e-8 * ss.standardErrors.maxCoeff());
      CHECK(std::abs(vs.effectiveCount - ss.effectiveCount) <= 1e-9 * ss.effectiveCount);
      CHECK(std::abs(vs.sst - ss.sst) <= 1e-9 * ss.sst);
      CHECK(std::abs(vs.rSquared - ss.rSquared) <= 1e-8);
      lowSeen = lowSeen || v.flags.has(Flag::low_excitation);
      guardedSeen = guardedSeen || v.flags.has(Flag::windup_guarded);
    }
  };
  for (int i = 0; i < 500; ++i) sample(true, true);
  x.setZero();
  for (int i = 0; i < 3000; ++i) {
    sample(false, false);
    if (i % 500 == 0) compare();
  }
  for (int i = 0; i < 3000; ++i) {
    sample(true, false);
    if (i % 500 == 0) compare();
  }
  T(0, 0) += 0.5;
  for (int i = 0; i < 150; ++i) sample(true, true);
  // The rest of the restart as one batch: addRows runs the guard row by row, like add.
  Eigen::Matrix<S, 150, 2> X;
  Eigen::Matrix<S, 150, 3> Y;
  for (int i = 0; i < 150; ++i) {
    X.row(i) = Eigen::Matrix<S, 1, 2>(S(n01(rng)), S(n01(rng)));
    for (int j = 0; j < 3; ++j) Y(i, j) = S(a(j) + T.row(j).dot(X.row(i).transpose().template cast<double>()) + 0.01 * n01(rng));
  }
  REQUIRE(multi.addRows(X, Y) == Status::ok);
  for (int j = 0; j < 3; ++j) REQUIRE(singles[static_cast<std::size_t>(j)].addRows(X, Y.col(j)) == Status::ok);
  compare();
  const auto& m = multi.guardCounters();
  const auto& s0 = singles[0].guardCounters();
  MESSAGE("held " << m.heldForgetting << ", floor rows " << m.floorRows);
  CHECK(m.heldForgetting == s0.heldForgetting);
  CHECK(m.floorRows == s0.floorRows);
  CHECK(m.heldForgetting > 1000);
  CHECK(m.floorRows > 0);
  CHECK(lowSeen);
  CHECK(guardedSeen);
  // The gain step is tracked: within 10 % of it after 300 samples (6 memory lengths).
  CHECK(std::abs(multi.response(0).solve().coefficients(0) - 1.3) < 0.05);
}

}  // namespace

TEST_CASE("Windup guard: every response equals its guarded single-response fit") {
  guardedCase<rowfold::GivensQr<double, 2>>();
  guardedCase<rowfold::NormalEquations<double, 2>>();
  guardedCase<rowfold::ForgettingRls<double, 2>>();
}

// 1e5 quiet samples; cross builds under an emulator use 1e4 (tests/CMakeLists.txt).
#ifndef ROWFOLD_MULTI_QUIET
#define ROWFOLD_MULTI_QUIET 100000
#endif

TEST_CASE_TEMPLATE("Windup guard in float32: 1e5 quiet samples, then a step: finite, bounded, reconverged", E,
                   rowfold::GivensQr<float, 2>, rowfold::NormalEquations<float, 2>, rowfold::ForgettingRls<float, 2>) {
  // tests/test_tracking.cpp's scenario with two responses (invented): lambda = 0.98, T0 = 50.
  rowfold::MultiResponse<E, 2> fit([] {
    typename E::Options o;
    o.forgetting = 0.98;
    return o;
  }());
  std::mt19937_64 rng(42);
  std::normal_distribution<double> n01(0, 1);
  double t1 = 0.8, t2 = -0.5;
  Eigen::Vector2f x(0.3f, -1.2f);
  const auto sample = [&](bool move) {
    if (move) x = Eigen::Vector2f(float(n01(rng)), float(n01(rng)));
    const double base = t1 * double(x(0)) + t2 * double(x(1));
    REQUIRE(fit.add(x, Eigen::Vector2f(float(1.0 + base + 0.01 * n01(rng)), float(-3.0 - 2.0 * base + 0.01 * n01(rng)))) ==
            Status::ok);
  };
  double worst = 0;
  const auto error = [&]() {
    double err = 0;
    for (Eigen::Index j = 0; j < 2; ++j) {
      const auto s = fit.response(j).solve();
      REQUIRE(s.status == Status::ok);
      REQUIRE(s.coefficients.allFinite());
      CHECK_FALSE(s.flags.has(Flag::lost_definiteness));
      const double g = j == 0 ? 1.0 : -2.0;
      err = std::max(err, std::max(std::abs(double(s.coefficients(0)) - g * t1), std::abs(double(s.coefficients(1)) - g * t2)) / std::abs(g));
    }
    return err;
  };
  for (int i = 0; i < 2000; ++i) sample(true);
  x.setZero();
  constexpr long quiet = ROWFOLD_MULTI_QUIET;
  for (long i = 0; i < quiet; ++i) {
    sample(false);
    if (i % 997 == 0) worst = std::max(worst, error());
  }
  t1 = 1.3;
  t2 = -1.0;
  for (int i = 0; i < 150; ++i) sample(true);  // 3 T0
  const double after = error();
  MESSAGE("worst relative slope error while quiet " << worst << ", after 3 T0 of the step " << after);
  CHECK(worst < 0.05);
  CHECK(after < 0.05);
  CHECK(fit.guardCounters().heldForgetting > static_cast<std::uint64_t>(quiet * 9 / 10));
}

TEST_CASE("Fixed sizes never touch the heap") {
  rowfold::MultiResponse<rowfold::GivensQr<double, 3>, 2> g;
  rowfold::GivensQrOptions go;
  rowfold::MultiResponse<rowfold::NormalEquations<float, 3>, 3> n;
  rowfold::ForgettingRlsOptions ro;
  ro.forgetting = 0.99;
  ro.windup.enabled = false;
  rowfold::MultiResponse<rowfold::ForgettingRls<double, 3>, 3> r(ro);
  rowfold::BatchQrOptions bo;
  rowfold::MultiResponse<rowfold::BatchQr<double, 3, 64>, 2> b(bo);
  rowfold::Summary<double, 3> sum;
  rowfold::Summary<float, 3> sumf;
  Eigen::Matrix<double, 3, 2> B2;
  Eigen::Matrix<double, 3, 3> B3;
  Eigen::Vector2d b02, yh2;
  Eigen::Vector3d b03, yh3;
  rowfold::Flags flags;
  Eigen::Matrix<double, 8, 3> X = Eigen::Matrix<double, 8, 3>::Random();
  Eigen::Matrix<double, 8, 3> Y = Eigen::Matrix<double, 8, 3>::Random();
  unsigned char buf[4096];
  std::size_t written = 0;
  Stream st;
  rowfold_test::fenceOn();
  for (int i = 0; i < 30; ++i) {
    const Eigen::Vector3d x = st.x(), y = st.y(x);
    g.add(x, y.head<2>());
    n.add(x.cast<float>(), y.cast<float>());
    r.add(x, y);
    b.add(x, y.head<2>());
  }
  g.addRows(X, Y.leftCols<2>());
  r.addRows(X, Y);
  r.addDelayed(X.row(0).transpose(), Y.row(0).transpose(), 3);
  for (int j = 0; j < 2; ++j) {
    g.response(j).summarizeInto(sum);
    b.response(j).summarizeInto(sum);
  }
  for (int j = 0; j < 3; ++j) {
    r.response(j).summarizeInto(sum);
    n.response(j).summarizeInto(sumf);
  }
  g.solveInto(B2, b02, flags);
  b.solveInto(B2, b02, flags);
  r.solveInto(B3, b03, flags);
  g.predict(X.row(1).transpose(), yh2);
  r.predict(X.row(1).transpose(), yh3);
  const bool fits = g.snapshotSize() <= sizeof buf && r.snapshotSize() <= sizeof buf;
  if (fits) {
    g.snapshot(buf, sizeof buf, written);
    g.restore(buf, written);
    r.snapshot(buf, sizeof buf, written);
    r.restore(buf, written);
  }
  rowfold_test::fenceOff();
  CHECK(fits);
  CHECK(sum.status == Status::ok);
  CHECK(rowfold_test::eigenAssertHits.load() == 0);
  CHECK(rowfold_test::newCalls.load() == 0);
  (void)go;
}
