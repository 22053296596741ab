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
