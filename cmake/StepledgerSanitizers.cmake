# Sanitizer and fuzzing builds (DEVELOPERS.md "Fuzzing and sanitizers"). Included before the
# libraries, so that every target of the build, libraries and tests alike, is instrumented.
#
#   STEPLEDGER_SANITIZE=ON     AddressSanitizer (with leak detection) and UndefinedBehaviorSanitizer
#                              on every target; any undefined behaviour ends the program
#                              (scripts/sanitize.sh, build-asan/). GCC or Clang.
#   STEPLEDGER_BUILD_FUZZ=ON   the libFuzzer targets under fuzz/ (scripts/fuzz.sh, build-fuzz/):
#                              the same sanitizers plus libFuzzer's coverage instrumentation.
#                              Clang only (libFuzzer is part of Clang).

option(STEPLEDGER_SANITIZE "Build everything with AddressSanitizer and UndefinedBehaviorSanitizer" OFF)
option(STEPLEDGER_BUILD_FUZZ "Build the libFuzzer targets under fuzz/ (Clang only; implies the sanitizers)" OFF)

if(STEPLEDGER_BUILD_FUZZ AND NOT CMAKE_CXX_COMPILER_ID MATCHES "Clang")
  message(FATAL_ERROR "STEPLEDGER_BUILD_FUZZ needs Clang (libFuzzer ships with it); configure with "
                      "-DCMAKE_CXX_COMPILER=clang++ (Debian: apt-get install clang libfuzzer-14-dev), "
                      "found ${CMAKE_CXX_COMPILER_ID}")
endif()

if(STEPLEDGER_SANITIZE OR STEPLEDGER_BUILD_FUZZ)
  # -fno-sanitize-recover: undefined behaviour is a failure, not a line on stderr that a passing
  # test hides. Frame pointers keep the reports' stacks whole.
  set(stepledger_sanitizer_flags -fsanitize=address,undefined -fno-sanitize-recover=undefined
      -fno-omit-frame-pointer)
  add_compile_options(${stepledger_sanitizer_flags})
  add_link_options(-fsanitize=address,undefined)
endif()

if(STEPLEDGER_BUILD_FUZZ)
  # Coverage feedback for libFuzzer in every library; the fuzz targets link libFuzzer's main
  # (fuzz/CMakeLists.txt adds -fsanitize=fuzzer to them alone).
  add_compile_options(-fsanitize=fuzzer-no-link)
endif()
