# Bare-metal Cortex-M7 with the double-precision FPU (FPv5-D16, hard-float ABI); images run on
# QEMU's mps2-an500.
#   cmake -S examples/firmware -B build-firmware-m7 --toolchain "$PWD/cmake/toolchains/cortex-m7.cmake"
# Both float and double are hardware here. (An M7 image uses double-precision instructions that
# an M4F lacks: run on the M4 board it stops with a UsageFault.)
set(ROWFOLD_FW_CPU cortex-m7)
set(ROWFOLD_FW_ARCH_FLAGS "-mcpu=cortex-m7 -mthumb -mfpu=fpv5-d16 -mfloat-abi=hard")
set(ROWFOLD_FW_QEMU_MACHINE mps2-an500)
include(${CMAKE_CURRENT_LIST_DIR}/cortex-m-common.cmake)
