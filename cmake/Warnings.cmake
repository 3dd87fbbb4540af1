# One place for compiler flags every accrue target shares: the warning set,
# warnings-as-errors in CI, and the sanitizer build.
add_library(accrue_flags INTERFACE)
target_compile_options(accrue_flags INTERFACE -Wall -Wextra -Wpedantic)
# g++ 12 reports a false mismatched-new-delete inside Boost.Asio's coroutine
# frame allocator (awaitable_frame_base) at -O2; the pairing there is correct.
target_compile_options(accrue_flags INTERFACE -Wno-mismatched-new-delete)
if(ACCRUE_WERROR)
  target_compile_options(accrue_flags INTERFACE -Werror)
endif()
if(ACCRUE_SANITIZE)
  target_compile_options(accrue_flags INTERFACE -fsanitize=address,undefined -fno-omit-frame-pointer -fno-sanitize-recover=undefined)
  target_link_options(accrue_flags INTERFACE -fsanitize=address,undefined)
endif()
