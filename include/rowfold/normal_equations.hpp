/// @file
/// NormalEquations: centered co-moment accumulation, Cholesky at solve time.
#pragma once

#include <limits>

#include "rowfold/detail/cholesky.hpp"
#include "rowfold/estimator_base.hpp"

namespace rowfold {

/// Options of NormalEquations (see FitOptions; nothing of its own).
struct NormalEquationsOptions : FitOptions {};

/// Least squares from the centered weighted co-moments G = [M m; m' Syy] = [X~ y~]'[X~ y~],
/// accumulated by symmetric rank-one updates G <- lambda G + (c [d; e])(c [d; e])' (Welford
/// 1962 / West 1979 in matrix form; NUMERICS §4.1). At solve time the Cholesky factor of the
/// augmented G gives [R z; 0 rho] directly (R'R = M, R b = z, rho^2 = SSE); never an inverse.
///
/// **Stability:** forming M squares the condition number: expect relative error ~ u kappa_s^2.
/// Centering removes the worst of it (the intercept column), so it is fine for well-conditioned
/// centered data in double, and the fastest and most easily merged state. Not for collinear
/// inputs or float32 with kappa_s beyond ~1e2 (flags report it).
///
/// **Cost:** add ~ (K+1)(K+2)/2 multiply-adds; solve O(K^3/6) (Cholesky) + K^2 (substitution).
/// With the windup guard (on by default when lambda < 1) or the outlier gate, every add also
/// factors the co-moments (O(K^3/6)) to get the sample's information and prediction error;
/// turn the guard off (`windup.enabled = false`) or use GivensQr where that matters.
/// Every query (solve, summarize, conditioning, predictionInterval, crossProducts) factors the
/// co-moments again; summarize and conditioning add O(K^3). State: (K+1)^2 scalars (lower
/// triangle used) + centering.
///
/// **Status and flags:** those of EstimatorBase; no capacity limit. The Cholesky factorization
/// never fails: a pivot not above 4 (K+1) eps times its diagonal entry (a column dependent to
/// working precision) gives a zero row, which the solve reports as `rank_deficient`. Inputs
/// whose squares overflow make the factor non-finite: `not_available` with `near_singular`.
template <typename Scalar_, int K_, int MaxK_ = K_>
class NormalEquations : public EstimatorBase<NormalEquations<Scalar_, K_, MaxK_>, Scalar_, K_, MaxK_> {
  using Base = EstimatorBase<NormalEquations<Scalar_, K_, MaxK_>, Scalar_, K_, MaxK_>;
  friend Base;

 public:
  using typename Base::Dims;  ///< see EstimatorBase
  using typename Base::Scalar;  ///< see EstimatorBase
  using typename Base::Vector1;  ///< see EstimatorBase
  using typename Base::WorkspaceType;  ///< see EstimatorBase
  using Options = NormalEquationsOptions;  ///< options type
  /// Error model of the conditioning analysis: a cross-product state (squares the condition).
  static constexpr detail::ErrorModel errorModel = detail::ErrorModel::online_gram;
  static constexpr EstimatorKind kind = EstimatorKind::normal_equations;  ///< snapshot image kind
  static constexpr bool guardable = true;  ///< the windup guard and outlier gate apply
  static constexpr bool positionalAges = false;  ///< ages live in the state: addDelayed/advance are exact

  /// Fixed K. status() reports invalid options; see EstimatorBase::status().
  explicit NormalEquations(const Options& options = Options())
      : NormalEquations(K_ == Eigen::Dynamic ? 0 : K_, options) {}
  /// Runtime K (any K > 0 for Eigen::Dynamic; must equal K otherwise, else status() is
  /// `wrong_size`). Allocates the co-moment matrix for Eigen::Dynamic K, nothing later.
  NormalEquations(Eigen::Index k, const Options& options)
      : Base(k, options), m_gram(k + 1, k + 1) {
    m_gram.setZero();
  }

  /// The augmented co-moment matrix G = [M m; m' Syy] ((K+1) x (K+1), lower triangle valid).
  const typename Dims::Matrix1& comoments() const { return m_gram; }

 private:
  std::uint64_t room() const { return std::numeric_limits<std::uint64_t>::max(); }
  void clearState() { m_gram.setZero(); }

  template <typename Self, typename V>
  static void visitOptions(Self&, V&) {}
  template <typename Self, typename V>
  static void visitState(Self& self, V& v) {
    v.array(self.m_gram.data(), static_cast<std::size_t>(self.m_gram.size()));
  }

  template <typename XD>
  void foldRow(const Eigen::MatrixBase<XD>&, Scalar, Scalar, const Vector1& row) {
    const Scalar lambda = this->lambda();
    if (lambda != Scalar(1)) m_gram.template triangularView<Eigen::Lower>() *= lambda;
    m_gram.template selfadjointView<Eigen::Lower>().rankUpdate(row, Scalar(1));
  }

  Status canMerge(const NormalEquations&) const { return Status::ok; }

  void ageState(Scalar f) { m_gram.template triangularView<Eigen::Lower>() *= f; }
  /// Forgets the residual part of Syy only: Syy - (1 - f) SSE, with SSE = rho^2 from the
  /// factorization priorInfo has just made (it always runs first on the guarded path).
  void ageResidual(Scalar f) {
    const Eigen::Index k = this->regressors();
    m_gram(k, k) -= (Scalar(1) - f) * m_lastSse;
  }

  /// The augmented factor [R z; 0 rho] of the co-moments into the workspace's `aug`
  /// (Cholesky, O(K^3/6)); false unless R has a positive diagonal.
  bool augmentedFactor() const {
    const Eigen::Index k = this->regressors();
    WorkspaceType& ws = this->work();
    const Scalar tol = Scalar(4) * Scalar(k + 1) * std::numeric_limits<Scalar>::epsilon();
    if (detail::semidefiniteCholesky(m_gram, ws.aug, tol, true) != 0) return false;
    for (Eigen::Index i = 0; i < k; ++i)
      if (!(ws.aug(i, i) > Scalar(0))) return false;
    return true;
  }

  /// Current slopes from the augmented factor (O(K^3/6)).
  template <typename VD>
  bool currentSlopes(VD& b) const {
    const Eigen::Index k = this->regressors();
    if (!augmentedFactor()) return false;
    const auto& aug = this->work().aug;
    b = aug.col(k).head(k);
    detail::backSubstitute(aug.topLeftCorner(k, k), b, k);
    return b.allFinite();
  }

  /// h = phi' M^-1 phi and e = eta - phi'b from the augmented factor: O(K^3/6) per sample, so
  /// the guards make NormalEquations cost like a batch solve per sample (use GivensQr when they
  /// are needed at large K).
  bool priorInfo(const Vector1& row, Scalar& h, Scalar& e) const {
    const Eigen::Index k = this->regressors();
    if (!augmentedFactor()) return false;
    WorkspaceType& ws = this->work();
    ws.v1 = row.head(k);
    detail::forwardSubstituteTransposed(ws.aug.topLeftCorner(k, k), ws.v1);
    h = ws.v1.squaredNorm();
    e = row(k) - ws.v1.dot(ws.aug.col(k).head(k));
    m_lastSse = ws.aug(k, k) * ws.aug(k, k);
    return true;
  }

  /// Co-moments add (Chan, Golub & LeVeque 1979): G = age G_a + G_b + r r' (r = correction row).
  void mergeState(const NormalEquations& other, Scalar age, const Vector1& correction) {
    auto lower = m_gram.template triangularView<Eigen::Lower>();
    if (age != Scalar(1)) lower *= age;
    lower += other.m_gram;
    m_gram.template selfadjointView<Eigen::Lower>().rankUpdate(correction, Scalar(1));
  }

  bool factorize(WorkspaceType& ws) const {
    const Eigen::Index k = this->regressors();
    ws.flags = Flags();
    const Scalar tol = Scalar(4) * Scalar(k + 1) * std::numeric_limits<Scalar>::epsilon();
    detail::semidefiniteCholesky(m_gram, ws.aug, tol, true);
    ws.R = ws.aug.topLeftCorner(k, k);
    ws.z = ws.aug.col(k).head(k);
    ws.rho = ws.aug(k, k);
    this->fillCenteringFacts(ws);
    ws.rank = detail::solveUpperWithRank(ws.R, ws.z, ws.b, ws.scratch, ws.scale, ws.pivoted);
    this->recoverIntercept(ws);
    return true;
  }

  typename Dims::Matrix1 m_gram;
  mutable Scalar m_lastSse = 0;  // scratch of the guarded path, not state
};

}  // namespace rowfold
