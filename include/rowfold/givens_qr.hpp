/// @file
/// GivensQr: square-root information form, one row folded at a time by Givens rotations.
#pragma once

#include <cmath>
#include <limits>
#include <type_traits>

#include "rowfold/detail/givens.hpp"
#include "rowfold/detail/householder_block.hpp"
#include "rowfold/detail/lone_load.hpp"
#include "rowfold/detail/row_block.hpp"
#include "rowfold/estimator_base.hpp"

namespace rowfold {

/// Options of GivensQr (see FitOptions; nothing of its own).
struct GivensQrOptions : FitOptions {};

/// Least squares by updating the augmented upper-triangular factor [R z; 0 rho] of the
/// centered, weighted data [X~ y~] one row at a time with square-root-free Givens rotations
/// (Gentleman 1973, "Least squares computations by Givens transformations without square
/// roots", J. Inst. Maths Applics 12:329-336; Golub & Van Loan 2013 §5.1.8, section number
/// from memory; NUMERICS §1.2(d), §4.2). The factor is kept as [R z; 0 rho] = D^(1/2) Rbar with D = diag(d) and Rbar unit upper
/// triangular (the last diagonal entry d_K = rho^2). A centered row x = [x~; y~] of weight delta
/// (NUMERICS §4.1) is folded column by column, i = 0..K:
/// ```
///   b = x_i,  d_i' = lambda d_i + delta b^2,  cbar = lambda d_i / d_i',  sbar = delta b / d_i',
///   for j > i:  x_j <- x_j - b rbar_ij,   rbar_ij <- cbar rbar_ij + sbar x_j (old x_j),
///   delta <- delta cbar.
/// ```
/// Forgetting scales D by lambda only (Rbar is unchanged). No square root is taken. The weight is
/// carried as its reciprocal, 1/delta' = 1/delta + b^2/(lambda d_i), so the only dependency chain
/// from column to column is one multiply-add (the reduced row entry); every division is
/// independent work. Columns whose weight would over- or underflow in that form take the direct
/// formulas above. `factor()` forms the explicit [R z; 0 rho] (O(K^2) square roots) on demand.
///
/// **Stability:** a sequence of orthogonal row updates is normwise backward stable (Gentleman
/// 1975; Higham 2002 ch. 19): the accuracy is governed by the scaled condition kappa_s of the
/// centered data, not its square. The square-root-free form keeps that property (Gentleman 1973,
/// §4). Safe in float32 for long runs (with lambda < 1).
///
/// **Cost:** add ~ 2 (K+1)^2 multiply-adds + 2 (K+1) divisions off the dependency chain;
/// solve = forming the explicit factor (K^2/2) + one back substitution (K^2/2);
/// summarize/conditioning O(K^3). State: (K+1)(K+2)/2 scalars (d and Rbar, stored as a full
/// row-major (K+1)^2 matrix) + centering.
///
/// **Blocked ingestion (addRows):** the state is turned into the explicit factor once per call,
/// each block of rows (detail::RowBlock: centered on its means, plus the mean-difference row) is
/// folded by one Householder QR of the factor stacked on the block (the TSQR step, NUMERICS §5;
/// detail/householder_block.hpp), ~ (K+1)^2 multiply-adds per row along contiguous columns, and
/// the result is turned back at the end. Normwise backward stable like the rotations; the same
/// fit to rounding (not bit for bit). Unguarded, the rows are read once: each block is checked
/// while it is in cache, and a refused call (the first bad row's Status, as add() gives it)
/// leaves the state and its snapshot image untouched; only scratch (the explicit factor, the
/// block buffers) keeps traces of the blocks folded before the bad one.
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
/// then the centered downdate of the means and weights. It runs on the explicit factor, formed
/// from and converted back to the square-root-free state (d_i = R_ii^2, rbar_ij = R_ij / R_ii).
/// Cost ~ K^2/2 + 3 K^2 multiplies and 2K square roots. **Stability:** only relationally stable (Stewart 1979): the error grows like
/// 1/alpha^2, so a sample that carries most of the information in some direction is refused or
/// removed inaccurately; long alternating update/downdate sequences are a double-precision
/// technique (Baykal & Constantinides 1998: stable in 53-bit, divergent with fewer bits).
/// Float32 downdating is not recommended; prefer BlockWindow (window.hpp) or a sliding BatchQr.
template <typename Scalar_, int K_, int MaxK_ = K_>
class GivensQr : public EstimatorBase<GivensQr<Scalar_, K_, MaxK_>, Scalar_, K_, MaxK_> {
  using Base = EstimatorBase<GivensQr<Scalar_, K_, MaxK_>, Scalar_, K_, MaxK_>;
  friend Base;
  template <typename, int>
  friend class MultiResponse;  // reads the shared state, writes a response's view

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
  static constexpr bool deferredCentering = false;  ///< folds at once (see EstimatorBase::syncCentering)
  static constexpr bool fusedRows = true;  ///< addRows validates and folds in one pass (ingestRows)
  static constexpr int sizedUpTo = 8;  ///< per-size copies of add for a runtime K up to 8 (EstimatorBase::addSized)

  /// Fixed K. status() reports invalid options; see EstimatorBase::status().
  explicit GivensQr(const Options& options = Options()) : GivensQr(K_ == Eigen::Dynamic ? 0 : K_, options) {}
  /// Runtime K (any K > 0 for Eigen::Dynamic; must equal K otherwise, else status() is
  /// `wrong_size`). Allocates its state for Eigen::Dynamic K, nothing later.
  GivensQr(Eigen::Index k, const Options& options)
      : Base(k, options),  // first: regressors() below is the storage size (detail::storedSize)
        m_state(this->regressors() + 1, stride(this->regressors() + 1)),
        m_x(stride(this->regressors() + 1)),
        m_rld(this->regressors() + 1),
        m_block(this->regressors()),
        m_wide(this->regressors() + 1 >= kWide
                   ? detail::RowBlock<Scalar, K_, MaxK_>::rowsFor(this->regressors()) + 1 + kPanelRows
                   : 0,
               this->regressors() + 1 >= kWide ? stride(this->regressors() + 1) : 0),
        m_factor(this->regressors() + 1, this->regressors() + 1),
        m_savedCentering(this->regressors()) {
    m_state.setZero();
    m_x.setZero();
    m_rld.setZero();
    // The pad columns of m_wide stay zero, as foldRowsHouseholder needs; m_wide is empty
    // otherwise (g++ 12 misreads its bound).
    if constexpr (!kNoWide) m_wide.setZero();
    m_factor.setZero();
  }

  /// The augmented factor [R z; 0 rho] ((K+1) x (K+1), upper triangular, diagonal >= 0), formed
  /// from the square-root-free state on each call (O(K^2)); the reference stays valid until the
  /// next call of factor/solve/summarize on this object.
  const typename Dims::Matrix1& factor() const {
    formFactor();
    return m_factor;
  }

  /// Back substitution on the explicit factor (O(K^2)); the pivoted fallback only when a
  /// column is numerically dependent (O(K^3), basic solution, `rank_deficient`).
  /// Returns `empty`, `not_available` (non-finite result: `near_singular`) or `ok`; flags
  /// `rank_deficient`, `too_few_samples` and the guard's. Backward stable (class comment).
  /// Never allocates.
  Status solveInto(SolutionType& out) const {
    out.flags = Flags();
    if (this->count() == 0) return Base::solveInto(out);
    const Eigen::Index k = this->regressors();
    WorkspaceType& ws = this->work();
    formFactor();
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
    formFactor();  // the downdate works on the explicit factor; takeFactor() converts back
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
    Vector1& e = ws.v2aug;
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
    takeFactor();
    this->centeringState().remove(x, y, w, this->interceptMode(), u, aged);
    return Status::ok;
  }

 private:
  // Rows padded to whole 64-byte lines: every row of the state starts at the same alignment as
  // the reduced row, so the vectorized sweeps need no line-splitting accesses.
  static constexpr int kPad = sizeof(Scalar) >= 64 ? 1 : static_cast<int>(64 / sizeof(Scalar));
  static constexpr int padded(int n) { return n == Eigen::Dynamic ? Eigen::Dynamic : (n + kPad - 1) / kPad * kPad; }
  static Eigen::Index stride(Eigen::Index n) { return (n + kPad - 1) / kPad * kPad; }
  using State = Eigen::Matrix<Scalar, Dims::K1, padded(Dims::K1), Eigen::RowMajor, Dims::MaxK1, padded(Dims::MaxK1)>;
  using Row = Eigen::Matrix<Scalar, padded(Dims::K1), 1, Eigen::ColMajor, padded(Dims::MaxK1), 1>;

  std::uint64_t room() const { return std::numeric_limits<std::uint64_t>::max(); }
  void clearState() {
    m_state.setZero();
    m_scale = Scalar(1);
  }

  template <typename Self, typename V>
  static void visitOptions(Self&, V&) {}
  /// State image: the (K+1)^2 row-major array holding d (times the scale) on the diagonal and
  /// Rbar above it, then the power-of-4 scale (snapshot format version 2; the row padding is not
  /// written).
  template <typename Self, typename V>
  static void visitState(Self& self, V& v) {
    const Eigen::Index n = self.m_state.rows();
    for (Eigen::Index i = 0; i < n; ++i) v.array(self.m_state.data() + i * self.m_state.cols(), static_cast<std::size_t>(n));
    v.field(self.m_scale);
  }

  void ageDiagonal(Eigen::Index from, Scalar lambda) {
    if (lambda == Scalar(1)) return;
    for (Eigen::Index l = from; l < m_state.rows(); ++l) m_state(l, l) *= lambda;
  }

  template <typename XD>
  void foldRow(const Eigen::MatrixBase<XD>&, Scalar, Scalar, const Vector1& d, Scalar delta) {
    foldCentered(d, delta, this->lambda());
  }

  /// One-pass addRows (guards off): each block is checked while it is in cache and folded into
  /// the explicit factor, which is scratch until the end; the state is taken from it only when
  /// every row was clean, and the centering (saved first) is put back otherwise. Returns the
  /// Status of the first row add() would reject (the state then untouched), else `ok`.
  template <typename XD, typename YD, typename WD>
  Status ingestRows(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, const WD* w) {
    m_savedCentering = this->centeringState();  // same size: no allocation
    const Status s = foldBlocks(X, y, w);
    if (s != Status::ok) this->centeringState() = m_savedCentering;
    return s;
  }

  /// Blocked ingestion: per block, foldBlock, from one explicit factor F = [R z; 0 rho]: the
  /// square-root-free state is turned into F once per call and back once at the end (one
  /// rounding each, however many blocks). Equal to row-by-row folding in exact arithmetic. Each
  /// block is validated while it is in cache, after its fold: with unit weights by
  /// the diagonal of F (a NaN or Inf anywhere in the block reaches the diagonal entry of its
  /// column: that column's reflector norm), else by the raw rows (zero-weight ones included).
  /// On a hit, the row-by-row check of the block gives the Status; rows that are finite but
  /// whose squares overflow find no bad row and stay folded, as row by row.
  template <typename XD, typename YD, typename WD>
  Status foldBlocks(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, const WD* w) {
    bool formed = false;
    for (Eigen::Index i = 0, i0 = 0; i < X.rows(); i0 = i) {
      const Eigen::Index nb = m_block.gather(X, y, w, i);
      detail::PrefetchStream ahead;  // the next block, asked for while this one is folded
      if (w == nullptr) ahead = m_block.prefetch(X, y, i);
      if (nb > 0) {
        if (!formed) formFactor();
        formed = true;
        foldBlock(nb, ahead);
      }
      if (w == nullptr ? !Base::allFiniteFast(m_factor.diagonal()) : !Base::cleanRows(X, y, w, i0, i)) {
        const Status s = this->firstReject(X, y, w, i0, i);
        if (s != Status::ok) return s;
      }
    }
    if (formed) takeFactor();
    return Status::ok;
  }

  /// Folds the nb gathered rows into m_factor: the rows are centered on the block's weighted
  /// means, F is aged by lambda^b once, and the centered rows (weights w lambda^age) and the mean
  /// difference (weight W_A W_B / W', the factored form of the pairwise update of Chan, Golub &
  /// LeVeque 1983; NUMERICS §5 "Centered merge") are folded together by one Householder QR of
  /// [sqrt(lambda^b) F; diag(sqrt(omega)) Z; sqrt(W_A W_B / W') diff'] (the stacked-triangle
  /// step of TSQR: detail::foldBlockHouseholder, or detail::foldRowsHouseholder for wide rows).
  /// `ahead`: the next block's rows, asked for during the fold (empty for none).
  void foldBlock(Eigen::Index nb, detail::PrefetchStream& ahead) {
    const Eigen::Index n = m_state.rows();
    const auto mg = m_block.prepare(nb, this->lambda(), this->interceptMode(), this->centeringState());
    if (mg.ageing != Scalar(1)) m_factor.template triangularView<Eigen::Upper>() *= std::sqrt(mg.ageing);
    auto& z = m_block.rows();
    const Scalar extra = mg.weight > Scalar(0) ? std::sqrt(mg.weight) : Scalar(0);
    auto root = m_block.tmp().head(nb);
    if (!mg.unit) root = m_block.weights().head(nb).cwiseSqrt();
    if constexpr (!kNoWide) {  // a compile-time bound below kWide never takes this branch
      if (n >= kWide) {  // wide rows: fold them row-major, in panels (see foldRowsHouseholder)
        if (mg.unit)
          m_wide.topLeftCorner(nb, n) = z.topRows(nb);
        else
          m_wide.topLeftCorner(nb, n) = root.asDiagonal() * z.topRows(nb);
        m_wide.row(nb).head(n) = extra * m_block.diff().transpose();
        detail::foldRowsHouseholder(m_factor, m_wide.data(), extra > Scalar(0) ? nb + 1 : nb, m_wide.cols(),
                                    m_wide.bottomRows(kPanelRows).data(), ahead);  // its panel scratch
        return;
      }
    }
    if (!mg.unit)
      for (Eigen::Index j = 0; j < n; ++j) z.col(j).head(nb).array() *= root.array();
    if (extra > Scalar(0)) m_x.head(n) = extra * m_block.diff();
    detail::foldBlockHouseholder(m_factor, z.data(), nb, z.rows(), extra > Scalar(0) ? m_x.data() : nullptr, ahead);
  }

  /// Folds the centered row d with weight delta (Gentleman 1973; see the class comment).
  ///
  /// Rows of the state are taken kRowBlock at a time (foldBlockDirect): the usual block, whose
  /// rows all take the reciprocal weight form and the one-term rotation, is folded without a
  /// branch per entry. Where a block declines, its first row is folded alone (foldStateRow: an
  /// empty column, a weight out of range, a dominant row) and the next block starts after it.
  template <typename VD>
  void foldCentered(const VD& d, Scalar deltaIn, Scalar lambda) {
    const Eigen::Index n = m_state.rows();
    const Eigen::Index ns = m_state.cols();  // row stride (padded)
    constexpr Scalar kMax = std::numeric_limits<Scalar>::max();
    if (kLoneRowCopy || (K_ == Eigen::Dynamic && n <= kLoneRowCopyUpTo)) {
      for (Eigen::Index i = 0; i < n; ++i) m_x(i) = detail::loadAlone(d(i));
    } else {
      m_x.head(n) = d;
    }
    if (!(deltaIn > Scalar(0))) {
      ageDiagonal(0, lambda);  // nothing to fold (first centered sample)
      return;
    }
    // d holds squares (delta b^2): keep delta b^2 of this row inside the exponent range by the
    // state's power-of-4 scale (the stored d and weights are d * m_scale; see rescale()).
    const Scalar amax = m_x.head(n).cwiseAbs().maxCoeff();
    Scalar delta = deltaIn * m_scale;
    const Scalar size = delta * amax * amax;
    if (!(size <= kHigh) || (size < kLow && amax > Scalar(0))) {
      rescale(deltaIn, amax);
      delta = deltaIn * m_scale;
    }
    Scalar invDelta = Scalar(1) / delta;  // 1/delta_i, the carried chain
    if (!(delta > Scalar(0)) || !(invDelta <= kMax)) {
      ageDiagonal(0, lambda);  // a negligible weight
      return;
    }
    Scalar deltaCur = delta;  // delta_i itself (off the chain)
    Scalar* const x = m_x.data();
    const Scalar* const base = m_state.data();
    // 1/(lambda d_i) for every row (inf for an empty row, whose block then declines), read
    // straight off the diagonal. Gathered into m_rld first and inverted there, the vector loads
    // waited on the gather's scalar stores (no store forwarding): dynamic K = 8, double, native,
    // 96 ns per sample against 67 ns read straight off.
    m_rld = (lambda * Eigen::Map<const Vector1, 0, Eigen::InnerStride<>>(base, n, Eigen::InnerStride<>(ns + 1)))
                .cwiseInverse();
    for (Eigen::Index i = 0; i < n;) {
      const Eigen::Index m = n - i < kRowBlock ? n - i : kRowBlock;
      if (foldBlockDirect(x, i, m, lambda, invDelta, deltaCur)) {
        i += m;
      } else if (foldStateRow(x, i, lambda, invDelta, deltaCur)) {
        ++i;
      } else {
        ageDiagonal(i + 1, lambda);  // the row's weight is used up: the remaining rows only age
        return;
      }
    }
  }

  /// The usual block of foldCentered, rows i0..i0+M-1, without a branch per entry: the block's
  /// reduced row entries b_q are found first (its diagonal block only), then its weights in the
  /// reciprocal form, 1/delta_(q+1) = 1/delta_q + b_q^2/(lambda d_q), with one independent
  /// division per row, and every entry of the block's rows takes the one-term rotation
  /// (see rotate()). Declines (returns false, nothing written) when a row of the block needs the
  /// direct form (an empty column, a weight out of range) or the two-term rotation
  /// (cbar < kCbarSplit). `x` is the reduced row (m_x), updated beyond the block.
  ///
  /// Forced inline (with sweepFour): called out of line, the chain values passed by reference
  /// and the caller's loop variables went through the stack, and those reloads waited on the
  /// sweep's stores whenever their addresses matched modulo 4 KiB. Measured at K = 64 (native,
  /// one object placed at 16 offsets within a page): 509-875 ns per sample out of line,
  /// 518-562 ns inlined.
  EIGEN_ALWAYS_INLINE bool foldBlockDirect(Scalar* x, Eigen::Index i0, Eigen::Index m, Scalar lambda, Scalar& invDelta, Scalar& deltaCur) {
    switch (m) {
      case 4: return foldBlockDirect<4>(x, i0, lambda, invDelta, deltaCur);
      case 3: return foldBlockDirect<3>(x, i0, lambda, invDelta, deltaCur);
      case 2: return foldBlockDirect<2>(x, i0, lambda, invDelta, deltaCur);
      default: return foldBlockDirect<1>(x, i0, lambda, invDelta, deltaCur);
    }
  }

  template <int M>
  EIGEN_ALWAYS_INLINE bool foldBlockDirect(Scalar* x, Eigen::Index i0, Scalar lambda, Scalar& invDelta, Scalar& deltaCur) {
    static_assert(M >= 1 && M <= 4 && kRowBlock == 4, "a block has 1..4 rows");
    // Plain scalars, not small arrays: GCC packs such arrays into vectors through the stack,
    // and the reloads then miss store forwarding (measured: a third of the time at K = 64).
    constexpr Scalar kMax = std::numeric_limits<Scalar>::max();
    const Scalar zero(0), one(1);
    const Eigen::Index step = m_state.cols() + 1;
    Scalar* const r0 = m_state.data() + i0 * step;  // row i0 + q starts at rq[0], its diagonal
    Scalar* const r1 = M > 1 ? r0 + step : nullptr;
    Scalar* const r2 = M > 2 ? r1 + step : nullptr;
    Scalar* const r3 = M > 3 ? r2 + step : nullptr;
    const Scalar* const rld = m_rld.data() + i0;
    // tqp: entry i0 + p of the reduced row after the rotation of row i0 + q; b_q = t(q-1)q.
    const Scalar b0 = x[i0];
    const Scalar t01 = M > 1 ? x[i0 + 1] - b0 * r0[1] : zero;
    const Scalar t02 = M > 2 ? x[i0 + 2] - b0 * r0[2] : zero;
    const Scalar t03 = M > 3 ? x[i0 + 3] - b0 * r0[3] : zero;
    const Scalar b1 = t01;
    const Scalar t12 = M > 2 ? t02 - b1 * r1[1] : zero;
    const Scalar t13 = M > 3 ? t03 - b1 * r1[2] : zero;
    const Scalar b2 = t12;
    const Scalar t23 = M > 3 ? t13 - b2 * r2[1] : zero;
    const Scalar b3 = t23;
    // Weights, reciprocal form: u_(q+1) = u_q + b_q^2/(lambda d_q) is the only chain.
    const Scalar c0 = b0 * rld[0], c1 = M > 1 ? b1 * rld[1] : zero;
    const Scalar c2 = M > 2 ? b2 * rld[2] : zero, c3 = M > 3 ? b3 * rld[3] : zero;
    const Scalar u0 = invDelta, u1 = u0 + b0 * c0, u2 = u1 + b1 * c1, u3 = u2 + b2 * c2, u4 = u3 + b3 * c3;
    const Scalar dl1 = one / u1, dl2 = M > 1 ? one / u2 : one, dl3 = M > 2 ? one / u3 : one;
    const Scalar dl4 = M > 3 ? one / u4 : one;
    // An empty column or a weight out of range (NaN too) needs the direct form; a dominant row
    // (cbar_q = u_q / u_(q+1) < kCbarSplit) the two-term rotation.
    const bool oneTerm = (u0 * dl1 >= kCbarSplit) & (M < 2 || u1 * dl2 >= kCbarSplit) &
                         (M < 3 || u2 * dl3 >= kCbarSplit) & (M < 4 || u3 * dl4 >= kCbarSplit);
    if (!(u4 <= kMax) || !oneTerm) return false;
    const Scalar s0 = c0 * dl1, s1 = c1 * dl2, s2 = c2 * dl3, s3 = c3 * dl4;
    r0[0] = lambda * r0[0] + deltaCur * b0 * b0;
    if constexpr (M > 1) {
      r0[1] += s0 * t01;
      r1[0] = lambda * r1[0] + dl1 * b1 * b1;
    }
    if constexpr (M > 2) {
      r0[2] += s0 * t02;
      r1[1] += s1 * t12;
      r2[0] = lambda * r2[0] + dl2 * b2 * b2;
    }
    if constexpr (M > 3) {
      r0[3] += s0 * t03;
      r1[2] += s1 * t13;
      r2[1] += s2 * t23;
      r3[0] = lambda * r3[0] + dl3 * b3 * b3;
    }
    invDelta = M == 1 ? u1 : M == 2 ? u2 : M == 3 ? u3 : u4;
    deltaCur = M == 1 ? dl1 : M == 2 ? dl2 : M == 3 ? dl3 : dl4;
    // A block of fewer than four rows ends the state (see foldCentered): nothing beyond it.
    if constexpr (M == 4)
      if (i0 + M < m_state.rows()) sweepFour(x, i0, b0, b1, b2, b3, s0, s1, s2, s3);
    return true;
  }

  /// The one-term rotations of rows i0..i0+3 applied to the columns beyond their diagonal
  /// block, the reduced row staying in registers across the four rows.
  EIGEN_ALWAYS_INLINE void sweepFour(Scalar* __restrict x, Eigen::Index i0, Scalar b0, Scalar b1, Scalar b2, Scalar b3,
                                     Scalar s0, Scalar s1, Scalar s2, Scalar s3) {
    const Eigen::Index n = m_state.rows(), ns = m_state.cols();
    Scalar* __restrict r0 = m_state.data() + i0 * ns;
    Scalar* __restrict r1 = r0 + ns;
    Scalar* __restrict r2 = r1 + ns;
    Scalar* __restrict r3 = r2 + ns;
    for (Eigen::Index j = i0 + 4; j < n; ++j) {
      const Scalar t0 = x[j] - b0 * r0[j];
      r0[j] += s0 * t0;
      const Scalar t1 = t0 - b1 * r1[j];
      r1[j] += s1 * t1;
      const Scalar t2 = t1 - b2 * r2[j];
      r2[j] += s2 * t2;
      const Scalar t3 = t2 - b3 * r3[j];
      r3[j] += s3 * t3;
      x[j] = t3;
    }
  }

  /// One row i of the state alone, for the blocks that foldBlockDirect declines: the weight in
  /// the reciprocal form where it holds, else by the direct formulas of the class comment (an
  /// empty column, or a weight that would leave the range); the one-term rotation unless the row
  /// dominates (see rotate()). False when the row's weight is used up.
  bool foldStateRow(Scalar* __restrict x, Eigen::Index i, Scalar lambda, Scalar& invDelta, Scalar& deltaCur) {
    constexpr Scalar kMax = std::numeric_limits<Scalar>::max();
    const Eigen::Index n = m_state.rows();
    Scalar* __restrict r = m_state.data() + i * m_state.cols();
    const Scalar b = x[i], ld = lambda * r[i];
    if (b == Scalar(0)) {
      r[i] = ld;
      return true;
    }
    const Scalar c = b * m_rld(i), invNew = invDelta + b * c;
    Scalar cbar, sbar;
    if (ld > Scalar(0) && invNew <= kMax) {
      const Scalar deltaNew = Scalar(1) / invNew;
      cbar = invDelta * deltaNew;
      sbar = c * deltaNew;
      r[i] = ld + deltaCur * b * b;
      invDelta = invNew;
      deltaCur = deltaNew;
    } else {
      const Scalar dNew = ld + deltaCur * b * b;
      cbar = ld / dNew;
      sbar = deltaCur * b / dNew;
      r[i] = dNew;
      deltaCur = deltaCur * cbar;
      invDelta = Scalar(1) / deltaCur;
    }
    for (Eigen::Index j = i + 1; j < n; ++j) rotate(x[j], r[j], b, cbar, sbar);
    return deltaCur > Scalar(0) && invDelta <= kMax;
  }

  /// Chooses the power-of-4 scale so that the incoming row's delta b^2 lands near the middle of
  /// the exponent range (as far as the largest stored d allows) and rescales the stored d.
  /// R and Rbar do not change: R = sqrt(d / m_scale) Rbar. Rare: only when a row is far out of
  /// range (|x| beyond ~1e9 or below ~1e-9 in float), never in steady state.
  void rescale(Scalar delta, Scalar amax) {
    using std::frexp;
    using std::ldexp;
    const Eigen::Index n = m_state.rows();
    int eRow = 0, eMax = 0, eAmax = 0;
    frexp(delta * m_scale, &eRow);
    frexp(amax, &eAmax);
    eRow += 2 * eAmax;  // exponent of delta b^2 in the current scale (about)
    Scalar dmax = Scalar(0);
    for (Eigen::Index i = 0; i < n; ++i) dmax = m_state(i, i) > dmax ? m_state(i, i) : dmax;
    frexp(dmax, &eMax);
    const int top = std::numeric_limits<Scalar>::max_exponent - 8;
    // A large row goes just below the no-rescale limit (so its weight 1/delta stays finite), a
    // small one to exponent 0 (as far as the largest stored d allows).
    const int hiExp = std::numeric_limits<Scalar>::max_exponent - 2 * std::numeric_limits<Scalar>::digits - 8;
    int shift = eRow > 0 ? hiExp - eRow : -eRow;
    if (shift > 0 && dmax > Scalar(0) && eMax + shift > top) shift = top - eMax;  // small row: cap
    shift -= shift & 1;  // even: the scale stays a power of 4 (its square root is exact)
    if (shift == 0 || (eRow < 0 && shift < 0)) return;
    for (Eigen::Index i = 0; i < n; ++i) m_state(i, i) = ldexp(m_state(i, i), shift);
    m_scale = ldexp(m_scale, shift);
  }

  /// One entry of a square-root-free rotation: x' = x - b rbar and rbar' = cbar rbar + sbar x.
  /// When the row is small against the column (cbar >= 1/2, the usual case once data have
  /// accumulated) rbar' = rbar + sbar x' is used instead (equal, as cbar + sbar b = 1): one
  /// multiply less and, measured on NIST StRD, the more accurate choice there; a dominant row
  /// keeps the two-term form (the one-term form loses digits then: Longley 13.2 -> 10.4).
  static void rotate(Scalar& x, Scalar& r, Scalar b, Scalar cbar, Scalar sbar) {
    const Scalar xo = x, ro = r;
    x = xo - b * ro;
    r = cbar >= kCbarSplit ? ro + sbar * x : cbar * ro + sbar * xo;
  }

  // d (m_row) is stored as x's K entries, then y's, and copied to m_x as K + 1 entries. For a
  // fixed K of 3, 5, 6 or 7 the copy's vector loads did not line up with those stores and
  // waited for them to leave the core; entry by entry they are served at once (timing
  // program, native, ns per sample, double K = 3 / 5 / 6 / 7: 24-26 / 34 / 35-37 / 60-62 ->
  // 21-22 / 29 / 30-31 / 51-53, float 23 / 24-26 / 30 / 35-36 -> 18 / 24-26 / 28 / 31-32).
  // Not for the powers of two, which line up (double K = 8 and 16: 63 / 91-94 -> 66-67 /
  // 106-111 entry by entry), nor above 8 (double K = 12: 76-78 -> 84-86). With a runtime K
  // (its copy's length known only at run time here), entry by entry up to K + 1 = 8: runtime
  // K = 3 / 6, double 27-28 / 42-44 -> 21-22 / 36-38, float 26 / 34-35 -> 21 / 33; K = 2 and 4
  // 2-5 % less; K = 8 double 60-62 -> 70 and 16 worse, so those keep the vector copy.
  static constexpr bool kLoneRowCopy = K_ != Eigen::Dynamic && K_ <= 8 && (K_ & (K_ - 1)) != 0;
  static constexpr Eigen::Index kLoneRowCopyUpTo = 8;
  static constexpr Eigen::Index kRowBlock = 4;
  // addRows: from this many columns (K + 1) on, a block is folded row-major in panels
  // (foldRowsHouseholder). Measured with 64-row blocks, double, against the column-major form:
  // 1.8x faster at K = 64 with AVX-512, a tie at K = 23..32; without FMA (SSE2) a tie at K = 64
  // and 0.75x at K = 32 (bench/README.md, "Blocked wide fold round").
  static constexpr int kWide = 24;
  static constexpr bool kNoWide = Dims::MaxK1 != Eigen::Dynamic && Dims::MaxK1 < kWide;
  static constexpr int kPanelRows = 2 * int(detail::kPanel);  // foldRowsHouseholder's scratch
  static_assert(detail::RowBlock<Scalar, K_, MaxK_>::kMaxRows + 1 <= detail::kPanelMaxRows,
                "a block and its mean-difference row must fit foldRowsHouseholder's panel copy");
  static constexpr int kWideRows = detail::RowBlock<Scalar, K_, MaxK_>::kFixedRows == Eigen::Dynamic
                                       ? Eigen::Dynamic
                                       : detail::RowBlock<Scalar, K_, MaxK_>::kFixedRows + 1 + kPanelRows;
  using WideRows = Eigen::Matrix<Scalar, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor, kNoWide ? 2 : kWideRows,
                                 kNoWide ? 2 : padded(Dims::MaxK1)>;
  // Range of delta b^2 that needs no rescaling: u^-2 .. u^2 away from the limits.
  static constexpr Scalar kHigh = std::numeric_limits<Scalar>::max() * std::numeric_limits<Scalar>::epsilon() *
                                  std::numeric_limits<Scalar>::epsilon();
  static constexpr Scalar kLow = std::numeric_limits<Scalar>::min() / std::numeric_limits<Scalar>::epsilon() /
                                 std::numeric_limits<Scalar>::epsilon();
  static constexpr Scalar kCbarSplit = Scalar(0.5);

  /// Explicit [R z; 0 rho] = D^(1/2) Rbar into m_factor.
  void formFactor() const {
    const Eigen::Index n = m_state.rows();
    int e = 0;
    std::frexp(m_scale, &e);                                // m_scale = 2^(e-1), e - 1 even
    const Scalar unscale = std::ldexp(Scalar(1), -(e - 1) / 2);  // 1/sqrt(m_scale), exact
    for (Eigen::Index i = 0; i < n; ++i) {
      const Scalar di = m_state(i, i);
      const Scalar s = di > Scalar(0) ? std::sqrt(di) * unscale : Scalar(0);
      m_factor(i, i) = s;
      for (Eigen::Index j = i + 1; j < n; ++j) {
        m_factor(i, j) = s * m_state(i, j);
        m_factor(j, i) = Scalar(0);
      }
    }
  }

  Status canMerge(const GivensQr&) const { return Status::ok; }

  void ageState(Scalar f) { ageDiagonal(0, f); }
  /// Forgets the residual only (rho^2 = d_K, the last diagonal entry), keeping R and z.
  void ageResidual(Scalar f) {
    const Eigen::Index k = m_state.rows() - 1;
    m_state(k, k) *= f;
  }

  /// Current slopes by back substitution on the explicit factor (K^2); false if it is singular.
  template <typename VD>
  bool currentSlopes(VD& b) const {
    const Eigen::Index k = this->regressors();
    formFactor();
    for (Eigen::Index i = 0; i < k; ++i)
      if (!(m_factor(i, i) > Scalar(0))) return false;
    b = m_factor.col(k).head(k);
    detail::backSubstitute(m_factor.topLeftCorner(k, k), b, k);
    return b.allFinite();
  }

  /// h = phi' M^-1 phi = |R^-T phi|^2 and the prediction error e = eta - phi'b = eta - u'z
  /// (u = R^-T phi): one forward substitution on the explicit factor (formed, K^2).
  template <int KV = K_>  // the loop length of add's per-size copies (EstimatorBase); unused
  bool priorInfo(const Vector1& row, Scalar& h, Scalar& e) const {
    const Eigen::Index k = this->regressors();
    formFactor();
    for (Eigen::Index i = 0; i < k; ++i)
      if (!(m_factor(i, i) > Scalar(0))) return false;
    auto& u = this->work().v1;
    u = row.head(k);
    detail::forwardSubstituteTransposed(m_factor.topLeftCorner(k, k), u);
    h = u.squaredNorm();
    e = row(k) - u.dot(m_factor.col(k).head(k));
    return true;
  }

  /// Stacked-factor merge (the TSQR step, NUMERICS §5), in square-root-free form: this state is
  /// aged by `age` (D only), then the rows of the other factor, D_o^(1/2) Rbar_o, are folded as
  /// the rows Rbar_o(i, :) with weights d_o,i (no square root), then the centering correction row.
  void mergeState(const GivensQr& other, Scalar age, const Vector1& correction) {
    const Eigen::Index n = m_state.rows();
    ageDiagonal(0, age);
    Vector1& row = this->work().v1aug;
    for (Eigen::Index i = 0; i < n; ++i) {
      const Scalar di = other.m_state(i, i) / other.m_scale;
      if (!(di > Scalar(0))) continue;
      row.head(i).setZero();
      row(i) = Scalar(1);
      for (Eigen::Index j = i + 1; j < n; ++j) row(j) = other.m_state(i, j);
      foldCentered(row, di, Scalar(1));
    }
    foldCentered(correction, Scalar(1), Scalar(1));
  }

  /// Square-root-free state from the explicit factor in m_factor (after a downdate or addRows):
  /// d_i = R_ii^2 (in the power-of-4 scale that keeps the largest in range), rbar_ij = R_ij/R_ii.
  void takeFactor() {
    const Eigen::Index n = m_state.rows();
    Scalar rmax = Scalar(0);
    for (Eigen::Index i = 0; i < n; ++i) rmax = std::abs(m_factor(i, i)) > rmax ? std::abs(m_factor(i, i)) : rmax;
    int e = 0;
    std::frexp(rmax, &e);
    const int top = (std::numeric_limits<Scalar>::max_exponent - 2 * std::numeric_limits<Scalar>::digits - 8) / 2;
    const int half = e > top ? top - e : 0;  // sqrt(scale) = 2^half
    m_scale = std::ldexp(Scalar(1), 2 * half);
    m_state.setZero();
    for (Eigen::Index i = 0; i < n; ++i) {
      const Scalar rii = m_factor(i, i);
      if (rii == Scalar(0)) continue;
      const Scalar s = std::ldexp(rii, half);
      m_state(i, i) = s * s;
      const Scalar inv = Scalar(1) / rii;
      for (Eigen::Index j = i + 1; j < n; ++j) m_state(i, j) = m_factor(i, j) * inv;
    }
  }

  static Scalar safeHypot(Scalar a, Scalar b) { return detail::safeHypot(a, b); }

  bool factorize(WorkspaceType& ws) const {
    const Eigen::Index k = this->regressors();
    ws.flags = Flags();
    formFactor();
    ws.R = m_factor.topLeftCorner(k, k).template triangularView<Eigen::Upper>();
    ws.z = m_factor.col(k).head(k);
    ws.rho = std::abs(m_factor(k, k));
    this->fillCenteringFacts(ws);
    ws.rank = detail::solveUpperWithRank(ws.R, ws.z, ws.b, ws.scratch, ws.scale, ws.pivoted);
    this->recoverIntercept(ws);
    return true;
  }

  State m_state;               // d on the diagonal, Rbar strictly above it (row-major, padded rows)
  Row m_x;                     // the row being reduced (padded like a state row)
  Vector1 m_rld;               // 1/(lambda d_i) during a fold
  Scalar m_scale = Scalar(1);  // power of 4: the stored d are d * m_scale
  detail::RowBlock<Scalar, K_, MaxK_> m_block;  // addRows scratch
  WideRows m_wide;  // addRows scratch (K + 1 >= kWide only): the rows of a block, row-major, padded
                    // like the state's rows, then kPanelRows rows of panel scratch
  mutable typename Dims::Matrix1 m_factor;  // explicit factor, formed on demand
  Centering<Scalar, K_, MaxK_> m_savedCentering;   // addRows scratch: the centering to put back on a refused call
};

}  // namespace rowfold
