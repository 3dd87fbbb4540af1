#!/usr/bin/env bash
# End to end with a 4-channel board (invented scenario): every channel has its
# own input (channel k: beam current / (k+1), offset sign alternating) and
# channel 1 its own front end (C = 2.2 nF, R1 = 470 MΩ, more noise), given to
# the daemon in the config's channels list. The daemon must keep a chain, a
# store and a total per channel, each within its own tolerance of the truth.
# With "text_lines" as $4 the board speaks the text-line variant instead
# (PROTOCOL.md §5) and the daemon is configured for it; text_lines_total.sh
# calls this script that way.
set -euo pipefail
sim=$1 daemon=$2 client=$3 wire=${4:-frames}
source "$(dirname "$0")/lib/harness.bash"
e2e_setup multi

channels=4 duration=240
sim_wire=()
if [ "$wire" = text_lines ]; then sim_wire=(--text-lines); channels=2 duration=120; fi
args=(--set duration_s=$duration --set beam.stop_s=$((duration - 10)) --set beam.start_s=25 --set zero_window_s=20
      --set beam.current_a=1e-9 --set seed=31 --set channel_count=$channels
      --set channels.1.front_end.c_farad=2.2e-9 --set channels.1.front_end.r1_ohm=4.7e8
      --set channels.1.front_end.noise_v=8e-5 --set samples_per_block=100)
"$sim" "${args[@]}" --print-scenario >"$work/scenario.json"
cat >"$work/accrued.json" <<EOF
{
  "device": "$work/board",
  "protocol": "$wire",
  "database": "$work/a.db",
  "socket": "$work/s.sock",
  "channels": [
    { "channel": 0, "sensor": "charge", "c_farad": 1e-9 },
    { "channel": 1, "sensor": "charge", "c_farad": 2.2e-9, "r1_ohm": 4.7e8 }
  ]
}
EOF
"$sim" "${args[@]}" "${sim_wire[@]}" --truth "$work/truth.json" --link "$work/board" >"$work/sim.out" 2>"$work/sim.err" &
pids+=($!)
e2e_wait_link "$work/board"
"$daemon" --config "$work/accrued.json" 2>"$work/daemon.err" &
pids+=($!)
e2e_wait_socket "$work/s.sock"
"$client" --socket "$work/s.sock" wait --timeout 120 >/dev/null
"$client" --socket "$work/s.sock" --json status >"$work/status.json"
"$client" --socket "$work/s.sock" --json totals >"$work/totals.json"

/usr/bin/python3 - "$work" "$channels" "$wire" <<'PY'
import json, math, sqlite3, sys
w, n, wire = sys.argv[1], int(sys.argv[2]), sys.argv[3]
truth = json.load(open(f"{w}/truth.json")); st = json.load(open(f"{w}/status.json"))
tot = {c["channel"]: c for c in json.load(open(f"{w}/totals.json"))["channels"]}
assert truth["complete"] and truth["channel_count"] == n and truth["wire"] == wire
assert st["wire_format"] == ("lines" if wire == "text_lines" else "frames")
assert st["ingest"]["gaps"] == 0 and st["ingest"]["wrong_shape_blocks"] == 0
assert st["ingest"]["samples"] == n * truth["samples"], (st["ingest"]["samples"], truth["samples"])
assert sorted(tot) == list(range(n)), sorted(tot)
con = sqlite3.connect(f"file:{w}/a.db?mode=ro", uri=True)
dt = truth["sample_period_s"]
truths = [c["true_total"] for c in truth["channels"]]
assert len(set(round(t, 15) for t in truths)) == n, "each channel must have its own input"
for c in truth["channels"]:
    k = c["channel"]; ch = tot[k]
    # Stored per channel too: the newest series point of the channel carries its total.
    (stored,) = con.execute("SELECT total FROM series_point WHERE channel = ? ORDER BY run_id DESC, first_index DESC LIMIT 1", (k,)).fetchone()
    assert abs(stored - ch["total"]) <= 1e-9 * abs(ch["total"]) + 1e-18, (k, stored, ch["total"])
    # Tolerance as total_matches_truth.sh: 4 standard uncertainties as the
    # chain states them (end fits, drift), plus the reset dead-time bound of
    # half the channel's largest input current times each dead interval.
    reset_bound = truth["resets"] * 0.5 * c["max_input_current_a"] * (truth["reset_s"] + 0.002 + dt)
    tol = 4 * ch["std_uncertainty"] + reset_bound
    err = abs(ch["total"] - c["true_total"])
    print(f"channel {k}: total {ch['total']:.9e} C, truth {c['true_total']:.9e} C, |error| {err:.2e} C, "
          f"tolerance {tol:.2e} C, C = {c['c_farad']:.3g} F")
    assert err <= tol, f"channel {k}: total outside the derived tolerance"
assert truth["resets"] >= 3, "scenario should exercise resets"
PY
