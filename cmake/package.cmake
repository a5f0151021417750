# CPack: `cpack -G DEB` (or just `cpack`) in a build tree makes kindling_<version>_<arch>.deb
# installing under /usr: the headers, the CMake package, kindling.pc and, when the
# kindling_tool target was built first, the `kindling` tool (its install rule is
# OPTIONAL). The package's dependencies are read from the tool's shared libraries by
# dpkg-shlibdeps (Debian package dpkg-dev).
set(CPACK_GENERATOR DEB)
set(CPACK_PACKAGE_NAME kindling)
set(CPACK_PACKAGE_VERSION ${PROJECT_VERSION})
set(CPACK_PACKAGE_DESCRIPTION_SUMMARY "${PROJECT_DESCRIPTION}")
set(CPACK_PACKAGE_VENDOR "kindling developers")
set(CPACK_PACKAGING_INSTALL_PREFIX /usr)
set(CPACK_DEBIAN_PACKAGE_MAINTAINER "kindling developers")
set(CPACK_DEBIAN_PACKAGE_SECTION libdevel)
set(CPACK_DEBIAN_FILE_NAME DEB-DEFAULT)
set(CPACK_DEBIAN_PACKAGE_SHLIBDEPS ON)
# The adapters' components need these only when a user asks for them.
set(CPACK_DEBIAN_PACKAGE_SUGGESTS "libeigen3-dev, libxtensor-dev, zlib1g-dev")
set(CPACK_RESOURCE_FILE_LICENSE ${PROJECT_SOURCE_DIR}/LICENSE)
include(CPack)
