// Test support: an estimator's snapshot image as a byte vector (for "the state is untouched"
// and round-trip checks).
#pragma once

#include <doctest/doctest.h>

#include <cstddef>
#include <vector>

#include "rowfold/status.hpp"

namespace rowfold_test {

/// The snapshot image of `e` (any type with snapshotSize() and snapshot()); the snapshot must
/// succeed and fill the whole buffer.
template <typename Est>
std::vector<unsigned char> image(const Est& e) {
  std::vector<unsigned char> buf(e.snapshotSize());
  std::size_t n = 0;
  REQUIRE(e.snapshot(buf.data(), buf.size(), n) == rowfold::Status::ok);
  REQUIRE(n == buf.size());
  return buf;
}

}  // namespace rowfold_test
