/// @file
/// Householder QR with column pivoting (Businger & Golub 1965; Golub & Van Loan 2013 §5.4.2)
/// for the small K x K factors, written as plain loops: no Eigen product kernel is involved, so
/// nothing can pull a heap fallback into firmware images (Eigen's own ColPivHouseholderQR does,
/// for K >= 8).
#pragma once

#include <Eigen/Core>
#include <cmath>

namespace rowfold::detail {

/// Turns column j of A, rows [j, n), into a Householder reflector H = I - tau v v' with
/// v = [1; A(j+1:n, j)] that maps the column to alpha e_j (alpha stored in A(j, j); Golub & Van
/// Loan 2013 §5.1.2). `norm2` is the column's squared norm over rows [j, n). Returns tau.
template <typename DA>
typename DA::Scalar makeReflector(Eigen::MatrixBase<DA>& A, Eigen::Index j, Eigen::Index n, typename DA::Scalar norm2) {
  using Scalar = typename DA::Scalar;
  const Scalar xnorm = std::sqrt(norm2);
  if (xnorm == Scalar(0)) return Scalar(0);
  const Scalar x0 = A(j, j);
  const Scalar alpha = x0 >= Scalar(0) ? -xnorm : xnorm;
  const Scalar v0 = x0 - alpha;
  for (Eigen::Index i = j + 1; i < n; ++i) A(i, j) /= v0;
  A(j, j) = alpha;
  return (alpha - x0) / alpha;
}

/// Applies the reflector held in column j of A (rows [j, n)) to `col` (rows [j, n)).
template <typename DA, typename DC>
void applyReflector(const Eigen::MatrixBase<DA>& A, Eigen::Index j, Eigen::Index n, typename DA::Scalar tau,
                    Eigen::MatrixBase<DC>& col) {
  if (tau == typename DA::Scalar(0)) return;
  typename DA::Scalar s = col(j);
  for (Eigen::Index i = j + 1; i < n; ++i) s += A(i, j) * col(i);
  s *= tau;
  col(j) -= s;
  for (Eigen::Index i = j + 1; i < n; ++i) col(i) -= s * A(i, j);
}

/// Factors A (n x n, overwritten: R on and above the diagonal, reflectors below) with column
/// pivoting, applying the same reflectors to `rhs`. `perm(j)` is the original column of pivot j,
/// `tau` and `norms` are workspace of size n. Returns the numerical rank: pivots with
/// |R_jj| <= tol |R_00| are treated as zero.
template <typename DA, typename DV, typename DP>
Eigen::Index pivotedQrInPlace(Eigen::MatrixBase<DA>& A, Eigen::MatrixBase<DV>& rhs, Eigen::MatrixBase<DP>& perm,
                              Eigen::MatrixBase<DV>& tau, Eigen::MatrixBase<DV>& norms, typename DA::Scalar tol) {
  using Scalar = typename DA::Scalar;
  using std::abs;
  using std::sqrt;
  const Eigen::Index n = A.cols();
  for (Eigen::Index j = 0; j < n; ++j) perm(j) = typename DP::Scalar(j);
  for (Eigen::Index j = 0; j < n; ++j) {
    for (Eigen::Index c = j; c < n; ++c) {
      Scalar s = 0;
      for (Eigen::Index i = j; i < n; ++i) s += A(i, c) * A(i, c);
      norms(c) = s;
    }
    Eigen::Index p = j;
    for (Eigen::Index c = j + 1; c < n; ++c)
      if (norms(c) > norms(p)) p = c;
    if (p != j) {
      for (Eigen::Index i = 0; i < n; ++i) {
        const Scalar t = A(i, j);
        A(i, j) = A(i, p);
        A(i, p) = t;
      }
      const auto t = perm(j);
      perm(j) = perm(p);
      perm(p) = t;
    }
    tau(j) = makeReflector(A, j, n, norms(p));
    for (Eigen::Index c = j + 1; c < n; ++c) {
      auto col = A.col(c);
      applyReflector(A, j, n, tau(j), col);
    }
    applyReflector(A, j, n, tau(j), rhs);
  }
  Eigen::Index rank = 0;
  const Scalar r00 = n > 0 ? abs(A(0, 0)) : Scalar(0);
  while (rank < n && abs(A(rank, rank)) > tol * r00 && A(rank, rank) != Scalar(0)) ++rank;
  return rank;
}

/// In-place back substitution U x = b for the leading `r` x `r` upper triangle of U.
template <typename DU, typename DB>
void backSubstitute(const Eigen::MatrixBase<DU>& U, Eigen::MatrixBase<DB>& b, Eigen::Index r) {
  // coeff/coeffRef, not operator(): g++ 12.2 at -O2 without NDEBUG miscompiles this descending
  // loop on fixed-size vectors when Eigen's index assertions are inlined (the vector comes back
  // unchanged; reproduced without rowfold; -O3, NDEBUG, -O0 and clang are fine).
  for (Eigen::Index i = r - 1; i >= 0; --i) {
    typename DU::Scalar s = b.coeff(i);
    for (Eigen::Index c = i + 1; c < r; ++c) s -= U.coeff(i, c) * b.coeff(c);
    b.coeffRef(i) = s / U.coeff(i, i);
  }
}

/// In-place forward substitution U' x = b (U upper triangular, n x n).
template <typename DU, typename DB>
void forwardSubstituteTransposed(const Eigen::MatrixBase<DU>& U, Eigen::MatrixBase<DB>& b) {
  const Eigen::Index n = U.cols();
  for (Eigen::Index i = 0; i < n; ++i) {
    typename DU::Scalar s = b(i);
    for (Eigen::Index r = 0; r < i; ++r) s -= U(r, i) * b(r);
    b(i) = s / U(i, i);
  }
}

}  // namespace rowfold::detail
