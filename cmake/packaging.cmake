# Installed files beyond the program, and the Debian package (make package,
# CPack's DEB generator; docs/deployment.md). Included from CMakeLists.txt
# after GNUInstallDirs.

# --- the service files (docs/deployment.md) -------------------------------------
# The units in deploy/ name /usr/bin/fxledger and /usr/lib/fxledger, the
# package's paths; cmake/install_units.cmake rewrites them for the prefix of
# each install (CPack installs with DESTDIR, so that prefix is /usr there).
set(FXL_LIBEXEC_DIR "lib/fxledger")
set(FXL_DEPLOY_OUT ${CMAKE_BINARY_DIR}/deploy)
install(CODE "set(FXL_SRC \"${CMAKE_SOURCE_DIR}\")
set(FXL_OUT \"${FXL_DEPLOY_OUT}\")
set(FXL_BINDIR \"${CMAKE_INSTALL_BINDIR}\")")
install(SCRIPT cmake/install_units.cmake)
# systemd reads units from <prefix>/lib/systemd/system for /usr and /usr/local
# (systemd.unit(5), "System Unit Search Path").
install(FILES ${FXL_DEPLOY_OUT}/fxledger.service ${FXL_DEPLOY_OUT}/fxledger-backup.service
              ${FXL_DEPLOY_OUT}/fxledger-backup.timer
        DESTINATION lib/systemd/system)
install(PROGRAMS deploy/fxledger-scheduled-backup DESTINATION ${FXL_LIBEXEC_DIR})

# --- Debian's documentation files (Debian policy 12.5 and 12.7) -----------------
add_custom_command(
  OUTPUT ${CMAKE_BINARY_DIR}/changelog.Debian.gz
  COMMAND gzip -9nc ${CMAKE_SOURCE_DIR}/packaging/changelog > ${CMAKE_BINARY_DIR}/changelog.Debian.gz
  DEPENDS ${CMAKE_SOURCE_DIR}/packaging/changelog)
add_custom_target(debian_changelog ALL DEPENDS ${CMAKE_BINARY_DIR}/changelog.Debian.gz)
install(FILES packaging/copyright ${CMAKE_BINARY_DIR}/changelog.Debian.gz DESTINATION ${CMAKE_INSTALL_DOCDIR})

# --- the package ------------------------------------------------------------------
set(CPACK_GENERATOR "DEB")
set(CPACK_PACKAGE_NAME "fxledger")
set(CPACK_PACKAGE_VERSION "${PROJECT_VERSION}")
set(CPACK_PACKAGING_INSTALL_PREFIX "/usr")
set(CPACK_PACKAGE_CONTACT "fxledger maintainers <maintainers@fxledger.example.org>")
set(CPACK_PACKAGE_DESCRIPTION_SUMMARY "fraction-by-fraction logbook for in vivo dosimetry")
# CPack puts the summary on the Description line and indents these lines
# by one space; an empty line becomes the paragraph separator " .".
set(CPACK_DEBIAN_PACKAGE_DESCRIPTION
"fxledger keeps the in vivo dosimetry record of a radiotherapy department:
detectors, cross-calibrations, correction tables, plans and readings, turned
into corrected doses and verdicts against the local tolerance and action
levels, a review queue that physicists sign, PDF reports and a hash-chained
audit trail, in one SQLite database, on the command line and in a web
console (fxledger serve).

The package installs the program, its manual pages and the systemd units for
the web console and a scheduled backup; it creates no account and no
database and starts nothing: /usr/share/doc/fxledger/docs/deployment.md gives
the steps. Results support, and do not replace, the judgement of a qualified
medical physicist.")
set(CPACK_DEBIAN_PACKAGE_SECTION "science")
set(CPACK_DEBIAN_PACKAGE_PRIORITY "optional")
set(CPACK_DEBIAN_PACKAGE_RELEASE 1)
set(CPACK_DEBIAN_FILE_NAME DEB-DEFAULT)
# Library dependencies from the program's shared libraries (dpkg-shlibdeps);
# the fonts the reports embed are data, named by hand.
set(CPACK_DEBIAN_PACKAGE_SHLIBDEPS ON)
set(CPACK_DEBIAN_PACKAGE_DEPENDS "fonts-dejavu-core")
set(CPACK_DEBIAN_PACKAGE_HOMEPAGE "https://fxledger.example.org/")
# Debug information stays out of the package (Debian policy 10.1).
set(CPACK_STRIP_FILES ON)
# Install with DESTDIR and the prefix /usr, so the units name /usr/bin.
set(CPACK_SET_DESTDIR ON)
set(CPACK_INSTALL_PREFIX "/usr")
# Only the program users run; never the test build.
set(CPACK_INSTALL_CMAKE_PROJECTS "${CMAKE_BINARY_DIR};fxledger;ALL;/")
include(CPack)
