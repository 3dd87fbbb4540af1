#!/usr/bin/env bash
# SIGTERM during heavy ingest (the simulator streaming as fast as the daemon
# reads) loses nothing accepted: the samples the daemon says it accepted are
# exactly the samples in the store's raw blocks after it exits, and at least
# as many as it had accepted when the signal was sent.
set -euo pipefail
sim=$1 daemon=$2 client=$3
source "$(dirname "$0")/lib/harness.bash"
e2e_setup sigterm hard
wait_for() { for _ in $(seq 600); do eval "$1" && return 0; sleep 0.05; done; echo "timed out: $1"; exit 1; }

"$sim" --set duration_s=36000 --set seed=5 --link "$work/board" --truth "$work/truth.json" --linger-s 1 \
  >/dev/null 2>"$work/sim.err" &
pids+=($!)
wait_for '[ -L "$work/board" ]'
"$daemon" --device "$work/board" --database "$work/a.db" --socket "$work/s.sock" 2>"$work/daemon.err" &
dpid=$!
pids+=($dpid)
wait_for '[ -S "$work/s.sock" ]'
accepted() { "$client" --socket "$work/s.sock" --json status | /usr/bin/python3 -c 'import json,sys; print(json.load(sys.stdin)["ingest"]["samples"])'; }
wait_for '[ "$(accepted)" -gt 200000 ]'
before=$(accepted)
kill -TERM "$dpid"
wait "$dpid"
line=$(grep "stopped: accepted" "$work/daemon.err")
echo "$line"
/usr/bin/python3 - "$work/a.db" "$before" "$line" <<'PY'
import re, sqlite3, sys
db, before, line = sys.argv[1], int(sys.argv[2]), sys.argv[3]
m = re.search(r"accepted (\d+) blocks \((\d+) samples\); raw blocks written (\d+), shed (\d+)", line)
blocks, samples, written, shed = map(int, m.groups())
con = sqlite3.connect(f"file:{db}?mode=ro", uri=True)
stored_samples, = con.execute("SELECT COALESCE(SUM(samples * channel_count), 0) FROM raw_block").fetchone()
print(f"accepted before SIGTERM {before}, at exit {samples}; stored {stored_samples}; shed blocks {shed}")
assert shed == 0, "nothing may be shed in this test"
assert samples >= before
assert stored_samples == samples, "every accepted sample must be committed"
ok, = con.execute("PRAGMA integrity_check").fetchone()
assert ok == "ok"
PY
