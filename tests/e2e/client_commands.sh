#!/usr/bin/env bash
# End to end for the accrue client's subcommands against a running accrued:
# tail during the stream, control commands, then every read subcommand in
# --json (compared with the API's own reply) and as a table, and export's CSV
# parsed with Python's csv module against the API's window (client_check.py).
# The scenario is the invented demo one, cut to 6000 s of board time.
set -euo pipefail
sim=$1 daemon=$2 client=$3
here=$(cd "$(dirname "$0")" && pwd)
source "$(dirname "$0")/lib/harness.bash"
e2e_setup client

"$sim" --set duration_s=6000 --set beam.stop_s=5900 --set zero_window_s=20 --set seed=11 --speed 400 \
  --truth "$work/truth.json" --link "$work/board" >"$work/sim.out" 2>"$work/sim.err" &
pids+=($!)
e2e_wait_link "$work/board"
cat >"$work/accrued.json" <<CONF
{ "device": "$work/board", "database": "$work/a.db", "socket": "$work/s.sock", "commit_interval_ms": 100 }
CONF
"$daemon" --config "$work/accrued.json" 2>"$work/daemon.err" &
pids+=($!)
e2e_wait_socket "$work/s.sock"

/usr/bin/python3 "$here/client_check.py" --socket "$work/s.sock" --client "$client" --work "$work" ||
  { echo "--- daemon log"; tail -20 "$work/daemon.err"; echo "--- simulator log"; tail -5 "$work/sim.err"; exit 1; }
