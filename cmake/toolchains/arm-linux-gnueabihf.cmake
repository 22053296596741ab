# Cross build for 32-bit ARM Linux (ARMv7-A, hard-float ABI) with Debian's
# g++-arm-linux-gnueabihf, NEON enabled; ctest runs every test executable through qemu-user
# (binfmt_misc is not assumed, so the emulator is always explicit).
#   cmake --preset armhf   (or -DCMAKE_TOOLCHAIN_FILE=cmake/toolchains/arm-linux-gnueabihf.cmake)
# Notes: Debian's default FPU is VFPv3-D16 without NEON; -mfpu=neon turns on Eigen's NEON path
# (float only: ARMv7 NEON has no double lanes). long double is plain double on this target.
# -Wno-psabi silences g++'s "parameter passing ... changed in GCC 7.1" notes from libstdc++.
set(CMAKE_SYSTEM_NAME Linux)
set(CMAKE_SYSTEM_PROCESSOR arm)
set(ROWFOLD_CROSS_TRIPLE arm-linux-gnueabihf)

find_program(CMAKE_CXX_COMPILER ${ROWFOLD_CROSS_TRIPLE}-g++ REQUIRED)
set(CMAKE_CXX_FLAGS_INIT "-mfpu=neon -Wno-psabi")

# Target libraries only from the cross sysroot; header-only Eigen and doctest from the host
# (see aarch64-linux-gnu.cmake for why that is safe with Debian's cross g++).
set(CMAKE_FIND_ROOT_PATH /usr/${ROWFOLD_CROSS_TRIPLE})
set(CMAKE_FIND_ROOT_PATH_MODE_PROGRAM NEVER)
set(CMAKE_FIND_ROOT_PATH_MODE_LIBRARY ONLY)
set(CMAKE_FIND_ROOT_PATH_MODE_INCLUDE BOTH)
set(CMAKE_FIND_ROOT_PATH_MODE_PACKAGE BOTH)

find_program(ROWFOLD_QEMU qemu-arm REQUIRED)
set(CMAKE_CROSSCOMPILING_EMULATOR ${ROWFOLD_QEMU} -L /usr/${ROWFOLD_CROSS_TRIPLE})
