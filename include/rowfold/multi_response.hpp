/// @file
/// MultiResponse: M responses fitted on the same regressors with one shared factor.
#pragma once

#include <Eigen/Core>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <limits>
#include <type_traits>

#include "rowfold/batch_qr.hpp"
#include "rowfold/detail/cholesky.hpp"
#include "rowfold/detail/triangular.hpp"
#include "rowfold/forgetting_rls.hpp"
#include "rowfold/givens_qr.hpp"
#include "rowfold/normal_equations.hpp"

namespace rowfold {

namespace detail {

/// Columns of the joint state [X Y_1..Y_{M-1}] that the stacked form treats as regressors.
constexpr int jointColumns(int k, int m) { return k == Eigen::Dynamic || m == Eigen::Dynamic ? Eigen::Dynamic : k + m - 1; }
/// M - 1 extra responses (or Dynamic).
constexpr int extraColumns(int m) { return m == Eigen::Dynamic ? Eigen::Dynamic : m - 1; }

/// How a single-response estimator type carries M responses (see MultiResponse).
template <typename Estimator>
struct ResponseFamily;

template <typename S, int K, int MaxK>
struct ResponseFamily<GivensQr<S, K, MaxK>> {
  template <int K2, int MaxK2>
  using Rebind = GivensQr<S, K2, MaxK2>;
  static constexpr int form = 0;  // stacked factor
};
template <typename S, int K, int MaxK>
struct ResponseFamily<NormalEquations<S, K, MaxK>> {
  template <int K2, int MaxK2>
  using Rebind = NormalEquations<S, K2, MaxK2>;
  static constexpr int form = 0;  // stacked factor (co-moments)
};
template <typename S, int K, int Capacity, int MaxK>
struct ResponseFamily<BatchQr<S, K, Capacity, MaxK>> {
  template <int K2, int MaxK2>
  using Rebind = BatchQr<S, K2, Capacity, MaxK2>;
  static constexpr int form = 1;  // stacked rows
};
template <typename S, int K, int MaxK>
struct ResponseFamily<ForgettingRls<S, K, MaxK>> {
  template <int K2, int MaxK2>
  using Rebind = ForgettingRls<S, K, MaxK>;  // the shared-gain form keeps K columns
  static constexpr int form = 2;  // shared gain
};

/// Entry (i, j) of the stacked rows [X, Y(:, 0..m-2)] (n x (k + m - 1)) for an Eigen nullary
/// expression: the joint estimator reads them in place, without a copy.
template <typename Scalar, typename XD, typename YD>
struct StackedColumns {
  const XD* x;
  const YD* y;
  Eigen::Index k;
  Scalar operator()(Eigen::Index i, Eigen::Index j) const {
    return j < k ? Scalar((*x)(i, j)) : Scalar((*y)(i, j - k));
  }
};

}  // namespace detail

/// M responses y_1..y_M fitted on the same K regressors (a multivariate regression
/// Y = 1 b0' + X B + E with K x M slopes B): one state of the regressors, M right-hand sides,
/// and a single-response view of each response for its statistics.
/// ```
///   rowfold::MultiResponse<rowfold::GivensQr<double, 3>, 2> fit;   // K = 3, M = 2
///   fit.add(x, y);                           // y: the M responses of one sample
///   auto b = fit.response(1).solve();        // response 2: slopes, intercept, flags
///   auto s = fit.response(0).summarize();    // SEs, intervals, R^2 of response 1
/// ```
///
/// **Math.** The centered, weighted data [X~ Y~] have one upper-triangular factor
/// [R Z; 0 T] ((K+M) x (K+M)): R'R = X~'X~ is shared, R B = Z, and T'T = E'E is the residual
/// cross-product matrix (Golub & Van Loan 2013 §5.3, multiple right-hand sides; Anderson 2003,
/// An Introduction to Multivariate Statistical Analysis §8.2 — section numbers from memory).
/// Response j's own factor is [R z_j; 0 rho_j] with z_j = Z(:, j) and rho_j = |T(:, j)|, which
/// is exactly the state a single-response estimator fed (x, y_j) would hold. How the state is
/// kept depends on the estimator (`Estimator` names the single-response type and its options):
/// - GivensQr, NormalEquations (*stacked factor*): one estimator over the K + M - 1 columns
///   [x, y_1..y_{M-1}] with y_M as its response: its factor (co-moments) is that of [X~ Y~],
///   one update of ~(K+M)^2/2 (NormalEquations) or ~2 (K+M)^2 (GivensQr) per sample instead of
///   M times ~(K+1)^2.
/// - BatchQr (*stacked rows*): the rows [x, y_1..y_M] are stored once; each response's query
///   copies its column into a single-response view (O(n K)) and solves it there with BatchQr's
///   refinement, which is per right-hand side.
/// - ForgettingRls (*shared gain*): P and the gain g = P phi depend on the regressors only, so
///   one recursion updates P and every theta_j += (delta / alpha) e_j g; each response adds
///   O(K) per sample to the O(K^2) of P. Before the exact start each response accumulates its
///   co-moments X~'y~_j; at the start each theta_j is solved from the same factor.
///
/// **Stability:** that of the estimator (class comments): GivensQr and BatchQr backward
/// stable, NormalEquations and ForgettingRls square the condition number. A response's view
/// is the single-response state of that response up to the rounding of the shared update.
///
/// **Views.** response(j) forms the single-response estimator of response j on demand
/// (GivensQr: O((K+M)^2) to form the explicit factor, with square roots; NormalEquations and
/// ForgettingRls O(K^2); BatchQr O(n K)) into storage inside this object: the reference is
/// valid until the next call of response() or of a query of this object. Every query of
/// EstimatorBase (solve, summarize, conditioning, predictionInterval, covariance, ...) works on
/// it, with the statistics of that response. It can also be copied out and fed on (a copy has
/// the options with the guards off: the windup guard runs in this object, not in the view).
///
/// **Windup guard.** Its default part, the information gate and the information floor per
/// input (WindupOptions; NUMERICS §2.4), decides on the regressors alone, so it is the same
/// for every response and runs here for GivensQr, NormalEquations and ForgettingRls exactly as
/// for a single response: h = phi' M^-1 phi from the shared R (or P); a held sample is folded
/// without aging R, Z (P, theta_j) while the centering and the residual block T (the residual
/// sums) forget; the floor's pseudo-row is a [e_i, B(i, :)], every response at its current
/// slope. Each response's view then equals the guarded single-response fit of that response
/// (tested hold for hold), and carries `low_excitation` / `windup_guarded`. The parts that judge
/// one response's prediction error are not available: options enabling the outlier gate, or,
/// with the guard on, regularized or variable forgetting or the change alarm, make status()
/// `invalid_options`. merge() returns `not_available` for ForgettingRls (its merge works on the
/// factor of one response).
///
/// **Allocation:** none for fixed K and M (BatchQr: fixed Capacity too); Eigen::Dynamic sizes
/// allocate at construction only. No member function throws. Threads: as EstimatorBase (the
/// queries use scratch inside the object).
template <typename Estimator, int M_ = Eigen::Dynamic>
class MultiResponse {
  using Family = detail::ResponseFamily<Estimator>;
  static constexpr int kForm = Family::form;

 public:
  using Scalar = typename Estimator::Scalar;  ///< float, double or long double
  static constexpr int K = Estimator::K;  ///< regressors at compile time, or Eigen::Dynamic
  static constexpr int MaxK = Estimator::MaxK;  ///< compile-time bound on K
  static constexpr int M = M_;  ///< responses at compile time, or Eigen::Dynamic
  using Options = typename Estimator::Options;  ///< options of the single-response estimator
  using Single = Estimator;  ///< type of a response's view
  using Vector = typename Estimator::Vector;  ///< K-vector type
  using ResponseVector = Eigen::Matrix<Scalar, M, 1>;  ///< one sample's M responses
  static_assert(M == Eigen::Dynamic || M > 0, "rowfold: M must be positive or Eigen::Dynamic");

 private:
  static constexpr int KJ = kForm == 2 ? K : detail::jointColumns(K, M);
  static constexpr int MaxKJ = kForm == 2 ? MaxK : detail::jointColumns(MaxK, M);
  static constexpr int MX = detail::extraColumns(M);
  using Joint = typename Family::template Rebind<KJ, MaxKJ>;
  using JointRow = Eigen::Matrix<Scalar, KJ, 1, Eigen::ColMajor, MaxKJ, 1>;
  // The type of the lazy stacked rows [X, Y(:, 0..m-2)] that addRows hands to the joint
  // estimator (an expression only: never stored).
  using JointRows = Eigen::Matrix<Scalar, Eigen::Dynamic, KJ, Eigen::ColMajor, Eigen::Dynamic, MaxKJ>;
  using WeightColumn = Eigen::Matrix<Scalar, Eigen::Dynamic, 1>;  // a pointer type for "no weights"
  // Zero extra responses (M = 1) as a runtime size bounded by 1 (Eigen's blocks need a column).
  static constexpr int MXS = MX == 0 ? Eigen::Dynamic : MX, MaxMX = MX == 0 ? 1 : MX;
  using ExtraMatrix = Eigen::Matrix<Scalar, K, MXS, Eigen::ColMajor, MaxK, MaxMX>;
  using ExtraVector = Eigen::Matrix<Scalar, MXS, 1, Eigen::ColMajor, MaxMX, 1>;
  using Matrix = typename Estimator::Matrix;

 public:
  /// Fixed K and M. status() reports bad sizes or options.
  explicit MultiResponse(const Options& options = Options())
      : MultiResponse(K == Eigen::Dynamic ? 0 : K, M == Eigen::Dynamic ? 0 : M, options) {}
  /// Runtime K and M (each must equal its compile-time value when that is fixed, else status()
  /// is `wrong_size`). Allocates for Eigen::Dynamic sizes, nothing later.
  MultiResponse(Eigen::Index k, Eigen::Index m, const Options& options)
      : m_k(k),
        m_m(m),
        m_joint(KJ == Eigen::Dynamic ? (jointSize(k, m) > 0 ? jointSize(k, m) : 0) : KJ, unguarded(options)),
        m_view(dimK(k), unguarded(options)),
        m_row(dimJ(k, m)),
        m_theta(dimK(k), dimX(m)),
        m_sse(dimX(m)),
        m_ybar(dimX(m)),
        m_syy(dimX(m)),
        m_eta(dimX(m)),
        m_phi(dimK(k)),
        m_gram(dimK(k), dimK(k)),
        m_chol(dimK(k), dimK(k)),
        m_z(dimK(k)),
        m_slopes(dimK(k), dimM(m)),
        m_guard(dimK(k)),
        m_solution(dimK(k)) {
    if (!detail::fitsSize<K, MaxK>(k) || m <= 0 || (M != Eigen::Dynamic && m != M))
      m_status = Status::wrong_size;
    else if (m_joint.status() != Status::ok)
      m_status = m_joint.status();
    else if (options.outliers.enabled ||
             (options.forgetting < 1.0 && options.windup.enabled &&
              (options.windup.regularization > 0.0 || options.windup.variableForgetting ||
               options.windup.changeThreshold > 0.0)))
      m_status = Status::invalid_options;
    m_guarded = m_status == Status::ok && kForm != 1 && options.forgetting < 1.0 && options.windup.enabled;
    m_windup = options.windup;
    clearExtras();
  }

  /// `ok`, `wrong_size` (k or m not positive, or not the compile-time value), the single-response
  /// estimator's own option status, or `invalid_options` (guards requested; class comment).
  /// Anything but `ok` makes add refuse every sample of positive weight. O(1).
  Status status() const { return m_status; }
  /// Number of regressors K.
  Eigen::Index regressors() const { return m_k; }
  /// Number of responses M.
  Eigen::Index responses() const { return m_m; }
  /// Accepted samples (weight > 0).
  std::uint64_t count() const { return m_joint.count(); }
  /// Sum of forgotten sample weights W.
  Scalar weightSum() const { return m_joint.weightSum(); }
  /// Effective sample size F^2/F2 (= count when lambda = 1).
  Scalar effectiveCount() const { return m_joint.effectiveCount(); }

  /// Folds one sample: K regressors x and M responses y, weight w >= 0 (0: accepted, nothing
  /// folded). Returns, checked in this order before anything is written: status() if it is not
  /// `ok`; `wrong_size` (x.size() != K or y.size() != M); `negative_weight` (w < 0, NaN, Inf);
  /// `nonfinite_input` (NaN or Inf in x or y); `ok` for w == 0; `capacity_full` (a full
  /// non-sliding BatchQr); otherwise `ok`. Cost: see the class comment. Never allocates.
  template <typename XD, typename YD>
  Status add(const Eigen::MatrixBase<XD>& x, const Eigen::MatrixBase<YD>& y, Scalar w = Scalar(1)) {
    static_assert(std::is_same<typename XD::Scalar, Scalar>::value, "rowfold: x must have the estimator's Scalar");
    static_assert(std::is_same<typename YD::Scalar, Scalar>::value, "rowfold: y must have the estimator's Scalar");
    const Status s = check(x, y, w);
    if (s != Status::ok || w == Scalar(0)) return s;
    if constexpr (kForm == 2) {
      if (m_guarded) return guardedAdd(x, y, w);
      foldShared(x, y, w, Scalar(1), 0, Step::now);
      return Status::ok;
    } else {
      if constexpr (kForm == 0) {
        if (m_guarded) return guardedAdd(x, y, w);
        if (m_joint.room() == 0) return Status::capacity_full;
        foldResponseSums(y, w, lambda(), false);
      }
      stackRow(x, y);
      return m_joint.add(m_row, y(m_m - 1), w);
    }
  }

  /// Folds a sample measured `age` steps ago with weight w lambda^age, without aging the state
  /// (EstimatorBase::addDelayed). Returns as add(), then `not_available` for BatchQr under
  /// forgetting (ages are row positions). Never allocates.
  template <typename XD, typename YD>
  Status addDelayed(const Eigen::MatrixBase<XD>& x, const Eigen::MatrixBase<YD>& y, std::uint64_t age,
                    Scalar w = Scalar(1)) {
    static_assert(std::is_same<typename XD::Scalar, Scalar>::value, "rowfold: x must have the estimator's Scalar");
    static_assert(std::is_same<typename YD::Scalar, Scalar>::value, "rowfold: y must have the estimator's Scalar");
    const Status s = check(x, y, w);
    if (s != Status::ok || w == Scalar(0)) return s;
    if constexpr (kForm == 2) {
      const Scalar aged = Centering<Scalar, K, MaxK>::agingFactor(lambda(), age);
      if (!(aged > Scalar(0))) return Status::ok;
      m_guard.lastFlags = 0;
      const Scalar delta = foldShared(x, y, w, aged, age, Step::late);
      if (m_guarded) m_guard.foldSpread(Scalar(1), m_phi, delta);
      return Status::ok;
    } else {
      stackRow(x, y);
      if constexpr (kForm == 0) {
        const Scalar aged = Centering<Scalar, K, MaxK>::agingFactor(lambda(), age);
        if (aged > Scalar(0)) foldResponseSums(y, w * aged, Scalar(1), true);
      }
      const Status d = m_joint.addDelayed(m_row, y(m_m - 1), age, w);
      if (d == Status::ok && m_guarded && Centering<Scalar, K, MaxK>::agingFactor(lambda(), age) > Scalar(0)) {
        // No step passes: nothing to hold; the spread gains the scaled row (EstimatorBase::foldAged).
        m_guard.lastFlags = 0;
        m_joint.m_guard.lastFlags = 0;
        m_guard.foldSpread(Scalar(1), m_joint.m_row.head(m_k));
      }
      return d;
    }
  }

  /// Folds the rows of X (n x K) with responses Y (n x M), optionally weighted by w (n).
  /// All-or-nothing: every row is validated first; on any reject nothing is folded and the
  /// first reject's Status (in row order, as add() gives it) is returned; `wrong_size` for
  /// mismatched shapes; `capacity_full` when fewer than n rows fit (BatchQr). GivensQr and
  /// NormalEquations fold in blocks (their blocked addRows). Never allocates.
  template <typename XD, typename YD>
  Status addRows(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& Y) {
    return addRowsImpl(X, Y, static_cast<const WeightColumn*>(nullptr));
  }
  /// Weighted form of addRows (w has n entries, each >= 0 and finite).
  template <typename XD, typename YD, typename WD>
  Status addRows(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& Y, const Eigen::MatrixBase<WD>& w) {
    return addRowsImpl(X, Y, &w);
  }

  /// Marks `steps` sampling steps without a sample: the state is aged by lambda^steps
  /// (EstimatorBase::advance). Returns status() if not `ok`, `not_available` (BatchQr under
  /// forgetting, non-empty), else `ok`.
  Status advance(std::uint64_t steps = 1) {
    if (m_status != Status::ok) return m_status;
    const bool acts = lambda() != Scalar(1) && steps != 0 && count() != 0;
    const Status s = m_joint.advance(steps);
    if (s == Status::ok && acts) ageExtras(Centering<Scalar, K, MaxK>::agingFactor(lambda(), steps));
    return s;
  }

  /// Multiplies the remembered information by f in (0, 1] (EstimatorBase::relax). Returns
  /// status() if not `ok`, `invalid_options` for f outside (0, 1], else `ok`.
  Status relax(Scalar f) {
    if (m_status != Status::ok) return m_status;
    const bool acts = count() != 0 && f != Scalar(1);
    const Status s = m_joint.relax(f);
    if (s == Status::ok && acts) ageExtras(f);
    return s;
  }

  /// Merges `other` (same K, M and options) into this state as if its samples had followed
  /// (EstimatorBase::merge). Returns status() if not `ok`; `state_mismatch` (other not `ok`,
  /// itself, or other sizes or options); `not_available` for ForgettingRls; BatchQr's
  /// `capacity_full`; else `ok`. On any status but `ok` nothing changes.
  Status merge(const MultiResponse& other) {
    if (m_status != Status::ok) return m_status;
    if (other.m_status != Status::ok || &other == this || other.m_k != m_k || other.m_m != m_m)
      return Status::state_mismatch;
    if constexpr (kForm == 2) {
      return Status::not_available;
    } else {
      // The guard's spread record merges as EstimatorBase::merge does it: aged, added, plus the
      // squared centering correction sqrt(Wa Wb / W) (xbar_b - xbar_a) (Chan, Golub & LeVeque).
      const auto& ca = m_joint.centering();
      const auto& cb = other.m_joint.centering();
      const Scalar age = Centering<Scalar, K, MaxK>::agingFactor(lambda(), cb.count());
      const Scalar wa = age * ca.weightSum(), wb = cb.weightSum();
      const Scalar corr = m_joint.fitOptions().intercept == Intercept::fit && wa + wb > Scalar(0)
                              ? wa * (wb / (wa + wb)) : Scalar(0);
      m_z = cb.xMean().head(m_k) - ca.xMean().head(m_k);
      for (Eigen::Index j = 0; j < m_syy.size(); ++j) {  // responses' sums: Chan, Golub & LeVeque
        const Scalar d = cb.xMean()(m_k + j) - ca.xMean()(m_k + j);
        m_eta(j) = age * m_syy(j) + other.m_syy(j) + corr * d * d;
      }
      const Status s = m_joint.merge(other.m_joint);
      if (s == Status::ok && cb.count() != 0) m_syy = m_eta;
      if (s == Status::ok && cb.count() != 0 && m_guarded) {
        m_guard.spread = age * m_guard.spread + other.m_guard.spread + corr * m_z.cwiseAbs2();
        m_guard.peak = m_guard.peak.cwiseMax(other.m_guard.peak).cwiseMax(m_guard.spread);
      }
      return s;
    }
  }

  /// Back to the empty state. O(size of the state).
  void reset() {
    m_joint.reset();
    clearExtras();
  }

  /// What the windup guard did since construction or reset() (heldForgetting, floorRows; the
  /// outlier counters stay zero: the gate is not available here).
  const GuardCounters& guardCounters() const { return m_counters; }

  /// Response j (0-based) as a single-response estimator: the state an estimator of type
  /// Single fed (x, y_j) would hold, formed on this call (cost in the class comment). The
  /// reference stays valid until the next call of response() or a query of this object. For
  /// j outside [0, M) or a bad status(): an empty estimator. Never allocates.
  const Estimator& response(Eigen::Index j) const {
    if (m_status != Status::ok || j < 0 || j >= m_m) {
      m_view.reset();
      return m_view;
    }
    return viewOf(j, true);
  }

  /// Slopes (K x M, one column per response) and intercepts (M) of every response: one
  /// response view after the other (the shared factor formed once for GivensQr). Returns
  /// `empty`, `wrong_size` (B or b0 of the wrong size: resize them first), `not_available`
  /// (some response has no finite solution: its column is zero), or `ok`; `flags` collects
  /// every response's flags. Never allocates.
  template <typename BD, typename VD>
  Status solveInto(Eigen::MatrixBase<BD>& B, Eigen::MatrixBase<VD>& b0, Flags& flags) const {
    flags = Flags();
    if (B.rows() != m_k || B.cols() != m_m || b0.size() != m_m) return Status::wrong_size;
    B.setZero();
    b0.setZero();
    if (m_status != Status::ok || count() == 0) return Status::empty;
    Status result = Status::ok;
    for (Eigen::Index j = 0; j < m_m; ++j) {
      const Status s = viewOf(j, j == 0).solveInto(m_solution);
      flags.set(m_solution.flags);
      if (s != Status::ok) {
        result = Status::not_available;
        continue;
      }
      B.col(j) = m_solution.coefficients;
      b0(j) = m_solution.intercept;
    }
    return result;
  }

  /// Predicted responses b0 + B'x0 into `yhat` (M). Returns `wrong_size`, `empty`,
  /// `not_available` (then yhat is NaN) or `ok`. Never allocates.
  template <typename XD, typename VD>
  Status predict(const Eigen::MatrixBase<XD>& x0, Eigen::MatrixBase<VD>& yhat) const {
    if (x0.size() != m_k || yhat.size() != m_m) return Status::wrong_size;
    yhat.setConstant(std::numeric_limits<Scalar>::quiet_NaN());
    if (m_status != Status::ok || count() == 0) return Status::empty;
    for (Eigen::Index j = 0; j < m_m; ++j) {
      if (viewOf(j, j == 0).solveInto(m_solution) != Status::ok) return Status::not_available;
      yhat(j) = m_solution.intercept + x0.dot(m_solution.coefficients);
    }
    return Status::ok;
  }

  /// Bytes of a snapshot image: a 20-byte header (magic "RFMR", format version, estimator kind,
  /// Scalar size, K, M, inner image length), the image of the inner single-response state
  /// (EstimatorBase::snapshot), ForgettingRls's per-response parts, and a CRC-32.
  std::size_t snapshotSize() const { return kHeader + m_joint.snapshotSize() + extrasBytes() + 4; }

  /// Writes the state into `buffer`; `written` receives the size. Returns `buffer_too_small`
  /// (nothing written) or `ok`. Never allocates.
  Status snapshot(unsigned char* buffer, std::size_t capacity, std::size_t& written) const {
    written = 0;
    const std::size_t inner = m_joint.snapshotSize(), size = kHeader + inner + extrasBytes() + 4;
    if (buffer == nullptr || capacity < size) return Status::buffer_too_small;
    writeHeader(buffer, inner);
    std::size_t innerWritten = 0;
    const Status s = m_joint.snapshot(buffer + kHeader, inner, innerWritten);
    if (s != Status::ok) return s;
    detail::ImageWriter w{buffer + kHeader + inner};
    visitExtras(*this, w);
    detail::putField(buffer + size - 4, detail::crc32(buffer, size - 4));
    written = size;
    return Status::ok;
  }

  /// Restores a snapshot image. Returns status() if not `ok`; `corrupt_image` (bad magic,
  /// length or CRC); `image_mismatch` (another kind, Scalar, K, M, options or format version);
  /// the inner estimator's restore status; else `ok`. On any status but `ok` the state is
  /// unchanged. Never allocates.
  Status restore(const unsigned char* image, std::size_t length) {
    using detail::getField;
    if (m_status != Status::ok) return m_status;
    if (image == nullptr || length < kHeader + 4 || std::memcmp(image, "RFMR", 4) != 0) return Status::corrupt_image;
    // Intact (CRC) first, then ours (header: kind, Scalar, K, M), then of the expected size.
    if (detail::crc32(image, length - 4) != getField<std::uint32_t>(image + length - 4)) return Status::corrupt_image;
    const std::uint32_t inner = getField<std::uint32_t>(image + 16);
    unsigned char expect[kHeader];
    writeHeader(expect, inner);
    if (std::memcmp(expect, image, kHeader) != 0) return Status::image_mismatch;
    if (static_cast<std::size_t>(inner) + kHeader + extrasBytes() + 4 != length) return Status::corrupt_image;
    const Status s = m_joint.restore(image + kHeader, inner);
    if (s != Status::ok) return s;
    detail::ImageReader r{image + kHeader + inner};
    visitExtras(*this, r);
    return Status::ok;
  }

 private:
  static constexpr std::size_t kHeader = 20;
  static constexpr std::uint16_t kFormat = 1;

  static Eigen::Index jointSize(Eigen::Index k, Eigen::Index m) { return kForm == 2 ? k : k + m - 1; }
  // Storage sizes: the compile-time size when there is one (a bad runtime size only sets status()).
  static Eigen::Index dimK(Eigen::Index k) { return detail::storedSize<K, MaxK>(k); }
  static Eigen::Index dimJ(Eigen::Index k, Eigen::Index m) {
    return KJ != Eigen::Dynamic ? KJ : (jointSize(dimK(k), m) > 0 ? jointSize(dimK(k), m) : 1);
  }
  static Eigen::Index dimM(Eigen::Index m) { return M != Eigen::Dynamic ? M : (m > 0 ? m : 1); }
  static Eigen::Index dimX(Eigen::Index m) { return MXS != Eigen::Dynamic ? MXS : (kForm != 1 && m > 1 ? m - 1 : 0); }
  static Options unguarded(Options o) {
    o.windup.enabled = false;
    o.outliers.enabled = false;
    return o;
  }
  Scalar lambda() const { return static_cast<Scalar>(m_joint.fitOptions().forgetting); }

  template <typename XD, typename YD>
  Status check(const Eigen::MatrixBase<XD>& x, const Eigen::MatrixBase<YD>& y, Scalar w) const {
    if (m_status != Status::ok) return m_status;
    if (x.size() != m_k || y.size() != m_m) return Status::wrong_size;
    if (!(w >= Scalar(0)) || !std::isfinite(w)) return Status::negative_weight;
    if (!x.allFinite() || !y.allFinite()) return Status::nonfinite_input;
    return Status::ok;
  }

  template <typename XD, typename YD>
  void stackRow(const Eigen::MatrixBase<XD>& x, const Eigen::MatrixBase<YD>& y) {
    m_row.head(m_k) = x;
    for (Eigen::Index j = 0; j + 1 < m_m; ++j) m_row(m_k + j) = y(j);
  }

  template <typename XD, typename YD, typename WD>
  Status addRowsImpl(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& Y, const WD* w) {
    static_assert(std::is_same<typename XD::Scalar, Scalar>::value, "rowfold: X must have the estimator's Scalar");
    if (m_status != Status::ok) return m_status;
    const Eigen::Index n = X.rows();
    if (X.cols() != m_k || Y.cols() != m_m || Y.rows() != n || (w != nullptr && w->size() != n))
      return Status::wrong_size;
    for (Eigen::Index i = 0; i < n; ++i) {
      const Scalar wi = w != nullptr ? Scalar((*w)(i)) : Scalar(1);
      const Status s = check(X.row(i), Y.row(i), wi);
      if (s != Status::ok) return s;
    }
    if constexpr (kForm == 1) {
      if (m_joint.room() < static_cast<std::uint64_t>(n)) return Status::capacity_full;
    }
    if constexpr (kForm == 0) {
      // The responses' sums of squares row by row (West's update, as add()), from the running
      // weight and means before this batch; the joint's blocked pass merges the same rows.
      if (m_guarded) {  // the guard acts per sample: row by row through add()
        for (Eigen::Index i = 0; i < n; ++i) {
          const Scalar wi = w != nullptr ? Scalar((*w)(i)) : Scalar(1);
          if (wi != Scalar(0)) guardedAdd(X.row(i).transpose(), Y.row(i).transpose(), wi);
        }
        return Status::ok;
      }
      const auto& c = m_joint.centering();
      const bool centered = m_joint.fitOptions().intercept == Intercept::fit;
      const Scalar lam = lambda();
      Scalar W = c.weightSum();
      for (Eigen::Index j = 0; j + 1 < m_m; ++j) m_eta(j) = centered ? c.xMean()(m_k + j) : Scalar(0);
      for (Eigen::Index i = 0; i < n; ++i) {
        const Scalar wi = w != nullptr ? Scalar((*w)(i)) : Scalar(1);
        if (wi == Scalar(0)) continue;
        const Scalar before = lam * W, wNew = before + wi;
        const Scalar delta = centered ? wi * (before / wNew) : wi, share = wi / wNew;
        for (Eigen::Index j = 0; j + 1 < m_m; ++j) {
          const Scalar eta = Scalar(Y(i, j)) - m_eta(j);
          m_syy(j) = lam * m_syy(j) + delta * eta * eta;
          if (centered) m_eta(j) += share * eta;
        }
        W = wNew;
      }
      // All rows in one call of the joint estimator's blocked addRows, on a lazy view of the
      // stacked rows [x', y_1 .. y_{m-1}] (no copy; the joint blocks and converts its factor
      // once per call, so the result does not depend on how the rows were chunked here).
      const auto stacked = JointRows::NullaryExpr(
          n, m_joint.regressors(), detail::StackedColumns<Scalar, XD, YD>{&X.derived(), &Y.derived(), m_k});
      const auto last = Y.col(m_m - 1);
      if (w != nullptr)
        m_joint.addRows(stacked, last, *w);
      else
        m_joint.addRows(stacked, last);
    } else {
      for (Eigen::Index i = 0; i < n; ++i) {
        const Scalar wi = w != nullptr ? Scalar((*w)(i)) : Scalar(1);
        if (wi != Scalar(0)) add(X.row(i).transpose(), Y.row(i).transpose(), wi);
      }
    }
    return Status::ok;
  }

  // ----- the windup guard -----

  /// The explicit joint factor [R Z; 0 T] for the guard, (K+M) x (K+M): GivensQr forms it,
  /// NormalEquations factors its co-moments into the joint's workspace (as its priorInfo does).
  /// `ok`: the K regressor columns have a positive diagonal (their information is known).
  template <int Form = kForm>
  const auto& jointFactor(bool& ok) const {
    static_assert(Form == 0, "stacked factor only");
    const Eigen::Index k = m_k;
    if constexpr (std::is_same<Joint, GivensQr<Scalar, KJ, MaxKJ>>::value) {
      m_joint.formFactor();
      const auto& F = m_joint.m_factor;
      ok = true;
      for (Eigen::Index i = 0; i < k; ++i) ok = ok && F(i, i) > Scalar(0);
      return F;
    } else {
      auto& F = m_joint.work().aug;
      const Scalar tol = Scalar(4) * Scalar(m_joint.m_gram.cols()) * std::numeric_limits<Scalar>::epsilon();
      detail::semidefiniteCholesky(m_joint.m_gram, F, tol, true);
      ok = true;
      for (Eigen::Index i = 0; i < k; ++i) ok = ok && F(i, i) > Scalar(0);
      return F;
    }
  }

  /// The guarded add (EstimatorBase::guardedFold restricted to the windup guard, which decides
  /// on the regressors alone and so is the same for every response): the information
  /// h = phi' M^-1 phi of the sample's scaled centered regressors from the current state; below
  /// informationGate (1 - lambda) the sample is folded without aging the slope information
  /// (the centering and the residual part still forget; flag `low_excitation`); then the
  /// information floor per input (pseudo-rows at every response's current slope; flag
  /// `windup_guarded`). NUMERICS §2.4.
  template <typename XD, typename YD>
  Status guardedAdd(const Eigen::MatrixBase<XD>& x, const Eigen::MatrixBase<YD>& y, Scalar w) {
    const Scalar one(1), lam = lambda();
    const Eigen::Index k = m_k;
    auto& J = m_joint;
    Scalar h = 0, delta = one;
    bool known = false;
    if constexpr (kForm == 2) {
      const Scalar c = J.m_centering.scaledRow(x, Scalar(y(0)), w, lam, J.m_fit.intercept, J.m_row);
      Scalar e = 0;
      known = c > Scalar(0) && J.priorInfo(J.m_row, h, e) && std::isfinite(h) && std::isfinite(e);
    } else {
      stackRow(x, y);
      const Scalar c = J.m_centering.scaledRow(m_row, y(m_m - 1), w, lam, J.m_fit.intercept, J.m_row);
      if (c > Scalar(0)) {
        bool ok = false;
        const auto& F = jointFactor(ok);
        if (ok) {
          m_z = J.m_row.head(k);
          detail::forwardSubstituteTransposed(F.topLeftCorner(k, k), m_z);
          h = m_z.squaredNorm();
          known = std::isfinite(h);
        }
      }
    }
    const bool hold = m_windup.informationGate > 0.0 && known &&
                      h < static_cast<Scalar>(m_windup.informationGate) * (one - lam);
    std::uint16_t flags = hold ? static_cast<std::uint16_t>(Flag::low_excitation) : 0;
    if (hold) ++m_counters.heldForgetting;
    const Scalar stepLam = hold ? one : lam;
    if constexpr (kForm == 2) {
      delta = foldShared(x, y, w, one, 0, hold ? Step::held : Step::now);
      m_guard.foldSpread(stepLam, m_phi, delta);
    } else {
      foldResponseSums(y, w, lam, hold);
      if (hold) {
        // The residual block T forgets, R and Z do not (EstimatorBase::guardedFold's hold).
        if constexpr (std::is_same<Joint, GivensQr<Scalar, KJ, MaxKJ>>::value) {
          J.ageDiagonal(k, lam);
        } else {
          const auto& F = J.m_work.aug;  // still the factor of the state before this sample (h above)
          const Eigen::Index n = J.m_gram.cols();
          for (Eigen::Index c = k; c < n; ++c)
            for (Eigen::Index i = c; i < n; ++i)  // G_yy -= (1 - lambda) T'T (lower triangle)
              J.m_gram(i, c) -= (one - lam) * F.col(i).segment(k, c - k + 1).dot(F.col(c).segment(k, c - k + 1));
        }
        J.m_step = one;
        J.foldRow(m_row, y(m_m - 1), w, J.m_row, one);  // a scaled row: weight 1
        J.m_step = J.m_lambda;
        J.m_centering.commit(m_row, y(m_m - 1), w, lam, J.m_fit.intercept, J.m_row);
      } else {
        delta = J.fold(m_row, y(m_m - 1), w, lam);
      }
      m_guard.foldSpread(stepLam, J.m_row.head(k), delta);
    }
    if (m_windup.spreadFloor > 0.0 && known && supportFloor(static_cast<Scalar>(m_windup.spreadFloor)))
      flags = static_cast<std::uint16_t>(flags | static_cast<std::uint16_t>(Flag::windup_guarded));
    m_guard.lastFlags = flags;
    J.m_guard.lastFlags = flags;  // the shared-gain lead is response 1's view
    J.m_counters = m_counters;
    return Status::ok;
  }

  /// Every response's current slopes into m_slopes (K x M); false if the factor is singular or
  /// a slope is not finite (as EstimatorBase's currentSlopes hook).
  template <int Form = kForm>
  bool currentSlopes() {
    static_assert(Form != 1, "not for stored rows");
    const Eigen::Index k = m_k;
    if constexpr (kForm == 2) {
      if (!m_joint.m_recursive) return false;
      m_slopes.col(0) = m_joint.m_theta;
      for (Eigen::Index j = 1; j < m_m; ++j) m_slopes.col(j) = m_theta.col(j - 1);
    } else {
      bool ok = false;
      const auto& F = jointFactor(ok);
      if (!ok) return false;
      for (Eigen::Index j = 0; j < m_m; ++j) {
        m_z = F.col(k + j).head(k);
        detail::backSubstitute(F.topLeftCorner(k, k), m_z, k);
        m_slopes.col(j) = m_z;
      }
    }
    return m_slopes.allFinite();
  }

  /// The information floor (EstimatorBase::supportFloor): an input whose forgotten spread fell
  /// below floor x its peak gets the pseudo-row a [e_j, B(j, :)] (every response at its current
  /// slope), a^2 = floor peak_j - D_j, folded with weight 1 and no aging.
  template <int Form = kForm>
  bool supportFloor(Scalar floor) {
    static_assert(Form != 1, "not for stored rows");
    const Eigen::Index k = m_k;
    auto& J = m_joint;
    bool any = false;
    for (Eigen::Index j = 0; j < k; ++j) {
      const Scalar need = floor * m_guard.peak(j) - m_guard.spread(j);
      if (!(need > Scalar(0))) continue;
      if (!any && !currentSlopes()) return false;
      any = true;
      const Scalar a = std::sqrt(need);
      auto& pseudo = J.m_work.v2aug;
      pseudo.setZero();
      pseudo(j) = a;
      if constexpr (kForm == 2) {
        pseudo(k) = a * m_slopes(j, 0);
        J.m_step = Scalar(1);
        J.foldRow(J.m_centering.xMean(), J.m_centering.yMean(), Scalar(1), pseudo, Scalar(1));
        J.m_step = J.m_lambda;
        m_phi.setZero();
        m_phi(j) = a;
        for (Eigen::Index r = 1; r < m_m; ++r) m_eta(r - 1) = a * m_slopes(j, r);
        foldExtras(Scalar(1), Scalar(1), true);
      } else {
        for (Eigen::Index r = 0; r < m_m; ++r) pseudo(k + r) = a * m_slopes(j, r);
        J.m_step = Scalar(1);
        J.foldRow(J.m_centering.xMean(), J.m_centering.yMean(), Scalar(1), pseudo, Scalar(1));
        J.m_step = J.m_lambda;
      }
      m_guard.spread(j) += need;
      ++m_counters.floorRows;
    }
    return any;
  }

  // ----- shared gain (ForgettingRls) -----

  void clearExtras() {
    m_guard.reset();
    m_counters = GuardCounters();
    m_theta.setZero();
    m_sse.setZero();
    m_ybar.setZero();
    m_syy.setZero();
  }

  void ageExtras(Scalar f) {
    m_guard.spread *= f;
    m_syy *= f;
    if constexpr (kForm == 2) {
      if (m_joint.m_recursive)
        m_sse *= f;
      else
        m_theta *= f;
    }
  }

  /// Stacked forms: the centered sums of squares Syy_j of the responses 1..M-1, which the joint
  /// estimator keeps as columns of its factor (where the windup guard's holds and floor rows
  /// change them) but not as a centering record; updated before the joint folds the sample, as
  /// Centering does for its response (commitStep; `scaled`: commit, the row c [d, e] of the
  /// late and the held paths). Syy_j = lambdaC Syy_j + delta (y_j - ybar_j)^2.
  template <typename YD>
  void foldResponseSums(const Eigen::MatrixBase<YD>& y, Scalar w, Scalar lamC, bool scaled) {
    const auto& c = m_joint.centering();
    const bool centered = m_joint.fitOptions().intercept == Intercept::fit;
    const Scalar before = lamC * c.weightSum(), wNew = before + w;
    const Scalar delta = centered ? w * (before / wNew) : w, root = std::sqrt(delta);
    for (Eigen::Index j = 0; j < m_syy.size(); ++j) {
      const Scalar eta = centered ? y(j) - c.xMean()(m_k + j) : Scalar(y(j));
      if (scaled) {
        const Scalar ce = root * eta;
        m_syy(j) = lamC * m_syy(j) + ce * ce;
      } else {
        m_syy(j) = lamC * m_syy(j) + delta * eta * eta;
      }
    }
  }

  /// How a sample enters the shared-gain state: on time, late (addDelayed: weight w lambda^age,
  /// no aging), or held by the windup guard (slope information not aged; the centering and the
  /// residual sums are).
  enum class Step : std::uint8_t { now, late, held };

  /// One sample through the lead recursion (response 1) and the extra responses, each step as
  /// EstimatorBase does it for one response: `now` as fold (Centering::centeredRow, weight
  /// delta, forgetting lambda), `late` as foldAged and `held` as the guard's hold (a scaled row
  /// c [d, e] of weight 1, P not aged). `w0` is the sample's weight, `aged` = lambda^age and
  /// `age` its delay (late only). Returns the weight delta of m_phi (1 for a scaled row).
  template <typename XD, typename YD>
  Scalar foldShared(const Eigen::MatrixBase<XD>& x, const Eigen::MatrixBase<YD>& y, Scalar w0, Scalar aged,
                    std::uint64_t age, Step kind) {
    auto& lead = m_joint;
    const auto& c = lead.centering();
    const Scalar w = kind == Step::late ? w0 * aged : w0;
    const bool centered = lead.fitOptions().intercept == Intercept::fit;
    const Scalar lamC = kind == Step::late ? Scalar(1) : lambda();  // the centering's forgetting
    const Scalar lamP = kind == Step::now ? lambda() : Scalar(1);   // P's forgetting
    const Scalar before = lamC * c.weightSum(), wNew = before + w;
    Scalar delta = centered ? w * (before / wNew) : w;
    const Scalar share = centered ? w / wNew : Scalar(0);
    if (centered) {
      m_phi = x - c.xMean();
      m_eta = y.tail(m_m - 1) - m_ybar;
    } else {
      m_phi = x;
      m_eta = y.tail(m_m - 1);
    }
    if (kind != Step::now) {  // the scaled row c [d, e] with weight 1 (Centering::scaledRow)
      const Scalar root = std::sqrt(delta);
      m_phi *= root;
      m_eta *= root;
      delta = Scalar(1);
    }
    const bool wasRecursive = lead.m_recursive;
    if (!wasRecursive) m_gram = lead.m_P;  // co-moments before this sample (lower triangle)
    if (kind == Step::now) {
      lead.add(x, Scalar(y(0)), w0);
    } else if (kind == Step::late) {
      lead.addDelayed(x, Scalar(y(0)), age, w0);
    } else {  // EstimatorBase::guardedFold's hold, for the lead
      lead.m_centering.scaledRow(x, Scalar(y(0)), w, lamC, lead.m_fit.intercept, lead.m_row);
      lead.ageResidual(lamC);
      lead.m_step = Scalar(1);
      lead.foldRow(x, Scalar(y(0)), w, lead.m_row, Scalar(1));
      lead.m_step = lead.m_lambda;
      lead.m_centering.commit(x, Scalar(y(0)), w, lamC, lead.m_fit.intercept, lead.m_row);
      m_sse *= lamC;
    }
    foldExtras(delta, lamP, wasRecursive);
    if (kind == Step::now) {
      if (centered) m_ybar += share * m_eta;
      m_syy = lamC * m_syy + delta * m_eta.cwiseAbs2();
    } else {
      // Centering::commit: ybar += (w/W') (y - ybar), Syy = lambda Syy + (c e)^2.
      if (centered) m_ybar += share * (y.tail(m_m - 1) - m_ybar);
      m_syy = lamC * m_syy + m_eta.cwiseAbs2();
    }
    return delta;
  }

  /// The extra responses' part of ForgettingRls::foldRow (its class comment): with the lead's
  /// gain g = P phi (computed before P changed), alpha = lambda + delta phi'g, kappa =
  /// delta/alpha: theta_j += kappa e_j g, SSE_j = lambda (SSE_j + kappa e_j^2). Before the start,
  /// the co-moments m_j = lambda m_j + delta eta_j phi; at the start theta_j = M^-1 m_j from
  /// the Cholesky factor of the same co-moments the lead factored.
  template <int Form = kForm>
  void foldExtras(Scalar delta, Scalar lam, bool wasRecursive) {
    static_assert(Form == 2, "shared gain only");
    const Eigen::Index k = m_k;
    if (wasRecursive) {
      const Scalar alpha = lam + delta * Joint::rowDot(m_phi, m_joint.m_gain);  // the lead's sum
      if (!(alpha > Scalar(0)) || !std::isfinite(alpha)) return;  // the lead refused the row too
      const Scalar kappa = delta / alpha;
      for (Eigen::Index j = 0; j < m_m - 1; ++j) {
        const Scalar e = m_eta(j) - Joint::rowDot(m_phi, m_theta.col(j));
        m_theta.col(j) += (kappa * e) * m_joint.m_gain;
        m_sse(j) = lam * (m_sse(j) + kappa * e * e);
      }
      return;
    }
    if (lam != Scalar(1)) m_theta *= lam;
    for (Eigen::Index j = 0; j < m_m - 1; ++j) m_theta.col(j) += (delta * m_eta(j)) * m_phi;
    if (!m_joint.m_recursive) return;
    // The lead started on this sample: the same co-moments, the same factor.
    if (lam != Scalar(1)) m_gram.template triangularView<Eigen::Lower>() *= lam;
    for (Eigen::Index c = 0; c < k; ++c) {
      const Scalar a = delta * m_phi(c);
      for (Eigen::Index i = c; i < k; ++i) m_gram(i, c) += a * m_phi(i);
    }
    const Scalar tol = Scalar(4) * Scalar(k + 1) * std::numeric_limits<Scalar>::epsilon();
    detail::semidefiniteCholesky(m_gram, m_chol, tol, false);
    for (Eigen::Index j = 0; j < m_m - 1; ++j) {
      m_z = m_theta.col(j);
      detail::forwardSubstituteTransposed(m_chol, m_z);  // z = R^-T m
      const Scalar sse = lam * m_syy(j) + delta * m_eta(j) * m_eta(j) - m_z.squaredNorm();
      m_sse(j) = sse > Scalar(0) ? sse : Scalar(0);
      detail::backSubstitute(m_chol, m_z, k);
      m_theta.col(j) = m_z;
    }
  }

  std::size_t extrasBytes() const {
    detail::ImageCounter c;
    visitExtras(*this, c);
    return c.bytes;
  }
  /// The guard's record, the responses' centered sums of squares Syy_1..Syy_{M-1}, then (shared
  /// gain) the extra responses' slopes, residual sums and means.
  template <typename Self, typename V>
  static void visitExtras(Self& self, V& v) {
    detail::GuardState<Scalar, K, MaxK>::visitState(self.m_guard, v);
    v.array(self.m_syy.data(), static_cast<std::size_t>(self.m_syy.size()));
    if constexpr (kForm != 2) return;
    v.array(self.m_theta.data(), static_cast<std::size_t>(self.m_theta.size()));
    v.array(self.m_sse.data(), static_cast<std::size_t>(self.m_sse.size()));
    v.array(self.m_ybar.data(), static_cast<std::size_t>(self.m_ybar.size()));
  }

  void writeHeader(unsigned char* h, std::size_t inner) const {
    std::memset(h, 0, kHeader);
    const unsigned char magic[4] = {'R', 'F', 'M', 'R'};
    std::memcpy(h, magic, sizeof magic);
    detail::putField(h + 4, kFormat);
    h[6] = static_cast<unsigned char>(Estimator::kind);
    h[7] = static_cast<unsigned char>(sizeof(Scalar));
    detail::putField(h + 8, static_cast<std::uint32_t>(m_k));
    detail::putField(h + 12, static_cast<std::uint32_t>(m_m));
    detail::putField(h + 16, static_cast<std::uint32_t>(inner));
  }

  // ----- response views -----

  /// Copies the joint centering record into the view for response j (ybar_j, Syy_j given).
  void viewCentering(Scalar ybar, Scalar syy) const {
    const auto& c = m_joint.centering();
    auto& v = m_view.m_centering;
    v.m_xbar = c.xMean().head(m_k);
    v.m_ybar = ybar;
    v.m_weight = c.weightSum();
    v.m_forget = c.forgetSum();
    v.m_forget2 = c.forgetSum2();
    v.m_syy = syy;
    v.m_count = c.count();
  }

  /// The view of response j (the lead itself for ForgettingRls's first response); `fresh`:
  /// form GivensQr's joint factor first (false when it was formed for a previous response).
  const Estimator& viewOf(Eigen::Index j, bool fresh) const {
    if constexpr (kForm == 2) {
      if (j == 0) return m_joint;  // its flags of the last sample are set by guardedAdd
    }
    formView(j, fresh);
    m_view.m_guard.lastFlags = m_guard.lastFlags;  // low_excitation / windup_guarded
    m_view.m_counters = m_counters;
    return m_view;
  }

  /// Forms the view of response j (see response()); `fresh`: form GivensQr's joint factor.
  void formView(Eigen::Index j, bool fresh) const {
    const Eigen::Index k = m_k;
    const auto& c = m_joint.centering();
    const bool last = j == m_m - 1;
    m_view.reset();
    if constexpr (std::is_same<Joint, GivensQr<Scalar, KJ, MaxKJ>>::value) {
      if (fresh) m_joint.formFactor();
      const auto& F = m_joint.m_factor;  // [R Z; 0 T], (K+M) x (K+M)
      auto& f = m_view.m_factor;
      f.setZero();
      f.topLeftCorner(k, k) = F.topLeftCorner(k, k).template triangularView<Eigen::Upper>();
      f.col(k).head(k) = F.col(k + j).head(k);
      f(k, k) = F.col(k + j).segment(k, j + 1).norm();  // rho_j = |T(:, j)|
      m_view.takeFactor();
      viewCentering(last ? c.yMean() : c.xMean()(k + j), last ? c.yySum() : m_syy(j));
    } else if constexpr (std::is_same<Joint, NormalEquations<Scalar, KJ, MaxKJ>>::value) {
      const auto& G = m_joint.m_gram;  // lower triangle of the (K+M) x (K+M) co-moments
      auto& g = m_view.m_gram;
      g.setZero();
      g.topLeftCorner(k, k).template triangularView<Eigen::Lower>() =
          G.topLeftCorner(k, k).template triangularView<Eigen::Lower>();
      g.row(k).head(k) = G.row(k + j).head(k);
      g(k, k) = G(k + j, k + j);
      viewCentering(last ? c.yMean() : c.xMean()(k + j), last ? c.yySum() : m_syy(j));
    } else if constexpr (kForm == 1) {
      // Copy response j's rows into the view, oldest first (same positions, same ages).
      const Eigen::Index n = m_joint.m_n;
      for (Eigen::Index i = 0; i < n; ++i) {
        const Eigen::Index s = m_joint.slot(i);
        m_view.m_x.row(i) = m_joint.m_x.row(s).head(k);
        m_view.m_y(i) = last ? m_joint.m_y(s) : m_joint.m_x(s, k + j);
        m_view.m_w(i) = m_joint.m_w(s);
      }
      m_view.m_n = n;
      m_view.m_head = 0;
      viewCentering(last ? c.yMean() : c.xMean()(k + j), Scalar(0));
    } else {
      m_view = m_joint;  // P, the lead's flags and centering; then response j's own parts
      m_view.m_theta = m_theta.col(j - 1);
      m_view.m_sse = m_sse(j - 1);
      m_view.m_centering.m_ybar = m_ybar(j - 1);
      m_view.m_centering.m_syy = m_syy(j - 1);
    }
  }

  Eigen::Index m_k, m_m;
  Status m_status = Status::ok;
  Joint m_joint;
  mutable Estimator m_view;
  JointRow m_row;
  // Shared gain only: the extra responses' slopes (co-moments before the start), residual sums,
  // means and centered sums of squares, and scratch.
  ExtraMatrix m_theta;
  ExtraVector m_sse, m_ybar, m_syy, m_eta;
  Vector m_phi;
  Matrix m_gram, m_chol;
  Vector m_z;
  // The windup guard (information gate and floor): options, the spread record, slopes scratch.
  using SlopeMatrix = Eigen::Matrix<Scalar, K, M, Eigen::ColMajor, MaxK, M>;
  SlopeMatrix m_slopes;
  detail::GuardState<Scalar, K, MaxK> m_guard;
  WindupOptions m_windup;
  bool m_guarded = false;
  GuardCounters m_counters;
  mutable typename Estimator::SolutionType m_solution;
};

}  // namespace rowfold
