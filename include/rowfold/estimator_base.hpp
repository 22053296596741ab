/// @file
/// The interface every rowfold estimator shares, written once (CRTP).
#pragma once

#include <Eigen/Core>
#include <algorithm>
#include <cmath>
#include <cstring>
#include <limits>
#include <type_traits>
#include <utility>

#include "rowfold/centering.hpp"
#include "rowfold/detail/analysis.hpp"
#include "rowfold/detail/dims.hpp"
#include "rowfold/detail/guard.hpp"
#include "rowfold/detail/target.hpp"
#include "rowfold/detail/workspace.hpp"
#include "rowfold/options.hpp"
#include "rowfold/results.hpp"
#include "rowfold/snapshot.hpp"
#include "rowfold/status.hpp"

namespace rowfold {

namespace detail {
/// Derived::fusedRows if the estimator declares it, else false (opt-in one-pass addRows).
template <typename D, typename = void>
struct FusedRows : std::false_type {};
template <typename D>
struct FusedRows<D, std::void_t<decltype(D::fusedRows)>> : std::bool_constant<D::fusedRows> {};
/// Derived::centeringFirst if the estimator declares it, else false (foldRow may read the
/// centering as it was before the sample).
template <typename D, typename = void>
struct CenteringFirst : std::false_type {};
template <typename D>
struct CenteringFirst<D, std::void_t<decltype(D::centeringFirst)>> : std::bool_constant<D::centeringFirst> {};
/// Derived::sizedUpTo if the estimator declares it, else 0 (no per-size copies of add).
template <typename D, typename = void>
struct SizedUpTo : std::integral_constant<int, 0> {};
template <typename D>
struct SizedUpTo<D, std::void_t<decltype(D::sizedUpTo)>> : std::integral_constant<int, D::sizedUpTo> {};
/// Derived::sizedGuarded if the estimator declares it, else false (the copies are unguarded).
template <typename D, typename = void>
struct SizedGuarded : std::false_type {};
template <typename D>
struct SizedGuarded<D, std::void_t<decltype(D::sizedGuarded)>> : std::bool_constant<D::sizedGuarded> {};
}  // namespace detail

/// Shared interface of all estimators. The contract, in code:
/// ```
///   rowfold::GivensQr<double, 3> fit;              // K = 3 regressors, intercept fitted
///   if (fit.add(x, y) != rowfold::Status::ok) {}   // rejected: state untouched
///   auto sol = fit.solve();                        // b, b0, rank, flags
///   auto rep = fit.summarize(0.95);                // SEs, intervals, R^2, F, conditioning
///   auto pre = fit.predictionInterval(x0, 0.95);   // yhat with CI and PI
/// ```
///
/// **Written once here:** input validation (a rejected sample leaves the state bit-identical),
/// online centering, statistics, conditioning, prediction.
///
/// **Minimum each estimator implements** (`Derived`):
/// - `void foldRow(const XD& x, Scalar y, Scalar w, const Vector1& d, Scalar delta)`: age the
///   state by lambda and fold the centered row d = [x - xbar, y - ybar] with weight delta, i.e.
///   the co-moments gain delta d d' (delta = c^2 of NUMERICS §4.1; no square root is taken, the
///   estimator takes one only if its form needs it; the guards pass already scaled pseudo-rows
///   with delta = 1). Age by `lambda()`, the step factor (the guards may change it per sample).
///   Raw x, y, w are given for estimators that keep raw data;
/// - optionally `static constexpr bool centeringFirst = true`: foldRow reads nothing of the
///   centering, so add() may commit the sample's centering step before it (same results, a
///   shorter chain from one sample to the next). Done where the loops have a compile-time
///   length (fixed K, or the per-size copies below): with runtime-length loops that order
///   measured slower (NormalEquations, portable, double, runtime K = 32 / 64: 143-148 / 451-454
///   ns per sample in the old order, 166-168 / 476-489 in this one);
/// - optionally `static constexpr int sizedUpTo = N`: with a runtime K <= N, the unguarded
///   add() runs a copy of its path compiled for that K, handing foldRow x as a vector of
///   fixed size (a Map of a contiguous x, else a block; foldRow reads the length from x's
///   type, detail::viewSize). None on Cortex-M (flash);
///   with `static constexpr bool sizedGuarded = true` as well, the copies include the guarded
///   path (priorInfo<KV> then gets the length too);
/// - optionally `void foldRows(X, y, w)`: fold validated rows (w == nullptr: unit weights) in
///   blocks; the default folds them one at a time;
/// - optionally `static constexpr bool fusedRows = true` with `Status ingestRows(X, y, w)`:
///   addRows in one pass (validate each block while folding it, commit only if every row is
///   clean; same Status as the two-pass default), used when the guards are off and room suffices;
/// - `std::uint64_t room() const`: how many more samples fit (capacity-bound estimators);
/// - `void clearState()`;
/// - `bool factorize(Workspace&) const`: fill R, z, rho, b, intercept, means, W, SST;
/// - `static constexpr detail::ErrorModel errorModel` and `static constexpr EstimatorKind kind`;
/// - `static void visitOptions(Self&, V&)` and `static void visitState(Self&, V&)`: the fields of
///   its options and state, in a fixed order, for snapshot/restore;
/// - `Status canMerge(const Derived&) const` and `void mergeState(const Derived&, Scalar age,
///   const Vector1& correction)`: combine another state (merge);
/// - `void ageState(Scalar f)`: multiply its information by f (relax, advance);
/// - for the guards: `static constexpr bool guardable`, `template <int KV = K> bool priorInfo(row, h, e) const`
///   (leverage h = phi'M^-1 phi and prediction error e of a scaled row from the current state),
///   `void ageResidual(Scalar f)` (forget the residual sum only) and
///   `bool currentSlopes(Vector&) const`; `static constexpr bool positionalAges` (true if a
///   sample's age is its position, so late samples cannot be placed).
/// Estimators may shadow `solveInto` with a cheaper path (back substitution, RLS theta).
///
/// Allocation: fixed K allocates nothing, ever. Eigen::Dynamic K allocates in the constructor
/// only, except for what a call returns or builds itself: the value forms solve(), summarize(),
/// conditioning() allocate their result (not with a bounded MaxK); the ...Into forms,
/// covariance() and correlation() with results sized once never allocate. No member function throws.
///
/// Threads: the const queries (solve, summarize, conditioning, predict) use scratch storage
/// inside the object (BatchQr's count(), weightSum(), effectiveCount() and centering() too: they
/// commit deferred centering steps), so one estimator must not be queried from two threads at
/// once; copies are independent.
///
/// **Math written here** (every estimator reduces its state to the factor [R z; 0 rho] of the
/// centered weighted data, R'R = X~'X~, R b = z, rho^2 = SSE): online centering (West 1979;
/// Centering), statistics under forgetting (NUMERICS §7.1-7.2, effective sample size after Kish
/// 1965), conditioning from R (Hager 1984 / Higham 1988 condition estimate, Businger & Golub 1965
/// pivoted QR for the rank, VIFs, NUMERICS §6), t quantiles (studentTQuantile).
///
/// **Stability** is the estimator's: the base only validates, centers and analyses the factor.
/// QR-type states (BatchQr, GivensQr) are backward stable and their accuracy follows the scaled
/// condition kappa_s; cross-product states (NormalEquations, ForgettingRls) square it. The
/// conditioning flags take that into account (Flag, conditioningInto).
///
/// **Cost per call** (n = stored rows of BatchQr): `add` O(K) checks + the estimator's update;
/// `solve` from O(K) (ForgettingRls) and O(K^2) (GivensQr) to O(K^3) (NormalEquations) and
/// O(n K^2) (BatchQr); `summarize`, `conditioning` add O(K^3); `predictionInterval` adds O(K^2);
/// `snapshot`/`restore` O(image size).
template <typename Derived, typename Scalar_, int K_, int MaxK_>
class EstimatorBase {
  template <typename, int>
  friend class MultiResponse;  // builds a response's view from a shared state

 public:
  using Scalar = Scalar_;  ///< float, double or long double
  static constexpr int K = K_;  ///< regressors at compile time, or Eigen::Dynamic
  static constexpr int MaxK = MaxK_;  ///< compile-time bound on K (inline storage when not Dynamic)
  using Dims = detail::Dims<Scalar, K, MaxK>;  ///< size arithmetic (internal)
  using Vector = typename Dims::Vector;  ///< K-vector type
  using Matrix = typename Dims::Matrix;  ///< K x K matrix type
  using Vector1 = typename Dims::Vector1;  ///< (K+1)-vector type (a scaled row [x, y])
  using SolutionType = Solution<Scalar, K, MaxK>;  ///< result of solve
  using SummaryType = Summary<Scalar, K, MaxK>;  ///< result of summarize
  using ConditioningType = Conditioning<Scalar, K, MaxK>;  ///< result of conditioning
  using PredictionType = Prediction<Scalar>;  ///< result of predictionInterval
  using WorkspaceType = detail::Workspace<Scalar, K, MaxK>;  ///< query scratch (internal)
  using GuardStateType = detail::GuardState<Scalar, K, MaxK>;  ///< windup guard and outlier gate state (internal)

  /// Number of regressors K (excluding the intercept). A compile-time constant for fixed K, so
  /// that every loop over the regressors has a known trip count (unrolled, vectorized).
  Eigen::Index regressors() const {
    if constexpr (K != Eigen::Dynamic) return K;
    else return m_k;
  }
  /// Outcome of option validation at construction: `ok`, `wrong_size` (k <= 0, k != K for a
  /// fixed K, or k > MaxK for a bounded one; regressors() is then K, or 1 for Eigen::Dynamic)
  /// or `invalid_options` (see validate(const FitOptions&)); estimators with options of their
  /// own shadow it. Anything but `ok` makes `add` refuse every sample of positive weight. O(1).
  Status status() const { return m_status; }
  /// The shared options given at construction.
  const FitOptions& fitOptions() const { return m_fit; }
  /// Accepted samples (weight > 0).
  std::uint64_t count() const { return derived().memoryCount(); }
  /// Sum of forgotten sample weights W.
  Scalar weightSum() const { return derived().memoryWeight(); }
  /// Effective sample size F^2/F2 (= count when lambda = 1).
  Scalar effectiveCount() const {
    const Scalar f2 = derived().memoryForget2();
    return f2 > Scalar(0) ? derived().memoryForget() * derived().memoryForget() / f2 : Scalar(0);
  }
  /// The running weighted means and sums (see Centering). An estimator that defers its
  /// centering (BatchQr) brings it up to date first, so the record is always current.
  const Centering<Scalar, K, MaxK>& centering() const {
    derived().syncCentering();
    return m_centering;
  }

  /// Folds one sample with weight 1; see add(const Eigen::MatrixBase<XD>&, Scalar, Scalar).
  template <typename XD>
  Status add(const Eigen::MatrixBase<XD>& x, Scalar y) { return add(x, y, Scalar(1)); }

  /// Folds one sample (x, y) with weight w >= 0. A zero weight is accepted and changes nothing.
  ///
  /// Math: ages the state by lambda and folds the scaled centered row
  /// c [x - xbar, y - ybar], c = sqrt(w lambda W / (lambda W + w)) (Centering; NUMERICS §4.1-4.2;
  /// sqrt(w) [x, y] with Intercept::none), by the estimator's own update (its class comment).
  /// With the windup guard (on by default when lambda < 1) or the outlier gate on (WindupOptions,
  /// OutlierOptions; GivensQr, NormalEquations, ForgettingRls only), the guarded path first
  /// computes from the current state the sample's prediction error and its information
  /// h = phi' M^-1 phi (phi the scaled centered regressors, M = X~'X~); it may refuse
  /// the sample (`outlier`), down-weight it (Huber), hold the forgetting of the slope information
  /// at 1 when h < informationGate (1 - lambda) (flag `low_excitation`), fold pseudo-rows (the
  /// information floor, flag `windup_guarded`; regularization toward the nominal model), and
  /// relax the information on a CUSUM alarm or a lock-out release (NUMERICS §2, §10).
  ///
  /// Precondition: x is an Eigen expression of the estimator's Scalar (static_assert).
  ///
  /// Returns, checked in this order before anything is written: the construction status if it
  /// is not `ok`; `wrong_size` (x.size() != K); `negative_weight` (w < 0, NaN or Inf);
  /// `nonfinite_input` (NaN or Inf in x or y); `ok` for w == 0 (nothing folded);
  /// `capacity_full` (no room: a full non-sliding BatchQr); `outlier` (the gate refused it: the fit is untouched, only guardCounters()
  /// count it); otherwise `ok`. Raises no flags itself: the guard's `low_excitation` and
  /// `windup_guarded` of the last sample show in the flags of the queries.
  ///
  /// Cost: O(K) checks + the estimator's update (BatchQr O(K), NormalEquations ~K^2/2,
  /// GivensQr ~2K^2 without square roots, ForgettingRls ~2K^2); the guarded path adds O(K^2)
  /// (GivensQr, ForgettingRls) or a Cholesky factorization, O(K^3/6) (NormalEquations), and,
  /// when the information floor acts, up to K pseudo-row updates. Never allocates.
  template <typename XD>
  Status add(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w) {
    static_assert(std::is_same<typename XD::Scalar, Scalar>::value, "rowfold: x must have the estimator's Scalar");
    if constexpr (kSizedUpTo > 0 && XD::SizeAtCompileTime == Eigen::Dynamic) {  // a fixed-size x is sized already
      if ((kSizedGuarded || !m_guarded) && x.size() <= kSizedUpTo && x.size() == regressors())
        return addSized(x, y, w, std::make_integer_sequence<int, kSizedUpTo>{});
      if constexpr (Derived::deferredCentering)  // a store (BatchQr): a call would cost more than it
        return addChecked<true>(x, y, w);
      else
        return addRuntime(x, y, w);
    } else {
      return addChecked<true>(x, y, w);
    }
  }

  /// Folds a sample measured `age` steps ago (a lab result that arrives late): it enters with
  /// its forgetting weight lambda^age and the state is not aged for it, so the fit is the one
  /// it would have been had the sample come on time — provided the step it belongs to was
  /// marked with advance() (exact in exact arithmetic: the co-moments are sums over samples
  /// with weights w lambda^age, whatever the order; NUMERICS §4.1). The outlier gate applies;
  /// the windup guard never holds it back (no forgetting happens). Same Status as add();
  /// BatchQr under forgetting returns not_available (its ages are row positions).
  ///
  /// Precondition: the steps since the sample's own were marked by add() or advance(), so that
  /// `age` counts them. A sample too old for lambda^age to be represented (underflow to 0) is
  /// accepted with nothing folded (`ok`). Returns, in order: as add() up to `capacity_full`,
  /// then `not_available` (BatchQr, lambda < 1), then `outlier` (gate), else `ok`. Cost: that of
  /// add() plus O(log age) for lambda^age. Stability: that of add(). Never allocates.
  template <typename XD>
  Status addDelayed(const Eigen::MatrixBase<XD>& x, Scalar y, std::uint64_t age, Scalar w = Scalar(1)) {
    static_assert(std::is_same<typename XD::Scalar, Scalar>::value, "rowfold: x must have the estimator's Scalar");
    const Status s = check(x, y, w);
    if (s != Status::ok) return s;
    if (w == Scalar(0)) return Status::ok;
    if (derived().room() == 0) return Status::capacity_full;
    if (Derived::positionalAges && m_lambda != Scalar(1)) return Status::not_available;
    const Scalar aged = Centering<Scalar, K, MaxK>::agingFactor(m_lambda, age);
    if (!(aged > Scalar(0))) return Status::ok;  // older than the memory can represent: no weight left
    if (m_guarded) return guardedFold(x, y, w, aged);
    foldAged(x, y, w, aged);
    return Status::ok;
  }

  /// Marks `steps` sampling steps that passed without a sample (e.g. the sample of this step
  /// will arrive later through addDelayed): the state is aged by lambda^steps. Nothing happens
  /// with lambda = 1 or an empty state; BatchQr under forgetting returns not_available.
  /// Never allocates. Returns the construction status if it is not `ok`, `not_available`
  /// (BatchQr, lambda < 1, non-empty) or `ok`. Cost: O(log steps) + scaling the state
  /// (O(K^2); ForgettingRls divides P). Raises no flag.
  Status advance(std::uint64_t steps = 1) {
    if (derived().status() != Status::ok) return derived().status();
    if (m_lambda == Scalar(1) || steps == 0 || count() == 0) return Status::ok;
    if (Derived::positionalAges) return Status::not_available;
    relaxState(Centering<Scalar, K, MaxK>::agingFactor(m_lambda, steps));
    return Status::ok;
  }

  /// Folds one sample from a raw array of K values (firmware convenience). Precondition: `x`
  /// points to K readable Scalars. `wrong_size` for a null pointer; otherwise as add() above.
  Status add(const Scalar* x, Scalar y, Scalar w = Scalar(1)) {
    if (x == nullptr) return Status::wrong_size;
    return add(Eigen::Map<const Vector>(x, regressors()), y, w);
  }

  /// Folds the rows of X (n x K) with responses y (n). All-or-nothing: every row is validated
  /// first; on any reject nothing is folded and the first reject's Status is returned. With the
  /// outlier gate on, a row the gate refuses is skipped and counted (guardCounters()).
  ///
  /// Returns the construction status if it is not `ok`; `wrong_size` (X.cols() != K, or y or w
  /// not of length n); the first rejected row's status, in row order, as add() would give it;
  /// `capacity_full` when fewer than n more samples fit (zero-weight rows count here, although they
  /// are not stored); otherwise `ok`. Zero-weight rows are skipped. Math and flags as add().
  ///
  /// Cost: O(n K) validation (one vectorized pass; row by row only to report a bad row) + n
  /// times the estimator's update; unguarded GivensQr and NormalEquations fold in blocks
  /// (merged with the pairwise centering update; equal to row-by-row folding up to rounding).
  /// Unguarded NormalEquations and GivensQr read the rows once: they validate each block in
  /// cache as they fold it into a call accumulator (GivensQr: its explicit factor, scratch),
  /// taken into the state only at the end (`fusedRows`).
  /// Never allocates.
  template <typename XD, typename YD>
  Status addRows(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y) {
    return addRowsImpl(X, y, static_cast<const Vector*>(nullptr));
  }
  /// Weighted form of addRows (w has n entries, each >= 0 and finite).
  template <typename XD, typename YD, typename WD>
  Status addRows(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, const Eigen::MatrixBase<WD>& w) {
    return addRowsImpl(X, y, &w);
  }

  /// Merges the state `other` into this one: afterwards this estimator holds the fit of this
  /// state's samples *followed by* other's samples, as if they had been folded here one by one.
  /// With forgetting, this state is first aged by lambda^n (n = samples folded into other); with
  /// lambda = 1 the merge is symmetric. With the windup guard on (lambda < 1), steps the guard
  /// held depend on the state a sample met, so a merge then differs from sequential folding by
  /// those held steps. Centered states combine with the pairwise formula of Chan, Golub &
  /// LeVeque (1979): the means are pooled and the row sqrt(Wa Wb / W) (mean_b - mean_a) is
  /// folded in with the other state (NUMERICS §4.1, §5). Each estimator combines its own form:
  /// stacked-factor QR, the TSQR step (Demmel, Grigori, Hoemmen & Langou 2012) of the augmented
  /// factors (GivensQr; ForgettingRls on the factors of P^-1, then P = R^-1 R^-T again), added
  /// co-moments (NormalEquations), appended rows (BatchQr).
  ///
  /// Stability: the stacked-factor merge is as stable as Householder QR (NUMERICS §5); added
  /// co-moments keep NormalEquations' squared condition number; BatchQr's row append is exact.
  /// Without guard-held steps (see above) the result equals sequential folding up to rounding.
  ///
  /// Returns, checked in this order: this estimator's construction status if it is not `ok`;
  /// `state_mismatch` (`other` has a non-`ok` status, is this very object, or has another K,
  /// intercept mode or forgetting factor); `ok` with nothing done for an empty `other`; then
  /// the estimator's own checks: `capacity_full` (non-sliding BatchQr: fewer free rows than
  /// other.rows()),
  /// `state_mismatch` (ForgettingRls: another start or priorPrecision), `not_available`
  /// (ForgettingRls with a prior start, whose prior would count twice, or either state's P not
  /// positive definite any more); otherwise `ok`. In every refusal
  /// the state is untouched. The VIF limit and BatchQr's capacity and refinement options of
  /// `other` are not compared: this estimator's are kept. Raises no flag itself; ForgettingRls
  /// carries `lost_definiteness` over from `other`.
  ///
  /// Never allocates. Cost: GivensQr O(K^3) (rotating K+2 rows in), NormalEquations O(K^2),
  /// ForgettingRls O(K^3), BatchQr O(n K) (n = other.rows()).
  Status merge(const Derived& other) {
    if (derived().status() != Status::ok) return derived().status();
    if (other.status() != Status::ok || &other == &derived()) return Status::state_mismatch;
    const EstimatorBase& o = other;
    if (o.regressors() != regressors() || o.m_fit.intercept != m_fit.intercept || o.m_fit.forgetting != m_fit.forgetting)
      return Status::state_mismatch;
    if (o.count() == 0) return Status::ok;
    const Status s = derived().canMerge(other);
    if (s != Status::ok) return s;
    derived().syncCentering();
    other.syncCentering();
    const Scalar age = Centering<Scalar, K, MaxK>::agingFactor(m_lambda, o.m_centering.count());
    m_centering.mergeRow(o.m_centering, age, m_fit.intercept, m_row);
    derived().mergeState(other, age, m_row);
    m_centering.commitMerge(o.m_centering, age, m_fit.intercept, m_row);
    m_guard.spread = age * m_guard.spread + o.m_guard.spread + m_row.head(regressors()).cwiseAbs2();
    m_guard.peak = m_guard.peak.cwiseMax(o.m_guard.peak).cwiseMax(m_guard.spread);
    if (!m_guard.scaleReady(m_fit.outliers.warmup)) {
      m_guard.scale2 = o.m_guard.scale2;
      m_guard.warmSum = o.m_guard.warmSum;
      m_guard.warmCount = o.m_guard.warmCount;
    }
    return Status::ok;
  }

  /// Forgets everything (options, status and the nominal model kept; guard counters cleared;
  /// ForgettingRls also clears `lost_definiteness`). O(size of the state). Never allocates.
  void reset() {
    m_centering.reset();
    m_guard.reset();
    m_counters = GuardCounters();
    derived().clearState();
  }

  /// Multiplies the information of the state by f in (0, 1] at once (W, the co-moments, F and
  /// the guard's spreads; the estimate is unchanged): a soft covariance reset that makes the
  /// estimator alert again after a known change (Goodwin & Sin 1984 resetting, in
  /// information form). `invalid_options` for f outside (0, 1]; never allocates.
  /// Returns the construction status if it is not `ok`, `invalid_options` or `ok`. Cost: O(K^2)
  /// (BatchQr: O(n), it scales the stored weights). GivensQr scales R by sqrt(f) (exact up to
  /// one rounding per entry); ForgettingRls divides P by f.
  Status relax(Scalar f) {
    if (derived().status() != Status::ok) return derived().status();
    if (!(f > Scalar(0) && f <= Scalar(1))) return Status::invalid_options;
    if (count() != 0 && f != Scalar(1)) relaxState(f);
    return Status::ok;
  }

  /// Sets theta0, the nominal slopes that regularized forgetting pulls unexcited directions
  /// toward (WindupOptions::regularization; NUMERICS §2.3: use the last validated model, not 0).
  /// Returns `wrong_size` (theta0.size() != K), `nonfinite_input` or `ok`; O(K). The nominal
  /// model is kept by reset(). Never allocates.
  template <typename VD>
  Status setNominal(const Eigen::MatrixBase<VD>& theta0) {
    if (theta0.size() != regressors()) return Status::wrong_size;
    if (!theta0.allFinite()) return Status::nonfinite_input;
    m_guard.nominal = theta0.template cast<Scalar>();
    return Status::ok;
  }

  /// What the windup guard and the outlier gate did since construction or reset() (see
  /// GuardCounters). O(1).
  const GuardCounters& guardCounters() const { return m_counters; }

  /// Coefficients. Cost depends on the estimator (see its class comment). Value form of
  /// solveInto: for Eigen::Dynamic K (unbounded MaxK) the returned Solution allocates its
  /// vector; use solveInto in a loop that must not allocate.
  SolutionType solve() const {
    SolutionType s(regressors());
    derived().solveInto(s);
    return s;
  }

  /// Coefficients into a caller-provided Solution (no allocation for any K once `out` is sized).
  ///
  /// Math: slopes from R b = z by back substitution on the estimator's factor, intercept
  /// b0 = ybar - xbar'b. When a column of R is numerically dependent (|r_jj| <= 8 (K+1) eps
  /// times its column norm), column-pivoted Householder QR of the column-equilibrated R
  /// (Businger & Golub 1965) gives the basic solution: dependent coefficients are zero.
  /// GivensQr and ForgettingRls shadow this with a cheaper path (see there).
  ///
  /// Returns `empty` (no sample yet; coefficients zero), `not_available` (no finite factor or
  /// solution; coefficients zero, flags `near_singular` and the estimator's own) or `ok`.
  /// Flags: `rank_deficient` (rank < K), `too_few_samples` (n_eff <= p), the estimator's own
  /// (`lost_definiteness`). No conditioning analysis here (`ill_conditioned`, `collinear` come
  /// from conditioningInto / summarizeInto).
  ///
  /// Stability: that of the estimator's factor (class comments). Cost: the estimator's
  /// factorization (BatchQr O(n K^2) + refinement sweeps, NormalEquations O(K^3)) + O(K^2)
  /// back substitution (O(K^3) on the rank-deficient path).
  Status solveInto(SolutionType& out) const {
    out.flags = Flags();
    if (count() == 0) {
      out.coefficients.setZero(regressors());
      out.intercept = Scalar(0);
      out.rank = 0;
      out.status = Status::empty;
      return out.status;
    }
    if (!factorizeChecked()) return unavailable(out);
    out.coefficients = m_work.b;
    out.intercept = m_work.intercept;
    out.rank = m_work.rank;
    out.flags = m_work.flags;
    return finishChecked(out);
  }

  /// Full report at confidence `level` (e.g. 0.95). Value form of summarizeInto (the Summary
  /// allocates for Eigen::Dynamic K).
  SummaryType summarize(Scalar level = Scalar(0.95)) const {
    SummaryType s(regressors());
    summarizeInto(s, level);
    return s;
  }

  /// Full report into a caller-provided Summary (no allocation for any K once sized).
  ///
  /// Math (NUMERICS §7.1-7.2): with F = sum lambda^age, F2 = sum lambda^(2 age), q = F2/F and
  /// n_eff = F^2/F2 (Kish 1965): s^2 = SSE / (F - p q), Cov(b) = s^2 q R^-1 R^-T,
  /// Var(b0) = s^2 q (1/W + ||R^-T xbar||^2), Cov(b0, b) = -Cov(b) xbar, t dof = n_eff - p,
  /// intervals b -+ t SE with t = t_{(1+level)/2, dof} (studentTQuantile); R^2 = 1 - SSE/SST,
  /// adjusted R^2 and F as in §7.1 with n_eff for n. At lambda = 1 these are the ordinary
  /// s^2 = SSE/(n - p), Cov = s^2 (X~'X~)^-1, dof = n - p. `out.conditioning` is filled as by
  /// conditioningInto. For a rank-deficient fit (not BatchQr, which sums its raw residuals)
  /// SSE = rho^2 + |z - R b|^2: the residual the basic solution leaves in the dependent rows.
  ///
  /// Preconditions: `out` sized for K (Summary(k) or resize), else it is resized (allocation for
  /// Eigen::Dynamic K).
  ///
  /// Returns `invalid_argument` (level not strictly between 0 and 1, NaN included; only
  /// out.status is written), `empty` (only out.status is written), `not_available` (out.status
  /// and out.flags written; flags say why) or `ok`. Flags: those of conditioningInto, `too_few_samples`
  /// (F - p q <= 0 or n_eff <= p: s, t and the intervals are NaN), the estimator's own.
  /// Standard errors are NaN when R is singular or rank deficient.
  ///
  /// Stability: covariances come from R^-1 (triangular inversion), not from inverting a
  /// cross-product matrix; with `ill_conditioned` set they may have no correct digit (NUMERICS
  /// §6.5). Cost: the estimator's factorization + O(K^3) + one t quantile.
  Status summarizeInto(SummaryType& out, Scalar level = Scalar(0.95)) const {
    if (!validLevel(level)) {
      out.flags = Flags();
      out.status = Status::invalid_argument;
      return out.status;
    }
    if (count() == 0) {
      out.flags = Flags();
      out.status = Status::empty;
      return out.status;
    }
    if (!factorizeChecked()) {
      out.status = Status::not_available;
      out.flags = m_work.flags;
      return out.status;
    }
    detail::analyzeSummary(m_work, facts(), level, out);
    out.flags.set(guardFlags());
    return out.status;
  }

  /// Condition estimate, VIFs, numerical rank, digit estimates and flags. Value form of
  /// conditioningInto (allocates for Eigen::Dynamic K).
  ConditioningType conditioning() const {
    ConditioningType c(regressors());
    conditioningInto(c);
    return c;
  }
  /// Condition estimate, VIFs, numerical rank, digit estimates and flags into `out`.
  ///
  /// Math (NUMERICS §6.2-6.5), D = column norms of R (= of the centered data):
  /// scaledCondition kappa_s = ||R D^-1||_1 times an estimate of ||(R D^-1)^-1||_1 (Hager 1984
  /// with Higham's 1988 safeguard, two triangular solves per iteration, at most 5 iterations);
  /// gramCondition = kappa_1(R)^2; lsCondition = kappa_s + kappa_s^2 rho/||z|| (Wedin 1973);
  /// rank by column-pivoted QR of R D^-1 (Businger & Golub 1965), run only when a column looks
  /// dependent; VIF_j = [(R'R)^-1]_jj ||R e_j||^2; digits from the first-order error estimate
  /// of §6.5 (conservative).
  ///
  /// Flags, with kappa_eff = kappa_s for QR-type states and kappa_s^2 for cross-product states
  /// (NormalEquations, ForgettingRls), u = eps/2: `ill_conditioned` when kappa_eff > u^-1/2 or some
  /// coefficient keeps fewer than a third of the working digits; `near_singular` when
  /// kappa_eff > 0.1/u, some coefficient has no correct digit left, or rank < K; `collinear`
  /// when a VIF exceeds FitOptions::vifLimit (or R is singular: VIFs are then +inf);
  /// `rank_deficient` when rank < K; plus the estimator's own.
  ///
  /// Returns `empty` (only out.status written), `not_available` (status and flags written) or
  /// `ok`. Precondition: `out` sized for K, else it is resized. Cost: the estimator's
  /// factorization + O(K^3) (R^-1 and the VIFs). Never allocates once `out` is sized.
  Status conditioningInto(ConditioningType& out) const {
    if (count() == 0) {
      out.flags = Flags();
      out.status = Status::empty;
      return out.status;
    }
    if (!factorizeChecked()) {
      out.status = Status::not_available;
      out.flags = m_work.flags;
      return out.status;
    }
    detail::analyzeConditioning(m_work, facts(), out);
    out.flags.set(m_work.flags);
    out.flags.set(guardFlags());
    return out.status;
  }

  /// Point prediction b0 + x0'b. Quiet NaN when there is no fit to predict from (empty, wrong
  /// size, or no usable factor); `predictionInterval` says which, with a Status.
  /// Uses the estimator's solveInto, so flags such as `rank_deficient` are not reported here.
  /// Cost: that of solveInto + O(K). Never allocates.
  template <typename XD>
  Scalar predict(const Eigen::MatrixBase<XD>& x0) const {
    SolutionType& s = m_solution;
    if (x0.size() != regressors() || derived().solveInto(s) != Status::ok) return std::numeric_limits<Scalar>::quiet_NaN();
    return s.intercept + x0.dot(s.coefficients);
  }

  /// Prediction with confidence and prediction intervals at `level`.
  ///
  /// Math (NUMERICS §7.1, with the forgetting correction of summarizeInto): yhat = b0 + x0'b,
  /// leverage h0 = q (1/W + ||R^-T (x0 - xbar)||^2) (q ||R^-T x0||^2 without intercept);
  /// confidence interval of the mean response yhat -+ t s sqrt(h0), prediction interval of a new
  /// unit-weight observation yhat -+ t s sqrt(1 + h0), t = t_{(1+level)/2, n_eff - p}.
  ///
  /// Returns `wrong_size` (x0.size() != K), `invalid_argument` (level not strictly between 0
  /// and 1, NaN included), `empty`, `not_available` (no finite factor) or `ok`.
  /// Flags: `too_few_samples` (n_eff <= p: t and the intervals are NaN), `rank_deficient` (R
  /// singular or a column dependent: leverage and intervals are NaN), the estimator's own. No
  /// conditioning analysis (call conditioning() for `ill_conditioned`, `collinear`).
  ///
  /// Cost: the estimator's factorization + O(K^2) (one triangular solve) + one t quantile.
  /// Never allocates.
  template <typename XD>
  PredictionType predictionInterval(const Eigen::MatrixBase<XD>& x0, Scalar level = Scalar(0.95)) const {
    PredictionType out;
    if (x0.size() != regressors()) {
      out.status = Status::wrong_size;
      return out;
    }
    if (!validLevel(level)) {
      out.status = Status::invalid_argument;
      return out;
    }
    if (count() == 0) return out;
    if (!factorizeChecked()) {
      out.status = Status::not_available;
      out.flags = m_work.flags;  // e.g. lost_definiteness, near_singular
      return out;
    }
    detail::analyzePrediction(m_work, facts(), level, x0, out);
    return out;
  }

  /// Size in bytes of the image `snapshot` writes now: 40-byte header + payload (options,
  /// centering, guard state, estimator state) + 4-byte CRC. Fixed for a given estimator type and K, except
  /// BatchQr, whose image grows with rows(). O(K).
  std::size_t snapshotSize() const {
    detail::ImageCounter c;
    visitPayload(derived(), m_centering, c);
    return detail::kSnapshotHeaderSize + c.bytes + 4;
  }

  /// Writes the state to `buffer` as a versioned, checksummed image (layout in snapshot.hpp).
  /// On success `written` holds the image size. Never allocates.
  ///
  /// Returns `buffer_too_small` (null buffer or capacity < snapshotSize(); `written` = 0 and
  /// nothing is written) or `ok`. Scalars are copied as raw bytes, so a restored state continues
  /// bit-identically. Precondition: `buffer` has `capacity` writable bytes. Cost: O(image size)
  /// (the CRC-32 is bitwise, 8 steps per byte).
  Status snapshot(unsigned char* buffer, std::size_t capacity, std::size_t& written) const {
    written = 0;
    const std::size_t size = snapshotSize();
    if (buffer == nullptr || capacity < size) return Status::buffer_too_small;
    derived().syncCentering();
    writeHeader(buffer, size - detail::kSnapshotHeaderSize - 4);
    detail::ImageWriter w{buffer + detail::kSnapshotHeaderSize};
    visitPayload(derived(), m_centering, w);
    detail::putField(buffer + size - 4, detail::crc32(buffer, size - 4));
    written = size;
    return Status::ok;
  }

  /// Restores a state written by `snapshot` of an estimator of the same kind, Scalar, K and
  /// options. A truncated or damaged image gives `corrupt_image`, a foreign one
  /// `image_mismatch`; in both cases the state is untouched. Never allocates.
  ///
  /// Returns, checked in this order: the construction status if it is not `ok`;
  /// `corrupt_image` (null, shorter than header + CRC, magic not "RFLD", `length` not equal to
  /// the header's payload length + 44, CRC-32 mismatch, payload shorter than the options,
  /// centering and guard state); `image_mismatch` (another format version, Scalar size or
  /// mantissa, estimator kind, intercept mode, byte order, K, forgetting factor or VIF limit,
  /// other guard or estimator options, or a state of the wrong size, e.g. a BatchQr image with
  /// more rows than this capacity); otherwise `ok`. The guard counters are not in the image.
  /// Precondition: `image` points to `length` readable bytes. Cost: O(length).
  Status restore(const unsigned char* image, std::size_t length) {
    using detail::getField;
    if (derived().status() != Status::ok) return derived().status();
    const std::size_t hs = detail::kSnapshotHeaderSize;
    if (image == nullptr || length < hs + 4 || std::memcmp(image, "RFLD", 4) != 0) return Status::corrupt_image;
    const std::uint32_t payload = getField<std::uint32_t>(image + 20);
    if (static_cast<std::size_t>(payload) + hs + 4 != length) return Status::corrupt_image;
    if (detail::crc32(image, length - 4) != getField<std::uint32_t>(image + length - 4)) return Status::corrupt_image;
    unsigned char expect[detail::kSnapshotHeaderSize];
    writeHeader(expect, payload);
    if (std::memcmp(expect, image, hs) != 0) return Status::image_mismatch;
    // Options must match byte for byte; then the state must have exactly the expected size.
    detail::ImageCounter optionBytes;
    visitOptionsAll(derived(), optionBytes);
    unsigned char ownOptions[256];
    if (optionBytes.bytes > sizeof ownOptions) return Status::image_mismatch;
    detail::ImageWriter ow{ownOptions};
    visitOptionsAll(derived(), ow);
    const unsigned char* p = image + hs;
    if (optionBytes.bytes > payload || std::memcmp(ownOptions, p, optionBytes.bytes) != 0) return Status::image_mismatch;
    detail::ImageCounter centerBytes;
    Centering<Scalar, K, MaxK>::visitState(m_centering, centerBytes);
    GuardStateType::visitState(m_guard, centerBytes);
    const std::size_t head = optionBytes.bytes + centerBytes.bytes;
    if (head > payload) return Status::corrupt_image;
    const std::size_t stateBytes = derived().expectedStateBytes(p + head, payload - head);
    if (head + stateBytes != payload) return Status::image_mismatch;
    detail::ImageReader r{p + optionBytes.bytes};
    Centering<Scalar, K, MaxK>::visitState(m_centering, r);
    GuardStateType::visitState(m_guard, r);
    Derived::visitState(derived(), r);
    return Status::ok;
  }

  /// Centered weighted cross-products: M = X~'X~ (K x K), m = X~'y~, and Syy (the "co-variances"
  /// of the regressors and with y, unnormalized). Divide by W for covariances.
  ///
  /// Math: from the factor, M = R'R, m = R'z, Syy = SST (uncentered sums with
  /// Intercept::none; forgotten sums under lambda < 1). ForgettingRls with RlsStart::prior
  /// includes the prior's information in M. NormalEquations rebuilds M from its semidefinite
  /// Cholesky factor, so a column dependent to working precision loses its dependent part.
  ///
  /// Precondition: M and m sized for K, else they are resized (allocation for Eigen::Dynamic K).
  /// Returns `empty`, `not_available` or `ok`. Cost: the estimator's factorization + O(K^3).
  Status crossProducts(Matrix& M, Vector& m, Scalar& syy) const {
    if (count() == 0) return Status::empty;
    if (!factorizeChecked()) return Status::not_available;
    M.noalias() = m_work.R.transpose().lazyProduct(m_work.R);
    m.noalias() = m_work.R.transpose().lazyProduct(m_work.z);
    syy = m_work.sst;
    return Status::ok;
  }

  /// Weighted covariance matrix of the regressors, M / W (see crossProducts: same Status values
  /// and cost). Allocates nothing once C is sized for K.
  Status covariance(Matrix& C) const {
    Scalar syy = 0;
    const Status s = crossProducts(C, m_work.v4, syy);  // m = X~'y~ into scratch: no allocation
    if (s == Status::ok) C /= weightSum();
    return s;
  }

  /// Correlation matrix of the regressors (unit diagonal where a column varies; a constant
  /// column gets a zero row and column). Same Status values, cost and allocation as covariance().
  Status correlation(Matrix& C) const {
    const Status s = covariance(C);
    if (s != Status::ok) return s;
    for (Eigen::Index j = 0; j < regressors(); ++j) m_work.v1(j) = C(j, j) > Scalar(0) ? Scalar(1) / std::sqrt(C(j, j)) : Scalar(0);
    for (Eigen::Index j = 0; j < regressors(); ++j) C.col(j) = C.col(j).cwiseProduct(m_work.v1) * m_work.v1(j);
    return Status::ok;
  }

 protected:
  /// For estimators: `k` regressors (must equal K unless K is Eigen::Dynamic; k > 0; at most
  /// MaxK when that is bounded) and the shared options. Sets status() (`wrong_size` or
  /// validate(fit)); allocates for Eigen::Dynamic K only. A k that does not fit makes storage of
  /// sizedFor(k) and sets `wrong_size`, nothing else.
  EstimatorBase(Eigen::Index k, const FitOptions& fit)
      : m_fit(fit),
        m_k(sizedFor(k)),
        m_lambda(static_cast<Scalar>(fit.forgetting)),
        m_step(static_cast<Scalar>(fit.forgetting)),
        m_status(!detail::fitsSize<K, MaxK>(k) ? Status::wrong_size : validate(fit)),
        m_centering(sizedFor(k)),
        m_guard(sizedFor(k)),
        m_work(sizedFor(k)),
        m_row(sizedFor(k) + 1),
        m_solution(sizedFor(k)) {
    m_row.setZero();
    if (m_status == Status::ok && fit.outliers.enabled && !Derived::guardable) m_status = Status::invalid_options;
    m_guarded = Derived::guardable && m_status == Status::ok &&
                ((fit.forgetting < 1.0 && fit.windup.enabled) || fit.outliers.enabled);
  }

  /// For an estimator's constructor: its own options are invalid, so status() is
  /// `invalid_options` from now on (over any other construction status) and nothing folds.
  /// One status word, so that add() tests one value, not the base's and the estimator's.
  void refuseOptions() {
    m_status = Status::invalid_options;
    m_guarded = false;
  }

  /// The size an estimator's own storage is made with for a constructor's k: k when it fits,
  /// else K (fixed) or 1, so that a bad k only sets `wrong_size` (detail::storedSize).
  static constexpr Eigen::Index sizedFor(Eigen::Index k) { return detail::storedSize<K, MaxK>(k); }

  /// CRTP access to the estimator.
  Derived& derived() { return static_cast<Derived&>(*this); }
  /// CRTP access to the estimator (const).
  const Derived& derived() const { return static_cast<const Derived&>(*this); }

  /// Forgetting factor of the sample being folded (the windup guard may hold it at 1); the
  /// nominal lambda outside a fold.
  Scalar lambda() const { return m_step; }
  /// The running means and sums, writable (for estimators that remove samples).
  Centering<Scalar, K, MaxK>& centeringState() { return m_centering; }
  /// Intercept mode of the fit.
  Intercept interceptMode() const { return m_fit.intercept; }
  /// The shared query scratch (mutable: const queries write it; one thread at a time).
  WorkspaceType& work() const { return m_work; }
  /// True only inside the fold that the guarded path makes right after `priorInfo` succeeded on
  /// the same centered row m_row, with nothing changed in between: the estimator may reuse
  /// what its priorInfo computed (ForgettingRls: the gain P d).
  bool priorOnRow() const { return m_priorOnRow; }

  /// Default factor bookkeeping: means, W and SST from the centering.
  void fillCenteringFacts(WorkspaceType& ws) const {
    ws.xbar = m_centering.xMean();
    ws.ybar = m_centering.yMean();
    ws.weight = m_centering.weightSum();
    ws.sst = m_centering.yySum();
  }
  /// Intercept b0 = ybar - xbar'b (zero without intercept).
  void recoverIntercept(WorkspaceType& ws) const {
    ws.intercept = m_fit.intercept == Intercept::fit ? ws.ybar - ws.xbar.dot(ws.b) : Scalar(0);
  }

  /// Sets `ok` and the `too_few_samples` / `rank_deficient` flags of a finished solution.
  void finishSolution(SolutionType& out) const {
    out.status = Status::ok;
    out.flags.set(guardFlags());
    const Eigen::Index p = regressors() + (m_fit.intercept == Intercept::fit ? 1 : 0);
    if (!(effectiveCount() > Scalar(p))) out.flags.set(Flag::too_few_samples);
    if (out.rank < regressors()) out.flags.set(Flag::rank_deficient);
  }

  /// Zero solution with `not_available` and the workspace's flags.
  Status unavailable(SolutionType& out) const {
    out.coefficients.setZero(regressors());
    out.intercept = Scalar(0);
    out.rank = 0;
    out.flags = m_work.flags;
    out.status = Status::not_available;
    return out.status;
  }

  /// Runs the estimator's factorization and refuses a non-finite result (e.g. a cross-product
  /// state that overflowed on huge inputs): then `near_singular` is set and callers report
  /// `not_available` instead of returning NaN.
  bool factorizeChecked() const {
    if (!derived().factorize(m_work)) return false;
    if (m_work.rank < regressors() && Derived::errorModel != detail::ErrorModel::refined_raw) {  // BatchQr sums raw residuals
      // Rank deficient: the basic solution leaves z - R b in the dependent rows (a factor whose
      // dependent diagonal is rounding-level carries part of y there), so that residual belongs
      // to the SSE: rho^2 + |z - R b|^2 (plain loops: no heap).
      Scalar extra = Scalar(0);
      for (Eigen::Index i = 0; i < regressors(); ++i) {
        Scalar r = m_work.z(i);
        for (Eigen::Index j = i; j < regressors(); ++j) r -= m_work.R(i, j) * m_work.b(j);
        extra += r * r;
      }
      m_work.rho = std::sqrt(m_work.rho * m_work.rho + extra);
    }
    const bool finite = m_work.b.allFinite() && std::isfinite(m_work.intercept) && m_work.R.allFinite() &&
                        m_work.z.allFinite() && std::isfinite(m_work.rho);
    if (!finite) m_work.flags.set(Flag::near_singular);
    return finite;
  }

  /// For estimators whose fast solve bypasses factorize: a non-finite answer becomes
  /// `not_available` with `near_singular`, never a silent NaN.
  Status finishChecked(SolutionType& out) const {
    if (!out.coefficients.allFinite() || !std::isfinite(out.intercept)) {
      m_work.flags = out.flags;
      m_work.flags.set(Flag::near_singular);
      return unavailable(out);
    }
    finishSolution(out);
    return out.status;
  }

  /// What the fit remembers: samples, W, F and F2. By default everything the centering has
  /// seen; an estimator with a finite window (samples leave it) shadows these four.
  std::uint64_t memoryCount() const { return m_centering.count(); }
  Scalar memoryWeight() const { return m_centering.weightSum(); }  ///< W remembered (see memoryCount)
  Scalar memoryForget() const { return m_centering.forgetSum(); }  ///< F remembered (see memoryCount)
  Scalar memoryForget2() const { return m_centering.forgetSum2(); }  ///< F2 remembered (see memoryCount)

  /// Estimators whose `deferredCentering` is true (BatchQr: it keeps the raw rows) store a sample
  /// with `Status storeRow(x, y, w)` (`capacity_full` when there is no room, else `ok`; add()
  /// leaves the room test to it) and commit it to the centering later, in `syncCentering() const`,
  /// with the same centeredRow/commitStep operations fold() would have run, in arrival order, so
  /// the record is the eager one (bit for bit without FMA contraction; see
  /// BatchQr::syncCentering). The base calls syncCentering before every read of the
  /// centering (centering(), merge, snapshot, relax/advance, addDelayed); this default (for the
  /// estimators that fold at once) does nothing.
  void syncCentering() const {}
  /// The centering, writable from a const member (for syncCentering; one thread at a time, as
  /// for every query).
  Centering<Scalar, K, MaxK>& deferredCenteringState() const { return m_centering; }

  /// Default: the state has a fixed size, the one it has now.
  std::size_t expectedStateBytes(const unsigned char*, std::size_t) const {
    detail::ImageCounter c;
    Derived::visitState(derived(), c);
    return c.bytes;
  }

  /// Sample counts, forgetting sums and options the statistics need.
  detail::SampleFacts<Scalar> facts() const {
    detail::SampleFacts<Scalar> f;
    f.count = derived().memoryCount();
    f.forget = derived().memoryForget();
    f.forget2 = derived().memoryForget2();
    f.intercept = m_fit.intercept;
    f.vifLimit = static_cast<Scalar>(m_fit.vifLimit);
    f.model = Derived::errorModel;
    return f;
  }

 private:
  template <typename Self, typename C, typename V>
  static void visitPayload(Self& self, C& centering, V& v) {
    visitOptionsAll(self, v);
    Centering<Scalar, K, MaxK>::visitState(centering, v);
    GuardStateType::visitState(self.EstimatorBase::m_guard, v);
    Derived::visitState(self, v);
  }

  /// The guard options, then the estimator's own options (restore compares them byte for byte).
  template <typename Self, typename V>
  static void visitOptionsAll(Self& self, V& v) {
    const FitOptions& f = self.EstimatorBase::m_fit;
    const WindupOptions& g = f.windup;
    const OutlierOptions& q = f.outliers;
    const std::uint8_t switches = static_cast<std::uint8_t>((g.enabled ? 1 : 0) | (g.variableForgetting ? 2 : 0) |
                                                            (q.enabled ? 4 : 0) | (q.huber ? 8 : 0));
    const double values[] = {g.informationGate, g.spreadFloor,    g.regularization, g.minForgetting,
                             g.changeThreshold, g.changeDrift,    g.changeRelax,    q.threshold,
                             q.leverageLimit,   q.scaleMemory,    q.lockoutRelax,   q.huberThreshold};
    const std::int32_t counts[] = {q.warmup, q.lockoutLimit};
    visitConst(v, switches);
    for (double d : values) visitConst(v, d);
    for (std::int32_t c : counts) visitConst(v, c);
    Derived::visitOptions(self, v);
  }
  /// Options are written and compared, never read back (they come from the constructor).
  template <typename V, typename T>
  static void visitConst(V& v, T value) {
    if constexpr (std::is_same<V, detail::ImageReader>::value) {
      T ignored{};
      v.field(ignored);
    } else {
      v.field(value);
    }
  }

  void writeHeader(unsigned char* h, std::size_t payload) const {
    std::memset(h, 0, detail::kSnapshotHeaderSize);
    const unsigned char magic[4] = {'R', 'F', 'L', 'D'};  // not a string: no terminator in the image
    std::memcpy(h, magic, sizeof magic);
    detail::putField(h + 4, kSnapshotVersion);
    h[6] = static_cast<unsigned char>(sizeof(Scalar));
    h[7] = static_cast<unsigned char>(std::numeric_limits<Scalar>::digits);
    h[8] = static_cast<unsigned char>(Derived::kind);
    h[9] = static_cast<unsigned char>(m_fit.intercept == Intercept::fit ? 0 : 1);
    detail::putField(h + 12, detail::kByteOrderTag);
    detail::putField(h + 16, static_cast<std::uint32_t>(regressors()));
    detail::putField(h + 20, static_cast<std::uint32_t>(payload));
    detail::putField(h + 24, m_fit.forgetting);
    detail::putField(h + 32, m_fit.vifLimit);
  }

  /// add() after its dispatch. Guarded = false for the per-size copies of an estimator without
  /// sizedGuarded, which are reached only unguarded (so that they do not instantiate the
  /// guarded path as well).
  template <bool Guarded, typename XD>
  EIGEN_ALWAYS_INLINE Status addChecked(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w) {
    const Status s = check(x, y, w);
    if (s != Status::ok) return s;
    if (w == Scalar(0)) return Status::ok;
    if constexpr (Derived::deferredCentering) {
      static_assert(!Derived::guardable, "rowfold: an estimator with deferred centering has no guard");
      return derived().storeRow(x, y, w);  // tests its own room (capacity_full)
    } else {
      if (derived().room() == 0) return Status::capacity_full;
      if constexpr (Guarded) {
        if (m_guarded) return guardedFold(x, y, w);
      }
      fold(x, y, w, m_lambda);
      return Status::ok;
    }
  }

  // Runtime K up to the estimator's sizedUpTo: the unguarded add (with sizedGuarded, the
  // guarded one too) compiled for each K <= N, x as a fixed-size block, so that the checks, the
  // centering and the estimator's fold have loops of compile-time length, as with a fixed K.
  // The same operations in the same order, so the same results (tests/test_tracking.cpp, "an
  // inert guard" and "a runtime K folds the same bits"). NormalEquations, native update bench,
  // double, runtime K = 2 / 4 / 8: 19.0 / 25.4 / 35.0 -> 9.2 / 13.4 / 22.9 ns per sample
  // (bench/README, per-size round).
  static constexpr int kSizedUpTo =
      K != Eigen::Dynamic || detail::kMicrocontroller ? 0 : std::min(detail::SizedUpTo<Derived>::value, detail::kSizedCap);
  // The copies include the guarded path too: each copy then carries it (compile time, code).
  static constexpr bool kSizedGuarded = detail::SizedGuarded<Derived>::value;
  template <typename XD, int... N>
  EIGEN_ALWAYS_INLINE Status addSized(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w, std::integer_sequence<int, N...>) {
    Status s = Status::ok;  // x.size() is one of N + 1: exactly one copy runs
    static_cast<void>(((x.size() == N + 1 && (s = addAs<N + 1>(x, y, w), true)) || ...));
    return s;
  }
  // Each copy out of line, and the runtime-length path too: each compiled on its own, not in
  // whatever function the caller's add() is inlined into. Inline, their speed moved with the
  // surroundings: the update bench's runtime K = 32 (double) took 173-176 ns per sample
  // instead of 137, a timing program's copy for K = 8 37 ns instead of 25.
  // A contiguous x reaches its copy as a pointer, in a register. Given by reference, an
  // expression the caller had just built (a Map: pointer and size, two stores) was read back
  // with one 16-byte load, which store forwarding cannot serve: BatchQr, runtime K = 2,
  // double, took 9.1 ns per sample so (update bench), half of the copy's samples on that load.
  // One copy per length then serves every contiguous type of x, too.
  template <int N, typename XD>
  EIGEN_ALWAYS_INLINE Status addAs(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w) {
    if constexpr ((int(XD::Flags) & Eigen::DirectAccessBit) != 0 && int(XD::InnerStrideAtCompileTime) == 1)
      return addAt<N>(x.derived().data(), y, w);
    else
      return addBlock<N>(x, y, w);
  }
  template <int N>
  EIGEN_DONT_INLINE Status addAt(const Scalar* x, Scalar y, Scalar w) {
    return addChecked<kSizedGuarded>(Eigen::Map<const Eigen::Matrix<Scalar, N, 1>>(x), y, w);
  }
  template <int N, typename XD>
  EIGEN_DONT_INLINE Status addBlock(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w) {
    return addChecked<kSizedGuarded>(x.template head<N>(), y, w);
  }
  template <typename XD>
  EIGEN_DONT_INLINE Status addRuntime(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w) {
    return addChecked<true>(x, y, w);
  }

  template <typename XD>
  Status check(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w) const {
    if (derived().status() != Status::ok) return derived().status();  // incl. the estimator's own options
    if (x.size() != regressors()) return Status::wrong_size;
    if (!(w >= Scalar(0)) || !std::isfinite(w)) return Status::negative_weight;
    // x * 0 is 0 for finite x and NaN for NaN or Inf: one vectorized pass without early exit
    // (Eigen's allFinite tests entry by entry), y's term added to its sum, so one test.
    if (!(zeroIfFinite(x) + y * Scalar(0) == Scalar(0))) return Status::nonfinite_input;
    return Status::ok;
  }

  /// Folds (x, y, w) with step factor lam; m_row keeps the unscaled centered row d. Returns
  /// its weight delta (the co-moments gained delta d d').
  ///
  /// Forced inline, with foldStep: in a runtime K's per-size copy (addAt) g++ left both out of
  /// line, three calls deep, each with its own stack frame, and d went from one frame to the
  /// next through m_row (native update bench, NormalEquations, runtime K = 2 / 4, float
  /// 11.5-11.6 / 12.0-12.2 -> 9.1-9.3 / 10.4 ns per sample, with rank1Scalars; bench/README,
  /// lone-load round).
  template <typename XD>
  EIGEN_ALWAYS_INLINE Scalar fold(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w, Scalar lam) {
    if constexpr (Derived::deferredCentering) {
      // Committed to the centering later, with lambda = lam (unguarded); the callers checked
      // room() for it, so it is stored.
      static_cast<void>(derived().storeRow(x, y, w));
      return w;  // not the fold weight: deferred estimators have no guard, which alone reads it
    }
    return foldStep(x, y, w, lam, m_centering.centeredRow(x, y, w, lam, m_fit.intercept, m_row));
  }

  /// fold() with m_row and its step already formed by centeredRow(x, y, w, lam).
  template <typename XD>
  EIGEN_ALWAYS_INLINE Scalar foldStep(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w, Scalar lam,
                  const typename Centering<Scalar, K, MaxK>::Step& step) {
    if constexpr (detail::CenteringFirst<Derived>::value && detail::viewSize<K, XD> != Eigen::Dynamic) {
      // The step commits while d is still in registers: after the estimator's stores a
      // compiler must read m_row back (they might alias it), and that read sat on the
      // loop-carried chain of the means. With a runtime K (m_row on the heap) a store of
      // m_step before the commit forced the same read, so it comes after. (The commit reading
      // d_y once, before its own stores, measured faster again at runtime K = 3 but made
      // GivensQr's guarded and plain paths fuse differently on aarch64: not done.)
      m_centering.template commitStep<detail::viewSize<K, XD>>(step, lam, m_fit.intercept, m_row);
      m_step = lam;
      derived().foldRow(x, y, w, m_row, step.delta);
    } else {
      m_step = lam;
      derived().foldRow(x, y, w, m_row, step.delta);
      m_centering.template commitStep<detail::viewSize<K, XD>>(step, lam, m_fit.intercept, m_row);
    }
    m_step = m_lambda;
    return step.delta;
  }

  /// Fold without aging the state; the sample weighs w lambda^age (aged = lambda^age).
  template <typename XD>
  void foldAged(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w, Scalar aged) {
    derived().syncCentering();
    m_step = Scalar(1);
    m_centering.scaledRow(x, y, w * aged, Scalar(1), m_fit.intercept, m_row);
    derived().foldRow(x, y, w * aged, m_row, Scalar(1));  // a scaled row: weight 1
    m_centering.commit(x, y, w * aged, Scalar(1), m_fit.intercept, m_row, aged);
    m_step = m_lambda;
  }

  Flags guardFlags() const {
    Flags f;
    if ((m_guard.lastFlags & static_cast<std::uint16_t>(Flag::low_excitation)) != 0) f.set(Flag::low_excitation);
    if ((m_guard.lastFlags & static_cast<std::uint16_t>(Flag::windup_guarded)) != 0) f.set(Flag::windup_guarded);
    return f;
  }

  void relaxState(Scalar f) {
    derived().syncCentering();
    derived().ageState(f);
    m_centering.age(f);
    m_guard.spread *= f;
  }

  /// The information floor: every regressor whose forgotten spread D_j fell below floor x its
  /// peak gets a pseudo-row a [e_j, b_j] (a^2 = floor peak_j - D_j, b_j its current slope) that
  /// tops D_j up to the floor. Forgetting goes on in the excited directions while a parked input
  /// keeps a bounded share of information at its current estimate: regularized forgetting
  /// toward the current model, restricted to starved directions (NUMERICS §2.2, §2.4).
  /// Returns true if a row was folded.
  bool supportFloor(Scalar floor) {
    bool any = false;
    for (Eigen::Index j = 0; j < regressors(); ++j) {
      const Scalar need = floor * m_guard.peak(j) - m_guard.spread(j);
      if (!(need > Scalar(0))) continue;
      if (!any && !derived().currentSlopes(m_work.v3)) return false;
      if (!std::isfinite(m_work.v3(j))) continue;
      any = true;
      typename Dims::Vector1& pseudo = m_work.v2aug;
      const Scalar a = std::sqrt(need);
      pseudo.setZero();
      pseudo(j) = a;
      pseudo(regressors()) = a * m_work.v3(j);
      m_step = Scalar(1);
      derived().foldRow(m_centering.xMean(), m_centering.yMean(), Scalar(1), pseudo, Scalar(1));  // a scaled row: weight 1
      m_step = m_lambda;
      m_guard.spread(j) += need;
      ++m_counters.floorRows;
    }
    return any;
  }

  /// The guarded path of add (NUMERICS §2.4 and §10): prediction error and leverage of the
  /// sample from the current state, outlier gate, Huber weight, the step forgetting factor,
  /// the fold, then the spreads, the regularization pseudo-row, the robust scale and CUSUM.
  /// `aged` < 1 (or a delayed sample, aged <= 1 with `delayed`): see addDelayed.
  template <typename XD>
  Status guardedFold(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w, Scalar aged = Scalar(-1)) {
    const WindupOptions& g = m_fit.windup;
    const OutlierOptions& o = m_fit.outliers;
    const Scalar one(1);
    const bool delayed = aged > Scalar(0);
    const Scalar noiseWeight = w;  // the sample's own precision (aging does not change its noise)
    if (delayed) w *= aged;
    // Leverage and prediction error of the unscaled centered row d (weight delta = c^2): both
    // are homogeneous in the row, so h = delta hx and e = c e_d without forming c (no square
    // root on the path to the gate's decision).
    const auto step0 = m_centering.centeredRow(x, y, w, delayed ? one : m_lambda, m_fit.intercept, m_row);
    const Scalar deltaRow = step0.delta;
    Scalar h = 0, ed = 0, q = 0, hxd = 0;
    const bool known =
        deltaRow > Scalar(0) && derived().template priorInfo<detail::viewSize<K, XD>>(m_row, hxd, ed) &&
        std::isfinite(hxd) && std::isfinite(ed);
    if (known) h = deltaRow * hxd;
    // The normalized prediction error q and its robust running scale are read only by the
    // outlier gate, variable forgetting and the change alarm; with all three off (the default)
    // they are not formed (four divisions a sample) and the scale stays at its reset value.
    const bool scaled = known && (o.enabled || g.variableForgetting || g.changeThreshold > 0.0);
    const Scalar hx = hxd;  // d' M^-1 d of the unscaled centered regressors
    if (scaled) {
      Scalar spread = one / noiseWeight + hx;
      if (m_fit.intercept == Intercept::fit) spread += one / m_centering.weightSum();
      q = ed * ed / spread;  // squared prediction error over its variance factor
    }
    const bool ready = scaled && m_guard.scaleReady(o.warmup);
    const Scalar c2 = static_cast<Scalar>(o.threshold * o.threshold);
    if (o.enabled && ready) {
      const bool leverage = o.leverageLimit > 0.0 && hx > static_cast<Scalar>(o.leverageLimit);
      if (leverage || q > c2 * m_guard.scale2) {
        if (++m_counters.consecutiveRejections <= static_cast<std::uint64_t>(o.lockoutLimit)) {
          ++(leverage ? m_counters.rejectedLeverage : m_counters.rejectedInnovation);
          return Status::outlier;
        }
        // A run of rejections longer than the limit: take it as a real change (no lock-out).
        ++m_counters.lockoutReleases;
        m_counters.consecutiveRejections = 0;
        relaxState(static_cast<Scalar>(o.lockoutRelax));
        m_guard.scale2 = q;
        m_guard.lastFlags = 0;
        if (delayed) {
          foldAged(x, y, w / aged, aged);
          m_guard.foldSpread(one, detail::headOf<K>(m_row, regressors()));
        } else {
          const Scalar delta = fold(x, y, w, m_lambda);
          m_guard.foldSpread(m_lambda, detail::headOf<K>(m_row, regressors()), delta);
        }
        return Status::ok;
      }
    }
    m_counters.consecutiveRejections = 0;
    Scalar weight = w;
    if (o.enabled && o.huber && ready && q > Scalar(0)) {
      const Scalar z = std::sqrt(q / m_guard.scale2), limit = static_cast<Scalar>(o.huberThreshold);
      if (z > limit) {
        weight = w * (limit / z);
        ++m_counters.downweighted;
      }
    }
    if (delayed) {  // no step passes: no forgetting to guard, no regularization pseudo-row
      foldAged(x, y, weight / aged, aged);
      m_guard.foldSpread(one, detail::headOf<K>(m_row, regressors()));
      if (scaled) m_guard.foldScale(q, o.warmup, static_cast<Scalar>(o.scaleMemory), c2);
      return Status::ok;
    }
    // Step forgetting factor.
    Scalar lam = m_lambda;
    std::uint16_t held = 0;
    if (m_lambda < one && g.enabled) {
      if (g.variableForgetting && ready) {
        const Scalar n0 = one / (one - m_lambda);
        lam = one - (one - h / (one + h)) * q / (m_guard.scale2 * n0);
        const Scalar lo = static_cast<Scalar>(g.minForgetting);
        lam = lam < lo ? lo : (lam > one ? one : lam);
      }
      if (g.informationGate > 0.0 && known && h < static_cast<Scalar>(g.informationGate) * (one - m_lambda)) {
        lam = one;
        held = static_cast<std::uint16_t>(Flag::low_excitation);
        ++m_counters.heldForgetting;
      }
    }
    Scalar delta = 1;  // the held path folds a scaled row
    if (held != 0) {
      // Hold the slope information only: the means, W, F and the residual sum are forgotten as
      // usual (the level keeps tracking; every sample excites the intercept direction), while
      // the centered cross-products are folded without aging.
      m_centering.scaledRow(x, y, weight, m_lambda, m_fit.intercept, m_row);
      derived().ageResidual(m_lambda);
      m_step = one;
      derived().foldRow(x, y, weight, m_row, Scalar(1));  // a scaled row: weight 1
      m_step = m_lambda;
      m_centering.commit(x, y, weight, m_lambda, m_fit.intercept, m_row);
    } else {
      // Nothing has changed the state or d since priorInfo (the lock-out path, which relaxes
      // the state, returned above; Huber weight and step factor change delta, not d).
      m_priorOnRow = known;
      if (weight == w && lam == m_lambda)  // the common case: d and its step are already formed
        delta = foldStep(x, y, w, lam, step0);
      else
        delta = fold(x, y, weight, lam);  // m_row: the unscaled centered row, weight delta
      m_priorOnRow = false;
    }
    m_guard.foldSpread(lam, detail::headOf<detail::viewSize<K, XD>>(m_row, regressors()), delta);
    if (lam < one && g.enabled && g.spreadFloor > 0.0 && known && supportFloor(static_cast<Scalar>(g.spreadFloor)))
      held = static_cast<std::uint16_t>(held | static_cast<std::uint16_t>(Flag::windup_guarded));
    m_guard.lastFlags = held;
    if (g.regularization > 0.0 && lam < one) {
      // One pseudo-row a [e_i, theta0_i], a^2 = K (1 - lam) delta, cycling over the inputs: on
      // average (1 - lam) delta I is added to the information (and theta0 to its right side).
      typename Dims::Vector1& pseudo = m_work.v2aug;
      const Eigen::Index i = static_cast<Eigen::Index>(m_guard.cycle % static_cast<std::uint32_t>(regressors()));
      const Scalar a = std::sqrt(Scalar(regressors()) * (one - lam) * static_cast<Scalar>(g.regularization));
      pseudo.setZero();
      pseudo(i) = a;
      pseudo(regressors()) = a * m_guard.nominal(i);
      m_step = one;
      derived().foldRow(m_centering.xMean(), m_centering.yMean(), one, pseudo, Scalar(1));  // a scaled row: weight 1
      m_step = m_lambda;
      m_guard.cycle = (m_guard.cycle + 1) % static_cast<std::uint32_t>(regressors());
    }
    if (scaled) {
      if (g.enabled && g.changeThreshold > 0.0 && ready) {
        m_guard.cusum += q / m_guard.scale2 - one - static_cast<Scalar>(g.changeDrift);
        if (m_guard.cusum < Scalar(0)) m_guard.cusum = Scalar(0);
        if (m_guard.cusum > static_cast<Scalar>(g.changeThreshold)) {
          m_guard.cusum = Scalar(0);
          ++m_counters.changeAlarms;
          relaxState(static_cast<Scalar>(g.changeRelax));
        }
      }
      m_guard.foldScale(q, o.warmup, static_cast<Scalar>(o.scaleMemory), c2);
    }
    return Status::ok;
  }

 protected:
  /// A confidence level the t quantile accepts: strictly between 0 and 1 (false for NaN).
  static bool validLevel(Scalar level) { return level > Scalar(0) && level < Scalar(1); }

  /// Default block ingestion: one validated row at a time (zero weights skipped, they do not age
  /// the state). Estimators with a blocked path shadow this.
  template <typename XD, typename YD, typename WD>
  void foldRows(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, const WD* w) {
    for (Eigen::Index i = 0; i < X.rows(); ++i) {
      const Scalar wi = w != nullptr ? Scalar((*w)(i)) : Scalar(1);
      if (wi != Scalar(0)) fold(X.row(i).transpose(), Scalar(y(i)), wi, m_lambda);
    }
  }

  /// True if every entry of m is finite: one vectorized pass without early exit (x * 0 is 0 for
  /// finite x, NaN for NaN or Inf; Eigen's allFinite tests entry by entry).
  template <typename MD>
  static bool allFiniteFast(const Eigen::MatrixBase<MD>& m) {
    using S = typename MD::Scalar;
    return m.size() == 0 || zeroIfFinite(m) == S(0);
  }
  /// 0 if every entry of m is finite, NaN otherwise (sum of m * 0).
  template <typename MD>
  static typename MD::Scalar zeroIfFinite(const Eigen::MatrixBase<MD>& m) {
    return (m.derived().array() * typename MD::Scalar(0)).sum();
  }

  /// True if rows [from, to) of X, y (and w) are finite and no weight is negative: one
  /// vectorized pass (x * 0 is 0 for finite x, NaN otherwise).
  template <typename XD, typename YD, typename WD>
  static bool cleanRows(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, const WD* w, Eigen::Index from,
                        Eigen::Index to) {
    const Eigen::Index m = to - from;
    if (m <= 0) return true;
    return allFiniteFast(X.middleRows(from, m)) && allFiniteFast(y.segment(from, m)) &&
           (w == nullptr || (allFiniteFast(w->segment(from, m)) && !(w->segment(from, m).minCoeff() < 0)));
  }

  /// The Status of the first row in [from, to) (to < 0: to the end) that add() would reject
  /// (`ok` if none), checked row by row; X, y, w have the right sizes.
  template <typename XD, typename YD, typename WD>
  Status firstReject(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, const WD* w, Eigen::Index from,
                     Eigen::Index to = -1) const {
    if (to < 0) to = X.rows();
    for (Eigen::Index i = from; i < to; ++i) {
      const Scalar wi = w != nullptr ? Scalar((*w)(i)) : Scalar(1);
      const Status s = check(X.row(i).transpose(), Scalar(y(i)), wi);
      if (s != Status::ok) return s;
    }
    return Status::ok;
  }

 private:

  template <typename XD, typename YD, typename WD>
  Status addRowsImpl(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, const WD* w) {
    static_assert(std::is_same<typename XD::Scalar, Scalar>::value, "rowfold: X must have the estimator's Scalar");
    if (derived().status() != Status::ok) return derived().status();
    const Eigen::Index n = X.rows();
    if (X.cols() != regressors() || y.size() != n || (w != nullptr && w->size() != n)) return Status::wrong_size;
    // Every row is validated before anything is folded. One vectorized pass over everything
    // first (x * 0 is 0 for finite x, NaN otherwise); only when it finds a bad value does the
    // row-by-row pass run to report the first offending row's Status.
    if constexpr (detail::FusedRows<Derived>::value) {
      // One pass: the estimator validates each block in cache as it folds it into a call
      // accumulator, and merges that into its state only when every row was clean.
      if (!m_guarded && derived().room() >= static_cast<std::uint64_t>(n)) return derived().ingestRows(X, y, w);
    }
    if (!cleanRows(X, y, w, 0, n)) {
      const Status s = firstReject(X, y, w, 0);
      if (s != Status::ok) return s;
    }
    if (derived().room() < static_cast<std::uint64_t>(n)) return Status::capacity_full;
    if (!m_guarded) {
      derived().foldRows(X, y, w);  // blocked where the estimator has a blocked path
      return Status::ok;
    }
    for (Eigen::Index i = 0; i < n; ++i) {
      const Scalar wi = w != nullptr ? Scalar((*w)(i)) : Scalar(1);
      if (wi == Scalar(0)) continue;
      guardedFold(X.row(i).transpose(), Scalar(y(i)), wi);  // a gated row is skipped and counted
    }
    return Status::ok;
  }

  FitOptions m_fit;
  Eigen::Index m_k;
  Scalar m_lambda;
  Scalar m_step;
  Status m_status = Status::ok;
  bool m_guarded = false;
  bool m_priorOnRow = false;  // see priorOnRow(); false outside a guarded fold
  mutable Centering<Scalar, K, MaxK> m_centering;  // mutable: see deferredCentering
  GuardStateType m_guard;
  GuardCounters m_counters;
  mutable WorkspaceType m_work;
  Vector1 m_row;
  mutable SolutionType m_solution;
};

}  // namespace rowfold
