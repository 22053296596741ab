/// @file
/// Dot products of a runtime length in interleaved partial sums.
#pragma once

#include <Eigen/Core>

namespace rowfold::detail {

/// sum_r a_r b_r over r < m (b == nullptr: sum_r a_r) in `Lanes` interleaved partial sums,
/// added pairwise at the end ((s0 + s1) + (s2 + s3) for four): independent adders instead of
/// one chain that waits on the adder's latency at every step, and a loop body the vectorizer
/// turns into one packet operation at any m. (Eigen's dot of a runtime length shorter than one
/// of its packets runs scalar: float m = 8 against 16-float AVX-512 packets.) The order of the
/// additions depends on m and Lanes only, so two calls on the same data agree bit for bit.
template <int Lanes, typename Scalar>
Scalar interleavedDot(const Scalar* __restrict a, const Scalar* __restrict b, Eigen::Index m) {
  static_assert(Lanes == 4 || Lanes == 8, "rowfold: four or eight partial sums");
  Scalar s[Lanes];
  for (int l = 0; l < Lanes; ++l) s[l] = Scalar(0);
  Eigen::Index r = 0;
  if (b == nullptr) {
    for (; r + Lanes <= m; r += Lanes)
      for (int l = 0; l < Lanes; ++l) s[l] += a[r + l];
    for (; r < m; ++r) s[0] += a[r];
  } else {
    for (; r + Lanes <= m; r += Lanes)
      for (int l = 0; l < Lanes; ++l) s[l] += a[r + l] * b[r + l];
    for (; r < m; ++r) s[0] += a[r] * b[r];
  }
  for (int half = Lanes / 2; half > 0; half /= 2)
    for (int l = 0; l < half; ++l) s[l] = s[2 * l] + s[2 * l + 1];
  return s[0];
}

}  // namespace rowfold::detail
