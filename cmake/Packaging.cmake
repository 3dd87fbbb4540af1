# A Debian package with CPack: `cpack -G DEB` in the build directory (configure
# with -DCMAKE_INSTALL_PREFIX=/usr, the default here when packaging).
set(CPACK_GENERATOR "DEB")
set(CPACK_PACKAGE_NAME "accrue")
set(CPACK_PACKAGE_VERSION ${PROJECT_VERSION})
set(CPACK_PACKAGE_CONTACT "accrue maintainers <accrue@localhost>")
set(CPACK_PACKAGE_DESCRIPTION_SUMMARY "measurement and logging daemon for analog integrator front ends")
set(CPACK_PACKAGE_DESCRIPTION "accrued reads an integrator board over serial, removes drift, stitches resets
into one continuous total with its uncertainty, stores it in SQLite and serves JSON-RPC 2.0.
Includes the accrue client, the accrue-sim board simulator and a systemd template unit.")
set(CPACK_PACKAGING_INSTALL_PREFIX "/usr")
set(CPACK_DEBIAN_FILE_NAME DEB-DEFAULT)
set(CPACK_DEBIAN_PACKAGE_SECTION "science")
set(CPACK_DEBIAN_PACKAGE_SHLIBDEPS ON)
set(CPACK_DEBIAN_PACKAGE_DEPENDS "systemd (>= 247)")
set(CPACK_DEBIAN_PACKAGE_CONTROL_EXTRA
  "${PROJECT_SOURCE_DIR}/systemd/debian/postinst;${PROJECT_SOURCE_DIR}/systemd/debian/postrm")
set(CPACK_DEBIAN_PACKAGE_CONTROL_STRICT_PERMISSION ON)
include(CPack)
