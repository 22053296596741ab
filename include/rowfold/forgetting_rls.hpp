/// @file
/// ForgettingRls: exponentially weighted recursive least squares in covariance (P) form.
#pragma once

#include <cmath>
#include <cstdint>
#include <limits>

#include "rowfold/detail/cholesky.hpp"
#include "rowfold/detail/givens.hpp"
#include "rowfold/detail/short_dot.hpp"
#include "rowfold/detail/target.hpp"
#include "rowfold/estimator_base.hpp"

namespace rowfold {

/// How ForgettingRls starts.
enum class RlsStart : std::uint8_t {
  /// Accumulate co-moments until they are positive definite, then P = M^-1, theta = M^-1 m:
  /// the recursion is then *exactly* least squares, with no prior bias (default).
  exact,
  /// P0 = I/delta, theta0 = 0 from the first sample (classic start; biases the fit toward 0
  /// with weight delta lambda^t, and the statistics include that prior).
  prior
};

/// Options of ForgettingRls.
struct ForgettingRlsOptions : FitOptions {
  /// How the recursion starts (default: exact).
  RlsStart start = RlsStart::exact;
  /// delta of P0 = I/delta for RlsStart::prior (in the units of the centered regressors); must
  /// be > 0 and finite with that start (else status() is `invalid_options`); unused otherwise.
  double priorPrecision = 1e-6;
};

/// Recursive least squares with forgetting factor lambda (Ljung & Söderström 1983; Åström &
/// Wittenmark 1995 §2.2, section number from memory; NUMERICS §1.2(a)). For each scaled centered row (phi, eta):
/// ```
///   g = P phi,  alpha = lambda + phi'g,  e = eta - phi'theta,
///   theta += g e / alpha,  P = (P - g g'/alpha) / lambda,  SSE = lambda SSE + lambda e^2/alpha.
/// ```
/// Up to kBothTrianglesUpTo regressors P is kept as a full matrix, and after each update the
/// lower triangle is copied over the upper (symmetry by construction, Verhaegen 1989); above,
/// only the lower triangle is updated (the cheaper choice there, bench/README.md "P-triangle
/// round"). A row enters unscaled with its weight delta (NUMERICS §4.1), so no square root is
/// taken.
/// Coefficients are current after every sample: solve() costs O(K).
///
/// **Start:** exact initialization by default (see RlsStart) — the first samples are
/// accumulated as normal equations and P is formed once they determine the fit, so the
/// recursion reproduces ordinary least squares exactly (in exact arithmetic) and the NIST
/// checks apply without prior bias. Until then solve() uses the normal-equation path.
///
/// **Stability:** P-form RLS is *not* backward stable: P is a difference of positive-definite
/// matrices and squares the condition number; in float32 with collinear, offset data P can
/// lose definiteness (NUMERICS §1.3). The estimator checks diag(P) > 0 and alpha > 0 on every
/// update and raises the sticky `lost_definiteness` flag. Prefer GivensQr for float32.
///
/// **Cost:** add ~ 2K^2 multiply-adds (before the start: ~K^2, plus one O(K^3) attempt to
/// start per sample once count + 1 >= p); solve O(K) (before the start O(K^3), by the
/// co-moments); summarize, conditioning, predictionInterval and crossProducts O(K^3) (they
/// factor P). State: K^2 (P, lower triangle used) + 2K scalars + centering.
///
/// **Status and flags:** those of EstimatorBase, plus `invalid_options` from status() for a
/// prior start with priorPrecision not > 0 and finite (add then returns `invalid_options` too).
/// `lost_definiteness` is sticky: once alpha <= 0 (or non-finite) or a diagonal entry of P
/// is <= 0, the flag stays on every result until reset(); a row that gives alpha <= 0 is not
/// applied to P and theta (the centering still counts it). The queries that factor P
/// (summarize, conditioning, predictionInterval, crossProducts) return `not_available` when P is
/// not positive definite to working precision; summarizeInto and conditioningInto then carry
/// `lost_definiteness` and `near_singular`. solve() does not factor P and still returns theta.
template <typename Scalar_, int K_, int MaxK_ = K_>
class ForgettingRls : public EstimatorBase<ForgettingRls<Scalar_, K_, MaxK_>, Scalar_, K_, MaxK_> {
  using Base = EstimatorBase<ForgettingRls<Scalar_, K_, MaxK_>, Scalar_, K_, MaxK_>;
  friend Base;
  template <typename, int>
  friend class MultiResponse;  // reads the shared state, writes a response's view

 public:
  using typename Base::Dims;  ///< see EstimatorBase
  using typename Base::Scalar;  ///< see EstimatorBase
  using typename Base::SolutionType;  ///< see EstimatorBase
  using typename Base::Vector;  ///< see EstimatorBase
  using typename Base::Matrix;  ///< see EstimatorBase
  using typename Base::Vector1;  ///< see EstimatorBase
  using typename Base::WorkspaceType;  ///< see EstimatorBase
  using Options = ForgettingRlsOptions;  ///< options type
  /// Error model of the conditioning analysis: a cross-product state (squares the condition).
  static constexpr detail::ErrorModel errorModel = detail::ErrorModel::online_gram;
  static constexpr EstimatorKind kind = EstimatorKind::forgetting_rls;  ///< snapshot image kind
  static constexpr bool guardable = true;  ///< the windup guard and outlier gate apply
  static constexpr bool positionalAges = false;  ///< ages live in the state: addDelayed/advance are exact
  static constexpr bool deferredCentering = false;  ///< folds at once (see EstimatorBase::syncCentering)
  /// Up to this many regressors both triangles of P are updated (then copied, so P is exactly
  /// symmetric); above it only the lower triangle is (see sweepP). Twice as many for float,
  /// whose SIMD packets hold twice the entries (measured, bench/README.md "P-triangle round").
  static constexpr Eigen::Index kBothTrianglesUpTo = sizeof(Scalar_) < sizeof(double) ? 32 : 16;
  static constexpr int sizedUpTo = 8;  ///< per-size copies of add for a runtime K up to 8 (EstimatorBase::addSized)
  static constexpr bool sizedGuarded = true;  ///< the copies include the guarded path (on by default for lambda < 1)

  /// Fixed K. status() reports invalid options.
  explicit ForgettingRls(const Options& options = Options()) : ForgettingRls(K_ == Eigen::Dynamic ? 0 : K_, options) {}
  /// Runtime K (any K > 0 for Eigen::Dynamic; must equal K otherwise, else status() is
  /// `wrong_size`). Allocates P, theta and the gain for Eigen::Dynamic K, nothing later.
  ForgettingRls(Eigen::Index k, const Options& options)
      : Base(k, options),  // first: regressors() below is the storage size (detail::storedSize)
        m_options(options),
        m_P(this->regressors(), this->regressors()),
        m_theta(this->regressors()),
        m_gain(this->regressors()),
        m_lambdaOption(static_cast<Scalar>(options.forgetting)),
        m_invLambda(Scalar(1) / m_lambdaOption) {
    if (this->status() == Status::ok && options.start == RlsStart::prior &&
        !(options.priorPrecision > 0.0 && std::isfinite(options.priorPrecision)))
      this->refuseOptions();  // status() is then invalid_options
    clearState();
  }

  /// True once P and theta are being updated recursively (after the exact start).
  bool recursive() const { return m_recursive; }
  /// P = (X~'X~)^-1, meaningful when recursive(). The lower triangle is always valid; the
  /// upper one too (P exactly symmetric) when regressors() <= kBothTrianglesUpTo, else it is
  /// stale: read P as `covarianceFactor().selfadjointView<Eigen::Lower>()`.
  const Matrix& covarianceFactor() const { return m_P; }
  /// Current slopes theta (meaningful when recursive(); before, the storage holds m = X~'y~).
  const Vector& theta() const { return m_theta; }

  /// Coefficients: theta and b0 = ybar - xbar'theta, O(K), once recursive(); before that (or
  /// with no sample) EstimatorBase::solveInto on the accumulated co-moments (O(K^3)).
  /// Returns `empty`, `not_available` (non-finite theta: `near_singular`) or `ok`; flags
  /// `lost_definiteness` (sticky), `too_few_samples`, and `rank_deficient` only before the start
  /// (the recursion always reports rank K). Not backward stable (class comment). Never allocates.
  Status solveInto(SolutionType& out) const {
    if (!m_recursive || this->count() == 0) return Base::solveInto(out);
    out.flags = Flags();
    if (m_lost) out.flags.set(Flag::lost_definiteness);
    out.coefficients = m_theta;
    out.rank = this->regressors();
    const auto& c = this->centering();
    out.intercept = this->interceptMode() == Intercept::fit ? c.yMean() - c.xMean().dot(m_theta) : Scalar(0);
    return this->finishChecked(out);
  }

 private:
  std::uint64_t room() const { return std::numeric_limits<std::uint64_t>::max(); }

  void clearState() {
    const Eigen::Index k = this->regressors();
    m_theta.setZero(k);
    m_sse = Scalar(0);
    m_lost = false;
    if (m_options.start == RlsStart::prior) {
      m_P.setIdentity(k, k);
      m_P /= static_cast<Scalar>(m_options.priorPrecision);
      m_recursive = true;
    } else {
      m_P.setZero(k, k);
      m_recursive = false;
    }
  }

  template <typename Self, typename V>
  static void visitOptions(Self& self, V& v) {
    v.field(self.m_options.start);
    v.field(self.m_options.priorPrecision);
  }
  template <typename Self, typename V>
  static void visitState(Self& self, V& v) {
    v.array(self.m_P.data(), static_cast<std::size_t>(self.m_P.size()));
    v.array(self.m_theta.data(), static_cast<std::size_t>(self.m_theta.size()));
    v.field(self.m_sse);
    v.field(self.m_recursive);
    v.field(self.m_lost);
  }

  template <typename XD>
  void foldRow(const Eigen::MatrixBase<XD>&, Scalar, Scalar, const Vector1& row, Scalar delta) {
    constexpr int KV = detail::viewSize<K_, XD>;  // K, or with a runtime K x's length (copies)
    const Eigen::Index k = this->regressors();
    const Scalar lambda = this->lambda();
    const auto phi = detail::headOf<KV>(row, k);
    const Scalar eta = row(k);
    if (!m_recursive) {
      // Exact start: accumulate M (in P's storage) and m (in theta's) until they determine the fit.
      if (lambda != Scalar(1)) {
        m_P.template triangularView<Eigen::Lower>() *= lambda;
        m_theta *= lambda;
      }
      for (Eigen::Index j = 0; j < k; ++j) {
        const Scalar a = delta * phi(j);
        for (Eigen::Index i = j; i < k; ++i) m_P(i, j) += a * phi(i);
      }
      m_theta += (delta * eta) * phi;
      tryStart(lambda * this->centering().yySum() + delta * eta * eta);
      return;
    }
    // The row enters with weight delta (phi and eta unscaled): with g = P phi,
    //   alpha = lambda + delta phi'g,  kappa = delta / alpha,  theta += kappa e g,
    //   P = (P - kappa g g') / lambda,  SSE = lambda (SSE + kappa e^2).
    // Up to kBothTrianglesUpTo regressors P is kept as a full symmetric matrix (both
    // triangles) so that every pass is a contiguous column sweep; sweepP keeps the two
    // triangles identical. Above, only the lower triangle (see sweepP).
    // On the guarded path priorInfo has just formed g = P d, d'g and e for this very row, P and
    // theta (the same expressions, so the same bits).
    const bool prior = this->priorOnRow();
    if (!prior) gainOf(phi, m_gain);
    const Scalar alpha = lambda + delta * (prior ? m_priorGain : rowDot(phi, m_gain));
    const Scalar e = prior ? m_priorError : eta - rowDot(phi, m_theta);
    if (!(alpha > Scalar(0)) || !std::isfinite(alpha)) {
      m_lost = true;
      return;
    }
    const Scalar kappa = delta / alpha;
    detail::sizedAs<KV>(m_theta) += (kappa * e) * detail::sizedAs<KV>(m_gain);
    bool positive;
    if (lambda == Scalar(1)) {
      positive = sweepP<false, KV>(Scalar(1), kappa);
    } else {
      // 1/lambda: precomputed for the configured factor; a guard's step factor divides here.
      const Scalar il = lambda == m_lambdaOption ? m_invLambda : Scalar(1) / lambda;
      positive = sweepP<true, KV>(il, kappa * il);
    }
    m_sse = lambda * (m_sse + kappa * e * e);
    if (!positive) m_lost = true;
  }

  /// Whether only P's lower triangle is kept (regressors() > kBothTrianglesUpTo). KV: the
  /// length of the loops, K or, with a runtime K, x's (a fixed-size block from add's copies).
  template <int KV = K_>
  bool lowerOnly() const {
    if constexpr (KV != Eigen::Dynamic)
      return KV > kBothTrianglesUpTo;
    else
      return this->regressors() > kBothTrianglesUpTo;
  }

  /// P = P il - (g g') s (Aged; else P - (g g') s), column by column, each entry formed as
  /// (g_i g_j) s. Instructions per sample measured by K (bench/README.md, "P-triangle round"):
  /// - up to kBothTrianglesUpTo: every entry, then the lower triangle is copied over the upper
  ///   (exact symmetry, see below). Fixed K: Eigen packet code with a known trip count (GCC
  ///   unrolls a plain loop of small known count into scalar code before its vectorizer sees
  ///   it: about 30 % more instructions at K = 8..32); dynamic K: a plain loop, which the
  ///   vectorizer handles without Eigen's alignment peeling on every column. Updating only the
  ///   lower triangle costs up to 1.7x more instructions here (short runtime-length columns);
  /// - above: only the lower triangle (half the arithmetic, no copy, nothing to keep symmetric).
  /// Returns whether every diagonal entry of the new P is > 0.
  template <bool Aged, int KV>
  bool sweepP(Scalar il, Scalar s) {
    const Eigen::Index k = KV != Eigen::Dynamic ? Eigen::Index(KV) : this->regressors();
    Scalar* const P = m_P.data();
    const Scalar* __restrict g = m_gain.data();
    if (lowerOnly<KV>()) {
      bool positive = true;
      for (Eigen::Index j = 0; j < k; ++j) {
        Scalar* __restrict pj = P + j * k;
        const Scalar gj = g[j];
        for (Eigen::Index i = j; i < k; ++i) sweepEntry<Aged>(pj[i], g[i] * gj, il, s);
        positive &= pj[j] > Scalar(0);
      }
      return positive;
    }
    if constexpr (K_ != Eigen::Dynamic) {
      for (Eigen::Index j = 0; j < k; ++j) {
        if constexpr (Aged)
          m_P.col(j) = m_P.col(j) * il - (m_gain * m_gain(j)) * s;
        else
          m_P.col(j) -= (m_gain * m_gain(j)) * s;
      }
    } else {
      for (Eigen::Index j = 0; j < k; ++j) {
        Scalar* __restrict pj = P + j * k;
        const Scalar gj = g[j];
        if constexpr (kKeepLoop<KV>) {
          ROWFOLD_KEEP_LOOP for (Eigen::Index i = 0; i < KV; ++i) sweepEntry<Aged>(pj[i], g[i] * gj, il, s);
        } else {
          for (Eigen::Index i = 0; i < k; ++i) sweepEntry<Aged>(pj[i], g[i] * gj, il, s);
        }
      }
    }
    // Vector code and its scalar remainder (or two unrolled copies) may contract a multiply-add
    // into an FMA in one entry and not, or around the other multiply, in its mirror (seen on
    // aarch64, fixed and dynamic K): P loses exact symmetry, and the antisymmetric part then
    // grows like lambda^-n (Verhaegen 1989) until the fit breaks down. Copying the lower
    // triangle over the upper keeps P symmetric whatever the compiler fuses.
    mirrorLower<KV>();
    return (detail::sizedAs<KV>(m_P.diagonal()).array() > Scalar(0)).all();
  }

  /// Loops of compile-time length KV > 2 (add's per-size copies for a runtime K) are kept as
  /// loops (ROWFOLD_KEEP_LOOP). At 2 g++'s scalar unrolling is the faster code (runtime K = 2,
  /// float: 16.2-16.4 ns per sample unrolled, 20.3-21.3 kept); at 4 the loop (double 32 against
  /// 39 unrolled; timing program, native, guard off).
  template <int KV>
  static constexpr bool kKeepLoop = KV != Eigen::Dynamic && KV > 2;

  /// One entry of the sweep: p il - gg s (Aged), else p - gg s; gg = g_i g_j.
  template <bool Aged>
  static EIGEN_ALWAYS_INLINE void sweepEntry(Scalar& p, Scalar gg, Scalar il, Scalar s) {
    if constexpr (Aged)
      p = p * il - gg * s;
    else
      p -= gg * s;
  }

  /// Copies P's lower triangle over the upper one. Four entries of a row of the lower triangle
  /// are loaded, then stored as a column segment. (The loop before moved one entry a pass, a
  /// load, a store and three loop instructions each, and the update took 14 % longer at runtime
  /// K = 16, float, twice as long at fixed K = 32, float; bench/README.md, "Runtime-K gain
  /// round".)
  template <int KV = K_>
  void mirrorLower() {
    const Eigen::Index k = KV != Eigen::Dynamic ? Eigen::Index(KV) : this->regressors();
    Scalar* const P = m_P.data();
    for (Eigen::Index j = 1; j < k; ++j) {
      Scalar* __restrict upper = P + j * k;    // P(0..j-1, j)
      const Scalar* __restrict lower = P + j;  // P(j, i) = lower[i k]
      Eigen::Index i = 0;
      for (; i + 4 <= j; i += 4) {
        const Scalar a0 = lower[i * k], a1 = lower[(i + 1) * k], a2 = lower[(i + 2) * k], a3 = lower[(i + 3) * k];
        upper[i] = a0;
        upper[i + 1] = a1;
        upper[i + 2] = a2;
        upper[i + 3] = a3;
      }
      for (; i < j; ++i) upper[i] = lower[i * k];
    }
  }

  /// g = P phi. Both triangles kept, fixed K: one dot product per entry (P's columns are its
  /// rows), each g_i summed in a register, with no store-to-load chain through g between
  /// columns; runtime K: the sum of phi_j times the columns, four columns a pass (below). Lower
  /// triangle only: per column j, g_j gets the dot product of the column's lower part with
  /// phi's tail, and the entries below j get phi_j times the column below the diagonal.
  template <typename VD, typename GD>
  void gainOf(const VD& phi, GD& g) const {
    constexpr int KV = VD::SizeAtCompileTime;  // K, or with a runtime K x's length (copies)
    const Eigen::Index k = KV != Eigen::Dynamic ? Eigen::Index(KV) : this->regressors();
    if (lowerOnly<KV>()) {
      for (Eigen::Index j = 0; j < k; ++j) g(j) = Scalar(0);
      for (Eigen::Index j = 0; j < k; ++j) {
        const Eigen::Index below = k - 1 - j;
        g(j) += m_P.col(j).tail(below + 1).dot(phi.tail(below + 1));
        g.tail(below) += phi(j) * m_P.col(j).tail(below);
      }
      return;
    }
    if constexpr (K_ == Eigen::Dynamic) {
      // g = sum_j phi_j P(:,j), four columns a pass: plain loops over i, which the vectorizer
      // handles at any runtime k. (Eigen's dot on a runtime length shorter than one packet runs
      // scalar: float k = 8 with 16-float packets; the dot form took 30 % of the update there.)
      const Scalar* const P = m_P.data();
      const Scalar* __restrict f = phi.data();
      Scalar* __restrict gi = g.data();
      const Eigen::Index whole = k - k % 4;  // (j + 4 <= k as the bound: g++ 12 misjudged the
      Eigen::Index j = 0;                      // tail loop's trip count at a compile-time k = 8)
      for (Eigen::Index i = 0; i < k; ++i) gi[i] = Scalar(0);
      for (; j < whole; j += 4) {
        const Scalar* __restrict p0 = P + j * k;
        const Scalar* __restrict p1 = p0 + k;
        const Scalar* __restrict p2 = p1 + k;
        const Scalar* __restrict p3 = p2 + k;
        const Scalar f0 = f[j], f1 = f[j + 1], f2 = f[j + 2], f3 = f[j + 3];
        if constexpr (kKeepLoop<KV>) {
          ROWFOLD_KEEP_LOOP for (Eigen::Index i = 0; i < KV; ++i) gi[i] += (f0 * p0[i] + f1 * p1[i]) + (f2 * p2[i] + f3 * p3[i]);
        } else {
          for (Eigen::Index i = 0; i < k; ++i) gi[i] += (f0 * p0[i] + f1 * p1[i]) + (f2 * p2[i] + f3 * p3[i]);
        }
      }
      for (; j < k; ++j) {
        const Scalar* __restrict pj = P + j * k;
        const Scalar fj = f[j];
        if constexpr (kKeepLoop<KV>) {
          ROWFOLD_KEEP_LOOP for (Eigen::Index i = 0; i < KV; ++i) gi[i] += fj * pj[i];
        } else {
          for (Eigen::Index i = 0; i < k; ++i) gi[i] += fj * pj[i];
        }
      }
      return;
    }
    for (Eigen::Index i = 0; i < g.size(); ++i) g(i) = m_P.col(i).dot(phi);
  }

  /// a'b of two K-vectors with unit stride: Eigen's dot for a fixed K, interleaved partial sums
  /// for a runtime K of 4 or more (detail::interleavedDot; Eigen's dot runs scalar there when K
  /// is shorter than one packet; below 4 Eigen's scalar loop measured faster). MultiResponse's
  /// extra responses use it too: their alpha is the lead's, bit for bit.
  template <typename A, typename B>
  static Scalar rowDot(const A& a, const B& b) {
    if constexpr (K_ == Eigen::Dynamic)
      return a.size() < 4 ? a.dot(b) : detail::interleavedDot<8>(a.data(), b.data(), a.size());
    else
      return a.dot(b);
  }

  void ageState(Scalar f) {
    if (m_recursive) {
      m_P /= f;  // both triangles (the upper one is stale where only the lower is kept)
      m_sse *= f;
    } else {
      m_P.template triangularView<Eigen::Lower>() *= f;
      m_theta *= f;
    }
  }

  /// Forgets the residual sum only (P and theta kept).
  void ageResidual(Scalar f) { m_sse *= f; }

  template <typename VD>
  bool currentSlopes(VD& b) const {
    if (!m_recursive) return false;
    b = m_theta;
    return true;
  }

  /// h = phi'P phi and e = eta - phi'theta (O(K^2)); unknown before the exact start. Leaves
  /// g = P phi, h and e in scratch members, which the fold that follows reuses (priorOnRow).
  template <int KV = K_>  // K, or with a runtime K the length of add's per-size copy
  bool priorInfo(const Vector1& row, Scalar& h, Scalar& e) const {
    if (!m_recursive) return false;
    const Eigen::Index k = this->regressors();
    const auto phi = detail::headOf<KV>(row, k);
    gainOf(phi, m_gain);
    h = m_priorGain = rowDot(phi, m_gain);
    e = m_priorError = row(k) - rowDot(phi, m_theta);
    return true;
  }

  /// Merging works on the augmented factors [R z; 0 rho] of both states (R'R = P^-1 after
  /// the start, the Cholesky factor of the co-moments before it); they are formed here, into
  /// the two workspaces, so that a state whose P lost definiteness is refused before anything
  /// changes. A prior start cannot merge: each state carries its own prior.
  Status canMerge(const ForgettingRls& other) const {
    if (m_options.start != other.m_options.start || m_options.priorPrecision != other.m_options.priorPrecision)
      return Status::state_mismatch;
    if (m_options.start == RlsStart::prior) return Status::not_available;
    if (!augmentedFactor() || !other.augmentedFactor()) return Status::not_available;
    return Status::ok;
  }

  /// Stacked-factor QR of the two augmented factors and the centering correction row
  /// (detail::mergeFactorInto), then P = R^-1 R^-T and theta = R^-1 z once R has full rank.
  /// Working on factors, not on co-moments, keeps the merge itself from squaring the
  /// condition number a second time.
  void mergeState(const ForgettingRls& other, Scalar age, const Vector1& correction) {
    const Eigen::Index k = this->regressors();
    WorkspaceType& ws = this->work();
    if (age != Scalar(1)) ws.aug *= std::sqrt(age);
    ws.v1aug = correction;
    detail::mergeFactorInto(ws.aug, other.work().aug, ws.v1aug, ws.v2aug);
    m_lost = m_lost || other.m_lost;
    ws.scratch = ws.aug.topLeftCorner(k, k);
    ws.v1 = ws.aug.col(k).head(k);
    const Eigen::Index p = k + (this->interceptMode() == Intercept::fit ? 1 : 0);
    if (this->count() + other.count() >= static_cast<std::uint64_t>(p) && !detail::hasDependentColumn(ws.scratch)) {
      startFrom(ws.aug(k, k) * ws.aug(k, k));
      return;
    }
    // Not yet determined: keep co-moments M = R'R, m = R'z (plain loops: no heap).
    m_recursive = false;
    for (Eigen::Index j = 0; j < k; ++j) {
      for (Eigen::Index i = j; i < k; ++i) m_P(i, j) = ws.scratch.col(i).head(j + 1).dot(ws.scratch.col(j).head(j + 1));
      m_theta(j) = ws.scratch.col(j).head(j + 1).dot(ws.v1.head(j + 1));
    }
  }

  /// [R z; 0 rho] of this state into its workspace's `aug` (false if P is no longer definite).
  bool augmentedFactor() const {
    const Eigen::Index k = this->regressors();
    WorkspaceType& ws = this->work();
    if (!factorize(ws)) return false;
    ws.aug.setZero();
    ws.aug.topLeftCorner(k, k) = ws.R.template triangularView<Eigen::Upper>();
    ws.aug.col(k).head(k) = ws.z;
    ws.aug(k, k) = ws.rho;
    return ws.aug.allFinite();
  }

  /// Starts the recursion from an upper-triangular factor R (in ws.scratch, R'R = M) and
  /// z = R^-T m (in ws.v1): theta = R^-1 z, P = R^-1 R^-T, and the given SSE.
  void startFrom(Scalar sse) {
    const Eigen::Index k = this->regressors();
    WorkspaceType& ws = this->work();
    ws.v2 = ws.v1;
    detail::backSubstitute(ws.scratch, ws.v2, k);
    detail::invertUpper(ws.scratch, ws.Rinv);
    m_theta = ws.v2;
    m_P.noalias() = ws.Rinv.lazyProduct(ws.Rinv.transpose());  // Rinv is upper triangular, zeros below
    mirrorLower();  // exactly symmetric (both triangles are updated)
    m_sse = sse;
    m_recursive = true;
  }

  /// Forms P = M^-1 and theta once the accumulated co-moments have full numerical rank.
  void tryStart(Scalar syyWithRow) {
    const Eigen::Index k = this->regressors();
    const Eigen::Index p = k + (this->interceptMode() == Intercept::fit ? 1 : 0);
    if (this->count() + 1 < static_cast<std::uint64_t>(p)) return;
    WorkspaceType& ws = this->work();
    const Scalar tol = Scalar(4) * Scalar(k + 1) * std::numeric_limits<Scalar>::epsilon();
    const Eigen::Index zeroed = detail::semidefiniteCholesky(m_P, ws.scratch, tol, false);
    if (zeroed != 0 || detail::hasDependentColumn(ws.scratch)) return;
    ws.v1 = m_theta;
    detail::forwardSubstituteTransposed(ws.scratch, ws.v1);  // z = R^-T m
    const Scalar sse = syyWithRow - ws.v1.squaredNorm();   // SSE = Syy - m'M^-1 m
    startFrom(sse > Scalar(0) ? sse : Scalar(0));
  }

  bool factorize(WorkspaceType& ws) const {
    const Eigen::Index k = this->regressors();
    ws.flags = Flags();
    this->fillCenteringFacts(ws);
    if (!m_recursive) {
      // Normal-equation path on the accumulated co-moments.
      ws.aug2.setZero();
      ws.aug2.topLeftCorner(k, k) = m_P.template triangularView<Eigen::Lower>();
      ws.aug2.row(k).head(k) = m_theta.transpose();
      ws.aug2(k, k) = ws.sst;
      const Scalar tol = Scalar(4) * Scalar(k + 1) * std::numeric_limits<Scalar>::epsilon();
      detail::semidefiniteCholesky(ws.aug2, ws.aug, tol, true);
      ws.R = ws.aug.topLeftCorner(k, k);
      ws.z = ws.aug.col(k).head(k);
      ws.rho = ws.aug(k, k);
      ws.rank = detail::solveUpperWithRank(ws.R, ws.z, ws.b, ws.scratch, ws.scale, ws.pivoted);
      this->recoverIntercept(ws);
      return true;
    }
    if (m_lost) ws.flags.set(Flag::lost_definiteness);
    // P = U U' with U upper triangular (Cholesky of the order-reversed P); R = U^-1 then
    // satisfies R'R = P^-1 = X~'X~ (diagnostics only; the coefficients are theta).
    ws.scratch = m_P.template selfadjointView<Eigen::Lower>();
    ws.Rinv = ws.scratch.reverse();
    const Scalar tol = Scalar(4) * Scalar(k + 1) * std::numeric_limits<Scalar>::epsilon();
    const Eigen::Index zeroed = detail::semidefiniteCholesky(ws.Rinv, ws.scratch, tol, false);
    if (zeroed != 0 || !ws.scratch.allFinite()) {
      ws.flags.set(Flag::lost_definiteness);
      ws.flags.set(Flag::near_singular);
      return false;
    }
    ws.Rinv = ws.scratch.reverse().transpose();  // U
    detail::invertUpper(ws.Rinv, ws.R);
    ws.b = m_theta;
    ws.z.noalias() = ws.R.lazyProduct(ws.b);  // R is upper triangular, zeros below
    ws.rho = std::sqrt(m_sse > Scalar(0) ? m_sse : Scalar(0));
    ws.rank = k;
    this->recoverIntercept(ws);
    return true;
  }

  Options m_options;
  Matrix m_P;
  Vector m_theta;
  mutable Vector m_gain;  // g = P phi of the last row folded or gated (scratch, not state)
  mutable Scalar m_priorGain = 0;   // phi'g of the last row gated (scratch, not state)
  mutable Scalar m_priorError = 0;  // eta - phi'theta of the last row gated (scratch, not state)
  Scalar m_lambdaOption;  // lambda of the options
  Scalar m_invLambda;     // 1/lambda
  Scalar m_sse = 0;
  bool m_recursive = false;
  bool m_lost = false;
};

}  // namespace rowfold
