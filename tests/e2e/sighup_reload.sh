#!/usr/bin/env bash
# SIGHUP reloads the config: a file with an error is refused whole (the error
# names the key; the daemon keeps running on the old config and keeps
# answering); a good file with a changed calibration is applied in place and
# the store gains a new calibration version for that channel.
set -euo pipefail
sim=$1 daemon=$2 client=$3
source "$(dirname "$0")/lib/harness.bash"
e2e_setup sighup hard
wait_for() { for _ in $(seq 600); do eval "$1" && return 0; sleep 0.05; done; echo "timed out: $1"; cat "$work/daemon.err"; exit 1; }
versions() { /usr/bin/python3 -c 'import sqlite3,sys; print(sqlite3.connect(f"file:{sys.argv[1]}?mode=ro", uri=True).execute("SELECT COUNT(*) FROM calibration WHERE channel = 0").fetchone()[0])' "$work/a.db"; }

"$sim" --set duration_s=3600 --speed 20 --link "$work/board" --truth "$work/truth.json" >/dev/null 2>"$work/sim.err" &
pids+=($!)
wait_for '[ -L "$work/board" ]'
cat >"$work/board.json" <<JSON
// invented test board
{ "log_level": "info", "channels": [ { "channel": 0, "c_farad": 1e-9 } ] }
JSON
"$daemon" --config "$work/board.json" --device "$work/board" --database "$work/a.db" --socket "$work/s.sock" \
  2>"$work/daemon.err" &
dpid=$!
pids+=($dpid)
wait_for '[ -S "$work/s.sock" ]'
wait_for '[ "$(versions)" = 1 ]'

# A bad file: refused, with the key named, and the old config kept.
cat >"$work/board.json" <<JSON
{ "log_level": "info", "channels": [ { "channel": 0, "c_farad": -2e-9 } ], "colour": "red" }
JSON
kill -HUP "$dpid"
wait_for 'grep -q "reload refused" "$work/daemon.err"'
grep -q "reload: config: channels\[0\].c_farad = -2e-09: must be > 0" "$work/daemon.err"
grep -q 'reload: config: colour = "red": unknown key' "$work/daemon.err"
"$client" --socket "$work/s.sock" status >/dev/null   # still answering
kill -0 "$dpid"
[ "$(versions)" = 1 ] || { echo "a refused reload changed the calibration"; exit 1; }

# A good file with a new capacitor value: applied without a restart.
cat >"$work/board.json" <<JSON
{ "log_level": "info", "channels": [ { "channel": 0, "c_farad": 2e-9 } ] }
JSON
kill -HUP "$dpid"
wait_for 'grep -q "reload: applied channels" "$work/daemon.err"'
wait_for '[ "$(versions)" = 2 ]'
kill -TERM "$dpid"
wait "$dpid"
echo "bad reload refused, good reload applied: $(versions) calibration versions for channel 0"
