#!/usr/bin/env bash
# The whole test suite through ctest, on a fresh machine included: installs
# what is missing, builds with warnings as errors, runs every test. Under CI
# (CI=true) or with ACCRUE_SANITIZE_SUITE=1 it then builds and runs the suite a
# second time with AddressSanitizer, LeakSanitizer and UndefinedBehaviorSanitizer.
set -euo pipefail
top=$(cd "$(dirname "$0")/.." && pwd)
"$top/scripts/bootstrap.sh"
jobs=$(nproc)
started=$(date +%s)

build="${ACCRUE_BUILD_DIR:-$top/build}"
cmake -S "$top" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DACCRUE_WERROR=ON >/dev/null
cmake --build "$build" -j"$jobs"
ctest --test-dir "$build" --output-on-failure -j"$jobs" "$@"
echo "accrue: plain suite passed in $(( $(date +%s) - started )) s"

if [ "${CI:-}" = "true" ] || [ "${ACCRUE_SANITIZE_SUITE:-0}" = "1" ]; then
  sanitized="${ACCRUE_SANITIZE_BUILD_DIR:-$top/build-sanitize}"
  cmake -S "$top" -B "$sanitized" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DACCRUE_WERROR=ON -DACCRUE_SANITIZE=ON >/dev/null
  cmake --build "$sanitized" -j"$jobs"
  ASAN_OPTIONS="detect_leaks=1:abort_on_error=1:strict_string_checks=1" \
  UBSAN_OPTIONS="print_stacktrace=1:halt_on_error=1" \
    ctest --test-dir "$sanitized" --output-on-failure -j"$jobs" "$@"
  echo "accrue: sanitizer suite passed; both suites in $(( $(date +%s) - started )) s"
fi
