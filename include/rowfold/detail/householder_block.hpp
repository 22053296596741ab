/// @file
/// Householder QR of an upper-triangular factor stacked on a dense block of rows: the
/// "triangle plus block" step of tall-skinny QR (Demmel, Grigori, Hoemmen & Langou 2012,
/// "Communication-optimal parallel and sequential QR and LU factorizations", SIAM J. Sci.
/// Comput. 34(1); reflectors as in Golub & Van Loan 2013 §5.1.2 and §5.2.1).
#pragma once

#include <Eigen/Core>
#include <cmath>
#include <limits>

#include "rowfold/detail/givens.hpp"

namespace rowfold::detail {

/// The reflector H = I - tau v v', v = [v0; x; xe], that maps [alpha; x; xe] (alpha = F_jj >= 0,
/// x = the m entries below it at stride `step`, sigma = |x|^2 + xe^2 > 0) onto [beta; 0; 0] with
/// beta = |[alpha; x; xe]| >= 0, returned. v0 = -sigma / (alpha + beta) keeps beta positive
/// without cancellation (Golub & Van Loan 2013, Algorithm 5.1.1). When sigma is outside the range
/// where squares are safe, x and xe are first scaled in place by the power of 2 that brings the
/// largest entry into [1, 2) (exact for normal numbers; H does not change, v0 then belongs to the
/// scaled v); that covers any x as long as alpha / max|x_r| stays within the exponent range.
template <typename Scalar>
Scalar makeReflector(Scalar alpha, Scalar sigma, Scalar* x, Eigen::Index m, Eigen::Index step, Scalar& xe, Scalar& v0,
                     Scalar& tau) {
  constexpr Scalar kLow = std::numeric_limits<Scalar>::min() / std::numeric_limits<Scalar>::epsilon();
  constexpr Scalar kHigh = std::numeric_limits<Scalar>::max() * std::numeric_limits<Scalar>::epsilon();
  Scalar beta;
  int shift = 0;
  if (sigma >= kLow && alpha * alpha + sigma <= kHigh) {
    beta = std::sqrt(alpha * alpha + sigma);
  } else {
    Scalar amax = std::abs(xe);
    for (Eigen::Index r = 0; r < m; ++r) amax = std::abs(x[r * step]) > amax ? std::abs(x[r * step]) : amax;
    // An entry that overflowed earlier (inf or NaN) has no exponent to scale by: no scaling,
    // and the non-finite result reaches the caller's finiteness checks.
    if (!(amax > Scalar(0) && amax <= std::numeric_limits<Scalar>::max())) {
      beta = std::sqrt(alpha * alpha + sigma);
      v0 = -sigma / (alpha + beta);
      tau = Scalar(2) / (v0 * v0 + sigma);
      return beta;
    }
    shift = -std::ilogb(amax);
    xe = std::ldexp(xe, shift);
    sigma = xe * xe;
    for (Eigen::Index r = 0; r < m; ++r) {
      x[r * step] = std::ldexp(x[r * step], shift);
      sigma += x[r * step] * x[r * step];
    }
    alpha = std::ldexp(alpha, shift);
    beta = safeHypot(alpha, std::sqrt(sigma));
  }
  v0 = -sigma / (alpha + beta);
  tau = Scalar(2) / (v0 * v0 + sigma);
  return shift == 0 ? beta : std::ldexp(beta, -shift);
}

/// Inner products d_q = x' b_q of x with the G columns b_q = b + q ld (m entries each), summed in
/// L interleaved lanes (so they vectorize without reassociation by the compiler).
template <int G, int L, typename Scalar>
void columnDots(const Scalar* __restrict x, const Scalar* __restrict b, Eigen::Index ld, Eigen::Index m, Scalar* d) {
  Scalar acc[G][L] = {};
  Eigen::Index r = 0;
  for (; r + L <= m; r += L)
    for (int l = 0; l < L; ++l)
      for (int q = 0; q < G; ++q) acc[q][l] += x[r + l] * b[q * ld + r + l];
  for (int q = 0; q < G; ++q) {
    Scalar s = acc[q][0];
    for (int l = 1; l < L; ++l) s += acc[q][l];
    for (Eigen::Index t = r; t < m; ++t) s += x[t] * b[q * ld + t];
    d[q] = s;
  }
}

/// b_q -= w_q x for the G columns b_q = b + q ld (m entries each).
template <int G, typename Scalar>
void columnUpdates(const Scalar* __restrict x, Scalar* __restrict b, Eigen::Index ld, Eigen::Index m,
                   const Scalar* w) {
  Scalar wq[G];
  for (int q = 0; q < G; ++q) wq[q] = w[q];
  for (Eigen::Index r = 0; r < m; ++r)
    for (int q = 0; q < G; ++q) b[q * ld + r] -= wq[q] * x[r];
}

/// Applies the reflector of column j (x, xe, v0, tau; see foldBlockHouseholder) to the G
/// trailing columns c .. c + G - 1 of [F; B; e'].
template <int G, int L, typename Scalar, typename FM>
void reflectColumns(FM& F, Scalar* B, Eigen::Index m, Eigen::Index ld, Scalar* e, Eigen::Index j, Eigen::Index c,
                    Scalar xe, Scalar v0, Scalar tau) {
  const Scalar* x = B + j * ld;
  Scalar w[G];
  columnDots<G, L>(x, B + c * ld, ld, m, w);
  for (int q = 0; q < G; ++q) {
    w[q] += v0 * F(j, c + q);
    if (e != nullptr) w[q] += xe * e[c + q];
    w[q] *= tau;
    F(j, c + q) -= w[q] * v0;
    if (e != nullptr) e[c + q] -= w[q] * xe;
  }
  columnUpdates<G>(x, B + c * ld, ld, m, w);
}

/// Folds the m rows of B (column-major, leading dimension ld, n columns) and one optional extra
/// row e (n entries; nullptr for none) into the upper-triangular F (n x n, diagonal >= 0):
/// [F; B; e'] = Q [F+; 0], F+ upper triangular with a non-negative diagonal. B and e are
/// overwritten (scratch). Column j takes one reflector (makeReflector) with one nonzero in F, at
/// the diagonal, and the column's entries of B and e; a zero column of B and e is the identity
/// (an empty column stays as it is). The inner loops run down the contiguous columns of B, up to
/// four trailing columns at a time (one pass for their inner products, one for their updates).
/// Cost about 2 m n^2 flops; never allocates.
template <typename Scalar, typename FM>
void foldBlockHouseholder(FM& F, Scalar* B, Eigen::Index m, Eigen::Index ld, Scalar* e) {
  using Index = Eigen::Index;
  constexpr int L = Eigen::internal::packet_traits<Scalar>::size;  // lanes: one SIMD register (measured best)
  const Index n = F.cols();
  for (Index j = 0; j < n; ++j) {
    Scalar* x = B + j * ld;
    Scalar xe = e != nullptr ? e[j] : Scalar(0);
    Scalar sigma;
    columnDots<1, L>(x, x, ld, m, &sigma);
    sigma += xe * xe;
    if (sigma == Scalar(0)) continue;  // nothing below the diagonal: identity
    Scalar v0, tau;
    F(j, j) = makeReflector(F(j, j), sigma, x, m, Eigen::Index(1), xe, v0, tau);
    Index c = j + 1;
    for (; c + 4 <= n; c += 4) reflectColumns<4, L>(F, B, m, ld, e, j, c, xe, v0, tau);
    switch (n - c) {  // the last one to three columns
      case 3: reflectColumns<3, L>(F, B, m, ld, e, j, c, xe, v0, tau); break;
      case 2: reflectColumns<2, L>(F, B, m, ld, e, j, c, xe, v0, tau); break;
      case 1: reflectColumns<1, L>(F, B, m, ld, e, j, c, xe, v0, tau); break;
      default: break;
    }
  }
}

/// Row-major form of foldBlockHouseholder for wide factors (many columns, few rows per block):
/// B holds all m rows to fold (row-major, leading dimension ld; no extra row), w is scratch of
/// n entries. The same reflectors; the inner loops run along the contiguous rows of B (the
/// trailing columns), four rows at a time, with no reductions. Cost about 2 m n^2 flops.
template <typename Scalar, typename FM>
void foldRowsHouseholder(FM& F, Scalar* B, Eigen::Index m, Eigen::Index ld, Scalar* w) {
  using Index = Eigen::Index;
  const Index n = F.cols();
  for (Index j = 0; j < n; ++j) {
    Scalar sigma = Scalar(0);
    for (Index r = 0; r < m; ++r) sigma += B[r * ld + j] * B[r * ld + j];
    if (sigma == Scalar(0)) continue;  // nothing below the diagonal: identity
    Scalar v0, tau, none = Scalar(0);
    F(j, j) = makeReflector(F(j, j), sigma, B + j, m, ld, none, v0, tau);
    const Index c0 = j + 1;
    if (c0 == n) break;
    Scalar* __restrict wc = w;
    for (Index c = c0; c < n; ++c) wc[c] = Scalar(0);
    Index r = 0;
    for (; r + 4 <= m; r += 4) {
      const Scalar* __restrict b0 = B + r * ld;
      const Scalar* __restrict b1 = b0 + ld;
      const Scalar* __restrict b2 = b1 + ld;
      const Scalar* __restrict b3 = b2 + ld;
      const Scalar x0 = b0[j], x1 = b1[j], x2 = b2[j], x3 = b3[j];
      for (Index c = c0; c < n; ++c) wc[c] += (x0 * b0[c] + x1 * b1[c]) + (x2 * b2[c] + x3 * b3[c]);
    }
    for (; r < m; ++r) {
      const Scalar* __restrict b0 = B + r * ld;
      const Scalar x0 = b0[j];
      for (Index c = c0; c < n; ++c) wc[c] += x0 * b0[c];
    }
    for (Index c = c0; c < n; ++c) {
      wc[c] = tau * (wc[c] + v0 * F(j, c));
      F(j, c) -= wc[c] * v0;
    }
    for (r = 0; r + 4 <= m; r += 4) {
      Scalar* __restrict b0 = B + r * ld;
      Scalar* __restrict b1 = b0 + ld;
      Scalar* __restrict b2 = b1 + ld;
      Scalar* __restrict b3 = b2 + ld;
      const Scalar x0 = b0[j], x1 = b1[j], x2 = b2[j], x3 = b3[j];
      for (Index c = c0; c < n; ++c) {
        const Scalar wv = wc[c];
        b0[c] -= x0 * wv;
        b1[c] -= x1 * wv;
        b2[c] -= x2 * wv;
        b3[c] -= x3 * wv;
      }
    }
    for (; r < m; ++r) {
      Scalar* __restrict b0 = B + r * ld;
      const Scalar x0 = b0[j];
      for (Index c = c0; c < n; ++c) b0[c] -= x0 * wc[c];
    }
  }
}

}  // namespace rowfold::detail
