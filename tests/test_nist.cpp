// Accuracy of every estimator on the NIST StRD linear least-squares datasets.
// Reference: NIST ITL Statistical Reference Datasets (certified values computed in 500-digit
// arithmetic), files in tests/data/nist (see SOURCE.md there). Metric: log relative error (LRE),
// McCullough 1998, Am. Stat. 52(4):358-366.
#include <doctest/doctest.h>

#include <algorithm>
#include <limits>
#include <cstdio>
#include <string>
#include <vector>

#include "rowfold/rowfold.hpp"
#include "support/doctest_rowfold.hpp"
#include "support/nist.hpp"

namespace {

using rowfold::Flag;
using rowfold_test::lre;

const char* const kSets[] = {"Norris", "Pontius", "NoInt1", "NoInt2", "Filip", "Longley",
                             "Wampler1", "Wampler2", "Wampler3", "Wampler4", "Wampler5"};

struct Result {
  double beta = 15, sd = 15, resSd = 15, r2 = 15;
  double minDigits = 15;
  rowfold::Flags flags;
  bool ok = false;
};

// Folds the dataset's rows with add (one at a time) or, `blocked`, with one addRows call.
template <typename Est>
Result summaryOf(const rowfold_test::NistDataset& ds, Est& est);

template <typename Est>
Result runOn(const rowfold_test::NistDataset& ds, Est& est, bool blocked = false) {
  using Scalar = typename Est::Scalar;
  const auto k = static_cast<Eigen::Index>(rowfold_test::numRegressors(ds));
  const auto n = static_cast<Eigen::Index>(ds.observations());
  Eigen::Matrix<Scalar, Eigen::Dynamic, Eigen::Dynamic> X(n, k);
  Eigen::Matrix<Scalar, Eigen::Dynamic, 1> x(k), Y(n);
  for (Eigen::Index i = 0; i < n; ++i) {
    rowfold_test::designRow<Scalar>(ds, static_cast<std::size_t>(i), x.data(), Y(i));
    X.row(i) = x.transpose();
    if (!blocked) REQUIRE(est.add(x, Y(i)) == rowfold::Status::ok);
  }
  if (blocked) REQUIRE(est.addRows(X, Y) == rowfold::Status::ok);
  return summaryOf(ds, est);
}

// LREs of the estimator's summary against the certified values.
template <typename Est>
Result summaryOf(const rowfold_test::NistDataset& ds, Est& est) {
  using Scalar = typename Est::Scalar;
  const auto k = static_cast<Eigen::Index>(rowfold_test::numRegressors(ds));
  Result r;
  const auto sum = est.summarize(Scalar(0.95));
  r.ok = sum.status == rowfold::Status::ok;
  r.flags = sum.flags;
  std::size_t c = 0;
  r.minDigits = sum.conditioning.digits.minCoeff();
  if (ds.intercept) {
    r.beta = lre(sum.intercept, ds.coef[c]);
    r.sd = lre(sum.interceptStandardError, ds.coefSd[c]);
    r.minDigits = std::min<double>(r.minDigits, sum.conditioning.interceptDigits);
    ++c;
  }
  for (Eigen::Index j = 0; j < k; ++j, ++c) {
    r.beta = std::min(r.beta, lre(sum.coefficients(j), ds.coef[c]));
    r.sd = std::min(r.sd, lre(sum.standardErrors(j), ds.coefSd[c]));
  }
  r.resSd = lre(sum.residualStandardError, ds.residualSd);
  r.r2 = lre(sum.rSquared, ds.rSquared);
  return r;
}

template <template <typename, int, int> class Est, typename Scalar>
Result fit(const rowfold_test::NistDataset& ds, bool blocked = false) {
  const auto k = static_cast<Eigen::Index>(rowfold_test::numRegressors(ds));
  typename Est<Scalar, Eigen::Dynamic, Eigen::Dynamic>::Options o;
  o.intercept = ds.intercept ? rowfold::Intercept::fit : rowfold::Intercept::none;
  Est<Scalar, Eigen::Dynamic, Eigen::Dynamic> est(k, o);
  return runOn(ds, est, blocked);
}

template <typename S, int K, int M>
using BatchQrD = rowfold::BatchQr<S, K, Eigen::Dynamic, M>;

// Minimum beta LRE thresholds in double, one row per dataset in kSets order.
// BatchQr and GivensQr: the figures the core issue requires (its prototype and the LAPACK dgels
// figures are listed there). NormalEquations and ForgettingRls: our own measured values less
// about half a digit; both square the condition number, so Filip (and ForgettingRls on
// Wampler4/5) must instead be *flagged* (checked separately below).
struct Thresholds {
  double batch, givens, normal, rls;
};
const Thresholds kDouble[] = {
    {13.5, 12, 12, 12},     // Norris
    {13, 11.5, 11, 12.5},   // Pontius
    {14, 14, 14, 14},       // NoInt1
    {14, 14, 14, 14},       // NoInt2
    {7.3, 6.8, 0, 0},       // Filip (NE/RLS: flagged, see below)
    {14, 12, 11.5, 11},     // Longley
    {13.5, 9, 6.5, 9.4},    // Wampler1 (NE: 7.8 on x86-64, 6.7 with aarch64's fused multiply-add)
    {13, 12.5, 9.3, 12.5},  // Wampler2
    {13, 9, 6.3, 5.6},      // Wampler3
    {13, 8, 6.2, 3.6},      // Wampler4 (RLS: flagged)
    {13, 6, 5.6, 1.6},      // Wampler5 (RLS: flagged)
};

std::string flagText(rowfold::Flags f) {
  std::string s;
  for (auto fl : rowfold::kAllFlags)
    if (f.has(fl)) s += std::string(s.empty() ? "" : ",") + rowfold::nameOf(fl);
  return s.empty() ? "-" : s;
}

void report(const std::string& set, const std::string& est, const std::string& scalar, const Result& r) {
  char line[256];
  std::snprintf(line, sizeof line, "%-9s %-16s %-11s beta %5.2f  sd %5.2f  resSd %5.2f  R2 %5.2f  est.digits %5.2f  %s",
                set.c_str(), est.c_str(), scalar.c_str(), r.beta, r.sd, r.resSd, r.r2, r.minDigits,
                flagText(r.flags).c_str());
  MESSAGE(line);
}

// No silent failure: a coefficient with LRE below `limit` must come with a conditioning flag.
void checkFlagged(const Result& r, double limit) {
  if (r.beta < limit) CHECK((r.flags.has(Flag::near_singular) || r.flags.has(Flag::ill_conditioned)));
}

template <typename Scalar>
double flagLimit() {
  return sizeof(Scalar) == sizeof(float) ? 2.0 : 4.0;
}

template <template <typename, int, int> class Est, typename Scalar>
Result checkOne(const rowfold_test::NistDataset& ds, const char* est, const char* scalar, bool blocked = false) {
  const Result r = fit<Est, Scalar>(ds, blocked);
  report(ds.name, est, scalar, r);
  // A report is always produced, except when the state itself is flagged unusable.
  CHECK((r.ok || r.flags.has(Flag::near_singular)));
  checkFlagged(r, flagLimit<Scalar>());
  return r;
}

}  // namespace

TEST_CASE_TEMPLATE("NIST StRD: every estimator meets its LRE thresholds and never fails silently", Scalar, double,
                   long double) {
  const char* sname = sizeof(Scalar) == sizeof(double) ? "double" : "long double";
  int i = 0;
  for (const char* name : kSets) {
    const std::string setName(name);
    CAPTURE(setName);
    const auto ds = rowfold_test::loadNist(name);
    const Thresholds& t = kDouble[i++];
    const bool filip = std::string(name) == "Filip";
    const Result b = checkOne<BatchQrD, Scalar>(ds, "BatchQr", sname);
    const Result g = checkOne<rowfold::GivensQr, Scalar>(ds, "GivensQr", sname);
    const Result n = checkOne<rowfold::NormalEquations, Scalar>(ds, "NormalEquations", sname);
    const Result r = checkOne<rowfold::ForgettingRls, Scalar>(ds, "ForgettingRls", sname);
    CHECK(b.beta >= t.batch);
    CHECK(g.beta >= t.givens);
    CHECK(n.beta >= t.normal);
    CHECK(r.beta >= t.rls);
    if (!filip) {
      // Certified coefficient SDs, residual SD and R^2 to >= 10 digits (core issue requirement).
      for (const Result* q : {&b, &g}) {
        CHECK(q->sd >= 10);
        CHECK(q->resSd >= 10);
        CHECK(q->r2 >= 10);
      }
    } else {
      // Filip: ill-conditioning is expected and correct (kappa_s = 5.2e9 > u^-1/2, NUMERICS §8),
      // but the QR estimators must not declare it rank deficient.
      CHECK_FALSE(b.flags.has(Flag::rank_deficient));
      CHECK_FALSE(g.flags.has(Flag::rank_deficient));
      if (std::numeric_limits<Scalar>::digits <= 64) {
        // With at most 64 significand bits kappa_s = 5.2e9 exceeds u^-1/2 (QR) and kappa_s^2 is
        // beyond 0.1/u (NE, RLS). A 113-bit long double (aarch64) resolves Filip: no such flags.
        CHECK(b.flags.has(Flag::ill_conditioned));
        CHECK((n.flags.has(Flag::near_singular) && r.flags.has(Flag::near_singular)));
      }
    }
    const std::string nm(name);
    if (nm == "Norris" || nm == "NoInt1" || nm == "NoInt2") {
      CHECK_FALSE(b.flags.has(Flag::near_singular));
      CHECK_FALSE(g.flags.has(Flag::near_singular));
    }
    // The digit estimate (NUMERICS §6.5) is meant to be conservative: it must not promise more
    // than half a digit beyond what the QR estimators achieve.
    // (LRE is capped at the 15 certified digits, so the estimate is capped likewise.)
    CHECK(std::min(b.minDigits, 14.5) <= b.beta + 0.5);
    CHECK(std::min(g.minDigits, 14.5) <= g.beta + 0.5);
  }
}

TEST_CASE("NIST StRD in float: meaningful sets reach their thresholds, the rest are flagged") {
  // Thresholds from NUMERICS §8 (float32 acceptance, project measurements): Norris >= 3,
  // Pontius >= 2.5, NoInt >= 6, Longley (centered) >= 3.5, Wampler2 >= 3; Filip and Wampler1/3/4/5
  // must carry a flag instead of unflagged coefficients.
  struct FloatCase {
    const char* name;
    double qr;  // min beta LRE for BatchQr and GivensQr; < 0: must be flagged
  };
  const FloatCase cases[] = {{"Norris", 3},    {"Pontius", 2.5},  {"NoInt1", 6},    {"NoInt2", 6},
                             {"Filip", -1},    {"Longley", 3.5},  {"Wampler1", -1}, {"Wampler2", 3},
                             {"Wampler3", -1}, {"Wampler4", -1},  {"Wampler5", -1}};
  for (const auto& c : cases) {
    const std::string setName(c.name);
    CAPTURE(setName);
    const auto ds = rowfold_test::loadNist(c.name);
    const Result b = checkOne<BatchQrD, float>(ds, "BatchQr", "float");
    const Result g = checkOne<rowfold::GivensQr, float>(ds, "GivensQr", "float");
    checkOne<rowfold::NormalEquations, float>(ds, "NormalEquations", "float");
    checkOne<rowfold::ForgettingRls, float>(ds, "ForgettingRls", "float");
    if (c.qr >= 0) {
      CHECK(b.beta >= c.qr);
      CHECK(g.beta >= c.qr);
    } else {
      for (const Result* q : {&b, &g})
        CHECK((q->flags.has(Flag::near_singular) || q->flags.has(Flag::ill_conditioned)));
    }
  }
}

TEST_CASE("NIST StRD certified values: NormalEquations::addRows of a whole dataset in one call") {
  // The one-pass blocked path (blocks centered on their own means, merged pairwise) must meet the
  // same thresholds as folding row by row, and keep the no-silent-failure rule.
  int i = 0;
  for (const char* name : kSets) {
    const std::string setName(name);
    CAPTURE(setName);
    const auto ds = rowfold_test::loadNist(name);
    const Thresholds& t = kDouble[i++];
    const auto k = static_cast<Eigen::Index>(rowfold_test::numRegressors(ds));
    const auto n = static_cast<Eigen::Index>(ds.observations());
    Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor> X(n, k);
    Eigen::VectorXd y(n);
    for (Eigen::Index r = 0; r < n; ++r) rowfold_test::designRow<double>(ds, static_cast<std::size_t>(r), X.row(r).data(), y(r));
    rowfold::NormalEquationsOptions o;
    o.intercept = ds.intercept ? rowfold::Intercept::fit : rowfold::Intercept::none;
    rowfold::NormalEquations<double, Eigen::Dynamic> whole(k, o), parts(k, o);
    REQUIRE(whole.addRows(X, y) == rowfold::Status::ok);
    REQUIRE(whole.count() == static_cast<std::uint64_t>(n));
    // Three calls of unequal length: each call's accumulator merged into a non-empty state.
    const Eigen::Index a = n / 5, b = n / 2;
    REQUIRE(parts.addRows(X.topRows(a), y.head(a)) == rowfold::Status::ok);
    REQUIRE(parts.addRows(X.middleRows(a, b - a), y.segment(a, b - a)) == rowfold::Status::ok);
    REQUIRE(parts.addRows(X.bottomRows(n - b), y.tail(n - b)) == rowfold::Status::ok);
    for (auto* est : {&whole, &parts}) {
      const Result r = summaryOf(ds, *est);
      report(ds.name, est == &whole ? "NE addRows" : "NE addRows x3", "double", r);
      CHECK((r.ok || r.flags.has(Flag::near_singular)));
      checkFlagged(r, flagLimit<double>());
      // Merging calls adds pairwise mean corrections: on Wampler1 (an exact polynomial fit) that
      // costs up to 0.3 digit (6.45 against 7.8 row by row; the earlier blocked path gave 6.45
      // for these three calls and 6.54 for one call, measured).
      CHECK(r.beta >= (est == &whole ? t.normal : t.normal - 0.3));
    }
  }
}

TEST_CASE_TEMPLATE("NIST StRD certified values through GivensQr::addRows (every row in one call)", Scalar, double,
                   float) {
  // The blocked path (addRows) against the NIST certified values, with the thresholds of the
  // row-by-row path above: kDouble's GivensQr column in double, NUMERICS §8's float32 acceptance
  // figures in float (sets below 0 there must be flagged instead).
  const bool isFloat = sizeof(Scalar) == sizeof(float);
  const double floatMin[] = {3, 2.5, 6, 6, -1, 3.5, -1, 3, -1, -1, -1};
  int i = 0;
  for (const char* name : kSets) {
    const std::string setName(name);
    CAPTURE(setName);
    const auto ds = rowfold_test::loadNist(name);
    const double limit = isFloat ? floatMin[i] : kDouble[i].givens;
    ++i;
    const Result g = checkOne<rowfold::GivensQr, Scalar>(ds, "GivensQr:rows", isFloat ? "float" : "double", true);
    if (limit >= 0) {
      CHECK(g.beta >= limit);
    } else {
      CHECK((g.flags.has(Flag::near_singular) || g.flags.has(Flag::ill_conditioned)));
    }
    if (!isFloat && setName != "Filip") {
      // Wampler1 is an exact fit (certified residual SD 0): its SD LREs measure the absolute
      // rounding noise of the residual, where Householder QR sits near 10 (NUMERICS §8 table:
      // 9.8 for a textbook Householder QR; 10.0 here, 10.2 folding row by row).
      const double sdMin = setName == "Wampler1" ? 9.5 : 10;
      CHECK(g.sd >= sdMin);
      CHECK(g.resSd >= sdMin);
      CHECK(g.r2 >= 10);
    }
    if (!isFloat && setName == "Filip") CHECK_FALSE(g.flags.has(Flag::rank_deficient));
  }
}
