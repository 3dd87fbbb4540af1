#!/usr/bin/env bash
# accrue reprocess through the daemon (progress notifications, a corrected
# capacitor) and offline on the file (an identity recomputation): each is a
# new derivation, the recording (derivation 1) stays as it was, and queries
# read the newest unless they name one.
set -euo pipefail
sim=$1 daemon=$2 client=$3
source "$(dirname "$0")/lib/harness.bash"
e2e_setup reprocess
"$sim" --set duration_s=300 --set beam.start_s=30 --set beam.stop_s=280 --set beam.current_a=5e-10 --set seed=7 \
  --link "$work/board" >/dev/null 2>&1 &
pids+=($!)
e2e_wait_link "$work/board"
"$daemon" --device "$work/board" --database "$work/night.db" --socket "$work/s.sock" 2>"$work/daemon.err" &
live=$!
pids+=($live)
e2e_wait_socket "$work/s.sock"
"$client" --socket "$work/s.sock" wait --timeout 120 >/dev/null
q() { sqlite3 -readonly "$work/night.db" "$1"; }
original=$(q "SELECT group_concat(quote(quantity) || quote(total_after), ',') FROM segment WHERE derivation = 1")
before=$(q "SELECT quote(total) FROM total_checkpoint WHERE channel = 0")

# Through the daemon: C was 1.02 nF, not 1.00 nF.
"$client" --socket "$work/s.sock" --json reprocess --run 1 --c 1.02n --who e2e --reason "C was 1.02 nF" >"$work/r2.json"
/usr/bin/python3 - "$work/r2.json" "$before" <<'PY'
import json, sys
r = json.load(open(sys.argv[1]))["derivations"][0]
assert r["derivation"] == 2 and r["parent"] == 1, r
ch = r["channels"][0]
ratio = ch["total"] / float(sys.argv[2])
# Q = -C*dV: the charge scales by C_new/C_old = 1.02, to a few roundings (reprocess_test.cpp states the bound).
assert abs(ratio / 1.02 - 1) < 1e-15, ratio
print("derivation 2: total x %.16g" % ratio)
PY
[ "$(q "SELECT state || ' ' || who FROM derivation WHERE run_id = 1 AND derivation = 2")" = "complete e2e" ]
# The API reads the newest by default, and derivation 1 when named.
"$client" --socket "$work/s.sock" --json totals >"$work/totals.json"
/usr/bin/python3 - "$work/totals.json" <<'PY'
import json, sys
t = json.load(open(sys.argv[1]))
assert t["channels"][0].get("derivation") == 2, t
PY
# A progress notification arrived over the API (the raw protocol, one connection).
/usr/bin/python3 - "$work/s.sock" <<'PY'
import json, socket, sys
s = socket.socket(socket.AF_UNIX); s.connect(sys.argv[1]); f = s.makefile("rw")
f.write(json.dumps({"jsonrpc": "2.0", "id": 1, "method": "reprocess",
                    "params": {"run_id": 1, "parent": 1, "who": "e2e", "reason": "robust fit",
                               "changes": [{"baseline_robust": "huber"}]}}) + "\n"); f.flush()
reply = json.loads(f.readline()); assert reply["result"]["state"] == "running", reply
progress = 0
while True:
    m = json.loads(f.readline())
    if m["method"] == "reprocess_progress": progress += 1; continue
    assert m["method"] == "reprocess_done" and m["params"]["ok"], m
    break
assert progress >= 2, progress
f.write(json.dumps({"jsonrpc": "2.0", "id": 2, "method": "segments", "params": {"derivation": 1, "limit": 1}}) + "\n"); f.flush()
seg = json.loads(f.readline())["result"]; assert seg["derivation"] == 1, seg
f.write(json.dumps({"jsonrpc": "2.0", "id": 3, "method": "derivations", "params": {"run_id": 1}}) + "\n"); f.flush()
d = json.loads(f.readline())["result"]; assert d["newest"] == 3 and [x["state"] for x in d["derivations"]] == ["recorded", "complete", "complete"], d
# Bad params get -32602.
f.write(json.dumps({"jsonrpc": "2.0", "id": 4, "method": "reprocess", "params": {"run_id": 1, "changes": [{"c_farad": "big"}]}}) + "\n"); f.flush()
assert json.loads(f.readline())["error"]["code"] == -32602
print("API: %d progress notifications, derivations %s" % (progress, [x["derivation"] for x in d["derivations"]]))
PY
# The client names a derivation too: segments and windows of the recording (1)
# and of the calibration change (2) are read apart.
"$client" --socket "$work/s.sock" --json segments --derivation 1 --limit 3 >"$work/seg1.json"
"$client" --socket "$work/s.sock" --json segments --derivation 2 --limit 3 >"$work/seg2.json"
"$client" --socket "$work/s.sock" --json window --derivation 1 --points 20 --select total >"$work/win1.json"
"$client" --socket "$work/s.sock" --json window --derivation 2 --points 20 --select total >"$work/win2.json"
/usr/bin/python3 - "$work" <<'PY'
import json, sys
w = sys.argv[1]
s1, s2 = (json.load(open(f"{w}/seg{d}.json")) for d in (1, 2))
assert s1["derivation"] == 1 and s2["derivation"] == 2, (s1["derivation"], s2["derivation"])
assert [a["ordinal"] for a in s1["segments"]] == [b["ordinal"] for b in s2["segments"]]
assert any(a["quantity"] != b["quantity"] for a, b in zip(s1["segments"], s2["segments"]))
w1, w2 = (json.load(open(f"{w}/win{d}.json")) for d in (1, 2))
assert w1["derivation"] == 1 and w2["derivation"] == 2, (w1["derivation"], w2["derivation"])
assert len(w1["points"]) == len(w2["points"]) > 0
print("client --derivation: segments and windows of derivations 1 and 2 read apart")
PY
kill -TERM "$live"; wait "$live"

# Offline, no daemon: the original calibration again, from derivation 1: bit for bit.
"$client" --json reprocess --database "$work/night.db" --run 1 --parent 1 --reason identity >"$work/r4.json"
[ "$(q "SELECT quote(total) FROM derivation_channel WHERE run_id = 1 AND derivation = 4")" = "$before" ]
[ "$(q "SELECT group_concat(quote(quantity) || quote(total_after), ',') FROM segment WHERE derivation = 4")" = "$original" ]
[ "$(q "SELECT group_concat(quote(quantity) || quote(total_after), ',') FROM segment WHERE derivation = 1")" = "$original" ]
# Bad usage: a clear message and exit 2.
if "$client" reprocess --database "$work/night.db" 2>"$work/usage.err"; then exit 1; else [ $? -eq 2 ]; fi
grep -q "name a run" "$work/usage.err"
if "$client" reprocess --database "$work/night.db" --run 9 2>"$work/run.err"; then exit 1; fi
grep -q "no run 9" "$work/run.err"
echo "reprocess: $(q "SELECT count(*) FROM derivation") derivations, the recording unchanged"
