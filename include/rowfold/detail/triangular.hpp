/// @file
/// Triangular-factor kernels shared by all estimators: rank-aware solve and the Hager/Higham
/// 1-norm estimate of an inverse. Nothing here allocates when the workspace is preallocated.
#pragma once

#include <Eigen/Core>
#include <cmath>
#include <limits>

#include "rowfold/detail/pivoted_qr.hpp"

namespace rowfold::detail {

/// Relative size below which a diagonal entry of an unpivoted factor marks a dependent column:
/// |R_ii| <= tau * ||R(:, i)||. tau = 8 (K+1) eps: rounding of an exactly dependent column
/// leaves a few eps of its norm on the diagonal; the scaled condition of data that double can
/// still solve (e.g. NIST Filip, 5e9) stays far above it.
template <typename Scalar>
Scalar dependenceTolerance(Eigen::Index k) {
  return Scalar(8) * Scalar(k + 1) * std::numeric_limits<Scalar>::epsilon();
}

/// Column 2-norms of an upper-triangular matrix (= column norms of the data it factors).
template <typename DR, typename DV>
void columnNorms(const Eigen::MatrixBase<DR>& R, Eigen::MatrixBase<DV>& out) {
  for (Eigen::Index j = 0; j < R.cols(); ++j) out(j) = R.col(j).head(j + 1).norm();
}

/// True if some diagonal entry is negligible against its column (unpivoted factor).
template <typename DR>
bool hasDependentColumn(const Eigen::MatrixBase<DR>& R) {
  using Scalar = typename DR::Scalar;
  const Scalar tau = dependenceTolerance<Scalar>(R.cols());
  for (Eigen::Index j = 0; j < R.cols(); ++j) {
    const Scalar colNorm = R.col(j).head(j + 1).norm();
    if (!(std::abs(R(j, j)) > tau * colNorm)) return true;
  }
  return false;
}

/// Solves R b = z for upper-triangular R. When a column is (numerically) dependent, falls back
/// to column-pivoted Householder QR (Businger & Golub 1965) of the column-equilibrated R and
/// returns the basic solution: dependent coefficients are zero. Returns the numerical rank.
template <typename DR, typename DZ, typename Vector, typename Matrix, typename PivotWork>
Eigen::Index solveUpperWithRank(const Eigen::MatrixBase<DR>& R, const Eigen::MatrixBase<DZ>& z, Vector& b,
                                Matrix& scratch, Vector& scale, PivotWork& pw) {
  using Scalar = typename DR::Scalar;
  const Eigen::Index k = R.cols();
  if (!hasDependentColumn(R)) {
    b = z;
    backSubstitute(R, b, k);
    return k;
  }
  columnNorms(R, scale);
  for (Eigen::Index j = 0; j < k; ++j) scale(j) = scale(j) > Scalar(0) ? scale(j) : Scalar(1);
  scratch = R.template triangularView<Eigen::Upper>();
  for (Eigen::Index j = 0; j < k; ++j) scratch.col(j) /= scale(j);
  pw.rhs = z;
  const Eigen::Index rank = pivotedQrInPlace(scratch, pw.rhs, pw.perm, pw.tau, pw.norms, dependenceTolerance<Scalar>(k));
  backSubstitute(scratch, pw.rhs, rank);
  b.setZero();
  for (Eigen::Index i = 0; i < rank; ++i) {
    const Eigen::Index j = pw.perm(i);
    b(j) = pw.rhs(i) / scale(j);
    if (!std::isfinite(b(j))) b(j) = Scalar(0);
  }
  return rank;
}

/// Hager (1984, SIAM J. Sci. Stat. Comput. 5(2):311-316) 1-norm estimate of T^{-1} for an
/// upper-triangular T, with Higham's safeguard vector (Higham 1988, ACM TOMS 14(4):381-396;
/// as in LAPACK xLACN2). Each iteration costs two triangular solves (O(K^2)).
/// Returns +inf when T has a zero diagonal entry.
template <typename DT, typename Vector>
typename DT::Scalar inverseNorm1Estimate(const Eigen::MatrixBase<DT>& T, Vector& x, Vector& y, Vector& w) {
  using Scalar = typename DT::Scalar;
  const Eigen::Index n = T.cols();
  for (Eigen::Index i = 0; i < n; ++i)
    if (!(T(i, i) != Scalar(0)) || !std::isfinite(T(i, i))) return std::numeric_limits<Scalar>::infinity();
  x.setConstant(Scalar(1) / Scalar(n));
  Scalar est = 0;
  Eigen::Index lastJ = -1;
  for (int iter = 0; iter < 5; ++iter) {
    y = x;
    backSubstitute(T, y, n);
    const Scalar norm = y.template lpNorm<1>();
    if (iter > 0 && norm <= est) break;
    est = norm;
    for (Eigen::Index i = 0; i < n; ++i) w(i) = y(i) >= Scalar(0) ? Scalar(1) : Scalar(-1);
    forwardSubstituteTransposed(T, w);
    Eigen::Index j = 0;
    const Scalar zmax = w.cwiseAbs().maxCoeff(&j);
    if (iter > 0 && (zmax <= w.dot(x) || j == lastJ)) break;
    x.setZero();
    x(j) = Scalar(1);
    lastJ = j;
  }
  // Higham's alternating test vector catches matrices that fool the power iteration.
  for (Eigen::Index i = 0; i < n; ++i) {
    const Scalar sign = (i % 2 == 0) ? Scalar(1) : Scalar(-1);
    x(i) = sign * (Scalar(1) + (n > 1 ? Scalar(i) / Scalar(n - 1) : Scalar(0)));
  }
  y = x;
  backSubstitute(T, y, n);
  const Scalar alt = Scalar(2) * y.template lpNorm<1>() / Scalar(3 * n);
  return est > alt ? est : alt;
}

/// Inv = T^-1 for a nonsingular upper-triangular T, one column at a time (column j of the inverse
/// solves the leading (j+1) x (j+1) system against e_j). Vector solves only: no blocked kernel,
/// no allocation for any size. Zeros below the diagonal.
template <typename DT, typename DI>
void invertUpper(const Eigen::MatrixBase<DT>& T, Eigen::MatrixBase<DI>& Inv) {
  const Eigen::Index n = T.cols();
  Inv.setZero();
  for (Eigen::Index j = 0; j < n; ++j) {
    Inv(j, j) = typename DT::Scalar(1);
    auto col = Inv.col(j);
    backSubstitute(T, col, j + 1);
  }
}

/// 1-norm of an upper-triangular matrix (largest column sum).
template <typename DT>
typename DT::Scalar upperNorm1(const Eigen::MatrixBase<DT>& T) {
  typename DT::Scalar best = 0;
  for (Eigen::Index j = 0; j < T.cols(); ++j) {
    const auto s = T.col(j).head(j + 1).template lpNorm<1>();
    if (s > best) best = s;
  }
  return best;
}

}  // namespace rowfold::detail
