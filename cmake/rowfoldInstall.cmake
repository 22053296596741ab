# Install and export rowfold::rowfold (header-only, architecture independent).
include(GNUInstallDirs)
include(CMakePackageConfigHelpers)

install(TARGETS rowfold rowfold_warnings EXPORT rowfoldTargets)
install(DIRECTORY ${PROJECT_SOURCE_DIR}/include/rowfold DESTINATION ${CMAKE_INSTALL_INCLUDEDIR})
set(ROWFOLD_CMAKE_DIR ${CMAKE_INSTALL_DATADIR}/rowfold/cmake CACHE STRING "Where rowfold's CMake package files go")
install(EXPORT rowfoldTargets NAMESPACE rowfold:: DESTINATION ${ROWFOLD_CMAKE_DIR})
configure_package_config_file(${PROJECT_SOURCE_DIR}/cmake/rowfoldConfig.cmake.in
  ${PROJECT_BINARY_DIR}/rowfoldConfig.cmake INSTALL_DESTINATION ${ROWFOLD_CMAKE_DIR})
write_basic_package_version_file(${PROJECT_BINARY_DIR}/rowfoldConfigVersion.cmake
  COMPATIBILITY SameMinorVersion ARCH_INDEPENDENT)
install(FILES ${PROJECT_BINARY_DIR}/rowfoldConfig.cmake ${PROJECT_BINARY_DIR}/rowfoldConfigVersion.cmake
  DESTINATION ${ROWFOLD_CMAKE_DIR})

# pkg-config file (rowfold.pc; Cflags only, Eigen through Requires), relocatable via ${pcfiledir}.
set(ROWFOLD_PKGCONFIG_DIR ${CMAKE_INSTALL_DATADIR}/pkgconfig CACHE STRING "Where rowfold.pc goes")
if(IS_ABSOLUTE "${ROWFOLD_PKGCONFIG_DIR}")
  set(ROWFOLD_PC_PREFIX "${CMAKE_INSTALL_PREFIX}")
else()
  file(RELATIVE_PATH _rowfold_pc_up "/${ROWFOLD_PKGCONFIG_DIR}" "/")
  string(REGEX REPLACE "/$" "" _rowfold_pc_up "${_rowfold_pc_up}")
  set(ROWFOLD_PC_PREFIX "\${pcfiledir}/${_rowfold_pc_up}")
endif()
if(IS_ABSOLUTE "${CMAKE_INSTALL_INCLUDEDIR}")
  set(ROWFOLD_PC_INCLUDEDIR "${CMAKE_INSTALL_INCLUDEDIR}")
else()
  set(ROWFOLD_PC_INCLUDEDIR "\${prefix}/${CMAKE_INSTALL_INCLUDEDIR}")
endif()
configure_file(${PROJECT_SOURCE_DIR}/cmake/rowfold.pc.in ${PROJECT_BINARY_DIR}/rowfold.pc @ONLY)
install(FILES ${PROJECT_BINARY_DIR}/rowfold.pc DESTINATION ${ROWFOLD_PKGCONFIG_DIR})
