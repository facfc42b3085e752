# Install and export so that find_package(stepledger) works from an installed copy.
include(GNUInstallDirs)
include(CMakePackageConfigHelpers)

install(TARGETS stepledger_engine stepledger_selection stepledger_io stepledger_run stepledger_audit stepledger_report stepledger_armadillo
        EXPORT stepledgerTargets
        ARCHIVE DESTINATION ${CMAKE_INSTALL_LIBDIR}
        LIBRARY DESTINATION ${CMAKE_INSTALL_LIBDIR})
install(TARGETS stepledger RUNTIME DESTINATION ${CMAKE_INSTALL_BINDIR})
foreach(folder engine selection io run audit report)
  install(DIRECTORY ${PROJECT_SOURCE_DIR}/${folder}/include/ DESTINATION ${CMAKE_INSTALL_INCLUDEDIR})
endforeach()

install(EXPORT stepledgerTargets NAMESPACE stepledger::
        DESTINATION ${CMAKE_INSTALL_LIBDIR}/cmake/stepledger)
configure_package_config_file(${PROJECT_SOURCE_DIR}/cmake/stepledgerConfig.cmake.in
  ${PROJECT_BINARY_DIR}/stepledgerConfig.cmake
  INSTALL_DESTINATION ${CMAKE_INSTALL_LIBDIR}/cmake/stepledger)
write_basic_package_version_file(${PROJECT_BINARY_DIR}/stepledgerConfigVersion.cmake
  COMPATIBILITY SameMinorVersion)
install(FILES ${PROJECT_BINARY_DIR}/stepledgerConfig.cmake
              ${PROJECT_BINARY_DIR}/stepledgerConfigVersion.cmake
        DESTINATION ${CMAKE_INSTALL_LIBDIR}/cmake/stepledger)
