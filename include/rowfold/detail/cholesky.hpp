/// @file
/// Cholesky factor of a symmetric positive semidefinite matrix, upper form, with dependent
/// columns zeroed instead of failing.
#pragma once

#include <Eigen/Core>
#include <cmath>
#include <limits>

namespace rowfold::detail {

/// Computes upper-triangular U with U'U = G from the lower triangle of G (n x n), column by
/// column (Golub & Van Loan 2013 §4.2.5, the LL' form of LDL'). A pivot that is not positive
/// beyond `tol` times the column's own diagonal (a column dependent on the earlier ones to
/// working precision) gets a zero row in U, so the factor keeps its shape and the shared
/// rank-aware solve treats that coefficient as dependent. The last column's pivot (the residual
/// sum of squares of an augmented matrix) is clamped at zero when `clampLast`. Returns the number
/// of zeroed rows.
template <typename DG, typename DU>
Eigen::Index semidefiniteCholesky(const Eigen::MatrixBase<DG>& G, Eigen::MatrixBase<DU>& U, typename DG::Scalar tol,
                                  bool clampLast) {
  using Scalar = typename DG::Scalar;
  const Eigen::Index n = G.rows();
  Eigen::Index zeroed = 0;
  U.setZero();
  for (Eigen::Index j = 0; j < n; ++j) {
    for (Eigen::Index i = 0; i <= j; ++i) {
      Scalar s = G(j, i);  // lower triangle holds G(j, i) = G(i, j)
      s -= U.col(i).head(i).dot(U.col(j).head(i));
      if (i < j) {
        U(i, j) = U(i, i) > Scalar(0) ? s / U(i, i) : Scalar(0);
      } else {
        if (j == n - 1 && clampLast) {
          U(j, j) = s > Scalar(0) ? std::sqrt(s) : Scalar(0);
        } else if (s > tol * G(j, j) && s > Scalar(0)) {
          U(j, j) = std::sqrt(s);
        } else {
          U(j, j) = Scalar(0);
          ++zeroed;
        }
      }
    }
  }
  return zeroed;
}

}  // namespace rowfold::detail
