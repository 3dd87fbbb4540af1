#!/usr/bin/env bash
# 200 hostile clients (slowloris, 10 MB lines, random bytes, deeply nested
# JSON, huge numbers, pipelined unknown methods from a client that never
# reads) on the Unix socket while accrued ingests a simulated stream: the
# daemon stays up, its memory stays bounded, ingest sheds nothing. Then
# api_max_clients slow clients at once: the idle and line timeouts cut them
# and an honest client is served.
# The checks and figures are in hostile_clients.py.
set -euo pipefail
sim=$1 daemon=$2 client=$3
here=$(cd "$(dirname "$0")" && pwd)
source "$(dirname "$0")/lib/harness.bash"
e2e_setup hostile

# 100x real time: ingest runs through the whole attack.
"$sim" --set duration_s=7200 --set zero_window_s=10 --set seed=3 --speed 100 --truth "$work/truth.json" \
  --link "$work/board" >/dev/null 2>"$work/sim.err" &
pids+=($!)
e2e_wait_link "$work/board"
cat >"$work/accrued.json" <<CONF
{ "device": "$work/board", "database": "$work/a.db", "socket": "$work/s.sock",
  "commit_interval_ms": 100, "api_max_clients": 64, "api_client_buffer_bytes": 262144,
  "api_idle_timeout_s": 2, "api_line_timeout_s": 2 }
CONF
"$daemon" --config "$work/accrued.json" 2>"$work/daemon.err" &
daemon_pid=$!
pids+=($daemon_pid)
e2e_wait_socket "$work/s.sock"
/usr/bin/python3 "$here/hostile_clients.py" --socket "$work/s.sock" --pid "$daemon_pid" --concurrent 40 --max-clients 64 --idle-timeout 2 --line-timeout 2 ${ACCRUE_HOSTILE_CONNECTIONS:+--connections $ACCRUE_HOSTILE_CONNECTIONS} \
  || { echo "--- daemon log"; tail -20 "$work/daemon.err"; exit 1; }
kill -0 "$daemon_pid" || { echo "daemon died"; exit 1; }
