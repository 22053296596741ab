/// @file
/// A load the compiler keeps whole: one scalar, not merged with its neighbours.
#pragma once

namespace rowfold::detail {

/// Reads v with a load of its own. Used where the value was written by a store of its own
/// just before (the previous sample's commit, or this sample's centered row): g++'s SLP
/// vectorizer otherwise merges the read with that of the neighbouring scalar into one wider
/// load, which the two narrower stores cannot forward to, and the load then waits until both
/// stores have left the core (bench/README, lone-load round). The value is the same; only the
/// access is kept whole, so the arithmetic and its results do not change.
template <typename Scalar>
inline Scalar loadAlone(const Scalar& v) {
  return *static_cast<const volatile Scalar*>(&v);
}

}  // namespace rowfold::detail
