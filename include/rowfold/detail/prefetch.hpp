/// @file
/// Prefetching the next block of rows while the blocked addRows folds this one.
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <type_traits>

namespace rowfold::detail {

#if defined(__GNUC__) && !(defined(__ARM_ARCH_PROFILE) && __ARM_ARCH_PROFILE == 'M')
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
  static constexpr bool enabled = ROWFOLD_DETAIL_PREFETCH != 0;

  /// The range [next, end) as addresses (integers: stepping past the end forms no pointer).
  std::uintptr_t next = 0;
  std::uintptr_t end = 0;

  PrefetchStream() = default;
  PrefetchStream(const void* from, const void* to)
      : next(reinterpret_cast<std::uintptr_t>(from)), end(reinterpret_cast<std::uintptr_t>(to)) {}

  /// The next line, if any is left.
  void step() {
    if constexpr (enabled) {
      if (next < end) {
        touch(next);
        next += 64;
      }
    }
  }
  /// The next of `parts` equal shares of the lines left (all of them for parts <= 1), for a
  /// loop whose steps are few and long.
  void share(Eigen::Index parts) {
    if constexpr (enabled) {
      const std::uintptr_t left = next < end ? (end - next + 63) / 64 : 0;
      const std::uintptr_t k = parts > 1 ? (left + std::uintptr_t(parts) - 1) / std::uintptr_t(parts) : left;
      for (std::uintptr_t t = 0; t < k; ++t) step();
    }
  }
  /// Every line left, now.
  void finish() {
    if constexpr (enabled) {
      while (next < end) step();
    }
  }

 private:
  static void touch(std::uintptr_t address) {
#if ROWFOLD_DETAIL_PREFETCH
    __builtin_prefetch(reinterpret_cast<const void*>(address), 0, 3);
#else
    (void)address;
#endif
  }
};

#undef ROWFOLD_DETAIL_PREFETCH

/// Rows [i, i + m) of a row-major X as a PrefetchStream; an empty one for other layouts.
template <typename Scalar, typename XD>
PrefetchStream aheadRows(const Eigen::MatrixBase<XD>& X, Eigen::Index i, Eigen::Index m) {
  PrefetchStream s;
  if (m > X.rows() - i) m = X.rows() - i;
  if constexpr (bool(XD::Flags & Eigen::DirectAccessBit) && bool(XD::IsRowMajor) &&
                std::is_same<typename XD::Scalar, Scalar>::value) {
    if (m > 0) {
      const Scalar* p = X.derived().data() + i * X.derived().outerStride();
      s = PrefetchStream(p, p + m * X.derived().outerStride());
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
