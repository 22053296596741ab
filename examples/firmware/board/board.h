/* Board support for the rowfold firmware examples on the QEMU MPS2 boards (Cortex-M4F on
 * mps2-an386, Cortex-M7 on mps2-an500): console and exit through ARM semihosting, a stack
 * high-water meter, and the exit-status convention shared by every image.
 *
 * Semihosting uses BKPT 0xAB. Under QEMU (-semihosting-config enable=on,target=native) or a
 * debugger it talks to the host; on a real MCU with no debugger attached it HardFaults. It
 * belongs in test images only. */
#ifndef ROWFOLD_FW_BOARD_H
#define ROWFOLD_FW_BOARD_H

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

/* Exit statuses (the QEMU process exits with them):
 *   0                 every self-check passed
 *   1                 a self-check failed (the image printed which)
 *   2                 an eigen_assert fired (images built with Eigen assertions on)
 *   100 + n           CPU exception number n was taken: 102 NMI, 103 HardFault,
 *                     104 MemManage, 105 BusFault, 106 UsageFault, 111 SVCall,
 *                     112 DebugMonitor, 114 PendSV, 115 SysTick, 116 + i external IRQ i */
enum { BOARD_EXIT_PASS = 0, BOARD_EXIT_CHECK_FAILED = 1, BOARD_EXIT_ASSERTION = 2, BOARD_EXIT_EXCEPTION_BASE = 100 };

/* Writes a NUL-terminated string to the host console (SYS_WRITE0). */
void board_write(const char* text);

/* Ends the emulation with `status` (SYS_EXIT_EXTENDED, so any 8-bit status reaches the host;
 * plain SYS_EXIT can only say "success" or "failure" on AArch32). */
void board_exit(int status) __attribute__((noreturn));

/* Copies the semihosting command line (QEMU: the -kernel path followed by the -append text)
 * into `buffer`; returns 0 and an empty string when the host offers none. */
int board_command_line(char* buffer, size_t capacity);

/* Reports a failed eigen_assert and exits with BOARD_EXIT_ASSERTION. */
void board_assertion_failed(const char* expression, const char* file, int line) __attribute__((noreturn));

/* Stack high-water meter: board_stack_paint() fills the unused part of the stack region with a
 * pattern (call it first thing in main); board_stack_used() returns the deepest use since, in
 * bytes from the top of RAM (startup frames included). */
void board_stack_paint(void);
size_t board_stack_used(void);
/* Size of the stack region reserved by the linker script. */
size_t board_stack_reserved(void);

#ifdef __cplusplus
}
#endif

#endif /* ROWFOLD_FW_BOARD_H */
