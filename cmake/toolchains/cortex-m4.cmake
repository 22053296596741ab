# Bare-metal Cortex-M4F (single-precision FPU, hard-float ABI); images run on QEMU's mps2-an386.
#   cmake -S examples/firmware -B build-firmware-m4 --toolchain "$PWD/cmake/toolchains/cortex-m4.cmake"
# float is hardware; double is software-emulated on this core (libgcc __aeabi_d*).
set(ROWFOLD_FW_CPU cortex-m4)
set(ROWFOLD_FW_ARCH_FLAGS "-mcpu=cortex-m4 -mthumb -mfpu=fpv4-sp-d16 -mfloat-abi=hard")
set(ROWFOLD_FW_QEMU_MACHINE mps2-an386)
include(${CMAKE_CURRENT_LIST_DIR}/cortex-m-common.cmake)
