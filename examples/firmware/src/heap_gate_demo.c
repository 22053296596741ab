/* Deliberately uses the heap. Never part of the default build: the ctest entry
 * heap_gate.rejects_malloc builds it and passes only if the link FAILS, which shows that the
 * --wrap gate of the firmware images really turns any heap use into a link error. */
#include <stdlib.h>

#include "board.h"

int main(void) {
  volatile char* p = malloc(16);
  const int status = p != 0 ? BOARD_EXIT_PASS : BOARD_EXIT_CHECK_FAILED;
  free((void*)p);
  return status;
}
