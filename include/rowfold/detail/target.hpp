/// @file
/// Facts about the compilation target that change the shape of the code, never its arithmetic.
#pragma once

namespace rowfold::detail {

/// M-profile ARM (Cortex-M): rows come from on-chip memory with no data cache, or a small one,
/// there are few registers to spill, and every inlined or dispatched copy of a loop is flash.
/// The speed measures that pay on a desktop or A-profile core (prefetching, forced inlining,
/// per-size copies of the per-sample path) are left out there.
#if defined(__ARM_ARCH_PROFILE) && __ARM_ARCH_PROFILE == 'M'
inline constexpr bool kMicrocontroller = true;
#else
inline constexpr bool kMicrocontroller = false;
#endif

}  // namespace rowfold::detail

/// Put before a loop of compile-time length that should stay a loop for the vectorizer. g++
/// unrolls a short loop of known trip count completely, into scalar code, before its
/// vectorizer runs: ForgettingRls' per-size copy for a runtime K = 8 (double) took 87 ns per
/// sample that way and 49 kept as a loop (timing program, native). Not for runtime-length
/// loops: there the same pragma cost 10 % at K = 16. Unroll hints only, never the arithmetic.
#if defined(__clang__)
#define ROWFOLD_KEEP_LOOP _Pragma("clang loop unroll(disable)")
#elif defined(__GNUC__)
#define ROWFOLD_KEEP_LOOP _Pragma("GCC unroll 1")
#else
#define ROWFOLD_KEEP_LOOP
#endif
