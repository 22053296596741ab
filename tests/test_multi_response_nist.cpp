// Several responses on one set of regressors (MultiResponse), against NIST StRD Wampler1-5
// (certified values, tests/data/nist/SOURCE.md): the five sets share one design (x = 0..20, a
// degree-5 polynomial) and differ in y only, so one multi-response fit carries all five; each
// response is scored against its own certified values by LRE (McCullough 1998) with the
// thresholds of tests/test_nist.cpp. Part of the test_multi_response executable (a second
// translation unit, so that a -j2 build compiles the two halves side by side).
// The Eigen configuration of the allocation fence, as in the other half (one definition rule).
#define ROWFOLD_ALLOC_FENCE_CONFIG_ONLY
#include "support/alloc_fence.hpp"

#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <ostream>
#include <string>
#include <vector>

#include "rowfold/rowfold.hpp"
#include "support/doctest_rowfold.hpp"
#include "support/nist.hpp"

namespace {

using rowfold::Flag;
using rowfold::Status;
using rowfold_test::lre;
constexpr int Dyn = Eigen::Dynamic;

template <typename S, int K, int M>
using BatchQrD = rowfold::BatchQr<S, K, Eigen::Dynamic, M>;

// Minimum beta LRE per Wampler set (1..5) and estimator: tests/test_nist.cpp's kDouble rows.
struct Limits {
  double batch, givens, normal, rls;
};
const Limits kWampler[] = {{13.5, 9, 6.5, 9.4}, {13, 12.5, 9.3, 12.5}, {13, 9, 6.3, 5.6}, {13, 8, 6.2, 3.6}, {13, 6, 5.6, 1.6}};

double limitFor(const Limits& l, const std::string& est) {
  if (est == "BatchQr") return l.batch;
  if (est == "GivensQr") return l.givens;
  if (est == "NormalEquations") return l.normal;
  return l.rls;
}

struct Wampler {
  std::vector<rowfold_test::NistDataset> sets;
  Wampler() {
    for (int i = 1; i <= 5; ++i) sets.push_back(rowfold_test::loadNist("Wampler" + std::to_string(i)));
    // The premise: one design for all five (same x tokens, same degree).
    for (const auto& s : sets) {
      REQUIRE(s.xText == sets[0].xText);
      REQUIRE(s.degree == sets[0].degree);
      REQUIRE(s.intercept);
    }
  }
  Eigen::Index k() const { return static_cast<Eigen::Index>(rowfold_test::numRegressors(sets[0])); }
  std::size_t n() const { return sets[0].observations(); }
  template <typename S>
  void fill(Eigen::Matrix<S, Dyn, Dyn>& X, Eigen::Matrix<S, Dyn, Dyn>& Y) const {
    X.resize(static_cast<Eigen::Index>(n()), k());
    Y.resize(static_cast<Eigen::Index>(n()), 5);
    Eigen::Matrix<S, Dyn, 1> x(k());
    for (std::size_t i = 0; i < n(); ++i) {
      for (int j = 0; j < 5; ++j) {
        S y;
        rowfold_test::designRow<S>(sets[static_cast<std::size_t>(j)], i, x.data(), y);
        Y(static_cast<Eigen::Index>(i), j) = y;
      }
      X.row(static_cast<Eigen::Index>(i)) = x.transpose();
    }
  }
};

struct Score {
  double beta, sd, resSd;
  bool operator>=(double limit) const { return beta >= limit; }  // the beta threshold
};
std::ostream& operator<<(std::ostream& os, const Score& s) { return os << "beta LRE " << s.beta; }

// Scores response j of a fit against set j (minimum LRE over the coefficients and their SDs).
template <typename Multi>
Score scoreResponse(const Multi& fit, const rowfold_test::NistDataset& ds, Eigen::Index j, const std::string& est) {
  const auto sum = fit.response(j).summarize();
  double beta = lre(sum.intercept, ds.coef[0]), sd = lre(sum.interceptStandardError, ds.coefSd[0]);
  for (Eigen::Index c = 0; c < fit.regressors(); ++c) {
    beta = std::min(beta, lre(sum.coefficients(c), ds.coef[static_cast<std::size_t>(c) + 1]));
    sd = std::min(sd, lre(sum.standardErrors(c), ds.coefSd[static_cast<std::size_t>(c) + 1]));
  }
  MESSAGE(ds.name << " " << est << ": beta LRE " << beta << ", sd LRE " << sd << ", resSd LRE "
                  << lre(sum.residualStandardError, ds.residualSd) << ", R2 LRE " << lre(sum.rSquared, ds.rSquared));
  // No silent failure (as tests/test_nist.cpp): a low LRE must come with a conditioning flag.
  if (beta < 4.0) CHECK((sum.flags.has(Flag::near_singular) || sum.flags.has(Flag::ill_conditioned)));
  CHECK(sum.count == fit.count());
  return Score{beta, sd, lre(sum.residualStandardError, ds.residualSd)};
}

template <template <typename, int, int> class Est, typename S>
void wamplerCase(const Wampler& w, const std::string& est) {
  using Multi = rowfold::MultiResponse<Est<S, Dyn, Dyn>, Dyn>;
  typename Multi::Options o;
  if constexpr (std::is_same<typename Multi::Options, rowfold::BatchQrOptions>::value) o.capacity = 64;
  Eigen::Matrix<S, Dyn, Dyn> X, Y;
  w.fill(X, Y);
  Multi one(w.k(), 5, o);
  REQUIRE(one.status() == Status::ok);
  for (Eigen::Index i = 0; i < X.rows(); ++i) REQUIRE(one.add(X.row(i).transpose(), Y.row(i).transpose()) == Status::ok);
  for (Eigen::Index j = 0; j < 5; ++j) {
    CAPTURE(j);
    const Score s = scoreResponse(one, w.sets[static_cast<std::size_t>(j)], j, est);
    CHECK(s >= limitFor(kWampler[j], est));
    if (est == "BatchQr" || est == "GivensQr") {  // certified SDs to >= 10 digits, as tests/test_nist.cpp
      CHECK(s.sd >= 10);
      CHECK(s.resSd >= 10);
    }
  }
  // The same rows in blocks (addRows), and as two states merged (ForgettingRls cannot merge).
  Multi rows(w.k(), 5, o);
  REQUIRE(rows.addRows(X, Y) == Status::ok);
  Multi a(w.k(), 5, o), b(w.k(), 5, o);
  REQUIRE(a.addRows(X.topRows(9), Y.topRows(9)) == Status::ok);
  REQUIRE(b.addRows(X.bottomRows(12), Y.bottomRows(12)) == Status::ok);
  const Status merged = a.merge(b);
  if (est == "ForgettingRls") {
    CHECK(merged == Status::not_available);
  } else {
    REQUIRE(merged == Status::ok);
    REQUIRE(a.count() == 21);
  }
  // Blocked and merged folding sum in another order: the sequential thresholds less one digit,
  // as tests/test_merge.cpp applies them to merged single-response states.
  for (Eigen::Index j = 0; j < 5; ++j) {
    CAPTURE(j);
    const double limit = limitFor(kWampler[j], est) - 1.0;
    CHECK(scoreResponse(rows, w.sets[static_cast<std::size_t>(j)], j, est + " addRows") >= limit);
    if (merged == Status::ok) CHECK(scoreResponse(a, w.sets[static_cast<std::size_t>(j)], j, est + " merged") >= limit);
  }
  // Every row four times (84 rows, in one addRows call; more than a block of the joint's blocked
  // path): the least-squares coefficients are those of the 21 rows, so the certified values
  // still apply (the SDs do not: n changed). Same threshold as the blocked case above.
  Eigen::Matrix<S, Dyn, Dyn> X4(4 * X.rows(), X.cols()), Y4(4 * Y.rows(), Y.cols());
  for (int r = 0; r < 4; ++r) {
    X4.middleRows(r * X.rows(), X.rows()) = X;
    Y4.middleRows(r * Y.rows(), Y.rows()) = Y;
  }
  typename Multi::Options o4 = o;
  if constexpr (std::is_same<typename Multi::Options, rowfold::BatchQrOptions>::value) o4.capacity = 128;
  Multi rows4(w.k(), 5, o4);
  REQUIRE(rows4.addRows(X4, Y4) == Status::ok);
  REQUIRE(rows4.count() == 84);
  for (Eigen::Index j = 0; j < 5; ++j) {
    CAPTURE(j);
    const double limit = limitFor(kWampler[j], est) - 1.0;
    CHECK(scoreResponse(rows4, w.sets[static_cast<std::size_t>(j)], j, est + " addRows x4") >= limit);
  }
}

}  // namespace

TEST_CASE_TEMPLATE("NIST Wampler1-5 as five responses of one fit: every response meets its set's thresholds", S,
                   double ROWFOLD_WITH_LONG_DOUBLE(long double)) {
  const Wampler w;
  wamplerCase<BatchQrD, S>(w, "BatchQr");
  wamplerCase<rowfold::GivensQr, S>(w, "GivensQr");
  wamplerCase<rowfold::NormalEquations, S>(w, "NormalEquations");
  wamplerCase<rowfold::ForgettingRls, S>(w, "ForgettingRls");
}

