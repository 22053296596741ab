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
#include "rowfold/detail/prefetch.hpp"

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
/// `ahead` (the next block's rows) is asked for in equal shares, one per column.
/// Cost about 2 m n^2 flops; never allocates.
template <typename Scalar, typename FM>
void foldBlockHouseholder(FM& F, Scalar* B, Eigen::Index m, Eigen::Index ld, Scalar* e, PrefetchStream& ahead) {
  using Index = Eigen::Index;
  const Index n = F.cols();
  for (Index j = 0; j < n; ++j) {
    ahead.share(n - j);
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

/// Reflectors per panel of foldRowsHouseholder: each pass over the trailing part of the block
/// applies this many at once.
inline constexpr Eigen::Index kPanel = 4;
/// Most rows foldRowsHouseholder takes in one call (its panel copy lives on the stack).
inline constexpr Eigen::Index kPanelMaxRows = 72;

/// Packets of columns per step of the panel kernels: kPanel x T accumulators stay in registers.
template <typename Scalar>
constexpr int panelTile() {
  return Eigen::internal::packet_traits<Scalar>::size == 1 ? 1 : (EIGEN_ARCH_DEFAULT_NUMBER_OF_REGISTERS >= 32 ? 3 : 2);
}

/// True where a packet with one value in every lane is best loaded from a copy made once:
/// x86 below AVX, whose broadcast from memory takes two instructions.
#if defined(EIGEN_VECTORIZE_SSE) && !defined(EIGEN_VECTORIZE_AVX)
inline constexpr bool kPreBroadcast = true;
#else
inline constexpr bool kPreBroadcast = false;
#endif

/// Entry i of x in every lane: from x[i], or from the broadcast copy at x + i W (kPreBroadcast).
template <typename Packet, typename Scalar>
Packet panelValue(const Scalar* x, Eigen::Index i) {
  using namespace Eigen::internal;
  if constexpr (kPreBroadcast)
    return pload<Packet>(x + i * unpacket_traits<Packet>::size);
  else
    return pset1<Packet>(x[i]);
}

/// D_q(c .. c + T W - 1) = sum_r x_q(r) B(r, c ..) for the kPanel columns x_q = x + q mx (m
/// entries each) and T packets of columns of B (row-major, leading dimension ld); into the rows
/// of d (stride ld).
template <int T, typename Scalar>
void panelDots(const Scalar* __restrict B, Eigen::Index ld, Eigen::Index m, const Scalar* __restrict x,
               Eigen::Index mx, Eigen::Index c, Scalar* __restrict d) {
  using namespace Eigen::internal;
  using Packet = typename packet_traits<Scalar>::type;
  constexpr Eigen::Index W = packet_traits<Scalar>::size, P = kPanel;
  Packet acc[P][T];
  for (Eigen::Index q = 0; q < P; ++q)
    for (int t = 0; t < T; ++t) acc[q][t] = pset1<Packet>(Scalar(0));
  for (Eigen::Index r = 0; r < m; ++r) {
    Packet xq[P];
    for (Eigen::Index q = 0; q < P; ++q) xq[q] = panelValue<Packet>(x, q * mx + r);
    for (int t = 0; t < T; ++t) {
      const Packet b = ploadu<Packet>(B + r * ld + c + t * W);
      for (Eigen::Index q = 0; q < P; ++q) acc[q][t] = pmadd(xq[q], b, acc[q][t]);
    }
  }
  for (Eigen::Index q = 0; q < P; ++q)
    for (int t = 0; t < T; ++t) pstoreu(d + q * ld + c + t * W, acc[q][t]);
}

/// B(r, c .. c + T W - 1) -= sum_q x_q(r) w_q(c ..) for T packets of columns (x_q as in
/// panelDots, w_q the rows of w, stride ld).
template <int T, typename Scalar>
void panelUpdates(Scalar* __restrict B, Eigen::Index ld, Eigen::Index m, const Scalar* __restrict x,
                  Eigen::Index mx, Eigen::Index c, const Scalar* __restrict w) {
  using namespace Eigen::internal;
  using Packet = typename packet_traits<Scalar>::type;
  constexpr Eigen::Index W = packet_traits<Scalar>::size, P = kPanel;
  Packet nw[P][T];
  for (Eigen::Index q = 0; q < P; ++q)
    for (int t = 0; t < T; ++t) nw[q][t] = pnegate(ploadu<Packet>(w + q * ld + c + t * W));
  for (Eigen::Index r = 0; r < m; ++r) {
    Packet xq[P];
    for (Eigen::Index q = 0; q < P; ++q) xq[q] = panelValue<Packet>(x, q * mx + r);
    for (int t = 0; t < T; ++t) {
      Scalar* br = B + r * ld + c + t * W;
      Packet b = ploadu<Packet>(br);
      for (Eigen::Index q = 0; q < P; ++q) b = pmadd(xq[q], nw[q][t], b);
      pstoreu(br, b);
    }
  }
}

/// Row-major, blocked form of foldBlockHouseholder for wide factors (many columns, few rows per
/// block). B holds the m <= kPanelMaxRows rows to fold (row-major, leading dimension ld, no
/// extra row); ld is a multiple of the SIMD packet size, and the pad columns n .. ld-1 of B are
/// zero. S is scratch of 2 kPanel ld entries. The same reflectors as foldBlockHouseholder, in panels of
/// kPanel columns (the compact WY idea of Schreiber & Van Loan 1989, "A storage-efficient WY
/// representation for products of Householder transformations", SIAM J. Sci. Stat. Comput.
/// 10(1); for a triangle on a block as in LAPACK's xTPQRT):
/// - the panel's columns are copied out (contiguous), and its reflectors are found and applied
///   within the panel column by column;
/// - one pass over the block gives the inner products D = X' B of the panel's reflector parts
///   below F (X, m x kPanel) with the trailing columns; since reflector q changes only row
///   j0 + q of F,
///     w_q = tau_q (v0_q F(j0 + q, :) + D_q - sum_{s<q} (x_q' x_s) w_s),  F(j0 + q, :) -= v0_q w_q;
/// - a second pass applies B -= X W.
/// Each element of the block is loaded and stored once per panel instead of once per reflector.
/// The trailing passes run in whole packets, from the packet boundary at or below the first
/// trailing column (w is zeroed on the columns before it, so the stale panel columns of B stay
/// as they are) to ld. `ahead` (the next block's rows) is asked for in equal shares, one per
/// panel. Cost about 2 m n^2 flops; never allocates.
template <typename Scalar, typename FM>
void foldRowsHouseholder(FM& F, Scalar* __restrict B, Eigen::Index m, Eigen::Index ld, Scalar* __restrict S,
                         PrefetchStream& ahead) {
  using namespace Eigen::internal;
  using Index = Eigen::Index;
  using Packet = typename packet_traits<Scalar>::type;
  constexpr Index W = packet_traits<Scalar>::size, P = kPanel, M = kPanelMaxRows;
  static_assert(P == 4, "the Gram products below are written out for four columns");
  constexpr int T = panelTile<Scalar>();
  const Index n = F.cols();
  eigen_assert(m <= M && ld % W == 0);
  Scalar* const wq = S;           // P rows of ld: the inner products D_q, then w_q
  Scalar* const fq = S + P * ld;  // P rows of ld: rows j0 .. j0 + P - 1 of F
  Scalar px[P * M];               // the panel's columns, column q at px + q M
  EIGEN_ALIGN_MAX Scalar xb[kPreBroadcast ? P * M * W : 1];  // px, each entry in a whole packet
  for (Index j0 = 0; j0 < n; j0 += P) {
    ahead.share((n - j0 + P - 1) / P);
    const Index pb = n - j0 < P ? n - j0 : P;  // reflectors in this panel
    Scalar v0[P] = {}, tau[P] = {};            // tau 0: the identity
    for (Index r = 0; r < m; ++r)
      for (Index q = 0; q < P; ++q) px[q * M + r] = q < pb ? B[r * ld + j0 + q] : Scalar(0);
    // The panel, column by column.
    for (Index q = 0; q < pb; ++q) {
      const Index j = j0 + q;
      Scalar* x = px + q * M;
      Scalar sigma;
      columnDots<1>(x, x, M, m, &sigma);
      if (sigma == Scalar(0)) continue;  // nothing below the diagonal: identity
      Scalar none = Scalar(0);
      F(j, j) = makeReflector(F(j, j), sigma, x, m, Index(1), none, v0[q], tau[q]);
      for (Index c = q + 1; c < pb; ++c) {
        Scalar s;
        columnDots<1>(x, px + c * M, M, m, &s);
        s = tau[q] * (s + v0[q] * F(j, j0 + c));
        F(j, j0 + c) -= s * v0[q];
        columnUpdates<1>(x, px + c * M, M, m, &s);
      }
    }
    const Index c1 = j0 + pb;  // first trailing column
    if (c1 >= n) break;
    const Index ca = c1 / W * W;  // the packet boundary at or below it
    const Scalar* xs = px;        // what the trailing passes broadcast x from
    if constexpr (kPreBroadcast) {
      for (Index q = 0; q < P; ++q)
        for (Index r = 0; r < m; ++r) pstore(xb + (q * M + r) * W, pset1<Packet>(px[q * M + r]));
      xs = xb;
    }
    Scalar g1[1], g2[2], g3[3];   // gq[s] = x_q' x_s, s < q
    columnDots<1>(px + M, px, M, m, g1);
    columnDots<2>(px + 2 * M, px, M, m, g2);
    columnDots<3>(px + 3 * M, px, M, m, g3);
    const Scalar* const g[P] = {nullptr, g1, g2, g3};
    for (Index q = 0; q < P; ++q) {
      Scalar* fr = fq + q * ld;
      const Index end = q < pb ? n : c1;  // row j0 + q of F on [c1, end), zeros elsewhere
      for (Index c = ca; c < c1; ++c) fr[c] = Scalar(0);
      for (Index c = c1; c < end; ++c) fr[c] = F(j0 + q, c);
      for (Index c = end; c < ld; ++c) fr[c] = Scalar(0);
    }
    // D = X' B(:, ca:), T packets of columns per pass down the block.
    Index c = ca;
    for (; c + T * W <= ld; c += T * W) panelDots<T>(B, ld, m, xs, M, c, wq);
    for (; c < ld; c += W) panelDots<1>(B, ld, m, xs, M, c, wq);
    // w_q and the rows of F, in order of q.
    for (Index q = 0; q < P; ++q) {
      const Packet pv = pset1<Packet>(v0[q]), pt = pset1<Packet>(tau[q]);
      for (c = ca; c < ld; c += W) {
        Packet d = padd(ploadu<Packet>(wq + q * ld + c), pmul(pv, ploadu<Packet>(fq + q * ld + c)));
        for (Index s = 0; s < q; ++s) d = psub(d, pmul(pset1<Packet>(g[q][s]), ploadu<Packet>(wq + s * ld + c)));
        const Packet w = pmul(pt, d);
        pstoreu(wq + q * ld + c, w);
        pstoreu(fq + q * ld + c, psub(ploadu<Packet>(fq + q * ld + c), pmul(pv, w)));
      }
      for (c = ca; c < c1; ++c) wq[q * ld + c] = Scalar(0);  // the panel's own columns stay
    }
    for (Index q = 0; q < pb; ++q)
      for (c = c1; c < n; ++c) F(j0 + q, c) = fq[q * ld + c];
    // B(:, ca:) -= X W.
    for (c = ca; c + T * W <= ld; c += T * W) panelUpdates<T>(B, ld, m, xs, M, c, wq);
    for (; c < ld; c += W) panelUpdates<1>(B, ld, m, xs, M, c, wq);
  }
}

}  // namespace rowfold::detail
