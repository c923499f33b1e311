# `cmake --install`: the program, its manual page and shell completions, the documentation and
# examples, and the core library with its headers, a CMake package (find_package(statewise),
# target statewise::core) and a pkg-config file. Paths follow GNUInstallDirs, so Debian's
# multiarch libdir and any --prefix work.
include(GNUInstallDirs)
include(CMakePackageConfigHelpers)

set(STATEWISE_CMAKE_DIR ${CMAKE_INSTALL_LIBDIR}/cmake/statewise)

# The library installs as libstatewise.a and is known to consumers as statewise::core.
set_target_properties(statewise_core PROPERTIES EXPORT_NAME core OUTPUT_NAME statewise)
target_include_directories(statewise_core PUBLIC $<INSTALL_INTERFACE:${CMAKE_INSTALL_INCLUDEDIR}>)

install(TARGETS statewise RUNTIME DESTINATION ${CMAKE_INSTALL_BINDIR})
install(TARGETS statewise_core EXPORT statewiseTargets
  ARCHIVE DESTINATION ${CMAKE_INSTALL_LIBDIR}
  LIBRARY DESTINATION ${CMAKE_INSTALL_LIBDIR}
  INCLUDES DESTINATION ${CMAKE_INSTALL_INCLUDEDIR})
install(DIRECTORY include/statewise DESTINATION ${CMAKE_INSTALL_INCLUDEDIR} FILES_MATCHING PATTERN "*.h")
install(FILES ${PROJECT_BINARY_DIR}/generated/statewise/version.h DESTINATION ${CMAKE_INSTALL_INCLUDEDIR}/statewise)

install(EXPORT statewiseTargets NAMESPACE statewise:: DESTINATION ${STATEWISE_CMAKE_DIR})
configure_package_config_file(cmake/statewiseConfig.cmake.in ${PROJECT_BINARY_DIR}/statewiseConfig.cmake
  INSTALL_DESTINATION ${STATEWISE_CMAKE_DIR})
# 0.x releases may change the API between minor versions.
write_basic_package_version_file(${PROJECT_BINARY_DIR}/statewiseConfigVersion.cmake
  COMPATIBILITY SameMinorVersion)
install(FILES ${PROJECT_BINARY_DIR}/statewiseConfig.cmake ${PROJECT_BINARY_DIR}/statewiseConfigVersion.cmake
  DESTINATION ${STATEWISE_CMAKE_DIR})

# pkg-config. The file is written at install time so that it names the prefix actually installed to
# (cmake --install --prefix may differ from the configured one); libdir and includedir are
# relative to ${prefix} when they are inside it, so `pkg-config --define-variable=prefix=...` can
# point at a moved tree.
function(statewise_pc_path variable directory)
  if(IS_ABSOLUTE "${directory}")
    set(${variable} "${directory}" PARENT_SCOPE)
  else()
    set(${variable} "\${prefix}/${directory}" PARENT_SCOPE)
  endif()
endfunction()
statewise_pc_path(STATEWISE_PC_LIBDIR "${CMAKE_INSTALL_LIBDIR}")
statewise_pc_path(STATEWISE_PC_INCLUDEDIR "${CMAKE_INSTALL_INCLUDEDIR}")
install(CODE "
  set(STATEWISE_PC_PREFIX \"\${CMAKE_INSTALL_PREFIX}\")
  set(STATEWISE_PC_LIBDIR [=[${STATEWISE_PC_LIBDIR}]=])
  set(STATEWISE_PC_INCLUDEDIR [=[${STATEWISE_PC_INCLUDEDIR}]=])
  set(PROJECT_VERSION ${PROJECT_VERSION})
  configure_file([=[${PROJECT_SOURCE_DIR}/cmake/statewise.pc.in]=] [=[${PROJECT_BINARY_DIR}/pkgconfig/statewise.pc]=] @ONLY)
")
install(FILES ${PROJECT_BINARY_DIR}/pkgconfig/statewise.pc DESTINATION ${CMAKE_INSTALL_LIBDIR}/pkgconfig)

install(FILES ${STATEWISE_MAN_PAGE} DESTINATION ${CMAKE_INSTALL_MANDIR}/man1)
install(FILES ${STATEWISE_BASH_COMPLETION} DESTINATION ${CMAKE_INSTALL_DATADIR}/bash-completion/completions)
install(FILES ${STATEWISE_ZSH_COMPLETION} DESTINATION ${CMAKE_INSTALL_DATADIR}/zsh/vendor-completions)

file(GLOB STATEWISE_DOCS CONFIGURE_DEPENDS docs/*.md docs/*.json)
install(FILES README.md ${STATEWISE_DOCS} DESTINATION ${CMAKE_INSTALL_DOCDIR})
install(DIRECTORY examples/ DESTINATION ${CMAKE_INSTALL_DOCDIR}/examples)
