# cmake -DBUILD_DIR=<build tree> -DPREFIX=<staging prefix> [-DCONFIG=<config>] -P stage_install.cmake
# Installs the build tree into a fresh staging prefix (the package tests' fixture).
foreach(_var BUILD_DIR PREFIX)
  if(NOT ${_var})
    message(FATAL_ERROR "stage_install.cmake: ${_var} is not set")
  endif()
endforeach()
file(REMOVE_RECURSE "${PREFIX}")
set(_config)
if(CONFIG)
  set(_config --config "${CONFIG}")
endif()
execute_process(COMMAND "${CMAKE_COMMAND}" --install "${BUILD_DIR}" --prefix "${PREFIX}" ${_config}
  RESULT_VARIABLE _rc)
if(NOT _rc EQUAL 0)
  message(FATAL_ERROR "cmake --install failed (${_rc})")
endif()
