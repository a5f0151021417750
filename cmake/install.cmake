# Install rules: headers, exported targets, package config, version file and
# pkg-config file.
include(CMakePackageConfigHelpers)

# Installing (and cpack) must not first build every target: the headers need no
# build, and the tool is installed only when it was built (examples/tool).
set(CMAKE_SKIP_INSTALL_ALL_DEPENDENCY ON)

set(KINDLING_CMAKE_DIR ${CMAKE_INSTALL_DATADIR}/cmake/kindling)

install(DIRECTORY ${PROJECT_SOURCE_DIR}/include/kindling
        DESTINATION ${CMAKE_INSTALL_INCLUDEDIR})

install(TARGETS kindling EXPORT kindlingTargets)
install(EXPORT kindlingTargets NAMESPACE kindling:: DESTINATION ${KINDLING_CMAKE_DIR})
if(TARGET kindling_eigen)
  install(TARGETS kindling_eigen EXPORT kindlingEigenTargets)
  install(EXPORT kindlingEigenTargets NAMESPACE kindling:: DESTINATION ${KINDLING_CMAKE_DIR})
endif()
if(TARGET kindling_npz)
  install(TARGETS kindling_npz EXPORT kindlingNpzTargets)
  install(EXPORT kindlingNpzTargets NAMESPACE kindling:: DESTINATION ${KINDLING_CMAKE_DIR})
endif()
# The compiled mode's library, when it was built (it is part of `all`; an install of a
# tree where nothing was built installs the headers alone, like the tool below).
install(TARGETS kindling_compiled EXPORT kindlingCompiledTargets
        ARCHIVE DESTINATION ${CMAKE_INSTALL_LIBDIR} OPTIONAL)
install(EXPORT kindlingCompiledTargets NAMESPACE kindling:: DESTINATION ${KINDLING_CMAKE_DIR})
if(TARGET kindling_xtensor)
  install(TARGETS kindling_xtensor EXPORT kindlingXtensorTargets)
  install(EXPORT kindlingXtensorTargets NAMESPACE kindling:: DESTINATION ${KINDLING_CMAKE_DIR})
endif()

configure_package_config_file(
  ${PROJECT_SOURCE_DIR}/cmake/kindlingConfig.cmake.in
  ${PROJECT_BINARY_DIR}/kindlingConfig.cmake
  INSTALL_DESTINATION ${KINDLING_CMAKE_DIR})
# Header-only: the version file must not depend on the architecture.
write_basic_package_version_file(
  ${PROJECT_BINARY_DIR}/kindlingConfigVersion.cmake
  COMPATIBILITY SameMajorVersion ARCH_INDEPENDENT)
install(FILES ${PROJECT_BINARY_DIR}/kindlingConfig.cmake
              ${PROJECT_BINARY_DIR}/kindlingConfigVersion.cmake
        DESTINATION ${KINDLING_CMAKE_DIR})

# The .pc file lives in DATADIR/pkgconfig and finds the prefix relative to itself.
set(_kindling_pc_dir ${CMAKE_INSTALL_DATADIR}/pkgconfig)
file(RELATIVE_PATH KINDLING_PC_PREFIX_FROM_PCFILEDIR /prefix/${_kindling_pc_dir} /prefix)
string(REGEX REPLACE "/$" "" KINDLING_PC_PREFIX_FROM_PCFILEDIR "${KINDLING_PC_PREFIX_FROM_PCFILEDIR}")  # "../.."
if(IS_ABSOLUTE "${CMAKE_INSTALL_INCLUDEDIR}")
  set(KINDLING_PC_INCLUDEDIR "${CMAKE_INSTALL_INCLUDEDIR}")
else()
  set(KINDLING_PC_INCLUDEDIR "\${prefix}/${CMAKE_INSTALL_INCLUDEDIR}")
endif()
configure_file(${PROJECT_SOURCE_DIR}/cmake/kindling.pc.in
               ${PROJECT_BINARY_DIR}/kindling.pc @ONLY)
install(FILES ${PROJECT_BINARY_DIR}/kindling.pc
        DESTINATION ${_kindling_pc_dir})

# `cpack` in the build tree makes a Debian package of whatever the install rules
# install (with the tool when it was built); see cmake/package.cmake.
include(${PROJECT_SOURCE_DIR}/cmake/package.cmake)
