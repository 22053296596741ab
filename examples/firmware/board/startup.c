/* Start-up code and board support for the rowfold firmware examples (QEMU mps2-an386 /
 * mps2-an500). Linked with -nostartfiles: nothing of crt0 is used. Memory symbols come from
 * mps2.ld.
 *
 * Reset sequence: enable the FPU (CP10/CP11 full access) before any compiled code runs, since
 * GCC may use FP registers even in integer code; enable the configurable fault handlers and
 * the divide-by-zero trap, so every fault class gets its own exit status; copy .data, clear
 * .bss, run static constructors; call main(); exit through semihosting with its return value. */
#include <stdint.h>

#include "board.h"

/* Linker-script symbols. */
extern uint32_t __data_load[], __data_start[], __data_end[], __bss_start[], __bss_end[];
extern uint32_t __stack_top[], __stack_limit[];
extern void (*__init_array_start[])(void);
extern void (*__init_array_end[])(void);

int main(void);

/* System control block registers (ARMv7-M). */
#define SCB_CPACR (*(volatile uint32_t*)0xE000ED88u)
#define SCB_SHCSR (*(volatile uint32_t*)0xE000ED24u)
#define SCB_CCR (*(volatile uint32_t*)0xE000ED14u)
#define SCB_CFSR (*(volatile uint32_t*)0xE000ED28u)
#define SCB_HFSR (*(volatile uint32_t*)0xE000ED2Cu)
#define SCB_MMFAR (*(volatile uint32_t*)0xE000ED34u)
#define SCB_BFAR (*(volatile uint32_t*)0xE000ED38u)

#define SHCSR_MEMFAULTENA (1u << 16)
#define SHCSR_BUSFAULTENA (1u << 17)
#define SHCSR_USGFAULTENA (1u << 18)
#define CCR_DIV_0_TRP (1u << 4)

/* ---- semihosting ---------------------------------------------------------------------- */

enum { SH_WRITE0 = 0x04, SH_GET_CMDLINE = 0x15, SH_EXIT_EXTENDED = 0x20 };
#define SH_APPLICATION_EXIT 0x20026u /* ADP_Stopped_ApplicationExit */

static int semihost(int operation, const void* argument) {
  register int r0 __asm__("r0") = operation;
  register const void* r1 __asm__("r1") = argument;
  __asm__ volatile("bkpt 0xAB" : "+r"(r0) : "r"(r1) : "memory");
  return r0;
}

void board_write(const char* text) {
  semihost(SH_WRITE0, text);
}

void board_exit(int status) {
  const uint32_t block[2] = {SH_APPLICATION_EXIT, (uint32_t)status};
  semihost(SH_EXIT_EXTENDED, block);
  for (;;) {
    __asm__ volatile("wfi");
  }
}

int board_command_line(char* buffer, size_t capacity) {
  if (buffer == 0 || capacity == 0) return -1;
  buffer[0] = '\0';
  struct {
    char* text;
    uint32_t length;
  } block = {buffer, (uint32_t)(capacity - 1)};
  if (semihost(SH_GET_CMDLINE, &block) != 0) {
    buffer[0] = '\0';
    return 0;
  }
  buffer[block.length < capacity ? block.length : capacity - 1] = '\0';
  return 0;
}

/* ---- small text helpers (no stdio: it would pull in newlib's allocator) ------------------ */

static void write_hex(uint32_t value) {
  char text[11] = "0x";
  for (int i = 0; i < 8; ++i) {
    const unsigned nibble = (value >> (28 - 4 * i)) & 0xFu;
    text[2 + i] = (char)(nibble < 10 ? '0' + nibble : 'a' + nibble - 10);
  }
  text[10] = '\0';
  board_write(text);
}

static void write_unsigned(uint32_t value) {
  char text[11];
  char* p = text + sizeof text;
  *--p = '\0';
  do {
    *--p = (char)('0' + value % 10u);
    value /= 10u;
  } while (value != 0);
  board_write(p);
}

void board_assertion_failed(const char* expression, const char* file, int line) {
  board_write("ASSERTION FAILED: ");
  board_write(expression);
  board_write(" at ");
  board_write(file);
  board_write(":");
  write_unsigned((uint32_t)line);
  board_write("\n");
  board_exit(BOARD_EXIT_ASSERTION);
}

/* ---- stack meter ------------------------------------------------------------------------- */

#define STACK_PAINT 0x5AC3F00Du

void board_stack_paint(void) {
  uint32_t* here;
  __asm__ volatile("mov %0, sp" : "=r"(here));
  /* Leave a margin below the current frame for this function's own use. */
  for (uint32_t* p = __stack_limit; p < here - 16; ++p) *p = STACK_PAINT;
}

size_t board_stack_used(void) {
  const uint32_t* p = __stack_limit;
  while (p < __stack_top && *p == STACK_PAINT) ++p;
  return (size_t)((const char*)__stack_top - (const char*)p);
}

size_t board_stack_reserved(void) {
  return (size_t)((const char*)__stack_top - (const char*)__stack_limit);
}

/* ---- exceptions -------------------------------------------------------------------------- */

static const char* exception_name(uint32_t number) {
  switch (number) {
    case 2:
      return "NMI";
    case 3:
      return "HardFault";
    case 4:
      return "MemManage";
    case 5:
      return "BusFault";
    case 6:
      return "UsageFault";
    case 11:
      return "SVCall";
    case 12:
      return "DebugMonitor";
    case 14:
      return "PendSV";
    case 15:
      return "SysTick";
    default:
      return number >= 16 ? "external interrupt" : "reserved exception";
  }
}

/* Every exception lands here: none is expected in these images. Report the exception number
 * and the fault status registers, then exit with 100 + number (capped at 255). */
void board_exception(void) __attribute__((noreturn));
void board_exception(void) {
  uint32_t ipsr;
  __asm__ volatile("mrs %0, ipsr" : "=r"(ipsr));
  const uint32_t number = ipsr & 0x1FFu;
  board_write("FAULT: ");
  board_write(exception_name(number));
  board_write(" (exception ");
  write_unsigned(number);
  board_write(") CFSR=");
  write_hex(SCB_CFSR);
  board_write(" HFSR=");
  write_hex(SCB_HFSR);
  board_write(" MMFAR=");
  write_hex(SCB_MMFAR);
  board_write(" BFAR=");
  write_hex(SCB_BFAR);
  board_write("\n");
  const uint32_t status = BOARD_EXIT_EXCEPTION_BASE + number;
  board_exit((int)(status > 255u ? 255u : status));
}

/* ---- reset ------------------------------------------------------------------------------- */

static void board_start(void) __attribute__((noreturn, used));
static void board_start(void) {
  SCB_SHCSR |= SHCSR_MEMFAULTENA | SHCSR_BUSFAULTENA | SHCSR_USGFAULTENA;
  SCB_CCR |= CCR_DIV_0_TRP;
  __asm__ volatile("dsb\n\tisb" ::: "memory");

  const uint32_t* from = __data_load;
  for (uint32_t* to = __data_start; to < __data_end;) *to++ = *from++;
  for (uint32_t* to = __bss_start; to < __bss_end;) *to++ = 0;
  for (void (**ctor)(void) = __init_array_start; ctor < __init_array_end; ++ctor) (*ctor)();

  board_exit(main());
}

/* Naked: runs before the FPU is usable, so it must not contain compiler-generated code. */
void board_reset(void) __attribute__((naked, noreturn));
void board_reset(void) {
  __asm__ volatile(
      "ldr r0, =0xE000ED88   \n" /* SCB->CPACR */
      "ldr r1, [r0]          \n"
      "orr r1, r1, #0xF00000 \n" /* CP10, CP11: full access */
      "str r1, [r0]          \n"
      "dsb                   \n"
      "isb                   \n"
      "b board_start         \n");
}

/* Vector table: initial stack pointer, reset, then every exception and 32 external interrupts
 * routed to board_exception (nothing enables an interrupt; anything taken is a failure). */
struct board_vector_table {
  uint32_t* initial_stack;
  void (*handler[15 + 32])(void);
};
/* clang-format off */
#define X board_exception
__attribute__((section(".vectors"), used)) const struct board_vector_table board_vectors = {
    __stack_top,
    {
        board_reset,                                     /* 1 */
        X, X, X, X, X, 0, 0, 0, 0, X, X, 0, X, X,        /* 2..15 */
        X, X, X, X, X, X, X, X, X, X, X, X, X, X, X, X,  /* IRQ 0..15 */
        X, X, X, X, X, X, X, X, X, X, X, X, X, X, X, X,  /* IRQ 16..31 */
    },
};
#undef X
/* clang-format on */

/* Normally defined by crtbegin.o, which -nostartfiles leaves out; referenced as soon as any
 * object with static storage duration has a non-trivial destructor. */
void* __dso_handle __attribute__((weak)) = 0;
