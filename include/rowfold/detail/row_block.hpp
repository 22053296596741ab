/// @file
/// Blocked ingestion shared by the estimators' addRows: gathers a block of validated rows,
/// weights them by forgetting within the block, centers them on the block's weighted means and
/// merges those means into the running centering (pairwise update, Chan, Golub & LeVeque 1983).
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <type_traits>

#include "rowfold/centering.hpp"
#include "rowfold/detail/dims.hpp"
#include "rowfold/detail/prefetch.hpp"
#include "rowfold/detail/short_dot.hpp"
#include "rowfold/options.hpp"

namespace rowfold::detail {

/// Copies rows of nonzero weight from row `i` on into the rows of `z` ([x y]) and `omega` (their
/// weights), at most `cap` of them, advancing `i` past every row read; returns how many.
template <typename XD, typename YD, typename WD, typename ZD, typename OD>
Eigen::Index gatherWeighted(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, const WD& w, Eigen::Index& i,
                            Eigen::Index cap, Eigen::MatrixBase<ZD>& z, Eigen::MatrixBase<OD>& omega) {
  using Scalar = typename ZD::Scalar;
  const Eigen::Index k = X.cols(), rows = X.rows();
  Eigen::Index nb = 0;
  for (; i < rows && nb < cap; ++i) {
    const Scalar wi = Scalar(w(i));
    if (wi == Scalar(0)) continue;
    z.row(nb).head(k) = X.row(i);
    z(nb, k) = Scalar(y(i));
    omega(nb) = wi;
    ++nb;
  }
  return nb;
}

/// Copies rows [i, i + nb) of X and y into the columns of the column-major block z (column
/// stride ld; k = X.cols() regressors, then y). Row by row, in the source's order: a row-major
/// X streams and the block's strided writes stay in L1 (reading down the columns instead waits
/// on one cache miss per row).
template <int K, typename XD, typename YD, typename Scalar, typename Ld>
void copyRows(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, Eigen::Index i, Eigen::Index nb,
              Scalar* z, Ld ld) {
  const Eigen::Index kk = K != Eigen::Dynamic ? Eigen::Index(K) : X.cols();
  for (Eigen::Index r = 0; r < nb; ++r) {
    for (Eigen::Index j = 0; j < kk; ++j) z[j * ld + r] = X(i + r, j);
    z[kk * ld + r] = Scalar(y(i + r));
  }
}

/// Scratch for one block of rows [x y] (column-major, so each column of the block is
/// contiguous) and their weights. Sized once at construction (up to 64 rows, about 4096 scalars
/// for K + 1 > 64).
template <typename Scalar, int K, int MaxK>
class RowBlock {
  using D = Dims<Scalar, K, MaxK>;

 public:
  /// Scalars per block, and rows per block: 64, fewer for K + 1 > 64 (at least 8). Blocks of
  /// many rows amortize the per-block work whose cost does not grow with the rows: GivensQr's
  /// reflectors are a chain of dependent square roots and divisions per block (measured at
  /// K = 64, native, in cache: 15 rows per block took about 1.9x the time per row of 63).
  static constexpr int kScalars = 4096, kMaxRows = 64, kMinRows = 8;
  /// Rows per block for a compile-time bound on K.
  static constexpr int kFixedRows =
      D::MaxK1 == Eigen::Dynamic
          ? Eigen::Dynamic
          : (kScalars / D::MaxK1 < kMinRows ? kMinRows
                                            : (kScalars / D::MaxK1 > kMaxRows ? kMaxRows : kScalars / D::MaxK1));
  using Block = Eigen::Matrix<Scalar, Eigen::Dynamic, D::K1, Eigen::ColMajor, kFixedRows, D::MaxK1>;
  using Weights = Eigen::Matrix<Scalar, Eigen::Dynamic, 1, Eigen::ColMajor, kFixedRows, 1>;
  using Vector1 = typename D::Vector1;

  /// What a block contributes besides its centered rows.
  struct Merge {
    Scalar ageing;  ///< lambda^b: factor on the running state's co-moments (b rows in the block)
    Scalar weight;  ///< W_A W_B / W': weight of the mean-difference row `diff`
    bool unit;      ///< every row weight is exactly 1 (no weights, no forgetting)
  };

  static Eigen::Index rowsFor(Eigen::Index k) {
    if (D::MaxK1 != Eigen::Dynamic) return kFixedRows;
    const Eigen::Index r = kScalars / (k + 1);
    return r < kMinRows ? kMinRows : (r > kMaxRows ? kMaxRows : r);
  }

  explicit RowBlock(Eigen::Index k)
      : m_z(rowsFor(k), k + 1), m_omega(rowsFor(k)), m_tmp(rowsFor(k)), m_mean(k + 1), m_diff(k + 1) {
    m_z.setZero();
    m_omega.setZero();
    m_tmp.setZero();
    m_mean.setZero();
    m_diff.setZero();
  }

  /// Copies the next block of rows with nonzero weight from row `i` on (advancing `i`); returns
  /// the number of rows gathered (0 when none are left). Zero-weight rows are skipped: like in
  /// `add`, they do not age the state.
  template <typename XD, typename YD, typename WD>
  Eigen::Index gather(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, const WD* w, Eigen::Index& i) {
    const Eigen::Index cap = m_z.rows(), rows = X.rows();
    Eigen::Index nb = 0;
    if (w == nullptr) {
      nb = rows - i < cap ? rows - i : cap;
      copyRows<K>(X, y, i, nb, m_z.data(), m_z.rows());
      m_omega.head(nb).setOnes();
      i += nb;
      return nb;
    }
    return gatherWeighted(X, y, *w, i, cap, m_z, m_omega);
  }

  /// The block that `gather` would copy from row `i` on: prefetches its y entries now and
  /// returns its rows of X, for the fold of this block to ask for (PrefetchStream).
  template <typename XD, typename YD>
  PrefetchStream prefetch(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, Eigen::Index i) const {
    prefetchEntries<Scalar>(y, i, m_z.rows());
    return aheadRows<Scalar>(X, i, m_z.rows());
  }

  /// Weights the nb gathered rows by lambda^age (age nb-1-r for row r at the end of the block),
  /// centers them on their weighted means (`Intercept::fit`) and merges the block's weight sums
  /// and means into `centering` (NUMERICS §4.1, §5). Afterwards rows() holds the centered rows,
  /// weights() their weights, diff() = block mean - old running mean.
  Merge prepare(Eigen::Index nb, Scalar lambda, Intercept mode, Centering<Scalar, K, MaxK>& centering) {
    const Eigen::Index n = m_z.cols();
    Scalar p = Scalar(1), f = Scalar(0), f2 = Scalar(0);
    bool unit = lambda == Scalar(1);
    if (unit) {
      f = f2 = Scalar(nb);
      unit = (m_omega.head(nb).array() == Scalar(1)).all();
    } else {
      for (Eigen::Index r = nb - 1; r >= 0; --r) {
        m_omega(r) *= p;
        f += p;
        f2 += p * p;
        p *= lambda;
      }
    }
    const Scalar* const om = unit ? nullptr : m_omega.data();  // nullptr: unit weights
    const Scalar wB = unit ? Scalar(nb) : interleavedDot<4>(m_omega.data(), static_cast<const Scalar*>(nullptr), nb);
    if (mode == Intercept::fit) {
      for (Eigen::Index j = 0; j < n; ++j) {
        m_mean(j) = interleavedDot<4>(m_z.col(j).data(), om, nb) / wB;
        m_z.col(j).head(nb).array() -= m_mean(j);
      }
    } else {
      m_mean.setZero();
    }
    const auto yc = m_z.col(n - 1).head(nb);
    const Scalar syyB = unit ? interleavedDot<4>(yc.data(), yc.data(), nb) : m_omega.head(nb).dot(yc.cwiseAbs2());
    const Scalar c =
        centering.mergeBlock(p, p * p, wB, m_mean, syyB, f, f2, static_cast<std::uint64_t>(nb), mode, m_diff);
    return Merge{p, c, unit};
  }

  Block& rows() { return m_z; }
  const Weights& weights() const { return m_omega; }
  Weights& tmp() { return m_tmp; }
  const Vector1& diff() const { return m_diff; }

 private:
  Block m_z;
  Weights m_omega, m_tmp;
  Vector1 m_mean, m_diff;
};

}  // namespace rowfold::detail
