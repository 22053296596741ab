/// @file
/// NormalEquations: centered co-moment accumulation, Cholesky at solve time.
#pragma once

#include <limits>

#include "rowfold/detail/cholesky.hpp"
#include "rowfold/detail/row_block.hpp"
#include "rowfold/estimator_base.hpp"

namespace rowfold {

/// Options of NormalEquations (see FitOptions; nothing of its own).
struct NormalEquationsOptions : FitOptions {};

/// Least squares from the centered weighted co-moments G = [M m; m' Syy] = [X~ y~]'[X~ y~],
/// accumulated by symmetric rank-one updates G <- lambda G + delta [d; e][d; e]' (Welford
/// 1962 / West 1979 in matrix form; NUMERICS §4.1). At solve time the Cholesky factor of the
/// augmented G gives [R z; 0 rho] directly (R'R = M, R b = z, rho^2 = SSE); never an inverse.
///
/// **Blocked ingestion (addRows):** rows are gathered in blocks of up to 64 (detail::RowBlock); per block
/// the weighted block means (rows weighted by w lambda^age within the block) and the block's
/// centered co-moments (one product of the centered block with itself) are formed, and the block
/// is combined with the running state by the pairwise update of Chan, Golub & LeVeque (1983,
/// Am. Stat. 37(3):242-247; NUMERICS §4.1, §5) under forgetting:
/// G <- lambda^b G + G_B + (W_A W_B / W) (m_B - m_A)(m_B - m_A)', W_A = lambda^b W. Equal to
/// row-by-row folding in exact arithmetic (tests/test_properties.cpp checks it to rounding).
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
///
/// Scratch: a block of up to 64 rows, about 1024 scalars (detail::RowBlock; allocated at
/// construction for Eigen::Dynamic).
template <typename Scalar_, int K_, int MaxK_ = K_>
class NormalEquations : public EstimatorBase<NormalEquations<Scalar_, K_, MaxK_>, Scalar_, K_, MaxK_> {
  using Base = EstimatorBase<NormalEquations<Scalar_, K_, MaxK_>, Scalar_, K_, MaxK_>;
  friend Base;
  template <typename, int>
  friend class MultiResponse;  // reads the shared state, writes a response's view

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
  static constexpr bool deferredCentering = false;  ///< folds at once (see EstimatorBase::syncCentering)

  /// Fixed K. status() reports invalid options; see EstimatorBase::status().
  explicit NormalEquations(const Options& options = Options())
      : NormalEquations(K_ == Eigen::Dynamic ? 0 : K_, options) {}
  /// Runtime K (any K > 0 for Eigen::Dynamic; must equal K otherwise, else status() is
  /// `wrong_size`). Allocates the co-moment matrix for Eigen::Dynamic K, nothing later.
  NormalEquations(Eigen::Index k, const Options& options)
      : Base(k, options), m_gram(k + 1, k + 1), m_block(k), m_u(k + 1) {
    m_gram.setZero();
    m_u.setZero();
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
  void foldRow(const Eigen::MatrixBase<XD>&, Scalar, Scalar, const Vector1& d, Scalar delta) {
    const Scalar lambda = this->lambda();
    const Eigen::Index n = m_gram.cols();
    // u = sqrt(delta) d, G += u u': the rounding of the symmetric square-root form, which keeps
    // about a digit more than delta d_i d_j on exact-fit data (NIST Wampler1: 7.8 vs 6.5).
    m_u = std::sqrt(delta) * d;
    Scalar* const g = m_gram.data();
    const Scalar* __restrict v = m_u.data();
    // Lower triangle, column by column (contiguous); forgetting fused into the same pass.
    if (lambda == Scalar(1)) {
      for (Eigen::Index j = 0; j < n; ++j) {
        Scalar* __restrict gj = g + j * n;
        const Scalar a = v[j];
        for (Eigen::Index i = j; i < n; ++i) gj[i] += a * v[i];
      }
    } else {
      for (Eigen::Index j = 0; j < n; ++j) {
        Scalar* __restrict gj = g + j * n;
        const Scalar a = v[j];
        for (Eigen::Index i = j; i < n; ++i) gj[i] = lambda * gj[i] + a * v[i];
      }
    }
  }

  /// Blocked addRows (rows already validated; see the class comment).
  template <typename XD, typename YD, typename WD>
  void foldRows(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, const WD* w) {
    Eigen::Index i = 0;
    for (Eigen::Index nb; (nb = m_block.gather(X, y, w, i)) > 0;) foldBlock(nb);
  }

  /// G <- lambda^b G + c diff diff' + Z' diag(omega) Z for the block's centered rows Z.
  void foldBlock(Eigen::Index nb) {
    const Eigen::Index n = m_gram.cols();
    const auto mg = m_block.prepare(nb, this->lambda(), this->interceptMode(), this->centeringState());
    const auto& z = m_block.rows();
    const auto& diff = m_block.diff();
    Scalar* const g = m_gram.data();
    if (mg.ageing != Scalar(1) || mg.weight != Scalar(0)) {
      for (Eigen::Index j = 0; j < n; ++j) {
        Scalar* __restrict gj = g + j * n;
        const Scalar a = mg.weight * diff(j);
        for (Eigen::Index i = j; i < n; ++i) gj[i] = mg.ageing * gj[i] + a * diff(i);
      }
    }
    // Lower triangle of Z' diag(omega) Z as dot products over the block's rows (each column of
    // the block is contiguous).
    const auto om = m_block.weights().head(nb);
    auto wz = m_block.tmp().head(nb);
    for (Eigen::Index j = 0; j < n; ++j) {
      Scalar* gj = g + j * n;
      if (mg.unit) {
        const auto zj = z.col(j).head(nb);
        for (Eigen::Index i = j; i < n; ++i) gj[i] += zj.dot(z.col(i).head(nb));
      } else {
        wz = om.cwiseProduct(z.col(j).head(nb));
        for (Eigen::Index i = j; i < n; ++i) gj[i] += wz.dot(z.col(i).head(nb));
      }
    }
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
  detail::RowBlock<Scalar, K_, MaxK_> m_block;  // addRows scratch
  Vector1 m_u;                                  // add: the scaled centered row
  mutable Scalar m_lastSse = 0;                 // scratch of the guarded path, not state
};

}  // namespace rowfold
