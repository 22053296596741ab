# cmake -DPKG_CONFIG=... -DPREFIX=<staging prefix> -DVERSION=<x.y.z> -DCXX=<compiler>
#       -DSOURCE=<consumer main.cpp> -DOUTPUT=<executable> -P pkgconfig_check.cmake
# With PKG_CONFIG_PATH pointing into the staged install (set by the test): rowfold.pc must be
# found with the project's version, its Cflags must name the staged include directory, and a
# consumer compiled with exactly those Cflags must build and run.
foreach(_var PKG_CONFIG PREFIX VERSION CXX SOURCE OUTPUT)
  if(NOT ${_var})
    message(FATAL_ERROR "pkgconfig_check.cmake: ${_var} is not set")
  endif()
endforeach()
message(STATUS "PKG_CONFIG_PATH=$ENV{PKG_CONFIG_PATH}")

execute_process(COMMAND "${PKG_CONFIG}" --modversion rowfold
  OUTPUT_VARIABLE _version RESULT_VARIABLE _rc OUTPUT_STRIP_TRAILING_WHITESPACE)
if(NOT _rc EQUAL 0 OR NOT _version STREQUAL VERSION)
  message(FATAL_ERROR "pkg-config --modversion rowfold gave '${_version}' (exit ${_rc}), expected ${VERSION}")
endif()

execute_process(COMMAND "${PKG_CONFIG}" --cflags rowfold
  OUTPUT_VARIABLE _cflags RESULT_VARIABLE _rc OUTPUT_STRIP_TRAILING_WHITESPACE)
message(STATUS "pkg-config --cflags rowfold: ${_cflags}")
if(NOT _rc EQUAL 0)
  message(FATAL_ERROR "pkg-config --cflags rowfold failed (${_rc})")
endif()
separate_arguments(_flags UNIX_COMMAND "${_cflags}")

get_filename_component(_prefix "${PREFIX}" REALPATH)
set(_staged FALSE)
foreach(_flag IN LISTS _flags)
  if(_flag MATCHES "^-I(.+)$")
    get_filename_component(_dir "${CMAKE_MATCH_1}" REALPATH)
    string(FIND "${_dir}/" "${_prefix}/" _at)
    if(_at EQUAL 0 AND EXISTS "${_dir}/rowfold/rowfold.hpp")
      set(_staged TRUE)
    endif()
  endif()
endforeach()
if(NOT _staged)
  message(FATAL_ERROR "the Cflags do not name the staged include directory below ${PREFIX}")
endif()

execute_process(COMMAND "${CXX}" -std=c++17 ${_flags} "${SOURCE}" -o "${OUTPUT}" RESULT_VARIABLE _rc)
if(NOT _rc EQUAL 0)
  message(FATAL_ERROR "compiling the consumer with the pkg-config Cflags failed (${_rc})")
endif()
execute_process(COMMAND "${OUTPUT}" RESULT_VARIABLE _rc)
if(NOT _rc EQUAL 0)
  message(FATAL_ERROR "the pkg-config consumer failed (${_rc})")
endif()
