/// @file
/// Size arithmetic shared by every estimator: one source of truth for K and MaxK.
#pragma once

#include <Eigen/Core>
#include <type_traits>
#include <utility>

namespace rowfold::detail {

constexpr int plusOne(int n) { return n == Eigen::Dynamic ? Eigen::Dynamic : n + 1; }

/// Matrix and vector types of an estimator with K regressors (compile-time or Eigen::Dynamic)
/// and compile-time maximum MaxK. Fixed or bounded sizes store their coefficients inline.
template <typename Scalar_, int K_, int MaxK_>
struct Dims {
  static_assert(std::is_floating_point<Scalar_>::value, "rowfold: Scalar must be float, double or long double");
  static_assert(K_ == Eigen::Dynamic || K_ > 0, "rowfold: K must be positive or Eigen::Dynamic");
  static_assert(MaxK_ == Eigen::Dynamic || (MaxK_ > 0 && (K_ == Eigen::Dynamic || MaxK_ >= K_)),
                "rowfold: MaxK must be >= K");
  using Scalar = Scalar_;
  static constexpr int K = K_;
  static constexpr int MaxK = MaxK_;
  static constexpr int K1 = plusOne(K_);
  static constexpr int MaxK1 = plusOne(MaxK_);
  using Vector = Eigen::Matrix<Scalar, K, 1, Eigen::ColMajor, MaxK, 1>;
  using Matrix = Eigen::Matrix<Scalar, K, K, Eigen::ColMajor, MaxK, MaxK>;
  using Vector1 = Eigen::Matrix<Scalar, K1, 1, Eigen::ColMajor, MaxK1, 1>;
  using Matrix1 = Eigen::Matrix<Scalar, K1, K1, Eigen::ColMajor, MaxK1, MaxK1>;
};

/// Whether an estimator declared with K (and MaxK) regressors can take k of them: k > 0, equal
/// to K when K is fixed, at most MaxK when that is bounded.
template <int K, int MaxK>
constexpr bool fitsSize(Eigen::Index k) {
  return k > 0 && (K == Eigen::Dynamic ? MaxK == Eigen::Dynamic || k <= MaxK : k == K);
}

/// The size an estimator's storage is made with for k regressors: k when it fits (fitsSize),
/// else K when fixed and 1 otherwise. A k that does not fit only sets the status to
/// `wrong_size`; the storage must still get a size Eigen accepts (a negative, wrong fixed or
/// over-MaxK size fails Eigen's assertion, and g++ -O2 reports the negative one as an
/// allocation larger than any object, -Walloc-size-larger-than).
template <int K, int MaxK>
constexpr Eigen::Index storedSize(Eigen::Index k) {
  if (fitsSize<K, MaxK>(k)) return k;
  return K != Eigen::Dynamic ? Eigen::Index(K) : Eigen::Index(1);
}

/// The compile-time length of the regressors x given to an estimator of K regressors: K when
/// fixed; with a runtime K, x's own (Eigen::Dynamic, or a fixed-size block: EstimatorBase's
/// per-size copies of add pass one, see SizedUpTo). Checked equal to the runtime K first.
template <int K, typename XD>
inline constexpr int viewSize = K != Eigen::Dynamic ? K : int(XD::SizeAtCompileTime);

/// A whole vector v with the compile-time length KV: v itself when KV is Eigen::Dynamic or v's
/// own length, else its fixed-size head (v of runtime length KV: EstimatorBase's per-size
/// copies). Not a runtime head: that one loses the alignment Eigen knows of a whole vector
/// (NormalEquations, runtime K = 16: 64 -> 78 ns per sample with the peeling loop it adds).
template <int KV, typename V>
decltype(auto) sizedAs(V&& v) {
  if constexpr (KV == Eigen::Dynamic || int(std::decay_t<V>::SizeAtCompileTime) == KV)
    return std::forward<V>(v);
  else
    return v.template head<KV>();
}

/// v.head(n) as a fixed-size block when N is known at compile time (N == n then): Eigen emits
/// straight-line code for it, where a runtime-sized head keeps a size and an alignment test on
/// the per-sample path even when n is a constant. The dynamic head otherwise.
template <int N, typename V>
auto headOf(V&& v, Eigen::Index n) {
  if constexpr (N == Eigen::Dynamic)
    return v.head(n);
  else
    return v.template head<N>();
}

}  // namespace rowfold::detail
