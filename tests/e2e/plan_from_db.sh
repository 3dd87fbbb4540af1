#!/usr/bin/env bash
# accrue plan --from-db: a 20-minute slice of the demo scenario (invented)
# recorded by accrued, compared with the plan made from the simulator's own
# parts. The plan's drift (offset 1 mV over R1*C = 1 s, plus 5 pA into 1 nF:
# 6 mV/s) must match the fitted drift, the reset count must match the
# threshold, and nothing saturates. A plan with a smaller bias current than the
# board has must be told its drift is exceeded.
set -euo pipefail
sim=$1 daemon=$2 client=$3
source "$(dirname "$0")/lib/harness.bash"
e2e_setup plandb

"$sim" --set duration_s=1200 --set beam.stop_s=1150 --set seed=5 --truth "$work/truth.json" --link "$work/board" \
  >"$work/sim.out" 2>"$work/sim.err" &
pids+=($!)
e2e_wait_link "$work/board"
e2e_start_daemon
"$client" --socket "$work/s.sock" wait --timeout 120 >/dev/null

# The simulator's parts (tools/accrue-sim/scenario.hpp defaults), its 8 V reset threshold.
plan=(plan --r1 1G --c 1n --vos 1m --ib 5p --rail 12 --adc-bits 24 --full-scale 10 --dead-time 1m
  --pedestal 5m --noise 50u --zero-window 60 --input 0:130p --threshold 8 --duration 1200)
"$client" --json "${plan[@]}" --from-db "$work/a.db" >"$work/good.json"
"$client" "${plan[@]}" --from-db "$work/a.db" >"$work/good.txt"
set +e
"$client" --json "${plan[@]/5p/1p}" --from-db "$work/a.db" >"$work/low.json"; rc=$?
"$client" plan --r1 1G --c 1n --input 1n --from-db "$work/missing.db" >/dev/null 2>"$work/missing.err"; rc_missing=$?
set -e
[ "$rc" -eq 1 ] || { echo "a plan with too little bias current exited $rc, expected 1"; exit 1; }
[ "$rc_missing" -eq 1 ] || { echo "a missing database exited $rc_missing, expected 1"; exit 1; }

/usr/bin/python3 - "$work/good.json" "$work/low.json" "$work/truth.json" <<'PY'
import json, sys
good = json.load(open(sys.argv[1]))["recorded"]
low = json.load(open(sys.argv[2]))["recorded"]
truth = json.load(open(sys.argv[3]))
print(f"from-db: drift {good['measured_drift_v_per_s']:.6g} V/s (plan {good['planned_drift_v_per_s']:.6g}), "
      f"start {good['measured_start_v_median']:.6g} V, resets {good['resets']} "
      f"(events {good['reset_events']}, at mean slope {good['resets_at_mean_slope']:.2f}, "
      f"plan {good['planned_resets_low']:.2f}..{good['planned_resets_high']:.2f}), truth resets {truth['resets']}")
assert good["within_plan"], good["findings"]
assert abs(good["measured_drift_v_per_s"] / 6e-3 - 1) < 0.05, good["measured_drift_v_per_s"]
assert good["resets"] == truth["resets"] == good["reset_events"]
assert good["resets"] >= 5
assert good["clipped_segments"] == 0 and good["overload_events"] == 0
assert not low["within_plan"]
assert "drift_above_plan" in {f["code"] for f in low["findings"]}, low["findings"]
PY
grep -q "behaved as planned" "$work/good.txt" || { echo "text comparison missing"; cat "$work/good.txt"; exit 1; }
echo ok
