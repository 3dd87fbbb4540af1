# One place for compiler flags every accrue target shares: the warning set,
# warnings-as-errors in CI, and the sanitizer build.
add_library(accrue_flags INTERFACE)
target_compile_options(accrue_flags INTERFACE -Wall -Wextra -Wpedantic)
if(ACCRUE_WERROR)
  target_compile_options(accrue_flags INTERFACE -Werror)
endif()
if(ACCRUE_SANITIZE)
  target_compile_options(accrue_flags INTERFACE -fsanitize=address,undefined -fno-omit-frame-pointer -fno-sanitize-recover=undefined)
  target_link_options(accrue_flags INTERFACE -fsanitize=address,undefined)
endif()
