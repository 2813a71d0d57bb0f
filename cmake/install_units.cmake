# Run by 'cmake --install' (and CPack) through install(SCRIPT): writes the
# systemd units of deploy/ with the program's paths under the prefix of this
# install, so /usr/local gets /usr/local/bin/fxledger and the package
# /usr/bin/fxledger. FXL_SRC, FXL_OUT and FXL_BINDIR are set by install(CODE).
file(MAKE_DIRECTORY "${FXL_OUT}")
foreach(unit fxledger.service fxledger-backup.service fxledger-backup.timer)
  file(READ "${FXL_SRC}/deploy/${unit}" text)
  string(REPLACE "/usr/bin/fxledger" "${CMAKE_INSTALL_PREFIX}/${FXL_BINDIR}/fxledger" text "${text}")
  string(REPLACE "/usr/lib/fxledger/" "${CMAKE_INSTALL_PREFIX}/lib/fxledger/" text "${text}")
  file(WRITE "${FXL_OUT}/${unit}" "${text}")
endforeach()
