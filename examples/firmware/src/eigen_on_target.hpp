// Include this before any Eigen or rowfold header in a firmware TU.
//
// With ROWFOLD_FW_EIGEN_ASSERTS defined, Eigen's run-time checks stay on in the optimized
// image and report through the board (exit status 2) instead of newlib's assert(), whose
// fiprintf would link stdio and the allocator. Together with EIGEN_NO_MALLOC (set by the
// build) this also turns any attempted Eigen heap allocation into a reported failure, on top
// of the link-time gate. Without it the build defines EIGEN_NO_DEBUG (production setting).
#pragma once

#include "board.h"

#if defined(ROWFOLD_FW_EIGEN_ASSERTS)
#define eigen_assert(x)                                       \
  do {                                                        \
    if (!(x)) board_assertion_failed(#x, __FILE__, __LINE__); \
  } while (false)
#endif

#include <Eigen/Core>
