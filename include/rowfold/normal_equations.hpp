/// @file
/// NormalEquations: centered co-moment accumulation, Cholesky at solve time.
#pragma once

#include <limits>
#include <type_traits>
#include <utility>

#include "rowfold/detail/cholesky.hpp"
#include "rowfold/detail/gram_block.hpp"
#include "rowfold/detail/lone_load.hpp"
#include "rowfold/detail/target.hpp"
#include "rowfold/estimator_base.hpp"

namespace rowfold {

/// Options of NormalEquations (see FitOptions; nothing of its own).
struct NormalEquationsOptions : FitOptions {};

/// Least squares from the centered weighted co-moments G = [M m; m' Syy] = [X~ y~]'[X~ y~],
/// accumulated by symmetric rank-one updates G <- lambda G + delta [d; e][d; e]' (Welford
/// 1962 / West 1979 in matrix form; NUMERICS §4.1). At solve time the Cholesky factor of the
/// augmented G gives [R z; 0 rho] directly (R'R = M, R b = z, rho^2 = SSE); never an inverse.
///
/// **Blocked ingestion (addRows):** rows are gathered in blocks of 16..256 (about 2048 scalars,
/// detail::GramBlock); per block the weighted block means (rows weighted by w lambda^age within
/// the block) and the block's centered co-moments (a register-blocked product of the centered
/// block with itself) are formed, and the block is combined with the running co-moments by the
/// pairwise update of Chan, Golub & LeVeque (1983, Am. Stat. 37(3):242-247; NUMERICS §4.1, §5)
/// under forgetting: G <- lambda^b G + G_B + (W_A W_B / W) (m_B - m_A)(m_B - m_A)',
/// W_A = lambda^b W. Unguarded addRows reads the rows once: each block is validated in cache
/// and folded into a *call accumulator* (co-moments and centering of this call's rows only);
/// the accumulator is merged into the state by the same update at the end, or dropped (state
/// untouched) at the first bad block, whose rows are then checked one by one for the Status.
/// Equal to row-by-row folding in exact arithmetic (tests/test_properties.cpp checks it to rounding).
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
/// Scratch: a block of rows, about 2048 scalars (detail::GramBlock), and the call accumulator,
/// (K+1)^2 + 2K scalars (allocated at construction for Eigen::Dynamic).
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
  /// foldRow reads no centering, so add() commits the centering step first where its loops
  /// have a compile-time length (EstimatorBase::foldStep).
  static constexpr bool centeringFirst = true;
  static constexpr bool fusedRows = true;  ///< addRows validates and folds in one pass (ingestRows)
  /// With a runtime K up to 16, the unguarded add() runs a copy of its path compiled for that
  /// K (EstimatorBase::addSized). 16, not 8 as for the others: from K = 9 to 16 the copy takes
  /// 0.5-0.75 of the time of the runtime-length loops (timing program, native, double K = 12 / 16:
  /// 52 / 58 -> 32 / 44 ns per sample, float 44 / 50 -> 22 / 33), for 11 KB of text and 2.6 s of
  /// g++ -O3 per Scalar type. Up to 32 it would gain as much again at K = 32 (double 147 -> 85)
  /// for 92 KB and 12 s: not taken.
  static constexpr int sizedUpTo = 16;

  /// Fixed K. status() reports invalid options; see EstimatorBase::status().
  explicit NormalEquations(const Options& options = Options())
      : NormalEquations(K_ == Eigen::Dynamic ? 0 : K_, options) {}
  /// Runtime K (any K > 0 for Eigen::Dynamic; must equal K otherwise, else status() is
  /// `wrong_size`). Allocates the co-moment matrix for Eigen::Dynamic K, nothing later.
  NormalEquations(Eigen::Index k, const Options& options)
      : Base(k, options),  // first: regressors() below is the storage size (detail::storedSize)
        m_gram(this->regressors() + 1, this->regressors() + 1),
        m_call(this->regressors() + 1, this->regressors() + 1),
        m_callCentering(this->regressors()),
        m_block(this->regressors()),
        m_u(this->regressors() + 1),
        m_diff(this->regressors() + 1) {
    m_gram.setZero();
    m_call.setZero();
    m_u.setZero();
    m_diff.setZero();
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

  // Fixed K <= 4: always inlined into add(). There the call costs as much as the update (the
  // state's vector registers spilled around it): native bench, double, K = 4 11.5-11.9 ->
  // 7.7-8.3 ns per sample (bench/README, store-order round), where g++ had declined to inline
  // it in a large translation unit. A fixed K above 4: kept out of line. Inline it measured
  // 10-15 % slower at K = 8, and g++ did inline it into the update bench's loop after an
  // unrelated change (double K = 8 / 32: 16.2-17.0 / 69-70 -> 19.0-19.1 / 80-81 ns per
  // sample). A runtime K is left to the compiler. Neither on Cortex-M: no vector registers to
  // spill there, and each inlined copy is code (M4F, K = 4: +456 B of text). KV: the length of
  // the loops, K or, with a runtime K, that of x (a fixed-size block from add's per-size copies).
  static constexpr int kSmallK = 4;  // up to this K: the fold inlined
  static constexpr int kScalarFoldUpTo = sizeof(Scalar_) < sizeof(double) ? 15 : 16;  // see foldCentered
  template <int KV>
  static constexpr bool kInlineFold = KV != Eigen::Dynamic && KV <= kSmallK && !detail::kMicrocontroller;
  template <int KV>
  static constexpr bool kApartFold = K_ != Eigen::Dynamic && KV > kSmallK && !detail::kMicrocontroller;
  template <typename XD, int KV = detail::viewSize<K_, XD>, std::enable_if_t<kInlineFold<KV>, int> = 0>
  EIGEN_ALWAYS_INLINE void foldRow(const Eigen::MatrixBase<XD>&, Scalar, Scalar, const Vector1& d, Scalar delta) {
    foldCentered<KV>(d, delta);
  }
  template <typename XD, int KV = detail::viewSize<K_, XD>, std::enable_if_t<kApartFold<KV>, int> = 0>
  EIGEN_DONT_INLINE void foldRow(const Eigen::MatrixBase<XD>&, Scalar, Scalar, const Vector1& d, Scalar delta) {
    foldCentered<KV>(d, delta);
  }
  template <typename XD, int KV = detail::viewSize<K_, XD>, std::enable_if_t<!kInlineFold<KV> && !kApartFold<KV>, int> = 0>
  void foldRow(const Eigen::MatrixBase<XD>&, Scalar, Scalar, const Vector1& d, Scalar delta) {
    foldCentered<KV>(d, delta);
  }

  /// G <- lambda G + delta d d' (lower triangle), loops of length KV + 1.
  template <int KV>
  EIGEN_ALWAYS_INLINE void foldCentered(const Vector1& d, Scalar delta) {
    // u = sqrt(delta) d, G += u u': the rounding of the symmetric square-root form, which keeps
    // about a digit more than delta d_i d_j on exact-fit data (NIST Wampler1: 7.8 vs 6.5).
    // A runtime K's copies up to kScalarFoldUpTo, and a fixed K = 3: u in scalars, never in
    // memory (rank1Scalars). In a copy the member m_u lives on the heap: the fold stored u
    // there in pieces and read it back in windows u[j..] that span two of them, which store
    // forwarding cannot serve (perf annotate, runtime K = 8, float: 40 % of the copy's
    // samples on the first such load). With a fixed K = 3, d's first three entries (one
    // vector and a scalar) and its last were stored apart and read back as one vector of four.
    // Timing program, native, ns per sample: fixed K = 3, double 11.4-11.6 -> 7.0-7.2, float
    // 10.3-10.6 -> 6.9; runtime K = 6 / 8 / 10 / 12 / 15, float 15.2-15.7 / 16.7-17.3 /
    // 22.0-23.1 / 23.0-23.2 / 45.2-45.7 -> 11.9-12.1 / 14.6-14.8 / 19.6-19.9 / 19.6-19.8 /
    // 28.5-29.0, double 16.0-16.2 / 20.6-21.3 / 24.4-24.6 / 31.5-31.8 / 44.3-45.0 -> 13.3-14.2
    // / 19.5-20.8 / 19.1-19.6 / 22.4-22.5 / 29.9-30.8; K = 16 double 43.1-43.5 -> 38.0-38.5,
    // float 31.5-31.6 -> 38.4-38.7 (its windows line up with the vectors: not for float).
    if constexpr (KV != Eigen::Dynamic && (K_ == Eigen::Dynamic ? KV <= kScalarFoldUpTo : KV == 3)) {
      if (this->lambda() == Scalar(1)) {
        rank1Scalars<detail::plusOne(KV)>(d.data(), std::sqrt(delta), std::make_integer_sequence<int, detail::plusOne(KV)>{});
        return;
      }
      // In a runtime K's copy, forgetting's runtime-length loops (below) out of line: inline,
      // their vector registers gave the whole copy a realigned stack frame, pushed and popped
      // on every sample (timing program, native, runtime K = 2 / 3 / 4, lambda = 1, float
      // 9.1 / 10.4 / 10.1 -> 8.6-8.8 / 9.8 / 9.5 ns per sample, double K = 2 9.2-9.3 ->
      // 8.0-8.3, K = 4 unchanged). Forgetting pays a call (lambda = 0.999, guard off: about
      // +1 ns of 12-18); with the guard on, the default under forgetting, add() takes the
      // runtime-length path and does not reach this copy.
      if constexpr (K_ == Eigen::Dynamic) {
        foldForgettingApart<KV>(d, delta);
        return;
      }
    }
    foldGeneral<KV>(d, delta);
  }
  template <int KV>
  EIGEN_DONT_INLINE void foldForgettingApart(const Vector1& d, Scalar delta) {
    foldGeneral<KV>(d, delta);
  }
  /// foldCentered without the scalar form.
  template <int KV>
  EIGEN_ALWAYS_INLINE void foldGeneral(const Vector1& d, Scalar delta) {
    constexpr int N = detail::plusOne(KV);
    const Scalar lambda = this->lambda();
    const Eigen::Index n = m_gram.cols();
    detail::sizedAs<N>(m_u) = std::sqrt(delta) * detail::sizedAs<N>(d);
    if constexpr (N != Eigen::Dynamic) {
      if (lambda == Scalar(1)) {
        rank1Unrolled<N>(m_u.data(), std::make_integer_sequence<int, N>{});
        return;
      }
    }
    // Lower triangle, column by column (contiguous) from the diagonal down; forgetting fused
    // into the same pass. Few loop variables on purpose: with a column index and a row index
    // g++ kept two of them on the stack and reloaded them once per column, and the time per
    // sample moved with the caller (timing program, runtime K = 32, double, add out of line:
    // 163-168 ns, 143-151 in this form; probably the reloads waiting on the column's stores
    // at addresses equal modulo 4 KiB, not confirmed: no hardware counters here).
    Scalar* __restrict gd = m_gram.data();  // the diagonal entry of column j
    const Scalar* __restrict vd = m_u.data();  // v + j
    const Eigen::Index step = n + 1;
    if (lambda == Scalar(1)) {
      for (Eigen::Index len = n; len > 0; --len, gd += step, ++vd) {
        const Scalar a = vd[0];
        for (Eigen::Index i = 0; i < len; ++i) gd[i] += a * vd[i];
      }
    } else {
      for (Eigen::Index len = n; len > 0; --len, gd += step, ++vd) {
        const Scalar a = vd[0];
        for (Eigen::Index i = 0; i < len; ++i) gd[i] = lambda * gd[i] + a * vd[i];
      }
    }
  }

  // Loops of compile-time length N (fixed K, or a runtime K through add's per-size copies),
  // lambda = 1: the same update, each column a loop of compile-time length and the
  // sequence of columns unrolled, so that no column pays a runtime loop's prologue and epilogue
  // (native bench, double: K = 8 33 -> 22 ns/sample, K = 16 57 -> 40, K = 32 132 -> 80;
  // bench/README, rank-1 round). Plain loops, not Eigen blocks: fixed-size blocks of every
  // length cost +8 s of compile time per instantiation at K = 32, these nothing measurable.
  // Not with forgetting: lambda g + a v has two products, and a compiler that fuses
  // multiply-adds may fuse either one. Unrolled, the guarded and the plain path stopped folding
  // the same bits under g++ on aarch64 (tests/test_tracking.cpp, "an inert guard"); the runtime
  // loops above keep one choice. g + a v has one fused form only. The column is written again
  // here rather than shared with the runtime loops: a helper with runtime index arguments
  // (constants once inlined) measured 5-15 % slower at fixed K = 16 and 32.
  template <int N, int... J>
  EIGEN_ALWAYS_INLINE void rank1Unrolled(const Scalar* __restrict v, std::integer_sequence<int, J...>) {
    Scalar* const g = m_gram.data();
    (rank1Column<N, J>(g, v), ...);
  }
  template <int N, int J>
  static EIGEN_ALWAYS_INLINE void rank1Column(Scalar* g, const Scalar* __restrict v) {
    Scalar* __restrict gj = g + J * N;
    const Scalar a = v[J];
    for (int i = J; i < N; ++i) gj[i] += a * v[i];
  }

  // The same update with u = r d in scalars, for a runtime K's copies up to kScalarFoldUpTo
  // and a fixed K = 3 (foldCentered): each d_i read with a load of its own, every product written
  // out, no loop and no pointer to u. d was stored in two parts (its first N - 1 entries,
  // then the last), and g++ read it, or a local u it had stored entry by entry, with wider
  // loads that those stores could not forward to (perf annotate, runtime K = 2, float: a
  // quarter of the copy's samples on one such load). Same operations as rank1Unrolled on
  // m_u, so the same bits (tests/test_tracking.cpp).
  template <int N, int... I>
  EIGEN_ALWAYS_INLINE void rank1Scalars(const Scalar* d, Scalar r, std::integer_sequence<int, I...>) {
    const Scalar u[N] = {(r * detail::loadAlone(d[I]))...};
    Scalar* const g = m_gram.data();
    (rank1ColumnScalars<N, I>(g, u, std::make_integer_sequence<int, N - I>{}), ...);
  }
  template <int N, int J, int... T>
  static EIGEN_ALWAYS_INLINE void rank1ColumnScalars(Scalar* g, const Scalar (&u)[N], std::integer_sequence<int, T...>) {
    ((g[J * N + J + T] += u[J] * u[J + T]), ...);
  }

  /// One-pass addRows (sizes checked, guards off; see the class comment): the Status of the
  /// first bad row with the state untouched, else `ok` with every row folded.
  template <typename XD, typename YD, typename WD>
  Status ingestRows(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, const WD* w) {
    const Intercept mode = this->interceptMode();
    const Scalar lambda = this->lambda();
    m_call.template triangularView<Eigen::Lower>().setZero();
    m_callCentering.reset();
    Scalar age = Scalar(1);
    for (Eigen::Index i = 0, i0 = 0; i < X.rows(); i0 = i) {
      const Eigen::Index nb = m_block.gather(X, y, w, i);
      detail::PrefetchStream ahead;  // the next block, asked for while this one is folded
      if (w == nullptr) ahead = m_block.prefetch(X, y, i);
      // The block is folded into the accumulator first and checked afterwards: with unit
      // weights a NaN or Inf shows in the block's co-moment diagonal (no second look at the
      // rows); with weights the raw rows are checked (zero-weight rows are not gathered but
      // add() checks them too). On a hit, the row-by-row check from the block's first row gives
      // the Status (squares that merely overflow find no bad row: folded, as row by row).
      if (nb > 0)
        age *= m_block.fold(nb, w != nullptr, lambda, mode, m_callCentering, m_call,
                            m_block.template rowForm<XD>(), ahead);
      if (w == nullptr ? !m_block.finite() : !Base::cleanRows(X, y, w, i0, i)) {
        const Status s = this->firstReject(X, y, w, i0, i);  // this block only: later ones are checked in turn
        if (s != Status::ok) {
          clearScratch();  // a refused call leaves no trace, in the scratch either
          return s;
        }
      }
    }
    const auto& cc = m_callCentering;
    if (cc.count() == 0) return Status::ok;
    const Eigen::Index k = this->regressors();
    m_u.head(k) = cc.xMean();
    m_u(k) = cc.yMean();
    const Scalar c = this->centeringState().mergeBlock(age, age * age, cc.weightSum(), m_u, cc.yySum(),
                                                       cc.forgetSum(), cc.forgetSum2(), cc.count(), mode, m_diff);
    detail::GramBlock<Scalar, K_, MaxK_>::combine(m_gram, age, c, m_diff, m_call);
    return Status::ok;
  }

  /// The addRows scratch back to its contents of construction.
  void clearScratch() {
    m_call.setZero();
    m_callCentering.reset();
    m_block.clear();
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
  template <int KV = K_>  // the loop length of add's per-size copies (EstimatorBase); unused
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
  typename Dims::Matrix1 m_call;                   // addRows scratch: this call's co-moments
  Centering<Scalar, K_, MaxK_> m_callCentering;    // addRows scratch: this call's means and sums
  detail::GramBlock<Scalar, K_, MaxK_> m_block;    // addRows scratch: one block of rows
  Vector1 m_u;                                     // add: the scaled centered row; addRows: call means
  Vector1 m_diff;                                  // addRows: call means - running means
  mutable Scalar m_lastSse = 0;                 // scratch of the guarded path, not state
};

}  // namespace rowfold
