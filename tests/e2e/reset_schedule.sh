#!/usr/bin/env bash
# End to end: accrued's reset schedule commands the simulated board's reset
# switch. Two short runs (invented scenario, scaled down: 90 s of board time
# at 15x real time), the board's own reset level set above anything the run
# reaches so every reset is one the daemon asked for. The simulator reads
# commands between chunks of 8192 samples, so the sample period is 0.1 ms
# (a chunk is 0.82 s of board time, 55 ms of wall time): well inside the
# daemon's command timeout, so the acks are in time.
#   1. reset_schedule.interval_s = 12: resets about every 12 s of board time;
#   2. reset_schedule.threshold_fraction = 0.5 (5 V of the 10 V full scale)
#      with hysteresis: each segment ends past 5 V and none clips.
# In both, the stored total must match the simulator's truth within the
# tolerance derived as in total_matches_truth.sh, and status must count the
# commands and acks.
set -euo pipefail
sim=$1 daemon=$2 client=$3
work=$(mktemp -d /tmp/accrue-e2e-schedule.XXXXXX)
pids=()
cleanup() { for p in "${pids[@]}"; do kill "$p" 2>/dev/null || true; done; wait 2>/dev/null || true; rm -rf "$work"; }
trap cleanup EXIT

run_case() {  # name, current_a, reset_schedule JSON
  local name=$1 current=$2 schedule=$3 dir="$work/$1"
  mkdir "$dir"
  echo "{ \"reset_schedule\": $schedule }" >"$dir/config.json"
  "$sim" --set duration_s=90 --set zero_window_s=10 --set beam.start_s=11 --set beam.stop_s=86 \
    --set beam.current_a="$current" --set front_end.reset_threshold_v=11.5 --set seed=7 --set sample_period_s=1e-4 --speed 15 \
    --truth "$dir/truth.json" --link "$dir/board" >"$dir/sim.out" 2>"$dir/sim.err" &
  local sim_pid=$!
  pids+=($sim_pid)
  for _ in $(seq 200); do [ -L "$dir/board" ] && break; sleep 0.05; done
  "$daemon" --config "$dir/config.json" --device "$dir/board" --database "$dir/a.db" --socket "$dir/s.sock" \
    2>"$dir/daemon.err" &
  local daemon_pid=$!
  pids+=($daemon_pid)
  for _ in $(seq 200); do [ -S "$dir/s.sock" ] && break; sleep 0.05; done
  "$client" --socket "$dir/s.sock" wait --timeout 60 >/dev/null
  wait "$sim_pid"
  "$client" --socket "$dir/s.sock" --json compare --truth "$dir/truth.json" >"$dir/compare.json"
  "$client" --socket "$dir/s.sock" --json status >"$dir/status.json"
  "$client" --socket "$dir/s.sock" --json segments >"$dir/segments.json"
  "$client" --socket "$dir/s.sock" --json events --kind board_reset_begin --limit 1000 >"$dir/resets.json"
  "$client" --socket "$dir/s.sock" --json events --kind reset_commanded --limit 1000 >"$dir/commanded.json"
  "$client" --socket "$dir/s.sock" status >"$dir/status.txt"
  kill "$daemon_pid"
  wait "$daemon_pid" || true
}

run_case interval 5e-10 '{"interval_s": 12}'
run_case threshold 1e-9 '{"threshold_fraction": 0.5, "threshold_hysteresis": 0.1}'

/usr/bin/python3 - "$work" <<'PY'
import json, math, sys, os
work = sys.argv[1]
def load(case, name): return json.load(open(os.path.join(work, case, name)))

def check_total(case):
    truth, cmp = load(case, "truth.json"), load(case, "compare.json")
    C, dt = truth["c_farad"], truth["sample_period_s"]
    # Per reading: output noise plus quantisation LSB/sqrt(12) (Bennett 1948).
    sigma = math.hypot(truth["noise_v"], truth["adc_lsb_v"] / math.sqrt(12))
    M = 16  # daemon default end_window
    # Least-squares line evaluated at the window's last point (textbook OLS prediction error).
    end_se = sigma * math.sqrt(1 / M + ((M - 1) / 2) ** 2 / (M * (M * M - 1) / 12))
    ends = end_se * math.sqrt(2 * (truth["resets"] + 1))
    # Drift slope from the zero window: se(b) = sigma/sqrt(Sxx), Sxx = N*T^2/12.
    T = truth["zero_window_s"]; N = T / dt
    drift = sigma / math.sqrt(N * T * T / 12) * (truth["samples"] * dt - T)
    # Dead time per reset (switch + 2 ms settle + a sample), estimated from the
    # rates either side: bounded by half the largest rate change times the gap.
    gap_bound = truth["resets"] * 0.5 * (truth["max_input_current_a"] / C) * (truth["reset_s"] + 0.002 + dt)
    tol = (4 * math.hypot(ends, drift) + gap_bound) * C
    err = abs(cmp["total"] - cmp["truth"])
    print(f"{case}: total {cmp['total']:.6e} C, truth {cmp['truth']:.6e} C, |error| {err:.2e} C, "
          f"tolerance {tol:.2e} C, U(k=2) {cmp['expanded_uncertainty_k2']:.2e} C, resets {truth['resets']}")
    assert truth["complete"], f"{case}: simulator did not finish"
    assert err <= tol, f"{case}: total outside the derived tolerance"
    return truth

def check_status(case, truth):
    rs = load(case, "status.json")["reset_schedule"]
    resets = load(case, "resets.json")["events"]
    commanded = load(case, "commanded.json")["events"]
    print(f"{case}: commanded {rs['commanded']}, acked {rs['acked']}, failed {rs['failed']}, "
          f"seen {rs['resets_seen']}, board's own {rs['board_initiated']}, last {rs['last_reset']}")
    assert rs["enabled"] and rs["board_reset_switch"] is True
    # Every reset the board made was one the daemon asked for (its own level is out of reach).
    assert truth["resets"] >= 5, f"{case}: too few resets {truth['resets']}"
    assert rs["resets_seen"] == truth["resets"] == len(resets), (rs["resets_seen"], truth["resets"], len(resets))
    assert rs["board_initiated"] == 0
    assert rs["acked"] >= truth["resets"] and rs["commanded"] == rs["acked"] + rs["failed"] + 0 * rs["not_sent"]
    assert len(commanded) == rs["commanded"], "one reset_commanded event per command"
    assert rs["last_reset"]["why"] in ("interval", "threshold", "retry")
    assert truth["clipped_samples"] == 0
    return rs, resets

truth = check_total("interval")
rs, resets = check_status("interval", truth)
dt = truth["sample_period_s"]
starts = [e["sample_index"] * dt for e in resets]
spacing = [b - a for a, b in zip(starts, starts[1:])]
print("interval: reset spacing (board s)", [round(s, 3) for s in spacing])
# The scheduler asks once 12 s of board time have passed since the last reset
# it saw (seen at the end of a 0.25 s block): never sooner.
assert all(s >= 12 - 0.3 for s in spacing), spacing
assert all("reason=interval" in e["detail"] or "reason=retry" in e["detail"] for e in load("interval", "commanded.json")["events"])
assert rs["next_reset"]["why"] == "interval" and rs["next_reset"]["utc"]

truth = check_total("threshold")
rs, resets = check_status("threshold", truth)
segs = load("threshold", "segments.json")["segments"]
ends = [abs(s["end_v"]) for s in segs[:-1]]  # every segment but the last ended in a reset
print("threshold: |end_v| of segments ended by a reset (V)", [round(v, 3) for v in ends])
# A reset is asked for once a block's largest |V| reaches 0.5 of the 10 V full
# scale, so each such segment ends at or past 5 V (less the end fit's noise), and
# no segment clips (flag 1).
assert len(ends) >= 5 and all(v >= 4.99 for v in ends), ends
assert all(not (s["flags"] & 1) for s in segs)
assert all("reason=threshold" in e["detail"] or "reason=retry" in e["detail"] for e in load("threshold", "commanded.json")["events"])
assert rs["next_reset"]["why"] == "threshold"
PY
grep -q "^reset" "$work/threshold/status.txt" || { echo "the client's status has no reset schedule line"; cat "$work/threshold/status.txt"; exit 1; }
