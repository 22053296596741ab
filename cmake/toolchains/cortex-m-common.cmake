# Shared part of the bare-metal Cortex-M toolchain files (cortex-m4.cmake, cortex-m7.cmake).
# Debian 12 packages: gcc-arm-none-eabi, libnewlib-arm-none-eabi, libstdc++-arm-none-eabi-newlib,
# and qemu-system-arm for running the images. The including file sets:
#   ROWFOLD_FW_CPU          cortex-m4 | cortex-m7 (also the QEMU -cpu value)
#   ROWFOLD_FW_ARCH_FLAGS   -mcpu/-mthumb/-mfpu/-mfloat-abi
#   ROWFOLD_FW_QEMU_MACHINE QEMU board (mps2-an386, mps2-an500)
# Used by examples/firmware (a separate CMake project); the library's own test suite is hosted
# (doctest, LAPACK cross-checks) and does not build for bare metal.
set(CMAKE_SYSTEM_NAME Generic)
set(CMAKE_SYSTEM_PROCESSOR arm)
# A bare-metal executable cannot link without the project's linker script and start-up code,
# so the compiler checks build static libraries instead.
set(CMAKE_TRY_COMPILE_TARGET_TYPE STATIC_LIBRARY)

find_program(CMAKE_C_COMPILER arm-none-eabi-gcc REQUIRED)
find_program(CMAKE_CXX_COMPILER arm-none-eabi-g++ REQUIRED)
find_program(CMAKE_SIZE arm-none-eabi-size)

# The platform files reset CMAKE_EXECUTABLE_SUFFIX; the per-language variables survive.
set(CMAKE_EXECUTABLE_SUFFIX_C ".elf")
set(CMAKE_EXECUTABLE_SUFFIX_CXX ".elf")

# -fno-math-errno: std::sqrt(float) becomes one vsqrt.f32 instead of a libm call that sets errno.
set(_rowfold_fw_common "${ROWFOLD_FW_ARCH_FLAGS} -ffunction-sections -fdata-sections -fno-math-errno")
set(CMAKE_C_FLAGS_INIT "${_rowfold_fw_common}")
set(CMAKE_CXX_FLAGS_INIT "${_rowfold_fw_common} -fno-exceptions -fno-rtti -fno-threadsafe-statics")
# newlib-nano, no crt0 (the project brings its own start-up code), unused sections dropped.
set(CMAKE_EXE_LINKER_FLAGS_INIT "--specs=nano.specs --specs=nosys.specs -nostartfiles -Wl,--gc-sections")

# Nothing for the target comes from the host, except header-only packages (Eigen's config).
set(CMAKE_FIND_ROOT_PATH_MODE_PROGRAM NEVER)
set(CMAKE_FIND_ROOT_PATH_MODE_LIBRARY ONLY)
set(CMAKE_FIND_ROOT_PATH_MODE_INCLUDE ONLY)
set(CMAKE_FIND_ROOT_PATH_MODE_PACKAGE BOTH)

# ctest runs a test whose COMMAND is an executable target as "<emulator...> <image.elf>", so
# -kernel must come last. Semihosting carries console output (to stderr) and the exit status.
find_program(ROWFOLD_FW_QEMU qemu-system-arm)
if(ROWFOLD_FW_QEMU)
  set(ROWFOLD_FW_QEMU_ARGS -M ${ROWFOLD_FW_QEMU_MACHINE} -cpu ${ROWFOLD_FW_CPU} -nographic -monitor none
                           -serial none -semihosting-config enable=on,target=native)
  set(CMAKE_CROSSCOMPILING_EMULATOR ${ROWFOLD_FW_QEMU} ${ROWFOLD_FW_QEMU_ARGS} -kernel)
endif()
