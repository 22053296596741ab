# Second line of defence behind the --wrap link gate: fails if the linked image defines any
# allocator entry point (malloc family, newlib's reentrant variants, _sbrk, operator new/delete).
#   cmake -DNM=<arm-none-eabi-nm> -DIMAGE=<file.elf> -P check_heap_free.cmake
execute_process(COMMAND ${NM} ${IMAGE} RESULT_VARIABLE _status OUTPUT_VARIABLE _symbols)
if(NOT _status EQUAL 0)
  message(FATAL_ERROR "${NM} failed on ${IMAGE}")
endif()
string(REGEX MATCHALL
       "[ \t][TtWw] (malloc|free|calloc|realloc|_malloc_r|_free_r|_calloc_r|_realloc_r|_sbrk|_sbrk_r|_Znw[jm]|_Zna[jm]|_ZdlPv|_ZdaPv|_ZdlPvj|_ZdaPvj)\r?\n"
       _hits "${_symbols}")
if(_hits)
  message(FATAL_ERROR "allocator linked into ${IMAGE}:\n${_hits}")
endif()
message("no allocator in ${IMAGE}")
