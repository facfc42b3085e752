# Shared helpers: one place that sets warnings and creates a stepledger library.

function(stepledger_set_warnings target)
  target_compile_options(${target} PRIVATE -Wall -Wextra -Wpedantic)
  # GCC 12 at -O3 reports -Wrestrict inside libstdc++ for `"text" + std::string` (GCC bug
  # 105329, a false positive fixed in GCC 13); it says nothing about our code.
  if(CMAKE_CXX_COMPILER_ID STREQUAL "GNU" AND CMAKE_CXX_COMPILER_VERSION VERSION_LESS 13)
    target_compile_options(${target} PRIVATE -Wno-restrict)
  endif()
endfunction()

# stepledger_add_library(NAME folder DEPENDS ...)
# Builds src/*.cpp of a folder into stepledger_<name>, with the alias stepledger::<name>,
# public headers in <folder>/include.
function(stepledger_add_library name)
  cmake_parse_arguments(ARG "" "" "PUBLIC_DEPS;PRIVATE_DEPS" ${ARGN})
  file(GLOB sources CONFIGURE_DEPENDS "${CMAKE_CURRENT_SOURCE_DIR}/src/*.cpp")
  add_library(stepledger_${name} ${sources})
  add_library(stepledger::${name} ALIAS stepledger_${name})
  set_target_properties(stepledger_${name} PROPERTIES EXPORT_NAME ${name} POSITION_INDEPENDENT_CODE ON)
  target_include_directories(stepledger_${name} PUBLIC
    $<BUILD_INTERFACE:${CMAKE_CURRENT_SOURCE_DIR}/include>
    $<INSTALL_INTERFACE:${CMAKE_INSTALL_INCLUDEDIR}>)
  target_link_libraries(stepledger_${name} PUBLIC ${ARG_PUBLIC_DEPS} PRIVATE ${ARG_PRIVATE_DEPS})
  target_compile_features(stepledger_${name} PUBLIC cxx_std_20)
  stepledger_set_warnings(stepledger_${name})
endfunction()
