# One place for compiler flags every accrue target shares: the warning set,
# warnings-as-errors in CI, and the sanitizer build.
add_library(accrue_flags INTERFACE)
target_compile_options(accrue_flags INTERFACE -Wall -Wextra -Wpedantic)
# g++ 12 reports a false mismatched-new-delete inside Boost.Asio's coroutine
# frame allocator (awaitable_frame_base) at -O2; the pairing there is correct.
target_compile_options(accrue_flags INTERFACE -Wno-mismatched-new-delete)
# g++ 12 at -O3 (Release: scripts/demo.sh, tools/bench/run.sh) reports a false
# -Wrestrict inside libstdc++'s operator+(const char*, std::string&&) (GCC bug
# 105329, number from memory; fixed in GCC 13). It flooded demo.sh's first build
# and would fail a Release build with ACCRUE_WERROR.
if(CMAKE_CXX_COMPILER_ID STREQUAL "GNU" AND CMAKE_CXX_COMPILER_VERSION VERSION_LESS 13)
  target_compile_options(accrue_flags INTERFACE -Wno-restrict)
endif()
if(ACCRUE_WERROR)
  target_compile_options(accrue_flags INTERFACE -Werror)
endif()
if(ACCRUE_SANITIZE)
  target_compile_options(accrue_flags INTERFACE -fsanitize=address,undefined -fno-omit-frame-pointer -fno-sanitize-recover=undefined)
  target_link_options(accrue_flags INTERFACE -fsanitize=address,undefined)
endif()
