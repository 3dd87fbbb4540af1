#!/usr/bin/env bash
# systemd-analyze accepts the template unit (as an instance, with ExecStart
# pointed at the built daemon) and rates its exposure; the rating must stay
# at 2.0 or below. Skips (77) where systemd-analyze is absent.
set -euo pipefail
daemon=$2
here=$(cd "$(dirname "$0")/../../systemd" && pwd)
command -v systemd-analyze >/dev/null || { echo "systemd-analyze not installed: skipped"; exit 77; }
source "$(dirname "$0")/lib/harness.bash"
e2e_setup units
sed "s|/usr/sbin/accrued|$daemon|" "$here/accrued@.service" >"$work/accrued@board1.service"
out=$(systemd-analyze verify "$work/accrued@board1.service" 2>&1) || { echo "$out"; exit 1; }
# verify prints warnings without failing; any line naming our unit is a finding.
if grep -q "accrued@board1.service" <<<"$out"; then echo "$out"; exit 1; fi
sec=$(systemd-analyze security --offline=true "$work/accrued@board1.service" 2>&1)
score=$(sed -n 's/.*Overall exposure level for accrued@board1.service: \([0-9.]*\).*/\1/p' <<<"$sec")
echo "systemd-analyze security exposure: $score"
[ -n "$score" ] || { echo "$sec"; exit 1; }
/usr/bin/python3 -c "import sys; sys.exit(0 if float('$score') <= 2.0 else 1)" || { echo "$sec" | grep '✗'; exit 1; }
