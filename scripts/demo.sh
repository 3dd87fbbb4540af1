#!/usr/bin/env bash
# The main job, end to end, on embedded defaults: a simulated integrator board
# (accrue-sim) on a pseudo-terminal plays an invented overnight scenario faster
# than real time, accrued logs it into a temporary SQLite store, and accrue
# asks for the accumulated charge and sets it beside the simulator's truth.
set -euo pipefail
top=$(cd "$(dirname "$0")/.." && pwd)
"$top/scripts/bootstrap.sh"
build="${ACCRUE_BUILD_DIR:-$top/build-release}"
cmake -S "$top" -B "$build" -DCMAKE_BUILD_TYPE=Release -DACCRUE_BUILD_TESTS=OFF >/dev/null
cmake --build "$build" -j"$(nproc)" >/dev/null

work=$(mktemp -d /tmp/accrue-demo.XXXXXX)
sim_pid=""; daemon_pid=""
cleanup() {
  [ -n "$daemon_pid" ] && kill "$daemon_pid" 2>/dev/null && wait "$daemon_pid" 2>/dev/null || true
  [ -n "$sim_pid" ] && kill "$sim_pid" 2>/dev/null && wait "$sim_pid" 2>/dev/null || true
}
trap cleanup EXIT

echo "accrue demo: simulating 8 hours of an invented overnight Faraday-cup run (1 kS/s, 100 pA spills, 1 nF)"
"$build/tools/accrue-sim/accrue-sim" --truth "$work/truth.json" --link "$work/board" >"$work/sim.out" 2>"$work/sim.log" &
sim_pid=$!
for _ in $(seq 100); do [ -L "$work/board" ] && break; sleep 0.05; done
device=$work/board
"$build/daemon/accrued" --device "$device" --database "$work/accrue.db" --socket "$work/accrued.sock" \
  2>"$work/accrued.log" &
daemon_pid=$!
client=("$build/tools/accrue/accrue" --socket "$work/accrued.sock")
for _ in $(seq 100); do [ -S "$work/accrued.sock" ] && break; sleep 0.05; done
"${client[@]}" wait --timeout 600 >/dev/null
wait "$sim_pid"; sim_pid=""
echo
"${client[@]}" compare --truth "$work/truth.json"
echo
kill -TERM "$daemon_pid"; wait "$daemon_pid" || true; daemon_pid=""
echo "database: $work/accrue.db   (daemon log: $work/accrued.log)"
