// doctest printing of rowfold values, and the float and long double switches of the contract-type
// suites.
#pragma once

#include <doctest/doctest.h>

#include "rowfold/status.hpp"

namespace doctest {
template <>
struct StringMaker<rowfold::Status> {
  static String convert(rowfold::Status s) { return rowfold::nameOf(s); }
};
}  // namespace doctest

// ROWFOLD_WITH_LONG_DOUBLE(types) appends ", types" to a doctest type list unless the build sets
// ROWFOLD_TEST_LONG_DOUBLE=0 (CMake option of the same name; tests/CMakeLists.txt says which CI
// stages switch it off and why).
#ifndef ROWFOLD_TEST_LONG_DOUBLE
#define ROWFOLD_TEST_LONG_DOUBLE 1
#endif
#if ROWFOLD_TEST_LONG_DOUBLE
#define ROWFOLD_WITH_LONG_DOUBLE(...) , __VA_ARGS__
#else
#define ROWFOLD_WITH_LONG_DOUBLE(...)
#endif

// ROWFOLD_WITH_FLOAT(types) puts "types, " in front of the rest of a doctest type list unless the
// build sets ROWFOLD_TEST_FLOAT=0 (CMake option of the same name; see tests/CMakeLists.txt).
#ifndef ROWFOLD_TEST_FLOAT
#define ROWFOLD_TEST_FLOAT 1
#endif
#if ROWFOLD_TEST_FLOAT
#define ROWFOLD_WITH_FLOAT(...) __VA_ARGS__,
#else
#define ROWFOLD_WITH_FLOAT(...)
#endif

// The allocation fence of support/alloc_fence.hpp (a file that includes it first, before Eigen),
// switched around the calls under test: fenceOn() zeroes the counters, refuses Eigen heap
// allocations and counts operator new; fenceOff() lifts both. The caller then checks
// rowfold_test::eigenAssertHits and newCalls.
#if defined(EIGEN_RUNTIME_NO_MALLOC)
namespace rowfold_test {
inline void fenceOn() {
  eigenAssertHits = 0;
  newCalls = 0;
  Eigen::internal::set_is_malloc_allowed(false);
  countNew = true;
}
inline void fenceOff() {
  countNew = false;
  Eigen::internal::set_is_malloc_allowed(true);
}
}  // namespace rowfold_test
#endif
