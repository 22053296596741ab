// Cross-check of every estimator against LAPACK on seeded random regression problems.
//
// Reference: LAPACK 3.x driver DGELS (least squares by Householder QR; Anderson et al., LAPACK
// Users' Guide, 3rd ed., SIAM 1999, §2.4.2 and §4.5), called through LAPACKE on the explicit
// design [1 X] (a column of ones carries the intercept). The condition number used for DGELS's
// own error bound comes from LAPACK DGESVD (singular values, Users' Guide §2.4.4).
//
// Tolerances are a priori error bounds, never fitted to the observed errors:
//   |error of estimator| + |error of DGELS| <= bound(estimator) + bound(DGELS).
// Each bound is C u kappa with u = 2^-53 and kappa the relevant condition number (below).
#include <doctest/doctest.h>
#include <lapacke.h>

#include "support/doctest_rowfold.hpp"
#include "rowfold/rowfold.hpp"

#include <Eigen/Core>
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <random>
#include <sstream>
#include <string>

namespace {

using rowfold::Flag;
using rowfold::Status;

constexpr double kU = 0x1p-53;  // unit roundoff of IEEE double (Higham 2002, §2.1)
constexpr double kPi = 3.14159265358979323846;

// Standard normal deviates from std::mt19937_64 by the Box-Muller transform (Box & Muller 1958,
// Ann. Math. Stat. 29(2):610-611). Written out (rather than std::normal_distribution, whose
// algorithm is implementation-defined) so that the data are the same with every standard library.
class Gaussian {
 public:
  explicit Gaussian(std::uint64_t seed) : m_rng(seed) {}
  double operator()() {
    if (m_have) {
      m_have = false;
      return m_next;
    }
    double u1 = uniform();
    while (u1 == 0.0) u1 = uniform();
    const double u2 = uniform();
    const double r = std::sqrt(-2.0 * std::log(u1));
    m_next = r * std::sin(2.0 * kPi * u2);
    m_have = true;
    return r * std::cos(2.0 * kPi * u2);
  }

 private:
  double uniform() { return static_cast<double>(m_rng() >> 11) * 0x1p-53; }  // [0, 1), 53 bits
  std::mt19937_64 m_rng;
  double m_next = 0;
  bool m_have = false;
};

struct Problem {
  std::string name;
  Eigen::MatrixXd X;  // n x K regressors
  Eigen::VectorXd y;
  bool wellConditioned = false;
  bool collinear = false;  // nearly dependent columns by construction
};

Eigen::Index rows(const Problem& pb) { return pb.X.rows(); }

// y = b0 + X beta + sigma e, Gaussian regressors with offsets.
Problem wellConditioned(Eigen::Index k, std::uint64_t seed) {
  Gaussian g(seed);
  const Eigen::Index n = 200;
  Problem pb;
  pb.name = "well-conditioned K=" + std::to_string(k);
  pb.wellConditioned = true;
  pb.X.resize(n, k);
  pb.y.resize(n);
  for (Eigen::Index i = 0; i < n; ++i) {
    double yi = 2.5;
    for (Eigen::Index j = 0; j < k; ++j) {
      const double mean = (j % 2 == 0 ? 1.0 : -1.0) * (1.0 + 0.75 * static_cast<double>(j));
      const double sd = 0.5 + 0.25 * static_cast<double>(j);
      pb.X(i, j) = mean + sd * g();
      yi += (1.0 - 0.3 * static_cast<double>(j)) * pb.X(i, j);
    }
    pb.y(i) = yi + 0.5 * g();
  }
  return pb;
}

// K = 4 with two near dependences: x2 = x1 + delta e, x4 = x3 - x1 + 10 delta e. The scaled
// condition number kappa_s of the centered regressors is ~ 1/delta. The residual enters the
// least-squares sensitivity as kappa_s^2 tan(theta) (Wedin 1973): with delta = 1e-5 an ordinary
// noise level (sigma = 0.5) exercises that term; with delta = 1e-7 a small sigma keeps
// kappa_s^2 tan(theta) below kappa_s, so the QR bounds still promise digits (with sigma = 0.5 every
// bound would exceed 1 and nothing could be compared).
Problem collinear(double delta, double sigma, std::uint64_t seed) {
  Gaussian g(seed);
  const Eigen::Index n = 200;
  Problem pb;
  std::ostringstream name;
  name << "collinear delta=" << delta << " sigma=" << sigma;
  pb.name = name.str();
  pb.collinear = true;
  pb.X.resize(n, 4);
  pb.y.resize(n);
  for (Eigen::Index i = 0; i < n; ++i) {
    const double x1 = 2.0 + g();
    const double x2 = x1 + delta * g();
    const double x3 = -1.0 + 2.0 * g();
    const double x4 = x3 - x1 + 10.0 * delta * g();
    pb.X.row(i) << x1, x2, x3, x4;
    pb.y(i) = 1.5 + 1.0 * x1 - 0.5 * x2 + 0.25 * x3 + 2.0 * x4 + sigma * g();
  }
  return pb;
}

// Independent regressors with means ~1e4 and spread 1: the raw design [1 X] is ill-conditioned
// (kappa ~ 1e4 sqrt(n)), the centered regressors are not.
Problem largeOffset(std::uint64_t seed) {
  Gaussian g(seed);
  const Eigen::Index n = 200;
  Problem pb;
  pb.name = "large offset (means 1e4, spread 1)";
  pb.X.resize(n, 4);
  pb.y.resize(n);
  for (Eigen::Index i = 0; i < n; ++i) {
    double yi = -3.0;
    for (Eigen::Index j = 0; j < 4; ++j) {
      pb.X(i, j) = 1.0e4 + 250.0 * static_cast<double>(j) + g();
      yi += (0.5 + 0.5 * static_cast<double>(j)) * pb.X(i, j);
    }
    pb.y(i) = yi + 0.5 * g();
  }
  return pb;
}

// DGELS on [1 X]: b0, b, and the residual sum of squares (sum of squares of B(p:n-1), LAPACK
// Users' Guide §2.4.2 / DGELS documentation).
struct Reference {
  double b0 = 0;
  Eigen::VectorXd b;
  double sse = 0;
};

Reference dgels(const Problem& pb) {
  const Eigen::Index n = rows(pb), k = pb.X.cols(), p = k + 1;
  Eigen::MatrixXd A(n, p);
  A.col(0).setOnes();
  A.rightCols(k) = pb.X;
  Eigen::VectorXd B = pb.y;
  const lapack_int ln = static_cast<lapack_int>(n), lp = static_cast<lapack_int>(p);
  const lapack_int info = LAPACKE_dgels(LAPACK_COL_MAJOR, 'N', ln, lp, 1, A.data(), ln, B.data(), ln);
  REQUIRE(info == 0);
  Reference ref;
  ref.b0 = B(0);
  ref.b = B.segment(1, k);
  ref.sse = B.tail(n - p).squaredNorm();
  return ref;
}

// Facts of the data, computed here independently of the estimators.
struct DataFacts {
  Eigen::VectorXd xbar;  // column means
  Eigen::VectorXd D;     // column norms of the centered regressors ||x_j - xbar_j||
  double ynorm = 0;      // ||y|| (raw)
  double sigmaMin = 0;   // extreme singular values of the column-equilibrated centered regressors
  double sigmaMax = 0;   // (DGESVD)
  double omegaMax = 0;   // max_j (1 + |xbar_j| sqrt(n) / D_j)
  double omegaF = 0;     // sqrt(sum_j (1 + 2 |xbar_j| sqrt(n) / D_j)^2)
};

DataFacts dataFacts(const Problem& pb) {
  const Eigen::Index n = rows(pb), k = pb.X.cols();
  DataFacts f;
  f.xbar = pb.X.colwise().mean().transpose();
  Eigen::MatrixXd S = pb.X.rowwise() - f.xbar.transpose();
  f.D = S.colwise().norm().transpose();
  for (Eigen::Index j = 0; j < k; ++j) S.col(j) /= f.D(j);
  f.ynorm = pb.y.norm();
  Eigen::VectorXd sv(k), superb(k);
  double dummy = 0;
  const lapack_int ln = static_cast<lapack_int>(n), lk = static_cast<lapack_int>(k);
  const lapack_int info =
      LAPACKE_dgesvd(LAPACK_COL_MAJOR, 'N', 'N', ln, lk, S.data(), ln, sv.data(), &dummy, 1, &dummy, 1, superb.data());
  REQUIRE(info == 0);
  f.sigmaMax = sv(0);
  f.sigmaMin = sv(k - 1);
  const double sn = std::sqrt(static_cast<double>(n));
  double sumSq = 0;
  for (Eigen::Index j = 0; j < k; ++j) {
    const double r = std::abs(f.xbar(j)) * sn / f.D(j);
    f.omegaMax = std::max(f.omegaMax, 1.0 + r);
    sumSq += (1.0 + 2.0 * r) * (1.0 + 2.0 * r);
  }
  f.omegaF = std::sqrt(sumSq);
  return f;
}

// How an estimator's error scales with the conditioning it reports.
enum class Kind {
  refined_qr,  // BatchQr: Householder QR + refinement against the raw data
  online_qr,   // GivensQr: orthogonal updates of online-centered rows
  gram         // NormalEquations, ForgettingRls: cross-product state, squares the condition
};

// The dimension constant. Householder QR least squares (Higham 2002, Thm 20.3) and a sequence of
// Givens row updates (Higham 2002, §19.6; Gentleman 1975) are backward stable with columnwise
// relative backward error gamma_{c m p} = c m p u / (1 - c m p u) (m rows, p columns, c a small
// integer); forming and Cholesky-factoring the cross products has backward error
// gamma_{m} + gamma_{p+1} relative to |X|'|X| (Higham 2002, §20.4 and Thm 10.3). Those are worst-case
// bounds; rounding errors accumulate like sqrt(m p) u in practice (Higham 2002, §2.8). C = m p is
// the worst-case factor with c = 1, ~sqrt(m p) times the typical one; it also absorbs the factor
// ~p by which a 1-norm condition estimate can undercount the 2-norm one. P-form RLS has no
// backward-error result: its rounding errors are propagated through n recursive updates
// (error propagation: Verhaegen 1989, Automatica 25(3):437-444), i.e. up to ~n u kappa_s^2,
// still within C u kappa_s^2.
double dimensionConstant(Eigen::Index n, Eigen::Index p) { return static_cast<double>(n * p); }

std::string flagText(rowfold::Flags f) {
  std::string s;
  for (auto fl : rowfold::kAllFlags)
    if (f.has(fl)) s += std::string(s.empty() ? "" : ",") + rowfold::nameOf(fl);
  return s.empty() ? "-" : s;
}

template <typename Est>
void crossCheck(const std::string& estName, Kind kind, Est& est, const Problem& pb, const Reference& ref,
                const DataFacts& f, bool oneCall = false) {
  const Eigen::Index n = rows(pb), k = pb.X.cols(), p = k + 1;
  const double sn = std::sqrt(static_cast<double>(n));
  const double C = dimensionConstant(n, p);
  const std::string where = pb.name + " | " + estName;

  bool folded = true;
  if (oneCall)  // blocked ingestion (GivensQr: Householder folds of row blocks; wide K row-major)
    folded = est.addRows(pb.X, pb.y) == Status::ok;
  else
    for (Eigen::Index i = 0; i < n; ++i) folded = folded && est.add(pb.X.row(i).transpose(), pb.y(i)) == Status::ok;
  REQUIRE_MESSAGE(folded, where);
  const auto sol = est.solve();
  const auto sum = est.summarize(0.95);
  const std::string statusText = where + ": solve " + rowfold::nameOf(sol.status) + ", summarize " +
                                 rowfold::nameOf(sum.status) + ", flags " + flagText(sum.flags);
  REQUIRE_MESSAGE(sol.status == Status::ok, statusText);
  REQUIRE_MESSAGE(sum.status == Status::ok, statusText);
  const auto& cond = sum.conditioning;

  // Error metric. Normwise on D b (D = column norms of the centered regressors): the backward
  // errors of QR, Givens and Cholesky are columnwise, so their bounds are invariant under column
  // scaling and hold for the equilibrated problem (Higham 2002, §20.1 and Thm 20.3; van der Sluis
  // 1969). An individual small coefficient may legitimately have a large relative error; D b
  // weighs each coefficient by its contribution ||x~_j|| |b_j| to the fit. The intercept
  // b0 = ybar - xbar'b is formed by a sum whose magnitude is |b0| + sum |xbar_j b_j|; its rounding
  // (and any slope error) is relative to that magnitude, not to |b0|, which cancellation can make
  // arbitrarily small (large-offset case).
  const Eigen::VectorXd Db = f.D.cwiseProduct(ref.b);
  const double errB = f.D.cwiseProduct(sol.coefficients - ref.b).norm() / Db.norm();
  const double s0 = std::abs(ref.b0) + f.xbar.cwiseAbs().dot(ref.b.cwiseAbs());
  const double err0 = std::abs(sol.intercept - ref.b0) / s0;

  // Estimator bound, from its own conditioning report. kappa_s = scaledCondition,
  // kappa_ls = lsCondition = kappa_s + kappa_s^2 tan(theta) (Wedin 1973; Higham 2002, Thm 20.1).
  // Cross-product estimators: kappa_s^2 (1 + tan(theta)) (Higham 2002, §20.4: the normal
  // equations err by ~ u kappa^2 (1 + ||r|| / (||A|| ||b||))). Online centering rounds x - xbar
  // with xbar itself off by ~u |xbar|: a columnwise relative error u (1 + |xbar_j| sqrt(n) / D_j)
  // (Chan, Golub & LeVeque 1983, Am. Stat. 37(3):242-247); BatchQr forms its residuals from the
  // raw data in double-length arithmetic and does not pay that factor (Björck 1967).
  const double ks = cond.scaledCondition;
  const double kls = cond.lsCondition;
  const double tanTheta = ks > 0 ? (kls - ks) / (ks * ks) : 0.0;
  double kappaEst = 0, omegaEst = 1;
  switch (kind) {
    case Kind::refined_qr: kappaEst = kls; break;
    case Kind::online_qr: kappaEst = kls; omegaEst = f.omegaMax; break;
    case Kind::gram: kappaEst = ks * ks * (1.0 + tanTheta); omegaEst = f.omegaMax; break;
  }
  const double boundEst = C * kU * omegaEst * kappaEst;

  // DGELS bound: Householder QR returns the exact solution for [1 X] + dA, y + dy with
  // ||dA(:,j)|| <= g ||A(:,j)||, ||dy|| <= g ||y||, g = C u (Higham 2002, Thm 20.3). Expanded to
  // first order (Higham 2002, §20.1) in the centered, equilibrated parameters D b: DGELS sees the
  // raw design, so column j of the perturbation, moved onto the centered column x~_j, is at most
  // g (D_j + 2 |xbar_j| sqrt(n)), and ||dA x|| <= g (sqrt(n) s0 + sum_j D_j |b_j|). With sigma the
  // singular values of the equilibrated centered regressors (DGESVD) and r the DGELS residual:
  //   ||D db|| <= g [(||y|| + sqrt(n) s0 + sum D_j |b_j|) / sigma_min + omegaF ||r|| / sigma_min^2].
  const double ssr = std::sqrt(ref.sse);
  const double boundRef = C * kU *
                          ((f.ynorm + sn * s0 + Db.cwiseAbs().sum()) / f.sigmaMin +
                           f.omegaF * ssr / (f.sigmaMin * f.sigmaMin)) /
                          Db.norm();
  const double boundB = boundEst + boundRef;
  // Intercept: |d b0| <= |d c0| + ||xbar ./ D|| ||D db|| (Cauchy-Schwarz), with
  // |d c0| <= C u (||y|| + sqrt(n) s0 + sum D_j |b_j| + ||r||) / sqrt(n) (same expansion).
  const double bound0 = C * kU * (f.ynorm + sn * s0 + Db.cwiseAbs().sum() + ssr) / (sn * s0) +
                        f.xbar.cwiseQuotient(f.D).norm() * Db.norm() / s0 * boundB;

  std::ostringstream line;
  line.precision(3);
  line << where << ": coef err " << errB << " <= " << boundB << " (est " << boundEst << ", dgels "
       << boundRef << "), intercept err " << err0 << " <= " << bound0 << "; kappa_s " << ks << " (dgesvd kappa_2 "
       << f.sigmaMax / f.sigmaMin << "), kappa_ls " << kls << ", flags " << flagText(sum.flags);
  if (!(boundB < 1.0)) line << " [coefficient bound >= 1: no digit guaranteed, not compared]";
  MESSAGE(line.str());
  INFO(line.str());

  // The reported scaled condition against LAPACK's singular values (DGESVD): for K x K matrices
  // kappa_1 and kappa_2 agree within a factor K (Higham 2002, Table 6.2), and the Hager/Higham
  // estimate is a lower bound of kappa_1 that is rarely more than a small factor low (Higham 2002,
  // ch. 15); 3 is allowed for that.
  const double kappa2 = f.sigmaMax / f.sigmaMin;
  CHECK(ks <= static_cast<double>(k) * kappa2 * (1.0 + 1e-6));
  CHECK(ks >= kappa2 / (3.0 * static_cast<double>(k)));

  if (boundB < 1.0) CHECK(errB <= boundB);
  if (bound0 < 1.0) CHECK(err0 <= bound0);

  if (pb.wellConditioned) {
    // s = sqrt(SSE / (n - p)) from DGELS's residual sum of squares.
    const double sRef = std::sqrt(ref.sse / static_cast<double>(n - p));
    CHECK(std::abs(sum.residualStandardError - sRef) <= 1e-8 * sRef);
  }
  if (pb.collinear) {
    // VIF_j = diag of the inverse correlation matrix of the regressors; > 10 = collinear
    // (Marquardt 1970, Technometrics 12(3):591-612).
    CHECK(sum.flags.has(Flag::collinear));
  } else {
    // VIFs are computed from the centered regressors, so large means alone are not collinearity.
    CHECK_FALSE(sum.flags.has(Flag::collinear));
  }
  if (kind == Kind::gram && ks * ks > 1.0 / std::sqrt(kU)) {
    CHECK((sum.flags.has(Flag::ill_conditioned) || sum.flags.has(Flag::near_singular)));
  }
}

void runAll(const Problem& pb) {
  const Reference ref = dgels(pb);
  const DataFacts f = dataFacts(pb);
  const Eigen::Index k = pb.X.cols();
  {
    rowfold::BatchQr<double, Eigen::Dynamic>::Options o;
    o.capacity = rows(pb);
    rowfold::BatchQr<double, Eigen::Dynamic> est(k, o);
    crossCheck("BatchQr", Kind::refined_qr, est, pb, ref, f);
  }
  {
    rowfold::GivensQr<double, Eigen::Dynamic> est(k, rowfold::GivensQr<double, Eigen::Dynamic>::Options{});
    crossCheck("GivensQr", Kind::online_qr, est, pb, ref, f);
  }
  {
    rowfold::GivensQr<double, Eigen::Dynamic> est(k, rowfold::GivensQr<double, Eigen::Dynamic>::Options{});
    crossCheck("GivensQr, one addRows call", Kind::online_qr, est, pb, ref, f, true);
  }
  {
    using Est = rowfold::NormalEquations<double, Eigen::Dynamic>;
    Est est(k, Est::Options{});
    crossCheck("NormalEquations", Kind::gram, est, pb, ref, f);
  }
  {
    rowfold::ForgettingRls<double, Eigen::Dynamic> est(k, rowfold::ForgettingRls<double, Eigen::Dynamic>::Options{});
    crossCheck("ForgettingRls", Kind::gram, est, pb, ref, f);
  }
}

}  // namespace

TEST_CASE("LAPACK DGELS cross-check: well-conditioned, K = 4") { runAll(wellConditioned(4, 0x5eed0001u)); }
TEST_CASE("LAPACK DGELS cross-check: well-conditioned, K = 8") { runAll(wellConditioned(8, 0x5eed0002u)); }
// K = 41: GivensQr's addRows folds 42 columns row-major in panels of four (the last panel has
// two columns), 64 rows per block (200 rows: three whole blocks and a short one).
TEST_CASE("LAPACK DGELS cross-check: well-conditioned, K = 41") { runAll(wellConditioned(41, 0x5eed0006u)); }
TEST_CASE("LAPACK DGELS cross-check: collinear, scaled condition ~1e5") { runAll(collinear(1e-5, 0.5, 0x5eed0003u)); }
TEST_CASE("LAPACK DGELS cross-check: collinear, scaled condition ~1e7") { runAll(collinear(1e-7, 1e-9, 0x5eed0004u)); }
TEST_CASE("LAPACK DGELS cross-check: large offset") { runAll(largeOffset(0x5eed0005u)); }
