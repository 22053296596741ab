/// @file
/// Test support: the allocation fence of the no-heap proofs. Include it FIRST in a test file
/// (before any Eigen or rowfold header); define EIGEN_STACK_ALLOCATION_LIMIT before it to also
/// count Eigen's hidden stack temporaries as heap (as tests/test_contract.cpp does for its no-heap proof).
///  - Eigen's runtime allocation fence (EIGEN_RUNTIME_NO_MALLOC + set_is_malloc_allowed(false)),
///    with eigen_assert redirected to a counter (the method of Eigen's own test/nomalloc.cpp);
///  - a counting global operator new/delete (any C++ allocation) while `countNew` is set.
/// Defines the replacement operators, so include it in one translation unit per executable; the
/// other translation units of that executable define ROWFOLD_ALLOC_FENCE_CONFIG_ONLY first and
/// include it too, so that all see the same Eigen configuration (one definition rule).
#pragma once

#if defined(__GNUC__) && !defined(__clang__)
// g++ 12 -O3 for aarch64 reports the malloc-backed replacement operator new/delete below as
// "mismatched" once std::vector is inlined into it (a false positive; see tests/CMakeLists.txt).
#pragma GCC diagnostic ignored "-Wmismatched-new-delete"
#endif
#define EIGEN_RUNTIME_NO_MALLOC
#include <atomic>
#include <cstdlib>
#include <new>

namespace rowfold_test {
inline std::atomic<long> eigenAssertHits{0};
inline std::atomic<long> newCalls{0};
inline std::atomic<bool> countNew{false};
}  // namespace rowfold_test

#define eigen_assert(x)                                   \
  do {                                                    \
    if (!(x)) rowfold_test::eigenAssertHits.fetch_add(1); \
  } while (false)

#ifndef ROWFOLD_ALLOC_FENCE_CONFIG_ONLY
void* operator new(std::size_t n) {
  if (rowfold_test::countNew.load()) rowfold_test::newCalls.fetch_add(1);
  if (void* p = std::malloc(n ? n : 1)) return p;
  std::abort();
}
void* operator new[](std::size_t n) { return operator new(n); }
void operator delete(void* p) noexcept { std::free(p); }
void operator delete[](void* p) noexcept { std::free(p); }
void operator delete(void* p, std::size_t) noexcept { std::free(p); }
void operator delete[](void* p, std::size_t) noexcept { std::free(p); }
#endif
