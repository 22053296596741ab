# Runs a command and passes only if it exits with the expected status (ctest can only tell
# zero from non-zero by itself).
#   cmake -DRUN=<arg|arg|...> -DEXPECT=<status> -P expect_exit.cmake
# RUN uses '|' between arguments so that the list survives add_test().
string(REPLACE "|" ";" _command "${RUN}")
execute_process(COMMAND ${_command} RESULT_VARIABLE _status OUTPUT_VARIABLE _out ERROR_VARIABLE _err TIMEOUT 60)
message("${_out}${_err}")
if(NOT "${_status}" STREQUAL "${EXPECT}")
  message(FATAL_ERROR "exit status ${_status}, expected ${EXPECT}")
endif()
message("exit status ${_status}, as expected")
