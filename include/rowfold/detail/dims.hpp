/// @file
/// Size arithmetic shared by every estimator: one source of truth for K and MaxK.
#pragma once

#include <Eigen/Core>
#include <type_traits>

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
