/// @file
/// GivensQr: square-root information form, one row folded at a time by Givens rotations.
#pragma once

#include <cmath>
#include <limits>
#include <type_traits>

#include "rowfold/detail/givens.hpp"
#include "rowfold/estimator_base.hpp"

namespace rowfold {

/// Options of GivensQr (see FitOptions; nothing of its own).
struct GivensQrOptions : FitOptions {};

/// Least squares by updating the augmented upper-triangular factor [R z; 0 rho] of the
/// centered, weighted data [X~ y~] one row at a time (Gentleman 1973, J. Inst. Maths Applics
/// 12:329-336; Golub & Van Loan 2013 §5.1.8, section number from memory; NUMERICS §1.2(d), §4.2):
/// ```
///   [ sqrt(lambda) R   sqrt(lambda) z ]   K+1 Givens rotations    [ R+  z+ ]
///   [ 0                sqrt(lambda) rho ] ---------------------->  [ 0   rho+ ]
///   [ c d'             c e             ]                          [ 0   0  ]
/// ```
/// Forgetting scales the old factor by sqrt(lambda); the scaling is folded into the rotations,
/// so it costs nothing extra. R'R = X~'X~ (centered weighted cross-products), R b = z,
/// rho^2 = weighted SSE.
///
/// **Stability:** a sequence of orthogonal row updates is normwise backward stable (Gentleman
/// 1975; Higham 2002 ch. 19): the accuracy is governed by the scaled condition kappa_s of the
/// centered data, not its square. Safe in float32 for long runs (with lambda < 1).
///
/// **Cost:** add ~ 2 (K+1)^2 multiplies + (K+1) square roots and divisions; solve = one back
/// substitution (K^2/2); summarize/conditioning O(K^3). State: (K+1)(K+2)/2 scalars of the
/// factor (stored as a full (K+1)^2 matrix) + centering.
///
/// **Status and flags:** those of EstimatorBase (remove() adds `not_definite`); no capacity
/// limit (`capacity_full` never occurs) and no flags of its own. With lambda = 1 in float32,
/// very long runs lose digits as R and z grow like sqrt(n) (NUMERICS §1.3): use lambda < 1 or
/// double there.
///
/// **Downdating (`remove`):** takes a previously folded sample out again (LINPACK/Saunders
/// method: Saunders 1972; Dongarra, Moler, Bunch & Stewart 1979, LINPACK Users' Guide ch. 10;
/// NUMERICS §3). With u the scaled centered row of the sample (Centering::removalRow):
/// ```
///   R'a = u_x,  alpha = sqrt(1 - |a|^2)   (|a|^2 >= 1: impossible -> Status::not_definite),
///   zeta = (u_y - a'z) / alpha,  rotations G_K .. G_1 with G [a; alpha] = [0; 1] applied to
///   [R z; 0 zeta]  ->  [R~ z~; u'],   rho~^2 = rho^2 - zeta^2,
/// ```
/// then the centered downdate of the means and weights. Cost ~ K^2/2 + 2 K^2 multiplies and K
/// square roots. **Stability:** only relationally stable (Stewart 1979): the error grows like
/// 1/alpha^2, so a sample that carries most of the information in some direction is refused or
/// removed inaccurately; long alternating update/downdate sequences are a double-precision
/// technique (Baykal & Constantinides 1998: stable in 53-bit, divergent with fewer bits).
/// Float32 downdating is not recommended; prefer BlockWindow (window.hpp) or a sliding BatchQr.
template <typename Scalar_, int K_, int MaxK_ = K_>
class GivensQr : public EstimatorBase<GivensQr<Scalar_, K_, MaxK_>, Scalar_, K_, MaxK_> {
  using Base = EstimatorBase<GivensQr<Scalar_, K_, MaxK_>, Scalar_, K_, MaxK_>;
  friend Base;

 public:
  using typename Base::Dims;  ///< see EstimatorBase
  using typename Base::Scalar;  ///< see EstimatorBase
  using typename Base::SolutionType;  ///< see EstimatorBase
  using typename Base::Vector1;  ///< see EstimatorBase
  using typename Base::WorkspaceType;  ///< see EstimatorBase
  using Options = GivensQrOptions;  ///< options type
  /// Error model of the conditioning analysis: orthogonal updates of online-centered rows.
  static constexpr detail::ErrorModel errorModel = detail::ErrorModel::online_qr;
  static constexpr EstimatorKind kind = EstimatorKind::givens_qr;  ///< snapshot image kind
  static constexpr bool guardable = true;  ///< the windup guard and outlier gate apply
  static constexpr bool positionalAges = false;  ///< ages live in the state: addDelayed/advance are exact

  /// Fixed K. status() reports invalid options; see EstimatorBase::status().
  explicit GivensQr(const Options& options = Options()) : GivensQr(K_ == Eigen::Dynamic ? 0 : K_, options) {}
  /// Runtime K (any K > 0 for Eigen::Dynamic; must equal K otherwise, else status() is
  /// `wrong_size`). Allocates the factor for Eigen::Dynamic K, nothing later.
  GivensQr(Eigen::Index k, const Options& options) : Base(k, options), m_factor(k + 1, k + 1) {
    m_factor.setZero();
  }

  /// The augmented factor [R z; 0 rho] ((K+1) x (K+1), upper triangular; zero before the
  /// second sample of a centered fit). R'R = X~'X~, R b = z, rho^2 = weighted SSE.
  const typename Dims::Matrix1& factor() const { return m_factor; }

  /// Back substitution on the stored factor (O(K^2)); the pivoted fallback only when a
  /// column is numerically dependent (O(K^3), basic solution, `rank_deficient`).
  /// Returns `empty`, `not_available` (non-finite result: `near_singular`) or `ok`; flags
  /// `rank_deficient`, `too_few_samples`. Backward stable (class comment). Never allocates.
  Status solveInto(SolutionType& out) const {
    out.flags = Flags();
    if (this->count() == 0) return Base::solveInto(out);
    const Eigen::Index k = this->regressors();
    WorkspaceType& ws = this->work();
    out.rank = detail::solveUpperWithRank(m_factor.topLeftCorner(k, k), m_factor.col(k).head(k), out.coefficients,
                                          ws.scratch, ws.scale, ws.pivoted);
    const auto& c = this->centering();
    out.intercept =
        this->interceptMode() == Intercept::fit ? c.yMean() - c.xMean().dot(out.coefficients) : Scalar(0);
    return this->finishChecked(out);
  }

  /// Removes a sample (x, y) folded earlier (downdating; see the class comment).
  ///
  /// `w` is the sample's *current* weight: the weight it was folded with times the forgetting
  /// it has undergone since (w0 lambda^age; with the windup guard, times the step factors the
  /// guard actually applied). `aged` is its forgetting share alone, lambda^age, which leaves F
  /// and F2 (the effective sample size); by default 1 when lambda = 1 and w when lambda < 1 (a
  /// unit-weight sample). The caller must pass a sample that was folded: the method cannot tell
  /// another one, except when removing it would make the state indefinite.
  ///
  /// Returns `ok`; `not_definite` when the downdate is impossible or singular to working
  /// precision (1 - |R^-T u_x|^2 <= (K+1) eps, the remaining weight W - w is not positive, the
  /// factor is rank deficient, or the residual sum of squares would turn clearly negative);
  /// `empty` (nothing folded); the input checks of add (`wrong_size`, `negative_weight` also for
  /// `aged` outside [0, 1], `nonfinite_input`) or the construction status. On any status but
  /// `ok` the state is untouched. A zero weight removes nothing. Removing the only sample
  /// resets the estimator. The windup guard's spread record is not downdated. Never allocates.
  template <typename XD>
  Status remove(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w = Scalar(1), Scalar aged = Scalar(-1)) {
    static_assert(std::is_same<typename XD::Scalar, Scalar>::value, "rowfold: x must have the estimator's Scalar");
    using std::abs;
    using std::sqrt;
    const Eigen::Index k = this->regressors();
    const Scalar one(1), zero(0), eps = std::numeric_limits<Scalar>::epsilon();
    if (this->status() != Status::ok) return this->status();
    if (x.size() != k) return Status::wrong_size;
    if (!(w >= zero) || !std::isfinite(w)) return Status::negative_weight;
    if (aged < zero && !std::isnan(aged)) aged = this->fitOptions().forgetting == 1.0 ? one : w;
    if (!(aged >= zero && aged <= one)) return Status::negative_weight;
    if (!std::isfinite(y) || !x.allFinite()) return Status::nonfinite_input;
    if (w == zero) return Status::ok;
    const auto& centering = this->centering();
    if (centering.count() == 0) return Status::empty;
    if (centering.count() == 1) {  // the only sample: its weight must be the whole weight
      if (!(abs(centering.weightSum() - w) <= sqrt(eps) * centering.weightSum())) return Status::not_definite;
      this->reset();
      return Status::ok;
    }
    WorkspaceType& ws = this->work();
    Vector1& u = ws.v1aug;
    if (!centering.removalRow(x, y, w, this->interceptMode(), u)) return Status::not_definite;
    for (Eigen::Index i = 0; i < k; ++i)
      if (!(m_factor(i, i) > zero)) return Status::not_definite;
    // a = R^-T u_x; the downdate exists iff |a| < 1 (R'R - u_x u_x' positive definite).
    auto& a = ws.v1;
    a = u.head(k);
    detail::forwardSubstituteTransposed(m_factor.topLeftCorner(k, k), a);
    const Scalar aa = a.squaredNorm();
    if (!(aa < one - Scalar(k + 1) * eps)) return Status::not_definite;
    Scalar alpha = sqrt(one - aa);
    const Scalar zeta = (u(k) - a.dot(m_factor.col(k).head(k))) / alpha;
    const Scalar rho = abs(m_factor(k, k));
    const Scalar rest2 = (rho - abs(zeta)) * (rho + abs(zeta));
    const Scalar scale2 = m_factor.col(k).head(k).squaredNorm() + rho * rho + zeta * zeta + u(k) * u(k);
    if (rest2 < -Scalar(8 * (k + 2)) * eps * scale2) return Status::not_definite;
    // Rotations zeroing a from the bottom against alpha, applied to the rows of [R z] and the
    // extra row e = [0, zeta]; the diagonal stays positive (R~_ii = c R_ii, c > 0).
    Vector1& e = m_row;
    e.setZero();
    e(k) = zeta;
    for (Eigen::Index i = k - 1; i >= 0; --i) {
      const Scalar r = detail::safeHypot(alpha, a(i));
      const Scalar c = alpha / r, s = a(i) / r;
      alpha = r;
      for (Eigen::Index j = i; j <= k; ++j) {
        const Scalar fij = m_factor(i, j), ej = e(j);
        m_factor(i, j) = c * fij - s * ej;
        e(j) = s * fij + c * ej;
      }
    }
    m_factor(k, k) = rest2 > zero ? sqrt(rest2) : zero;
    this->centeringState().remove(x, y, w, this->interceptMode(), u, aged);
    return Status::ok;
  }

 private:
  std::uint64_t room() const { return std::numeric_limits<std::uint64_t>::max(); }
  void clearState() { m_factor.setZero(); }

  template <typename Self, typename V>
  static void visitOptions(Self&, V&) {}
  template <typename Self, typename V>
  static void visitState(Self& self, V& v) {
    v.array(self.m_factor.data(), static_cast<std::size_t>(self.m_factor.size()));
  }

  template <typename XD>
  void foldRow(const Eigen::MatrixBase<XD>&, Scalar, Scalar, const Vector1& rowIn) {
    using std::abs;
    using std::sqrt;
    const Eigen::Index n = m_factor.cols();
    const Scalar sl = sqrt(this->lambda());
    Vector1& row = m_row;
    row = rowIn;
    for (Eigen::Index i = 0; i < n; ++i) {
      const Scalar a = sl * m_factor(i, i);
      const Scalar b = row(i);
      if (b == Scalar(0)) {
        if (sl != Scalar(1)) m_factor.row(i).tail(n - i) *= sl;
        continue;
      }
      // Givens rotation zeroing b against a (a >= 0 is kept). r = sqrt(a^2 + b^2) directly: two
      // roundings fewer than the ratio form, which measurably helps on large-residual data
      // (NIST Wampler4/5: +0.5 digit); the ratio form only where a^2 + b^2 over/underflows.
      Scalar r = sqrt(a * a + b * b);
      if (!(r <= std::numeric_limits<Scalar>::max()) || r < std::numeric_limits<Scalar>::min() / std::numeric_limits<Scalar>::epsilon())
        r = safeHypot(a, b);
      const Scalar c = a / r, s = b / r;
      const Scalar cs = c * sl, ss = s * sl;
      m_factor(i, i) = r;
      for (Eigen::Index j = i + 1; j < n; ++j) {
        const Scalar rij = m_factor(i, j);
        const Scalar vj = row(j);
        m_factor(i, j) = cs * rij + s * vj;
        row(j) = c * vj - ss * rij;
      }
    }
  }

  Status canMerge(const GivensQr&) const { return Status::ok; }

  void ageState(Scalar f) { m_factor.template triangularView<Eigen::Upper>() *= std::sqrt(f); }
  /// Forgets the residual only (rho, the last diagonal entry), keeping R and z.
  void ageResidual(Scalar f) { m_factor(m_factor.rows() - 1, m_factor.cols() - 1) *= std::sqrt(f); }

  /// Current slopes by back substitution (K^2/2); false if the factor is singular.
  template <typename VD>
  bool currentSlopes(VD& b) const {
    const Eigen::Index k = this->regressors();
    for (Eigen::Index i = 0; i < k; ++i)
      if (!(m_factor(i, i) > Scalar(0))) return false;
    b = m_factor.col(k).head(k);
    detail::backSubstitute(m_factor.topLeftCorner(k, k), b, k);
    return b.allFinite();
  }

  /// h = phi' M^-1 phi = |R^-T phi|^2 and the prediction error e = eta - phi'b = eta - u'z
  /// (u = R^-T phi): one forward substitution, K^2/2 multiply-adds.
  bool priorInfo(const Vector1& row, Scalar& h, Scalar& e) const {
    const Eigen::Index k = this->regressors();
    for (Eigen::Index i = 0; i < k; ++i)
      if (!(m_factor(i, i) > Scalar(0))) return false;
    auto& u = this->work().v1;
    u = row.head(k);
    detail::forwardSubstituteTransposed(m_factor.topLeftCorner(k, k), u);
    h = u.squaredNorm();
    e = row(k) - u.dot(m_factor.col(k).head(k));
    return true;
  }

  /// Stacked-factor merge (detail::mergeFactorInto): this factor aged by sqrt(age), then the
  /// other factor's rows and the centering correction row rotated in.
  void mergeState(const GivensQr& other, Scalar age, const Vector1& correction) {
    if (age != Scalar(1)) m_factor.template triangularView<Eigen::Upper>() *= std::sqrt(age);
    Vector1& extra = this->work().v1aug;
    extra = correction;
    detail::mergeFactorInto(m_factor, other.m_factor, extra, m_row);
  }

  static Scalar safeHypot(Scalar a, Scalar b) { return detail::safeHypot(a, b); }

  bool factorize(WorkspaceType& ws) const {
    const Eigen::Index k = this->regressors();
    ws.flags = Flags();
    ws.R = m_factor.topLeftCorner(k, k).template triangularView<Eigen::Upper>();
    ws.z = m_factor.col(k).head(k);
    ws.rho = std::abs(m_factor(k, k));
    this->fillCenteringFacts(ws);
    ws.rank = detail::solveUpperWithRank(ws.R, ws.z, ws.b, ws.scratch, ws.scale, ws.pivoted);
    this->recoverIntercept(ws);
    return true;
  }

  typename Dims::Matrix1 m_factor;
  Vector1 m_row{Vector1::Zero(m_factor.cols())};
};

}  // namespace rowfold
