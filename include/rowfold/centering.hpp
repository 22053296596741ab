/// @file
/// Online centering (deviation variables) under sample weights and exponential forgetting.
#pragma once

#include <cmath>
#include <cstddef>
#include <cstdint>

#include "rowfold/detail/dims.hpp"
#include "rowfold/detail/lone_load.hpp"
#include "rowfold/options.hpp"

namespace rowfold {

template <typename Estimator, int M>
class MultiResponse;

/// Running weighted means of x and y, the weight sums, and the centered sum of squares of y.
///
/// Update for a sample (x, y) with weight w under forgetting lambda (West 1979, CACM 22(9);
/// exponentially weighted form derived in NUMERICS §4.1):
/// ```
///   W' = lambda W + w,   d = x - xbar,   e = y - ybar,
///   xbar' = xbar + (w/W') d,   ybar' = ybar + (w/W') e,
///   M' = lambda M + c^2 [d; e][d; e]'   with   c = sqrt(w lambda W / W').
/// ```
/// Every estimator therefore folds the *scaled centered row* c [d, e] into its own state; the
/// intercept never enters a solve and is recovered as b0 = ybar - xbar'b. With
/// `Intercept::none` the means stay zero and c = sqrt(w) (uncentered fit through the origin).
///
/// Besides W it keeps the forgetting sums F = sum lambda^age and F2 = sum lambda^(2 age)
/// (sample weights excluded), which give the effective sample size F^2/F2 used by the
/// statistics under forgetting (Kish 1965; NUMERICS §7.2). With lambda = 1, F = F2 = n.
///
/// **Stability:** the updating form never subtracts large sums of squares (the one-pass
/// sum(x^2) - n xbar^2 formula loses every digit for data with a large mean, NUMERICS §4.4);
/// the means carry a relative error of a few u, which the conditioning analysis accounts for.
///
/// **Cost:** O(K) per sample, no allocation after construction. Estimators own one Centering
/// and drive it (scaledRow or centeredRow, then their own fold, then commit or commitStep;
/// mergeBlock for blocked addRows); users normally only read it
/// through EstimatorBase::centering().
template <typename Scalar, int K, int MaxK = K>
class Centering {
  template <typename, int>
  friend class MultiResponse;  // builds a response's view from a shared record

 public:
  using Dims = detail::Dims<Scalar, K, MaxK>;  ///< size arithmetic (internal)
  using Vector = typename Dims::Vector;  ///< K-vector type
  using Vector1 = typename Dims::Vector1;  ///< (K+1)-vector type (a scaled row [x, y])

  /// Empty state, fixed K.
  Centering() { reset(); }
  /// Empty state for `k` regressors (allocates the mean vector for Eigen::Dynamic K).
  explicit Centering(Eigen::Index k) : m_xbar(k) { reset(); }

  /// Back to the empty state (means, sums and count zero). O(K).
  void reset() {
    m_xbar.setZero();
    m_ybar = Scalar(0);
    m_weight = Scalar(0);
    m_forget = Scalar(0);
    m_forget2 = Scalar(0);
    m_syy = Scalar(0);
    m_count = 0;
  }

  /// Writes the scaled row c [x - xbar, y - ybar] (or sqrt(w) [x, y]) into `row` (size K+1)
  /// without changing the state. Returns c. The first sample of a centered fit gives c = 0
  /// (one sample has no spread). Preconditions (checked by EstimatorBase, not here): x has
  /// K finite entries, y finite, w > 0 and finite, 0 < lambda <= 1. O(K).
  template <typename XD>
  Scalar scaledRow(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w, Scalar lambda, Intercept mode,
                   Vector1& row) const {
    const Eigen::Index k = m_xbar.size();
    if (mode == Intercept::none) {
      const Scalar c = std::sqrt(w);
      detail::headOf<K>(row, k) = c * x;
      row(k) = c * y;
      return c;
    }
    const Scalar aged = lambda * m_weight;
    const Scalar wNew = aged + w;
    const Scalar c = std::sqrt(w * (aged / wNew));
    detail::headOf<K>(row, k) = c * (x - m_xbar);
    row(k) = c * (y - m_ybar);
    return c;
  }

  /// Weight of a centered row in the square-root-free forms: the row is d = [x - xbar, y - ybar]
  /// (unscaled) and it enters the co-moments as delta d d' (delta = c^2 of `scaledRow`).
  struct Step {
    Scalar delta;  ///< c^2 = w lambda W / W' (w without intercept)
    Scalar share;  ///< w / W' (mean update)
    Scalar wNew;   ///< W'
  };

  /// Writes d = [x - xbar, y - ybar] (or [x, y] without intercept) into `row` and returns its
  /// weight delta and the mean step, without changing the state. One division, no square root.
  /// With a runtime K and a fixed-size x, the loops have x's length (detail::viewSize).
  template <typename XD>
  Step centeredRow(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w, Scalar lambda, Intercept mode,
                   Vector1& row) const {
    constexpr int KV = detail::viewSize<K, XD>;
    const Eigen::Index k = m_xbar.size();
    const Scalar aged = lambda * m_weight;
    const Scalar wNew = aged + w;
    if (mode == Intercept::none) {
      detail::headOf<KV>(row, k) = x;
      row(k) = y;
      return Step{w, Scalar(0), wNew};
    }
    detail::headOf<KV>(row, k) = x - detail::sizedAs<KV>(m_xbar);
    // ybar with a load of its own: g++ read it and the last mean of x (the member before it)
    // with one load, which the two stores of the previous commitStep could not forward to
    // (NormalEquations, float, K = 2, native update bench: 7.7-7.9 -> 5.6-5.7 ns per sample).
    row(k) = y - detail::loadAlone(m_ybar);
    // Two independent divisions (not a reciprocal and products): one rounding each, which the
    // cross-product forms notice on exact-fit data (NIST Wampler1).
    return Step{w * (aged / wNew), w / wNew, wNew};
  }

  /// Commits a sample prepared by `centeredRow` (`row` still holds its d). KV: the length
  /// centeredRow used (K, or with a runtime K that of its x).
  template <int KV = K>
  void commitStep(const Step& st, Scalar lambda, Intercept mode, const Vector1& row) {
    const Eigen::Index k = m_xbar.size();
    if (mode == Intercept::fit) {
      detail::sizedAs<KV>(m_xbar) += st.share * detail::headOf<KV>(row, k);
      m_ybar += st.share * row(k);
    }
    m_syy = lambda * m_syy + st.delta * row(k) * row(k);
    m_weight = st.wNew;
    m_forget = lambda * m_forget + Scalar(1);
    m_forget2 = lambda * lambda * m_forget2 + Scalar(1);
    ++m_count;
  }

  /// Folds a block of samples summarized by their own weighted statistics into the running ones
  /// (pairwise update of Chan, Golub & LeVeque 1983, Am. Stat. 37(3):242-247, under forgetting:
  /// NUMERICS §4.1, §5). The running state is aged by `lambdaBlock` = lambda^b (b accepted rows
  /// in the block) first; `wB`, `meanB` (size K+1, y last), `syyB` are the block's forgotten
  /// weight sum, weighted means and centered y sum of squares (the rows already weighted by
  /// lambda^age within the block); `forgetB`/`forget2B` its forgetting sums, `rows` its count.
  /// Returns the merge weight W_a W_b / W' of the mean difference (the caller adds
  /// that times diff diff' to its co-moments) and leaves diff = meanB - mean (before the update).
  template <typename V1>
  Scalar mergeBlock(Scalar lambdaBlock, Scalar lambda2Block, Scalar wB, const V1& meanB, Scalar syyB,
                    Scalar forgetB, Scalar forget2B, std::uint64_t rows, Intercept mode, Vector1& diff) {
    const Eigen::Index k = m_xbar.size();
    const Scalar wA = lambdaBlock * m_weight;
    const Scalar wNew = wA + wB;
    Scalar c = Scalar(0);
    if (mode == Intercept::fit) {
      diff.head(k) = meanB.head(k) - m_xbar;
      diff(k) = meanB(k) - m_ybar;
      const Scalar share = wB / wNew;
      c = wA * share;
      m_xbar += share * diff.head(k);
      m_ybar += share * diff(k);
    } else {
      diff.setZero();
    }
    m_syy = lambdaBlock * m_syy + syyB + c * diff(k) * diff(k);
    m_weight = wNew;
    m_forget = lambdaBlock * m_forget + forgetB;
    m_forget2 = lambda2Block * m_forget2 + forget2B;
    m_count += rows;
    return c;
  }

  /// Commits the sample to the means and sums (call after the estimator folded `row`); the
  /// arguments must be those given to scaledRow, and `row` its output. O(K).
  /// `aged` is the sample's own forgetting weight lambda^age (1 for a sample of this step; less
  /// for a delayed sample), which enters F and F2.
  template <typename XD>
  void commit(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w, Scalar lambda, Intercept mode,
              const Vector1& row, Scalar aged = Scalar(1)) {
    const Eigen::Index k = m_xbar.size();
    const Scalar wNew = lambda * m_weight + w;
    if (mode == Intercept::fit) {
      const Scalar share = w / wNew;
      m_xbar += share * (x - m_xbar);
      m_ybar += share * (y - m_ybar);
    }
    m_syy = lambda * m_syy + row(k) * row(k);
    m_weight = wNew;
    m_forget = lambda * m_forget + aged;
    m_forget2 = lambda * lambda * m_forget2 + aged * aged;
    ++m_count;
  }

  /// Row that removes a sample (x, y) of current weight w (its folding weight times the
  /// forgetting it has undergone since) from the state: the weighted form of the centered
  /// downdate (NUMERICS §3, derived there for unit weights, here with weights by inverting the
  /// update above): with W, xbar, ybar the statistics *including* the sample,
  /// ```
  ///   W' = W - w,   d = [x - xbar, y - ybar],   row = sqrt(W w / W') d,   M' = M - row row',
  ///   xbar' = xbar - (w/W') d_x,   ybar' = ybar - (w/W') d_y.
  /// ```
  /// Without intercept row = sqrt(w) [x, y]. Returns false (row unspecified) when W' is not
  /// positive. Does not change the state; commit with remove() once the estimator accepted it.
  /// O(K). Stability: a downdate; the subtraction can cancel when the sample carries most of
  /// the weight (NUMERICS §3).
  template <typename XD>
  bool removalRow(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w, Intercept mode, Vector1& row) const {
    const Eigen::Index k = m_xbar.size();
    const Scalar rest = m_weight - w;
    if (!(rest > Scalar(0))) return false;
    if (mode == Intercept::none) {
      const Scalar c = std::sqrt(w);
      detail::headOf<K>(row, k) = c * x;
      row(k) = c * y;
      return true;
    }
    const Scalar c = std::sqrt(w * (m_weight / rest));
    detail::headOf<K>(row, k) = c * (x - m_xbar);
    row(k) = c * (y - m_ybar);
    return true;
  }

  /// Commits the removal of a sample (see removalRow; `row` is the row it produced). `aged` is
  /// the sample's forgetting share lambda^age alone (sample weight excluded), which leaves F and
  /// F2. Sums that rounding would push below zero are clamped at zero. O(K).
  template <typename XD>
  void remove(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w, Intercept mode, const Vector1& row, Scalar aged) {
    const Eigen::Index k = m_xbar.size();
    const Scalar rest = m_weight - w;
    if (mode == Intercept::fit) {
      const Scalar share = w / rest;
      m_xbar -= share * (x - m_xbar);
      m_ybar -= share * (y - m_ybar);
    }
    const Scalar zero(0);
    m_syy -= row(k) * row(k);
    if (m_syy < zero) m_syy = zero;
    m_weight = rest;
    m_forget -= aged;
    if (m_forget < zero) m_forget = zero;
    m_forget2 -= aged * aged;
    if (m_forget2 < zero) m_forget2 = zero;
    if (m_count > 0) --m_count;
  }

  /// Aging factor lambda^n applied to this state when `n` later samples are merged in
  /// (1 when lambda = 1; may underflow to 0, which forgets the old state entirely).
  /// Binary powering: O(log n) multiplications.
  static Scalar agingFactor(Scalar lambda, std::uint64_t n) {
    if (lambda == Scalar(1)) return Scalar(1);
    Scalar result = Scalar(1), base = lambda;
    for (std::uint64_t e = n; e != 0; e >>= 1) {  // binary powering: exact for small n, O(log n)
      if ((e & 1u) != 0) result *= base;
      base *= base;
    }
    return result;
  }

  /// Correction row of the pairwise merge with a state `other` whose samples came after this
  /// state's, this state aged by `age`: row = sqrt(Wa Wb / W) [xbar_b - xbar_a, ybar_b - ybar_a]
  /// with Wa = age W_this (Chan, Golub & LeVeque 1979, factored form; NUMERICS §4.1, §5).
  /// Zero without intercept (no centering). Does not change the state. O(K).
  void mergeRow(const Centering& other, Scalar age, Intercept mode, Vector1& row) const {
    const Eigen::Index k = m_xbar.size();
    row.setZero();
    if (mode == Intercept::none) return;
    const Scalar wa = age * m_weight, wb = other.m_weight, w = wa + wb;
    if (!(w > Scalar(0))) return;
    const Scalar c = std::sqrt(wa * (wb / w));
    row.head(k) = c * (other.m_xbar - m_xbar);
    row(k) = c * (other.m_ybar - m_ybar);
  }

  /// Commits the merge of `other` (see mergeRow; `row` is the correction row it produced). O(K).
  void commitMerge(const Centering& other, Scalar age, Intercept mode, const Vector1& row) {
    const Eigen::Index k = m_xbar.size();
    const Scalar wa = age * m_weight, w = wa + other.m_weight;
    if (mode == Intercept::fit && w > Scalar(0)) {
      const Scalar share = other.m_weight / w;
      m_xbar += share * (other.m_xbar - m_xbar);
      m_ybar += share * (other.m_ybar - m_ybar);
    }
    m_syy = age * m_syy + other.m_syy + row(k) * row(k);
    m_weight = w;
    m_forget = age * m_forget + other.m_forget;
    m_forget2 = age * age * m_forget2 + other.m_forget2;
    m_count += other.m_count;
  }

  /// Multiplies the remembered weight by f (means unchanged): W, Syy and F by f, F2 by f^2. O(1).
  void age(Scalar f) {
    m_weight *= f;
    m_syy *= f;
    m_forget *= f;
    m_forget2 *= f * f;
  }

  /// Visits every state field in a fixed order (snapshot/restore; Self may be const).
  template <typename Self, typename V>
  static void visitState(Self& self, V& v) {
    v.array(self.m_xbar.data(), static_cast<std::size_t>(self.m_xbar.size()));
    v.field(self.m_ybar);
    v.field(self.m_weight);
    v.field(self.m_forget);
    v.field(self.m_forget2);
    v.field(self.m_syy);
    v.field(self.m_count);
  }

  /// Weighted (and forgotten) mean of x; zero with Intercept::none.
  const Vector& xMean() const { return m_xbar; }
  /// Weighted (and forgotten) mean of y; zero with Intercept::none.
  Scalar yMean() const { return m_ybar; }
  /// W = sum of forgotten sample weights.
  Scalar weightSum() const { return m_weight; }
  /// Centered (or, without intercept, uncentered) weighted sum of squares of y.
  Scalar yySum() const { return m_syy; }
  /// F = sum lambda^age over accepted samples.
  Scalar forgetSum() const { return m_forget; }
  /// F2 = sum lambda^(2 age) over accepted samples.
  Scalar forgetSum2() const { return m_forget2; }
  /// Effective number of samples F^2/F2 (= count when lambda = 1).
  Scalar effectiveCount() const { return m_forget2 > Scalar(0) ? m_forget * m_forget / m_forget2 : Scalar(0); }
  /// Samples committed (zero-weight samples never reach the Centering).
  std::uint64_t count() const { return m_count; }

 private:
  // Order matters for add's speed. A compiler may merge the stores of neighbouring members
  // into one vector store, which is complete only when its last lane is. The next sample's
  // W = lambda W + w must not wait for the division behind Syy and the means (commitStep):
  // with W, F, F2 and Syy side by side, g++ merged them and NormalEquations' add took 11.3 ns
  // instead of 5.2 (double, K = 2; bench/README, store-order round). The integer count keeps
  // the two groups apart: late (means, Syy) | count | early (W, F, F2).
  Vector m_xbar;
  Scalar m_ybar;
  Scalar m_syy;
  std::uint64_t m_count;
  Scalar m_weight;
  Scalar m_forget;
  Scalar m_forget2;
};

}  // namespace rowfold
