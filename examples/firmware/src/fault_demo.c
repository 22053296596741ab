/* Executes a permanently undefined instruction. The start-up code has enabled the UsageFault
 * handler, so the image must stop with exit status 106 (100 + exception number 6); the ctest
 * entry fault.usage_fault_exits_106 checks exactly that, i.e. that a crash on the target can
 * never look like a pass. */
#include "board.h"

int main(void) {
  board_write("fault demo: executing UDF, expecting a UsageFault (exit 106)\n");
  __asm__ volatile("udf #0");
  return BOARD_EXIT_PASS; /* not reached */
}
