/// @file
/// Folding one row into an upper-triangular factor by Givens rotations (merges and windows;
/// the GivensQr hot path has its own loop with the forgetting factor folded in).
#pragma once

#include <Eigen/Core>
#include <cmath>
#include <limits>

namespace rowfold::detail {

/// sqrt(a^2 + b^2) without overflow or harmful underflow.
template <typename Scalar>
Scalar safeHypot(Scalar a, Scalar b) {
  using std::abs;
  const Scalar aa = abs(a), ab = abs(b);
  const Scalar big = aa > ab ? aa : ab, small = aa > ab ? ab : aa;
  if (big == Scalar(0)) return Scalar(0);
  const Scalar t = small / big;
  return big * std::sqrt(Scalar(1) + t * t);
}

/// Rotates `row` (zero before column `start`, destroyed) into the upper-triangular `factor`
/// (n x n, diagonal >= 0 kept): [factor; row'] = Q [factor+; 0] (Golub & Van Loan 2013 §5.1.8).
/// Cost 2 (n - start)^2 multiplies and n - start square roots.
template <typename DM, typename DV>
void rotateRowInto(Eigen::MatrixBase<DM>& factor, Eigen::MatrixBase<DV>& row, Eigen::Index start) {
  using Scalar = typename DM::Scalar;
  const Eigen::Index n = factor.cols();
  for (Eigen::Index i = start; i < n; ++i) {
    const Scalar a = factor(i, i), b = row(i);
    if (b == Scalar(0)) continue;
    Scalar r = std::sqrt(a * a + b * b);
    if (!(r <= std::numeric_limits<Scalar>::max()) || r < std::numeric_limits<Scalar>::min() / std::numeric_limits<Scalar>::epsilon())
      r = safeHypot(a, b);
    const Scalar c = a / r, s = b / r;
    factor(i, i) = r;
    for (Eigen::Index j = i + 1; j < n; ++j) {
      const Scalar fij = factor(i, j), vj = row(j);
      factor(i, j) = c * fij + s * vj;
      row(j) = c * vj - s * fij;
    }
  }
}

/// Stacked-factor merge (the TSQR step; Demmel, Grigori, Hoemmen & Langou 2012, SIAM J. Sci.
/// Comput. 34(1)): `into` becomes the triangular factor of [into; other; extra'] where `other`
/// is upper triangular and `extra` one more row (destroyed). `scratch` has n entries.
template <typename DM, typename DO, typename DV, typename DS>
void mergeFactorInto(Eigen::MatrixBase<DM>& into, const Eigen::MatrixBase<DO>& other, Eigen::MatrixBase<DV>& extra,
                     Eigen::MatrixBase<DS>& scratch) {
  const Eigen::Index n = into.cols();
  for (Eigen::Index i = 0; i < n; ++i) {
    scratch.head(i).setZero();
    scratch.tail(n - i) = other.row(i).tail(n - i).transpose();
    rotateRowInto(into, scratch, i);
  }
  rotateRowInto(into, extra, 0);
}

}  // namespace rowfold::detail
