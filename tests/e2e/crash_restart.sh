#!/usr/bin/env bash
# Crash loop: accrued is killed with SIGKILL at random moments while the
# simulator streams at 20 kS/s, and restarted on the same store each time.
# After every kill the file passes PRAGMA integrity_check, the committed
# checkpoint never goes back, the run continues (no new run), segment rows
# are contiguous and add up to the committed total, and each restart records
# a run_resumed event with the count of samples it missed.
# ACCRUE_CRASH_KILLS sets the number of kills (default 12; 100 for a long run).
set -euo pipefail
sim=$1 daemon=$2 client=$3
kills=${ACCRUE_CRASH_KILLS:-12}
source "$(dirname "$0")/lib/harness.bash"
e2e_setup crash hard
RANDOM=42  # seeded: the kill moments repeat from run to run
"$sim" --set duration_s=$(( kills * 600 + 600 )) --set zero_window_s=10 \
  --set beam.start_s=15 --set beam.current_a=4e-10 --speed 20 --truth "$work/truth.json" --link "$work/board" \
  >/dev/null 2>&1 &
sim_pid=$!
pids+=($sim_pid)
e2e_wait_link "$work/board"
dev=$work/board
start_daemon() {
  rm -f "$work/s.sock"
  "$daemon" --device "$dev" --database "$work/a.db" --socket "$work/s.sock" 2>>"$work/daemon.err" &
  daemon_pid=$!
  pids+=($daemon_pid)
  e2e_wait_socket "$work/s.sock"
  # Wait until this daemon has taken up the run and committed that it did, so
  # every kill hits a live run whose resumption is on disk.
  local want=$1
  for _ in $(seq 400); do
    [ "$(sqlite3 -readonly "$work/a.db" "SELECT COUNT(*) FROM event WHERE kind = '$2'" 2>/dev/null || echo 0)" -ge "$want" ] && return 0
    sleep 0.05
  done
  echo "daemon did not take up the run"; exit 1
}
q() { sqlite3 -readonly "$work/a.db" "$1"; }
start_daemon 1 board_zero_relay_opened  # past the zero window: the run and its baseline exist
last=0
for k in $(seq "$kills"); do
  sleep "0.$(( 300 + RANDOM % 700 ))"
  kill -9 "$daemon_pid"; wait "$daemon_pid" 2>/dev/null || true
  [ "$(q 'PRAGMA integrity_check')" = "ok" ] || { echo "kill $k: integrity_check failed"; exit 1; }
  now=$(q "SELECT COALESCE(MAX(last_index), 0) FROM total_checkpoint")
  [ "$now" -ge "$last" ] || { echo "kill $k: checkpoint went back from $last to $now"; exit 1; }
  last=$now
  start_daemon "$k" run_resumed
done
# The simulator streams on (it is long enough for any machine's pace): stop
# the last daemon cleanly, which commits everything it accepted.
kill -TERM "$daemon_pid"; wait "$daemon_pid" || true
kill "$sim_pid" 2>/dev/null || true
[ "$(q 'PRAGMA integrity_check')" = "ok" ]
runs=$(q "SELECT COUNT(*) FROM run")
[ "$runs" -eq 1 ] || { echo "expected one continued run, found $runs"; exit 1; }
read -r n lo hi < <(q "SELECT COUNT(*), MIN(ordinal), MAX(ordinal) FROM segment" | tr '|' ' ')
[ "$lo" -eq 1 ] && [ "$hi" -eq "$n" ] || { echo "segment ordinals not contiguous: $n rows, $lo..$hi"; exit 1; }
resumed=$(q "SELECT COUNT(*) FROM event WHERE kind = 'run_resumed' AND detail LIKE '%missing_samples=%'")
[ "$resumed" -eq "$kills" ] || { echo "expected $kills run_resumed events, found $resumed"; exit 1; }
/usr/bin/python3 - "$work/a.db" <<'PY'
import json, sqlite3, sys
con = sqlite3.connect(f"file:{sys.argv[1]}?mode=ro", uri=True)
total, segments = con.execute("SELECT total, segments FROM total_checkpoint").fetchone()
summed = con.execute("SELECT SUM(quantity) FROM segment").fetchone()[0]
assert abs(summed - total) <= 1e-9 * abs(total), (summed, total)
missing = sum(int(d.split("missing_samples=")[1].split()[0]) for (d,) in con.execute(
    "SELECT detail FROM event WHERE kind = 'run_resumed'"))
print(f"{segments} segments, total {total:.6e} C; samples missed across restarts (estimated from rates): {missing}")
PY
