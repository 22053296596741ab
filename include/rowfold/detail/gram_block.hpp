/// @file
/// NormalEquations' blocked ingestion: gathers a block of rows, validates it in cache, centers
/// it on its own weighted means and forms its co-moments with a register-blocked kernel.
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <type_traits>

#include "rowfold/centering.hpp"
#include "rowfold/detail/dims.hpp"
#include "rowfold/detail/row_block.hpp"
#include "rowfold/options.hpp"

/// Columns (K + 1, the regressors and y) from which NormalEquations::addRows folds a row-major X
/// in the row form (GramKernel::rowLower) instead of the column form (GramKernel::lower); 0: the
/// default below. The row form pays with 32 vector registers and packets of four or more
/// scalars (AVX-512); measured in cache, double, ns per row, column form -> row form:
/// K = 8: 5.5 -> 6.9, K = 12: 12.1 -> 9.8, K = 16: 16.9 -> 14.1, K = 32: 61 -> 42,
/// K = 64: 418 -> 211. With SSE2 (16 registers, packets of 2) it lost or tied at every K, so
/// the default keeps the column form there. The test suite defines 2 in a build of its own, so
/// that the row form runs on every target (tests/CMakeLists.txt).
#ifndef ROWFOLD_GRAM_ROW_FORM_FROM
#define ROWFOLD_GRAM_ROW_FORM_FROM 0
#endif

namespace rowfold::detail {

/// Lower triangle of Z' diag(omega) Z (or Z'Z) for a column-major block Z whose row count `len`
/// is a multiple of the packet size (padding rows are zero). Tiles of 2 x 4 dot products share
/// their column loads (2 + 4 loads per 8 multiply-adds, as in the register-blocked kernels of
/// Goto & van de Geijn 2008, ACM TOMS 34(3)); each entry is written once.
template <typename Scalar>
struct GramKernel {
  using Packet = typename Eigen::internal::packet_traits<Scalar>::type;
  static constexpr int kWidth = Eigen::internal::unpacket_traits<Packet>::size;
  /// 32 vector registers (AVX-512, NEON on aarch64), not 16.
  static constexpr bool kWideRegisters = EIGEN_ARCH_DEFAULT_NUMBER_OF_REGISTERS >= 32;

  /// g(i, j) = sum_r omega_r z(r, j) z(r, i) for i >= j, j < n (ld: leading dimension of z,
  /// an Eigen::Index or a std::integral_constant for a compile-time stride; ldg: that of g).
  /// Column pairs against row chunks of at most 6 (2 x 6 tiles: 12 accumulators + 3 loads in
  /// 16 SSE registers), chunks of even size so that no short tile waits on its adder's latency;
  /// an odd n ends with a 3 x 3 tile.
  /// `ahead`: the next block's rows, prefetched a line per packet of rows (PrefetchStream).
  template <bool Weighted, typename Ld>
  static void lower(const Scalar* z, Ld ld, const Scalar* om, Eigen::Index len, Eigen::Index n, Scalar* g,
                    Eigen::Index ldg, PrefetchStream& ahead) {
    if (n == 1) return tile<1, 1, Weighted>(z, ld, om, len, 0, 0, g, ldg, ahead);
    Eigen::Index j = 0;
    for (; n - j > 3 || n - j == 2; j += 2) {
      const Eigen::Index rest = n - j, chunks = (rest + 5) / 6;
      for (Eigen::Index c = 0, i = j; c < chunks; ++c) {
        const Eigen::Index len_c = (rest - (i - j) + (chunks - c) - 1) / (chunks - c);
        switch (len_c) {
          case 1: tile<2, 1, Weighted>(z, ld, om, len, j, i, g, ldg, ahead); break;
          case 2: tile<2, 2, Weighted>(z, ld, om, len, j, i, g, ldg, ahead); break;
          case 3: tile<2, 3, Weighted>(z, ld, om, len, j, i, g, ldg, ahead); break;
          case 4: tile<2, 4, Weighted>(z, ld, om, len, j, i, g, ldg, ahead); break;
          case 5: tile<2, 5, Weighted>(z, ld, om, len, j, i, g, ldg, ahead); break;
          default: tile<2, 6, Weighted>(z, ld, om, len, j, i, g, ldg, ahead); break;
        }
        i += len_c;
      }
    }
    if (n - j == 3) tile<3, 3, Weighted>(z, ld, om, len, j, j, g, ldg, ahead);
  }

  /// out(j) = sum of column j over the first `len` rows (a multiple of the packet size), four
  /// columns per pass: independent adders instead of one latency-bound chain per column.
  template <typename Ld, typename V>
  static void columnSums(const Scalar* z, Ld ld, Eigen::Index len, Eigen::Index n, V& out) {
    using namespace Eigen::internal;
    Eigen::Index j = 0;
    for (; j + 4 <= n; j += 4) {
      Packet s0 = pset1<Packet>(Scalar(0)), s1 = s0, s2 = s0, s3 = s0;
      const Scalar* c = z + j * ld;
      for (Eigen::Index r = 0; r < len; r += kWidth) {
        s0 = padd(s0, ploadu<Packet>(c + r));
        s1 = padd(s1, ploadu<Packet>(c + ld + r));
        s2 = padd(s2, ploadu<Packet>(c + 2 * ld + r));
        s3 = padd(s3, ploadu<Packet>(c + 3 * ld + r));
      }
      out(j) = predux(s0);
      out(j + 1) = predux(s1);
      out(j + 2) = predux(s2);
      out(j + 3) = predux(s3);
    }
    for (; j < n; ++j) {
      Packet s0 = pset1<Packet>(Scalar(0)), s1 = s0;
      const Scalar* c = z + j * ld;
      Eigen::Index r = 0;
      for (; r + 2 * kWidth <= len; r += 2 * kWidth) {
        s0 = padd(s0, ploadu<Packet>(c + r));
        s1 = padd(s1, ploadu<Packet>(c + r + kWidth));
      }
      if (r < len) s0 = padd(s0, ploadu<Packet>(c + r));
      out(j) = predux(padd(s0, s1));
    }
  }

  /// The row form of `lower`, for a row-major block: z holds m rows of stride S (a multiple of
  /// the packet size; columns n..S-1 zero), om their weights. Each row updates a tile of G's
  /// rows i0..i0+MR-1 (its entries broadcast) against NP packets of its columns (the outer
  /// products of Goto & van de Geijn 2008, here one row of the block at a time), so no transpose
  /// and no reduction across lanes. Only the packets that reach the diagonal are formed:
  /// about (n + W/2) n / 2 multiply-adds per row for packet width W. `ahead`: the next block's
  /// rows, prefetched a line per row of every tile (PrefetchStream).
  template <bool Weighted>
  static void rowLower(const Scalar* z, Eigen::Index S, const Scalar* om, Eigen::Index m, Eigen::Index n, Scalar* g,
                       Eigen::Index ldg, PrefetchStream& ahead) {
    for (Eigen::Index i0 = 0; i0 < n; i0 += kRowTile) {
      const int mr = static_cast<int>(n - i0 < kRowTile ? n - i0 : kRowTile);
      const Eigen::Index reach = (i0 + mr - 1) / kWidth + 1;  // packets up to the diagonal
      for (Eigen::Index p0 = 0; p0 < reach; p0 += kRowPackets) {
        const int np = static_cast<int>(reach - p0 < kRowPackets ? reach - p0 : kRowPackets);
        rowTileRows<kRowTile, Weighted>(mr, np, z, S, om, m, i0, p0, g, ldg, ahead);
      }
    }
  }

  /// out[0..S) = sum_r om_r z_r (unweighted: sum_r z_r) over the m rows of a row-major block of
  /// stride S, up to four packets at a time with two adders each.
  template <bool Weighted>
  static void rowSums(const Scalar* z, Eigen::Index S, const Scalar* om, Eigen::Index m, Scalar* out) {
    for (Eigen::Index p0 = 0; p0 < S / kWidth; p0 += 4) {
      switch (S / kWidth - p0) {
        case 1: rowSumPackets<1, Weighted>(z, S, om, m, p0, out); break;
        case 2: rowSumPackets<2, Weighted>(z, S, om, m, p0, out); break;
        case 3: rowSumPackets<3, Weighted>(z, S, om, m, p0, out); break;
        default: rowSumPackets<4, Weighted>(z, S, om, m, p0, out); break;
      }
    }
  }

  /// z_r -= mean for the m rows of a row-major block of stride S (whole packets).
  static void center(Scalar* z, Eigen::Index S, Eigen::Index m, const Scalar* mean) {
    using namespace Eigen::internal;
    for (Eigen::Index r = 0; r < m; ++r, z += S)
      for (Eigen::Index c = 0; c < S; c += kWidth) pstoreu(z + c, psub(ploadu<Packet>(z + c), ploadu<Packet>(mean + c)));
  }

 private:
  /// Row-form tiles: kRowTile x kRowPackets accumulators (24 with 32 vector registers, 12 with 16).
  static constexpr int kRowPackets = 3;
  static constexpr int kRowTile = kWideRegisters ? 8 : 4;

  template <int MR, bool Weighted>
  static void rowTileRows(int mr, int np, const Scalar* z, Eigen::Index S, const Scalar* om, Eigen::Index m,
                          Eigen::Index i0, Eigen::Index p0, Scalar* g, Eigen::Index ldg, PrefetchStream& ahead) {
    if (mr == MR) {
      switch (np) {
        case 1: return rowTile<MR, 1, Weighted>(z, S, om, m, i0, p0, g, ldg, ahead);
        case 2: return rowTile<MR, 2, Weighted>(z, S, om, m, i0, p0, g, ldg, ahead);
        default: return rowTile<MR, 3, Weighted>(z, S, om, m, i0, p0, g, ldg, ahead);
      }
    }
    if constexpr (MR > 1) rowTileRows<MR - 1, Weighted>(mr, np, z, S, om, m, i0, p0, g, ldg, ahead);
  }

  template <int MR, int NP, bool Weighted>
  static void rowTile(const Scalar* z, Eigen::Index S, const Scalar* om, Eigen::Index m, Eigen::Index i0,
                      Eigen::Index p0, Scalar* g, Eigen::Index ldg, PrefetchStream& ahead) {
    using namespace Eigen::internal;
    // U sets of accumulators over alternate rows: a small tile (the y row's) would otherwise
    // wait on the adder's latency at every row.
    constexpr int U = MR * NP >= 8 ? 1 : (MR * NP >= 4 ? 2 : 4);
    Packet acc[U][MR][NP];
    for (int u = 0; u < U; ++u)
      for (int a = 0; a < MR; ++a)
        for (int q = 0; q < NP; ++q) acc[u][a][q] = pset1<Packet>(Scalar(0));
    const auto step = [&](int u, const Scalar* zr, Eigen::Index r) {
      ahead.step();
      Packet b[NP];
      for (int q = 0; q < NP; ++q) b[q] = ploadu<Packet>(zr + (p0 + q) * kWidth);
      if constexpr (Weighted) {
        const Packet w = pset1<Packet>(om[r]);
        for (int q = 0; q < NP; ++q) b[q] = pmul(b[q], w);
      }
      for (int a = 0; a < MR; ++a) {
        const Packet e = pset1<Packet>(zr[i0 + a]);
        for (int q = 0; q < NP; ++q) acc[u][a][q] = pmadd(e, b[q], acc[u][a][q]);
      }
    };
    Eigen::Index r = 0;
    for (; r + U <= m; r += U)
      for (int u = 0; u < U; ++u) step(u, z + (r + u) * S, r + u);
    for (; r < m; ++r) step(0, z + r * S, r);
    for (int u = 1; u < U; ++u)
      for (int a = 0; a < MR; ++a)
        for (int q = 0; q < NP; ++q) acc[0][a][q] = padd(acc[0][a][q], acc[u][a][q]);
    Scalar lanes[kWidth];
    for (int a = 0; a < MR; ++a)
      for (int q = 0; q < NP; ++q) {
        pstoreu(lanes, acc[0][a][q]);
        const Eigen::Index i = i0 + a;
        for (int l = 0; l < kWidth; ++l) {
          const Eigen::Index j = (p0 + q) * kWidth + l;
          if (j <= i) g[j * ldg + i] = lanes[l];
        }
      }
  }

  template <int G, bool Weighted>
  static void rowSumPackets(const Scalar* z, Eigen::Index S, const Scalar* om, Eigen::Index m, Eigen::Index p0,
                            Scalar* out) {
    using namespace Eigen::internal;
    Packet s0[G], s1[G];
    for (int q = 0; q < G; ++q) s0[q] = s1[q] = pset1<Packet>(Scalar(0));
    const Scalar* zr = z + p0 * kWidth;
    Eigen::Index r = 0;
    for (; r + 2 <= m; r += 2, zr += 2 * S)
      for (int q = 0; q < G; ++q) {
        if constexpr (!Weighted) {
          s0[q] = padd(s0[q], ploadu<Packet>(zr + q * kWidth));
          s1[q] = padd(s1[q], ploadu<Packet>(zr + S + q * kWidth));
        } else {
          s0[q] = pmadd(pset1<Packet>(om[r]), ploadu<Packet>(zr + q * kWidth), s0[q]);
          s1[q] = pmadd(pset1<Packet>(om[r + 1]), ploadu<Packet>(zr + S + q * kWidth), s1[q]);
        }
      }
    if (r < m)
      for (int q = 0; q < G; ++q) {
        const Packet v = ploadu<Packet>(zr + q * kWidth);
        if constexpr (Weighted) {
          s0[q] = pmadd(pset1<Packet>(om[r]), v, s0[q]);
        } else {
          s0[q] = padd(s0[q], v);
        }
      }
    for (int q = 0; q < G; ++q) pstoreu(out + (p0 + q) * kWidth, padd(s0[q], s1[q]));
  }

  template <int MR, int NR, bool Weighted, typename Ld>
  static void tile(const Scalar* z, Ld ld, const Scalar* om, Eigen::Index len, Eigen::Index j0,
                   Eigen::Index i0, Scalar* g, Eigen::Index ldg, PrefetchStream& ahead) {
    using namespace Eigen::internal;
    Packet acc[MR][NR];
    for (int m = 0; m < MR; ++m)
      for (int q = 0; q < NR; ++q) acc[m][q] = pset1<Packet>(Scalar(0));
    const Scalar* a0 = z + j0 * ld;
    const Scalar* b0 = z + i0 * ld;
    for (Eigen::Index r = 0; r < len; r += kWidth) {
      ahead.step();
      Packet a[MR], b[NR];
      for (int m = 0; m < MR; ++m) a[m] = ploadu<Packet>(a0 + m * ld + r);
      if constexpr (Weighted) {
        const Packet w = ploadu<Packet>(om + r);
        for (int m = 0; m < MR; ++m) a[m] = pmul(a[m], w);
      }
      for (int q = 0; q < NR; ++q) b[q] = ploadu<Packet>(b0 + q * ld + r);
      for (int m = 0; m < MR; ++m)
        for (int q = 0; q < NR; ++q) acc[m][q] = pmadd(a[m], b[q], acc[m][q]);
    }
    for (int m = 0; m < MR; ++m)
      for (int q = 0; q < NR; ++q)
        if (i0 + q >= j0 + m) g[(j0 + m) * ldg + i0 + q] = predux(acc[m][q]);
  }
};

/// Scratch and steps of one block of rows [x y] for NormalEquations' addRows (column-major, each
/// column contiguous; rows padded with zeros to the packet size). Sized once at construction.
template <typename Scalar, int K, int MaxK>
class GramBlock {
  using D = Dims<Scalar, K, MaxK>;
  static constexpr int kWidth = GramKernel<Scalar>::kWidth;
  // Multiples of 16 rows: whole packets for every scalar and instruction set.
  static constexpr int clampRows(int r) { return (r < 16 ? 16 : (r > 256 ? 256 : r)) / 16 * 16; }

 public:
  /// Rows per block for a compile-time bound on K: about 2048 scalars, 16..256 rows (multiple of 16).
  static constexpr int kFixedRows = D::MaxK1 == Eigen::Dynamic ? Eigen::Dynamic : clampRows(2048 / D::MaxK1);
  /// Unused rows after each column: the column stride is then no power of two (columns whose
  /// addresses agree modulo 4 KiB slow the strided writes of `gather`).
  static constexpr int kPad = 8;
  using Block = Eigen::Matrix<Scalar, Eigen::Dynamic, D::K1, Eigen::ColMajor,
                              kFixedRows == Eigen::Dynamic ? Eigen::Dynamic : kFixedRows + kPad, D::MaxK1>;
  using Weights = Eigen::Matrix<Scalar, Eigen::Dynamic, 1, Eigen::ColMajor, kFixedRows, 1>;
  using Vector1 = typename D::Vector1;
  using Matrix1 = typename D::Matrix1;

  static Eigen::Index rowsFor(Eigen::Index k) {
    return D::MaxK1 != Eigen::Dynamic ? kFixedRows : clampRows(static_cast<int>(2048 / (k + 1)));
  }

  /// Whether the rows of X are folded in the row form: X row-major (each row is copied whole
  /// into a row-major block, no transpose, and multiplied out by GramKernel::rowLower) and
  /// K + 1 at least ROWFOLD_GRAM_ROW_FORM_FROM. Otherwise the column form (the block's columns
  /// gathered, dot products along them).
  template <typename XD>
  bool rowForm() const {
    if constexpr (!bool(XD::IsRowMajor) || XD::ColsAtCompileTime == 1) {
      return false;
    } else {
      constexpr Eigen::Index wide = GramKernel<Scalar>::kWideRegisters && kWidth >= 4 ? kWidth + kWidth / 2 + 1 : 0;
      constexpr Eigen::Index from = ROWFOLD_GRAM_ROW_FORM_FROM > 0 ? ROWFOLD_GRAM_ROW_FORM_FROM : wide;
      return from > 0 && m_z.cols() >= from;
    }
  }

  explicit GramBlock(Eigen::Index k)
      : m_z(rowsFor(k) + kPad, k + 1), m_omega(rowsFor(k)), m_mean(k + 1), m_diff(k + 1), m_g(k + 1, k + 1) {
    clear();
  }

  /// Back to the contents of construction (all zero).
  void clear() {
    m_z.setZero();
    m_omega.setZero();
    m_mean.setZero();
    m_diff.setZero();
    m_g.setZero();
  }

  /// Copies the next block of rows with nonzero weight from row `i` on (advancing `i` past every
  /// row read, zero-weight ones included); returns the number gathered. Zero-weight rows are
  /// skipped: like in `add`, they do not age the state.
  template <typename XD, typename YD, typename WD>
  Eigen::Index gather(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, const WD* w, Eigen::Index& i) {
    const Eigen::Index cap = m_z.rows() - kPad, rows = X.rows();
    Eigen::Index nb = 0;
    if (rowForm<XD>()) {
      const Eigen::Index S = rowStride(), rcap = rowCapacity();
      Scalar* const z = m_z.data();
      if (w == nullptr) {
        nb = rows - i < rcap ? rows - i : rcap;
        for (Eigen::Index r = 0; r < nb; ++r) copyRow(X, y, i + r, z + r * S, S);
        i += nb;
        return nb;
      }
      for (; i < rows && nb < rcap; ++i) {
        const Scalar wi = Scalar((*w)(i));
        if (wi == Scalar(0)) continue;
        copyRow(X, y, i, z + nb * S, S);
        m_omega(nb++) = wi;
      }
      return nb;
    } else {
      if (w == nullptr) {
        nb = rows - i < cap ? rows - i : cap;
        copyRows<K>(X, y, i, nb, m_z.data(), stride());
        i += nb;
        return nb;
      }
      return gatherWeighted(X, y, *w, i, cap, m_z, m_omega);
    }
  }

  /// The block that `gather` would copy from row `i` on: prefetches its y entries now and
  /// returns its rows of X, for `fold` to ask for while it folds this block (PrefetchStream).
  template <typename XD, typename YD>
  PrefetchStream prefetch(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, Eigen::Index i) const {
    const Eigen::Index m = rowForm<XD>() ? rowCapacity() : m_z.rows() - kPad;
    prefetchEntries<Scalar>(y, i, m);
    return aheadRows<Scalar>(X, i, m);
  }

  /// After fold: false if the last block had a NaN or Inf (or squares that overflow): its
  /// co-moment diagonal (sums of squares of the centered columns) is then not finite.
  bool finite() const { return (m_g.diagonal().array() * Scalar(0)).sum() == Scalar(0); }

  /// gram <- p gram + c diff diff' + add (lower triangles): the pairwise combination of
  /// Chan, Golub & LeVeque (1983) with the co-moments `add` of the later part.
  static void combine(Matrix1& gram, Scalar p, Scalar c, const Vector1& diff, const Matrix1& add) {
    const Eigen::Index n = gram.cols();
    Scalar* const a = gram.data();
    const Scalar* const g = add.data();
    for (Eigen::Index j = 0; j < n; ++j) {
      Scalar* __restrict aj = a + j * n;
      const Scalar* __restrict gj = g + j * n;
      const Scalar cj = c * diff(j);
      if (p != Scalar(1)) {
        for (Eigen::Index i = j; i < n; ++i) aj[i] = p * aj[i] + cj * diff(i) + gj[i];
      } else {
        for (Eigen::Index i = j; i < n; ++i) aj[i] += cj * diff(i) + gj[i];
      }
    }
  }

  /// Folds the nb gathered rows into the co-moments `gram` (lower triangle) and `centering`
  /// (pairwise update of Chan, Golub & LeVeque 1983, Am. Stat. 37(3):242-247, under forgetting;
  /// NUMERICS §4.1, §5): rows weighted by w lambda^age within the block (age nb-1-r for row r),
  /// centered on the block's weighted means, G <- lambda^nb G + c diff diff' + Z' diag(omega) Z.
  /// Returns lambda^nb.
  /// `rows`: rowForm<XD>() of the X that `gather` copied the block from (no default: the two
  /// must agree). `ahead`: the next block's rows (prefetch; empty for none).
  Scalar fold(Eigen::Index nb, bool weighted, Scalar lambda, Intercept mode, Centering<Scalar, K, MaxK>& centering,
              Matrix1& gram, bool rows, PrefetchStream& ahead) {
    const Eigen::Index n = m_z.cols();
    Scalar p = Scalar(1), f = Scalar(nb), f2 = Scalar(nb);
    const bool unit = !weighted && lambda == Scalar(1);
    if (!unit) {
      if (!weighted) m_omega.head(nb).setOnes();
      f = f2 = Scalar(0);
      for (Eigen::Index r = nb - 1; r >= 0; --r) {
        m_omega(r) *= p;
        f += p;
        f2 += p * p;
        p *= lambda;
      }
    }
    const Scalar wB = unit ? Scalar(nb) : m_omega.head(nb).sum();  // the block's weight
    if (rows) {
      foldRowForm(nb, unit, wB, mode, ahead);
    } else {
      foldColumnForm(nb, unit, wB, mode, ahead);
    }
    const Scalar c = centering.mergeBlock(p, p * p, wB, m_mean, m_g(n - 1, n - 1), f, f2,
                                          static_cast<std::uint64_t>(nb), mode, m_diff);
    combine(gram, p, c, m_diff, m_g);
    return p;
  }

 private:
  /// Row form: stride of a row (K + 1 rounded up to whole packets), and rows per block (the
  /// block's storage less one row, which holds the column sums; at most one weight per row).
  auto rowStride() const {
    if constexpr (D::K1 != Eigen::Dynamic) {
      return std::integral_constant<Eigen::Index, (D::K1 + kWidth - 1) / kWidth * kWidth>();
    } else {
      return (m_z.cols() + kWidth - 1) / kWidth * kWidth;
    }
  }
  Eigen::Index rowCapacity() const {
    const Eigen::Index r = m_z.size() / rowStride() - 1;
    return r > m_omega.size() ? m_omega.size() : r;
  }

  /// Row i of [X y] into out[0..S), zeros on the pad columns (whatever the column form left
  /// there). Scalar stores: a vector store may alias X's data pointer, which is then reloaded.
  template <typename XD, typename YD>
  static void copyRow(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, Eigen::Index i, Scalar* out,
                      Eigen::Index S) {
    const Eigen::Index k = K != Eigen::Dynamic ? Eigen::Index(K) : X.cols();
    Eigen::Map<Eigen::Matrix<Scalar, 1, K>>(out, 1, k) = X.row(i).template cast<Scalar>();
    out[k] = Scalar(y(i));
    for (Eigen::Index j = k + 1; j < S; ++j) out[j] = Scalar(0);
  }

  /// Row form: centers the nb rows (weight wB in all) on their weighted means (m_mean) and
  /// forms their co-moments in m_g (lower triangle).
  void foldRowForm(Eigen::Index nb, bool unit, Scalar wB, Intercept mode, PrefetchStream& ahead) {
    using Kernel = GramKernel<Scalar>;
    const Eigen::Index n = m_z.cols(), S = rowStride();
    Scalar* const z = m_z.data();
    const Scalar* const om = m_omega.data();
    if (mode == Intercept::fit) {
      Scalar* const sums = z + rowCapacity() * S;  // the spare row after the block
      if (unit) {
        Kernel::template rowSums<false>(z, S, nullptr, nb, sums);
      } else {
        Kernel::template rowSums<true>(z, S, om, nb, sums);
      }
      for (Eigen::Index j = 0; j < S; ++j) sums[j] /= wB;  // the means (zero on the pad columns)
      m_mean = Eigen::Map<const Vector1>(sums, n);
      Kernel::center(z, S, nb, sums);
    } else {
      m_mean.setZero();
    }
    if (unit) {
      Kernel::template rowLower<false>(z, S, nullptr, nb, n, m_g.data(), n, ahead);
    } else {
      Kernel::template rowLower<true>(z, S, om, nb, n, m_g.data(), n, ahead);
    }
  }

  /// Column form: the same from the column-major block.
  void foldColumnForm(Eigen::Index nb, bool unit, Scalar wB, Intercept mode, PrefetchStream& ahead) {
    const Eigen::Index n = m_z.cols();
    // Zero padding up to the packet size: the kernels run whole packets.
    const Eigen::Index len = (nb + kWidth - 1) / kWidth * kWidth;
    if (len > nb) {
      m_z.middleRows(nb, len - nb).setZero();
      m_omega.segment(nb, len - nb).setZero();
    }
    const auto om = m_omega.head(nb);
    if (mode == Intercept::fit) {
      if (unit) GramKernel<Scalar>::columnSums(m_z.data(), stride(), len, n, m_mean);
      for (Eigen::Index j = 0; j < n; ++j) {
        auto zj = m_z.col(j).head(nb);
        m_mean(j) = (unit ? m_mean(j) : om.dot(zj)) / wB;
        zj.array() -= m_mean(j);
      }
    } else {
      m_mean.setZero();
    }
    Scalar* const g = m_g.data();
    if (unit) {
      GramKernel<Scalar>::template lower<false>(m_z.data(), stride(), nullptr, len, n, g, n, ahead);
    } else {
      GramKernel<Scalar>::template lower<true>(m_z.data(), stride(), m_omega.data(), len, n, g, n, ahead);
    }
  }

  /// Column stride of the block: a compile-time constant for a compile-time bound on K (one base
  /// register and constant offsets address every column).
  auto stride() const {
    if constexpr (kFixedRows != Eigen::Dynamic) {
      return std::integral_constant<Eigen::Index, kFixedRows + kPad>();
    } else {
      return m_z.rows();
    }
  }

  Block m_z;
  Weights m_omega;
  Vector1 m_mean, m_diff;
  Matrix1 m_g;
};

}  // namespace rowfold::detail
