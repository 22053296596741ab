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

/// Largest runtime K for which add() gets a copy compiled for that K (EstimatorBase, an
/// estimator's `sizedUpTo`): ROWFOLD_SIZED_UP_TO if it is defined, else no cap. The copies cost
/// compile time and code: without them the contract test's translation unit compiled in 205 s
/// instead of 365 (g++ 12 -O3, 2026-12-05). 0 turns them off; a runtime K above the cap runs
/// the runtime-length path, which folds the same bits on x86-64 (test_tracking). Define it the
/// same in every translation unit of a program.
#if defined(ROWFOLD_SIZED_UP_TO)
inline constexpr int kSizedCap = ROWFOLD_SIZED_UP_TO;
#else
inline constexpr int kSizedCap = 1 << 30;
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
