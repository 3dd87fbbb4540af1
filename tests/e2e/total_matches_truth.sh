#!/usr/bin/env bash
# End to end: accrue-sim on a pseudo-terminal -> accrued -> SQLite -> accrue.
# A 30-minute slice of the demo scenario (invented), about 15 resets. The
# stored total must equal the simulator's truth within a tolerance derived
# from the simulated noise and quantisation (see tolerance below).
set -euo pipefail
sim=$1 daemon=$2 client=$3
source "$(dirname "$0")/lib/harness.bash"
e2e_setup e2e

"$sim" --set duration_s=1800 --set beam.stop_s=1740 --set seed=11 --truth "$work/truth.json" --link "$work/board" \
  >"$work/sim.out" 2>"$work/sim.err" &
pids+=($!)
e2e_wait_link "$work/board"
e2e_start_daemon
"$client" --socket "$work/s.sock" wait --timeout 120 >/dev/null
# When the simulator exits, its --link has gone before its terminal closed,
# so this daemon's reconnect attempts cannot reach another test's simulator
# that is handed the same /dev/pts number.
wait "${pids[0]}"
[ ! -L "$work/board" ] || { echo "the simulator left its link behind"; exit 1; }
"$client" --socket "$work/s.sock" --json compare --truth "$work/truth.json" >"$work/compare.json"
"$client" --socket "$work/s.sock" --json totals >"$work/totals.json"

/usr/bin/python3 - "$work/truth.json" "$work/compare.json" "$work/totals.json" <<'PY'
import json, math, sys
truth = json.load(open(sys.argv[1])); cmp = json.load(open(sys.argv[2])); tot = json.load(open(sys.argv[3]))
ch = tot["channels"][0]
C, dt, sigma_n = truth["c_farad"], truth["sample_period_s"], truth["noise_v"]
# Per reading: output noise plus quantisation LSB/sqrt(12) (Bennett 1948).
sigma = math.hypot(sigma_n, truth["adc_lsb_v"] / math.sqrt(12))
M = 16  # samples in each segment-end fit (daemon default end_window)
# Standard error of a least-squares line evaluated at the window's last point:
# sigma*sqrt(1/M + ((M-1)/2)^2/Sxx), Sxx = M(M^2-1)/12 (textbook OLS prediction error).
end_se = sigma * math.sqrt(1 / M + ((M - 1) / 2) ** 2 / (M * (M * M - 1) / 12))
segments = truth["resets"] + 1
ends = end_se * math.sqrt(2 * segments)
# Drift slope from the zero window: se(b) = sigma/sqrt(Sxx), Sxx = N*T^2/12.
N = truth["zero_window_s"] / dt
T = truth["zero_window_s"]
slope_se = sigma / math.sqrt(N * T * T / 12)
live_s = truth["samples"] * dt - T
drift = slope_se * live_s
# Dead time per reset: switch (reset_s) + settle (2 ms) + one sample; the lost
# part is estimated from the rates either side, so its error is bounded by half
# the largest rate change times the gap (a bound, added linearly).
gap_s = truth["reset_s"] + 0.002 + dt
gap_bound = truth["resets"] * 0.5 * (truth["max_input_current_a"] / C) * gap_s
tol_v = 4 * math.hypot(ends, drift) + gap_bound
tol = tol_v * C
err = abs(cmp["total"] - cmp["truth"])
print(f"total {cmp['total']:.9e} C, truth {cmp['truth']:.9e} C, |error| {err:.3e} C, "
      f"tolerance {tol:.3e} C (4 sigma of {ends*C:.2e}/{drift*C:.2e} C + gap bound {gap_bound*C:.2e} C), "
      f"stated U(k=2) {cmp['expanded_uncertainty_k2']:.3e} C, resets {truth['resets']}")
assert truth["complete"], "simulator did not finish"
assert truth["resets"] >= 5, "scenario should exercise resets"
assert ch["segments"] == segments, f"segments {ch['segments']} != resets+1 {segments}"
assert err <= tol, "total outside the derived tolerance"
# The uncorrected figure must be visibly wrong on this scenario (drift and resets matter).
assert abs(cmp["uncorrected_relative_error_percent"]) > 5
assert abs(cmp["stitched_uncorrected_relative_error_percent"]) > 1
PY
