#!/usr/bin/env bash
# Each program prints its usage with --help and exits 0; unknown options exit 2.
set -euo pipefail
for prog in "$1" "$2" "$3"; do
  out=$("$prog" --help)
  grep -q "^usage: $(basename "$prog")" <<<"$out" || { echo "$prog --help: no usage line"; exit 1; }
  set +e; "$prog" --no-such-option >/dev/null 2>&1; rc=$?; set -e
  [ "$rc" -eq 2 ] || { echo "$prog: unknown option exited $rc, expected 2"; exit 1; }
done
