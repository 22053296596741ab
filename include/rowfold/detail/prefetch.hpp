/// @file
/// Prefetching the next block of rows while the blocked addRows folds this one.
#pragma once

#include <Eigen/Core>
#include <cstddef>
#include <type_traits>

#include "rowfold/detail/target.hpp"

namespace rowfold::detail {

#if defined(__GNUC__)
#define ROWFOLD_DETAIL_PREFETCH 1
#else
#define ROWFOLD_DETAIL_PREFETCH 0
#endif

/// A range of memory prefetched a cache line at a time, spread over the arithmetic of a fold:
/// the blocked addRows sets it to the next block's rows, and the kernels that fold this block ask
/// for it bit by bit (GramKernel: step() once per row or packet of rows; the Householder folds:
/// share() once per column or panel). Issued all at once before the fold, the same prefetches
/// bought nothing: from DRAM, addRows took the time it took with no prefetch at all, the stream
/// and the arithmetic taking turns. Spread (native, 10^6 rows from DRAM, double): NormalEquations
/// K = 16 23 -> 18 ms, GivensQr K = 8 19 -> 15 ms, K = 16 47 -> 37 ms. Lines left when the fold
/// ends are not asked for (the copy finds them).
struct PrefetchStream {
  /// Whether anything is asked for: with GCC and Clang (__builtin_prefetch), except on M-profile
  /// ARM (Cortex-M), whose rows come from on-chip memory with no data cache, or a small one, to
  /// fill; there every step() and share() is empty.
  static constexpr bool enabled = ROWFOLD_DETAIL_PREFETCH != 0 && !kMicrocontroller;

  /// The next line to ask for and how many are left (next moves only while one is left, so it
  /// stays inside the range).
  const char* next = nullptr;
  std::size_t left = 0;

  PrefetchStream() = default;
  /// The lines that hold the bytes [from, to).
  PrefetchStream(const void* from, const void* to) : next(static_cast<const char*>(from)) {
    const char* const end = static_cast<const char*>(to);
    if (end > next) left = (static_cast<std::size_t>(end - next) + 63) / 64;
  }

  /// The next line, if any is left.
  void step() {
    if constexpr (enabled) {
      if (left > 0) {
        touch(next);
        if (--left > 0) next += 64;
      }
    }
  }
  /// The next of `parts` equal shares of the lines left (all of them for parts <= 1), for a
  /// loop whose steps are few and long.
  void share(Eigen::Index parts) {
    if constexpr (enabled) {
      const std::size_t n = parts > 1 ? static_cast<std::size_t>(parts) : 1;
      for (std::size_t t = (left + n - 1) / n; t > 0; --t) step();
    }
  }
  /// Every line left, now.
  void finish() {
    if constexpr (enabled) {
      while (left > 0) step();
    }
  }

 private:
  static void touch(const char* p) {
#if ROWFOLD_DETAIL_PREFETCH
    __builtin_prefetch(p, 0, 3);
#else
    (void)p;
#endif
  }
};

#undef ROWFOLD_DETAIL_PREFETCH

/// Rows [i, i + m) of a row-major X as a PrefetchStream (from the first row's first entry to the
/// last row's last one: for a block of a wider matrix, the range ends inside the data); an
/// empty one for other layouts.
template <typename Scalar, typename XD>
PrefetchStream aheadRows(const Eigen::MatrixBase<XD>& X, Eigen::Index i, Eigen::Index m) {
  PrefetchStream s;
  if (m > X.rows() - i) m = X.rows() - i;
  if constexpr (bool(XD::Flags & Eigen::DirectAccessBit) && bool(XD::IsRowMajor) &&
                std::is_same<typename XD::Scalar, Scalar>::value) {
    if (m > 0) {
      const Scalar* p = X.derived().data() + i * X.derived().outerStride();
      s = PrefetchStream(p, p + (m - 1) * X.derived().outerStride() + X.cols());
    }
  }
  return s;
}

/// Asks for entries [i, i + m) of a contiguous y at once (it is a small part of a block).
template <typename Scalar, typename YD>
void prefetchEntries(const Eigen::MatrixBase<YD>& y, Eigen::Index i, Eigen::Index m) {
  if (m > y.size() - i) m = y.size() - i;
  if constexpr (bool(YD::Flags & Eigen::DirectAccessBit) && std::is_same<typename YD::Scalar, Scalar>::value) {
    if (m > 0 && y.derived().innerStride() == 1) {
      const Scalar* q = y.derived().data() + i;
      PrefetchStream(q, q + m).finish();
    }
  }
}

}  // namespace rowfold::detail
