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
