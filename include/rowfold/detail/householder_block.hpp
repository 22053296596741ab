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

/// Inner products d_q = x' b_q of x with the G columns b_q = b + q ld (m entries each), in
/// SIMD packets with one accumulator per column (plus a second set when G is small, so that
/// the adds do not wait on each other's latency), the tail of fewer than a packet in scalars.
template <int G, typename Scalar>
void columnDots(const Scalar* __restrict x, const Scalar* __restrict b, Eigen::Index ld, Eigen::Index m, Scalar* d) {
  using namespace Eigen::internal;
  using Packet = typename packet_traits<Scalar>::type;
  constexpr Eigen::Index W = packet_traits<Scalar>::size;
  constexpr int S = G < 3 ? 2 : 1;  // accumulator sets
  Packet acc[S][G];
  for (int t = 0; t < S; ++t)
    for (int q = 0; q < G; ++q) acc[t][q] = pset1<Packet>(Scalar(0));
  Eigen::Index r = 0;
  for (; r + S * W <= m; r += S * W)
    for (int t = 0; t < S; ++t) {
      const Packet xv = ploadu<Packet>(x + r + t * W);
      for (int q = 0; q < G; ++q) acc[t][q] = pmadd(xv, ploadu<Packet>(b + q * ld + r + t * W), acc[t][q]);
    }
  if constexpr (S == 2) {
    if (r + W <= m) {
      const Packet xv = ploadu<Packet>(x + r);
      for (int q = 0; q < G; ++q) acc[0][q] = pmadd(xv, ploadu<Packet>(b + q * ld + r), acc[0][q]);
      r += W;
    }
  }
  for (int q = 0; q < G; ++q) {
    Packet t = acc[0][q];
    if constexpr (S == 2) t = padd(t, acc[1][q]);
    Scalar s = predux(t);
    for (Eigen::Index u = r; u < m; ++u) s += x[u] * b[q * ld + u];
    d[q] = s;
  }
}

/// b_q -= w_q x for the G columns b_q = b + q ld (m entries each), in SIMD packets.
template <int G, typename Scalar>
void columnUpdates(const Scalar* __restrict x, Scalar* __restrict b, Eigen::Index ld, Eigen::Index m,
                   const Scalar* w) {
  using namespace Eigen::internal;
  using Packet = typename packet_traits<Scalar>::type;
  constexpr Eigen::Index W = packet_traits<Scalar>::size;
  Packet wq[G];
  for (int q = 0; q < G; ++q) wq[q] = pset1<Packet>(w[q]);
  Eigen::Index r = 0;
  for (; r + W <= m; r += W) {
    const Packet xv = ploadu<Packet>(x + r);
    for (int q = 0; q < G; ++q) {
      Scalar* bq = b + q * ld + r;
      pstoreu(bq, psub(ploadu<Packet>(bq), pmul(wq[q], xv)));
    }
  }
  for (; r < m; ++r)
    for (int q = 0; q < G; ++q) b[q * ld + r] -= w[q] * x[r];
}

/// Applies the reflector of column j (x, xe, v0, tau; see foldBlockHouseholder) to the G
/// trailing columns c .. c + G - 1 of [F; B; e'].
template <int G, typename Scalar, typename FM>
void reflectColumns(FM& F, Scalar* B, Eigen::Index m, Eigen::Index ld, Scalar* e, Eigen::Index j, Eigen::Index c,
                    Scalar xe, Scalar v0, Scalar tau) {
  const Scalar* x = B + j * ld;
  Scalar w[G];
  columnDots<G>(x, B + c * ld, ld, m, w);
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
  const Index n = F.cols();
  for (Index j = 0; j < n; ++j) {
    Scalar* x = B + j * ld;
    Scalar xe = e != nullptr ? e[j] : Scalar(0);
    Scalar sigma;
    columnDots<1>(x, x, ld, m, &sigma);
    sigma += xe * xe;
    if (sigma == Scalar(0)) continue;  // nothing below the diagonal: identity
    Scalar v0, tau;
    F(j, j) = makeReflector(F(j, j), sigma, x, m, Eigen::Index(1), xe, v0, tau);
    Index c = j + 1;
    for (; c + 4 <= n; c += 4) reflectColumns<4>(F, B, m, ld, e, j, c, xe, v0, tau);
    switch (n - c) {  // the last one to three columns
      case 3: reflectColumns<3>(F, B, m, ld, e, j, c, xe, v0, tau); break;
      case 2: reflectColumns<2>(F, B, m, ld, e, j, c, xe, v0, tau); break;
      case 1: reflectColumns<1>(F, B, m, ld, e, j, c, xe, v0, tau); break;
      default: break;
    }
  }
}

/// Row-major form of foldBlockHouseholder for wide factors (many columns, few rows per block):
/// B holds all m rows to fold (row-major, leading dimension ld; no extra row), w and f are
/// scratch of n entries each. The same reflectors; the inner loops run along the contiguous
/// rows of B (the trailing columns) in SIMD packets, four rows at a time, with no reductions;
/// row j of F is worked on in a contiguous copy, and the next column's sum of squares is taken
/// in the update pass. Cost about 2 m n^2 flops.
template <typename Scalar, typename FM>
void foldRowsHouseholder(FM& F, Scalar* B, Eigen::Index m, Eigen::Index ld, Scalar* w, Scalar* f) {
  using namespace Eigen::internal;
  using Index = Eigen::Index;
  using Packet = typename packet_traits<Scalar>::type;
  constexpr Index W = packet_traits<Scalar>::size;
  const Index n = F.cols();
  Scalar* __restrict wc = w;      // w_c = tau v'[F; B](:, c)
  Scalar* __restrict fj = f;      // row j of F
  Scalar sigma = Scalar(0);       // sum of squares of column j of B
  for (Index r = 0; r < m; ++r) sigma += B[r * ld] * B[r * ld];
  for (Index j = 0; j < n; ++j) {
    const Index c0 = j + 1;
    if (sigma == Scalar(0)) {  // nothing below the diagonal: identity
      sigma = Scalar(0);
      for (Index r = 0; c0 < n && r < m; ++r) sigma += B[r * ld + c0] * B[r * ld + c0];
      continue;
    }
    Scalar v0, tau, none = Scalar(0);
    F(j, j) = makeReflector(F(j, j), sigma, B + j, m, ld, none, v0, tau);
    if (c0 == n) break;
    const Index cv = c0 + (n - c0) / W * W;  // end of the whole packets
    for (Index c = c0; c < n; ++c) {
      wc[c] = Scalar(0);
      fj[c] = F(j, c);
    }
    // wc = B(:, c0:)' x, four rows per pass.
    Index r = 0;
    for (; r + 4 <= m; r += 4) {
      const Scalar* b0 = B + r * ld;
      const Scalar *b1 = b0 + ld, *b2 = b1 + ld, *b3 = b2 + ld;
      const Scalar x0 = b0[j], x1 = b1[j], x2 = b2[j], x3 = b3[j];
      const Packet p0 = pset1<Packet>(x0), p1 = pset1<Packet>(x1), p2 = pset1<Packet>(x2), p3 = pset1<Packet>(x3);
      for (Index c = c0; c < cv; c += W) {
        const Packet s01 = padd(pmul(p0, ploadu<Packet>(b0 + c)), pmul(p1, ploadu<Packet>(b1 + c)));
        const Packet s23 = padd(pmul(p2, ploadu<Packet>(b2 + c)), pmul(p3, ploadu<Packet>(b3 + c)));
        pstoreu(wc + c, padd(ploadu<Packet>(wc + c), padd(s01, s23)));
      }
      for (Index c = cv; c < n; ++c) wc[c] += (x0 * b0[c] + x1 * b1[c]) + (x2 * b2[c] + x3 * b3[c]);
    }
    for (; r < m; ++r) {
      const Scalar* b0 = B + r * ld;
      const Scalar x0 = b0[j];
      for (Index c = c0; c < n; ++c) wc[c] += x0 * b0[c];
    }
    {
      const Packet pv = pset1<Packet>(v0), pt = pset1<Packet>(tau);
      Index c = c0;
      for (; c < cv; c += W) {
        const Packet wv = pmul(pt, padd(ploadu<Packet>(wc + c), pmul(pv, ploadu<Packet>(fj + c))));
        pstoreu(wc + c, wv);
        pstoreu(fj + c, psub(ploadu<Packet>(fj + c), pmul(wv, pv)));
      }
      for (; c < n; ++c) {
        wc[c] = tau * (wc[c] + v0 * fj[c]);
        fj[c] -= wc[c] * v0;
      }
    }
    for (Index c = c0; c < n; ++c) F(j, c) = fj[c];
    // B(:, c0:) -= x wc', four rows per pass; sigma of column c0 on the way.
    sigma = Scalar(0);
    for (r = 0; r + 4 <= m; r += 4) {
      Scalar* b0 = B + r * ld;
      Scalar *b1 = b0 + ld, *b2 = b1 + ld, *b3 = b2 + ld;
      const Scalar x0 = b0[j], x1 = b1[j], x2 = b2[j], x3 = b3[j];
      const Packet p0 = pset1<Packet>(x0), p1 = pset1<Packet>(x1), p2 = pset1<Packet>(x2), p3 = pset1<Packet>(x3);
      for (Index c = c0; c < cv; c += W) {
        const Packet wv = ploadu<Packet>(wc + c);
        pstoreu(b0 + c, psub(ploadu<Packet>(b0 + c), pmul(p0, wv)));
        pstoreu(b1 + c, psub(ploadu<Packet>(b1 + c), pmul(p1, wv)));
        pstoreu(b2 + c, psub(ploadu<Packet>(b2 + c), pmul(p2, wv)));
        pstoreu(b3 + c, psub(ploadu<Packet>(b3 + c), pmul(p3, wv)));
      }
      for (Index c = cv; c < n; ++c) {
        const Scalar wv = wc[c];
        b0[c] -= x0 * wv;
        b1[c] -= x1 * wv;
        b2[c] -= x2 * wv;
        b3[c] -= x3 * wv;
      }
      sigma += b0[c0] * b0[c0] + b1[c0] * b1[c0] + b2[c0] * b2[c0] + b3[c0] * b3[c0];
    }
    for (; r < m; ++r) {
      Scalar* b0 = B + r * ld;
      const Scalar x0 = b0[j];
      for (Index c = c0; c < n; ++c) b0[c] -= x0 * wc[c];
      sigma += b0[c0] * b0[c0];
    }
  }
}

}  // namespace rowfold::detail
