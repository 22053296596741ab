# Cross build for 64-bit ARM Linux with Debian's g++-aarch64-linux-gnu; ctest runs every test
# executable through qemu-user (binfmt_misc is not assumed, so the emulator is always explicit).
#   cmake --preset aarch64   (or -DCMAKE_TOOLCHAIN_FILE=cmake/toolchains/aarch64-linux-gnu.cmake)
# Note: long double is IEEE binary128 here, computed in software.
set(CMAKE_SYSTEM_NAME Linux)
set(CMAKE_SYSTEM_PROCESSOR aarch64)
set(ROWFOLD_CROSS_TRIPLE aarch64-linux-gnu)

find_program(CMAKE_CXX_COMPILER ${ROWFOLD_CROSS_TRIPLE}-g++ REQUIRED)

# Target libraries only from the cross sysroot (so host-only libraries such as LAPACKE are not
# picked up). Eigen and doctest are header-only: their headers and package configs
# (/usr/include/eigen3, /usr/share/eigen3/cmake/Eigen3Config.cmake, /usr/include/doctest) are
# taken from the host. Debian's cross g++ searches /usr/include after its own target include
# directories, so host glibc headers never shadow the target's.
set(CMAKE_FIND_ROOT_PATH /usr/${ROWFOLD_CROSS_TRIPLE})
set(CMAKE_FIND_ROOT_PATH_MODE_PROGRAM NEVER)
set(CMAKE_FIND_ROOT_PATH_MODE_LIBRARY ONLY)
set(CMAKE_FIND_ROOT_PATH_MODE_INCLUDE BOTH)
set(CMAKE_FIND_ROOT_PATH_MODE_PACKAGE BOTH)

find_program(ROWFOLD_QEMU qemu-aarch64 REQUIRED)
set(CMAKE_CROSSCOMPILING_EMULATOR ${ROWFOLD_QEMU} -L /usr/${ROWFOLD_CROSS_TRIPLE})
