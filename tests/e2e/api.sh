#!/usr/bin/env bash
# End to end for the JSON-RPC API (docs/api.md): every documented example,
# malformed input of each kind, 64 concurrent clients while the simulator
# streams at 500 times real time, a subscriber that stops reading, TCP
# tokens, the socket's mode. The
# scenario is the invented demo one, cut to two hours of board time.
set -euo pipefail
sim=$1 daemon=$2 client=$3
here=$(cd "$(dirname "$0")" && pwd)
source "$(dirname "$0")/lib/harness.bash"
e2e_setup api

# 500x real time (500 kS/s of board samples): long enough for the checks to run during the stream.
"$sim" --set duration_s=7200 --set beam.stop_s=7100 --set zero_window_s=20 --set seed=6 --speed 500 \
  --truth "$work/truth.json" --link "$work/board" >"$work/sim.out" 2>"$work/sim.err" &
pids+=($!)
e2e_wait_link "$work/board"
head -c 24 /dev/urandom | od -An -tx1 | tr -d ' \n' >"$work/token"
chmod 600 "$work/token"
port=$(/usr/bin/python3 -c "import socket; s=socket.socket(); s.bind((\"127.0.0.1\", 0)); print(s.getsockname()[1])")
cat >"$work/accrued.json" <<CONF
{ "device": "$work/board", "database": "$work/a.db", "socket": "$work/s.sock",
  "commit_interval_ms": 50, "tcp": {"address": "127.0.0.1", "port": $port, "token_file": "$work/token"},
  "api_max_clients": 80, "api_client_buffer_bytes": 65536 }
CONF
"$daemon" --config "$work/accrued.json" 2>"$work/daemon.err" &
pids+=($!)
for _ in $(seq 200); do grep -q "TCP port" "$work/daemon.err" 2>/dev/null && [ -S "$work/s.sock" ] && break; sleep 0.05; done


/usr/bin/python3 "$here/api_check.py" --socket "$work/s.sock" --tcp-port "$port" --token-file "$work/token" \
  --docs "$here/../../docs/api.md" --database "$work/a.db" --truth "$work/truth.json" --client "$client" \
  --work "$work" || { echo "--- daemon log"; tail -20 "$work/daemon.err"; echo "--- simulator log"; tail -5 "$work/sim.err"; exit 1; }
