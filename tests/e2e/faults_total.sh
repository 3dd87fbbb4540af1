#!/usr/bin/env bash
# End to end with link and board faults on: 1e-4 byte corruption, 0.1 % frame
# drops, two cable pulls (terminal closed, a new one behind the same link
# after a pause) and one board reboot, on a 5-minute slice of the invented
# demo scenario (a stronger beam, so resets happen). The daemon must keep
# running, reopen the link after each pull, count exactly what the simulator
# says it injected, account for every lost sample in its gap events, and
# keep the total within its stated uncertainty of the truth plus a bound for
# the gaps that hold a spill edge (derived below).
set -euo pipefail
sim=$1 daemon=$2 client=$3
source "$(dirname "$0")/lib/harness.bash"
e2e_setup faults

# Spills: 4 s on, 2 s off, from 25 s. The reboot at 149.5 s falls in the off
# time [149, 151): the last block the board sends before it (at most 0.25 s
# earlier) and the end of its 0.5 s zero window afterwards are off-beam too,
# so no charge passes while the daemon cannot see the board (checked below).
args=(--set duration_s=300 --set beam.stop_s=290 --set beam.start_s=25 --set zero_window_s=20
      --set beam.current_a=1e-9 --set seed=21
      --set faults.corrupt_byte_rate=1e-4 --set faults.drop_frame_rate=1e-3
      --set 'faults.cable_pull_at_s=[100,200]' --set faults.cable_pull_s=0.5 --set faults.cable_pull_pause_s=0.3
      --set faults.reboot_at_s=149.5 --set faults.reboot_s=0.2 --set faults.reboot_zero_window_s=0.5
      --set faults.seed=5)
"$sim" "${args[@]}" --print-scenario >"$work/scenario.json"
"$sim" "${args[@]}" --truth "$work/truth.json" --link "$work/board" >"$work/sim.out" 2>"$work/sim.err" &
pids+=($!)
e2e_wait_link "$work/board"
"$daemon" --device "$work/board" --database "$work/a.db" --socket "$work/s.sock" 2>"$work/daemon.err" &
dpid=$!
pids+=($dpid)
e2e_wait_socket "$work/s.sock"
"$client" --socket "$work/s.sock" wait --timeout 60 >/dev/null
kill -0 "$dpid"  # still running after every fault
"$client" --socket "$work/s.sock" --json status >"$work/status.json"
"$client" --socket "$work/s.sock" --json totals >"$work/totals.json"
"$client" --socket "$work/s.sock" --json compare --truth "$work/truth.json" >"$work/compare.json"

/usr/bin/python3 - "$work" <<'PY'
import json, math, re, sqlite3, sys
w = sys.argv[1]
truth = json.load(open(f"{w}/truth.json")); scen = json.load(open(f"{w}/scenario.json"))
st = json.load(open(f"{w}/status.json")); tot = json.load(open(f"{w}/totals.json"))
cmp = json.load(open(f"{w}/compare.json"))
f, d, ing, link = truth["faults"], st["decoder"], st["ingest"], st["link"]
print("injected:", {k: f[k] for k in ("frames_corrupted", "bytes_corrupted", "frames_dropped", "frames_lost_to_pulls",
                                      "cable_pulls", "reboots", "samples_lost", "expect_gaps")})
print("counted: ", {k: d[k] for k in ("bad_crc", "bad_version", "oversize", "discarded_bytes", "truncated")},
      {k: ing[k] for k in ("gaps", "missing_samples", "reboots", "runs_started")}, "link opens", link["opens"])
assert truth["complete"]
assert f["frames_corrupted"] >= 10 and f["frames_dropped"] >= 1 and f["cable_pulls"] == 2 and f["reboots"] == 1
# Decoder: every corrupted frame rejected as predicted, every discarded byte accounted for.
assert d["bad_crc"] + d["bad_version"] + d["oversize"] == \
    f["expect_bad_crc"] + f["expect_bad_version"] + f["expect_oversize"] + f["expect_false_syncs"]
assert d["discarded_bytes"] == f["expect_discarded_bytes"], (d["discarded_bytes"], f["expect_discarded_bytes"])
assert d["frames_ok"] == f["frames_sent"]
# Samples: the gap events carry exactly the lost samples; nothing else is missing.
con = sqlite3.connect(f"file:{w}/a.db?mode=ro", uri=True)
gaps = [(run, idx, int(re.search(r"missing_samples=(\d+)", det).group(1)))
        for run, idx, det in con.execute("SELECT run_id, sample_index, detail FROM event WHERE kind = 'sample_gap'")]
assert len(gaps) == f["expect_gaps"] == ing["gaps"], (len(gaps), f["expect_gaps"])
assert sum(g[2] for g in gaps) == f["expect_missing_samples"] == ing["missing_samples"]
# Every sample the board made was received, lost on the wire, or still in its
# buffer when it rebooted (ingest counts samples times channels).
assert ing["samples"] // truth["channel_count"] + f["samples_lost"] + truth["unsent_at_reboot"] == truth["samples"]
assert f["samples_lost"] == f["expect_missing_samples"] + f["samples_lost_at_session_edges"]
assert ing["reboots"] == 1 and ing["runs_started"] == 2
assert link["opens"] == 3, link  # the first open and one after each pull
assert truth["charge_during_reboot"] == 0.0, "the scenario must reboot off-beam"

# Tolerance. The chain states an uncertainty (end fits, drift, and the dead
# intervals' estimates from the rates either side); 4 standard uncertainties
# of it, as total_matches_truth.sh allows 4 sigma. That model takes the true
# rate in a dead interval to lie between the rates either side; where a spill
# edge falls inside it the beam jumps, so add a bound there: each interval is
# shorter than a spill's on and off times, so it holds at most one edge and
# the midpoint estimate is off by at most half the largest rate times its
# length (a bound, added linearly, as total_matches_truth.sh does for resets).
ch = tot["channels"][0]
beam, dt = scen["beam"], truth["sample_period_s"]
i_max = truth["max_input_current_a"]
session2_start_s = scen["faults"]["reboot_at_s"] + scen["faults"]["reboot_s"]
runs = sorted({r for (r,) in con.execute("SELECT run_id FROM event WHERE run_id IS NOT NULL")})
def true_s(run, index):
    return index * dt + (session2_start_s if run == runs[-1] and len(runs) > 1 else 0.0)
def holds_edge(a, b):
    k0 = math.floor((a - beam["start_s"]) / beam["spill_period_s"]) - 1
    for k in range(k0, k0 + 4):
        on = beam["start_s"] + k * beam["spill_period_s"]
        for edge in (on, on + beam["spill_on_s"]):
            if beam["start_s"] <= edge <= beam["stop_s"] and a <= edge <= b:
                return True
    return False
margin_s = 16 * dt  # the end-window fits either side see the rate there
dead = [(true_s(r, i) - margin_s, true_s(r, i + n) + 0.002 + margin_s, (n + 3) * dt) for r, i, n in gaps]
gap_bound = sum(0.5 * i_max * length for a, b, length in dead if holds_edge(a, b))
edges = sum(1 for a, b, _ in dead if holds_edge(a, b))
reset_bound = truth["resets"] * 0.5 * i_max * (truth["reset_s"] + 0.002 + dt)
tol = 4 * ch["std_uncertainty"] + gap_bound + reset_bound
err = abs(cmp["total"] - cmp["truth"])
print("stated U(k=2)", cmp["expanded_uncertainty_k2"], "covered_by_k2", cmp["covered_by_k2"], "discarded expected", f["expect_discarded_bytes"], "false syncs", f["expect_false_syncs"], "predicted bad_crc/version/oversize", f["expect_bad_crc"], f["expect_bad_version"], f["expect_oversize"])
print(f"total {cmp['total']:.9e} C, truth {cmp['truth']:.9e} C, |error| {err:.3e} C, tolerance {tol:.3e} C "
      f"(4 u = {4 * ch['std_uncertainty']:.2e} C, {edges} of {len(gaps)} gaps hold a spill edge: {gap_bound:.2e} C, "
      f"resets {truth['resets']}: {reset_bound:.2e} C)")
assert err <= tol, "total outside the derived tolerance"
PY
