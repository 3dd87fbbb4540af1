#!/usr/bin/env bash
# Readiness and watchdog on a NOTIFY_SOCKET the test listens on: READY=1 comes
# first, then WATCHDOG=1 keep-alives from the event loop; once the loop is
# made to hang (test hook, SIGUSR2) no keep-alive follows. A second daemon
# shows STOPPING=1 after the keep-alives on SIGTERM.
set -euo pipefail
sim=$1 daemon=$2
helper=$(cd "$(dirname "$0")/../helpers" && pwd)/notify_listen.py
source "$(dirname "$0")/lib/harness.bash"
e2e_setup notify hard
wait_for() { for _ in $(seq 400); do eval "$1" && return 0; sleep 0.05; done; echo "timed out: $1"; exit 1; }

"$sim" --set duration_s=600 --speed 1 --link "$work/board" --truth "$work/truth.json" >/dev/null 2>"$work/sim.err" &
pids+=($!)
wait_for '[ -L "$work/board" ]'
/usr/bin/python3 "$helper" "$work/notify.sock" "$work/notify.log" &
pids+=($!)
wait_for '[ -S "$work/notify.sock" ]'

# WATCHDOG_USEC as systemd sets it for WatchdogSec=0.4s: keep-alives every 0.2 s.
NOTIFY_SOCKET=$work/notify.sock WATCHDOG_USEC=400000 \
  "$daemon" --device "$work/board" --database "$work/a.db" --socket "$work/s.sock" \
  --test-hang-on-sigusr2 2>"$work/daemon.err" &
dpid=$!
pids+=($dpid)
wait_for '[ "$(grep -c WATCHDOG=1 "$work/notify.log" 2>/dev/null)" -ge 5 ]'
kill -USR2 "$dpid"
wait_for 'grep -q "blocking the event loop" "$work/daemon.err"'
hung_at=$(wc -l <"$work/notify.log")
# Ten keep-alive intervals with the loop blocked; at most one message can have
# been in flight when the hook ran.
sleep 2
after=$(wc -l <"$work/notify.log")
kill -0 "$dpid"  # still running, only stuck: systemd would now restart it
kill -9 "$dpid"

/usr/bin/python3 - "$work/notify.log" "$hung_at" "$after" <<'PY'
import sys
lines = [l.split(" ", 1)[1].strip() for l in open(sys.argv[1])]
hung_at, after = int(sys.argv[2]), int(sys.argv[3])
print("notify messages:", lines[:3], "...", len(lines), "lines;", after - hung_at, "after the hang")
assert lines[0] == "READY=1", "READY=1 must come first"
assert lines[1].startswith("STATUS=store open, link "), lines[1]
assert lines[1] in ("STATUS=store open, link up", "STATUS=store open, link retrying"), lines[1]
assert all(l == "WATCHDOG=1" for l in lines[2:hung_at]), "only keep-alives after readiness"
assert hung_at - 2 >= 5
assert after - hung_at <= 1, f"{after - hung_at} keep-alives arrived from a hung loop"
PY

# SIGTERM: keep-alives, then STOPPING=1, and a clean exit.
: >"$work/notify.log"
NOTIFY_SOCKET=$work/notify.sock WATCHDOG_USEC=400000 \
  "$daemon" --device /dev/accrue-no-such-device --database "$work/b.db" --socket "$work/t.sock" 2>"$work/daemon2.err" &
dpid=$!
pids+=($dpid)
wait_for '[ "$(grep -c WATCHDOG=1 "$work/notify.log" 2>/dev/null)" -ge 2 ]'
kill -TERM "$dpid"
wait "$dpid"
/usr/bin/python3 - "$work/notify.log" <<'PY'
import sys
lines = [l.split(" ", 1)[1].strip() for l in open(sys.argv[1])]
print("second daemon:", lines)
assert lines[0] == "READY=1"
assert lines[1] == "STATUS=store open, link retrying", "a missing device is ready-and-retrying"
assert lines[-1] == "STOPPING=1"
assert lines.count("STOPPING=1") == 1
PY
