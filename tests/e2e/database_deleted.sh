#!/usr/bin/env bash
# The database file deleted, then replaced, under a running daemon: each is
# logged as an error and recorded as an event, the daemon keeps running and
# ingesting, and no accepted sample is lost. After the delete the live data is
# copied back to the path and writing carries on there; after another file is
# renamed over the path, that file is left untouched and writing carries on in
# a rescued sibling "<path>.rescued-<UTC>", which at exit holds every raw
# sample the daemon accepted (the same count as its "stopped" line).
set -euo pipefail
sim=$1 daemon=$2 client=$3
source "$(dirname "$0")/lib/harness.bash"
e2e_setup dbdel hard
wait_for() { for _ in $(seq 600); do eval "$1" && return 0; sleep 0.05; done; echo "timed out: $1"; cat "$work/daemon.err"; exit 1; }

"$sim" --set duration_s=36000 --set seed=9 --speed 5 --link "$work/board" --truth "$work/truth.json" --linger-s 1 \
  >/dev/null 2>"$work/sim.err" &
pids+=($!)
wait_for '[ -L "$work/board" ]'
"$daemon" --device "$work/board" --database "$work/a.db" --socket "$work/s.sock" 2>"$work/daemon.err" &
dpid=$!
pids+=($dpid)
wait_for '[ -S "$work/s.sock" ]'
writer() { "$client" --socket "$work/s.sock" --json status | /usr/bin/python3 -c "import json,sys; print(json.load(sys.stdin)[\"writer\"][\"$1\"])"; }
wait_for '[ "$(writer raw_blocks_written)" -gt 20 ]'

# 1. rm of the file alone (its -wal and -shm stay, as after "rm a.db").
rm "$work/a.db"
wait_for '[ "$(writer file_rescues)" -eq 1 ]'
grep -q "was deleted while open" "$work/daemon.err"
before=$(writer raw_blocks_written)
wait_for '[ "$(writer raw_blocks_written)" -gt $((before + 10)) ]'

# 2. Someone else's database renamed over the path.
/usr/bin/python3 -c "import sqlite3; c = sqlite3.connect('$work/other.db'); c.execute('CREATE TABLE notes(text)'); c.execute(\"INSERT INTO notes VALUES('not yours')\"); c.commit()"
mv "$work/other.db" "$work/a.db"
wait_for '[ "$(writer file_rescues)" -eq 2 ]'
grep -q "was replaced by another file" "$work/daemon.err"
rescued=$(writer path)
before=$(writer raw_blocks_written)
wait_for '[ "$(writer raw_blocks_written)" -gt $((before + 10)) ]'
kill -0 "$dpid"
kill -TERM "$dpid"
wait "$dpid"
line=$(grep "stopped: accepted" "$work/daemon.err")
echo "$line"
echo "rescued to $rescued"
/usr/bin/python3 - "$work/a.db" "$rescued" "$line" <<'PY'
import re, sqlite3, sys
path, rescued, line = sys.argv[1], sys.argv[2], sys.argv[3]
m = re.search(r"accepted (\d+) blocks \((\d+) samples\); raw blocks written (\d+), shed (\d+)", line)
blocks, samples, written, shed = map(int, m.groups())
assert rescued.startswith(path + ".rescued-"), rescued
con = sqlite3.connect(f"file:{rescued}?mode=ro", uri=True)
assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
stored, = con.execute("SELECT COALESCE(SUM(samples * channel_count), 0) FROM raw_block").fetchone()
deleted = [r[0] for r in con.execute("SELECT detail FROM event WHERE kind = 'database_deleted'")]
replaced = [r[0] for r in con.execute("SELECT detail FROM event WHERE kind = 'database_replaced'")]
runs, = con.execute("SELECT count(*) FROM run").fetchone()
print(f"accepted {samples} samples in {blocks} blocks; rescued file holds {stored}; shed {shed}; runs {runs}")
print("events:", deleted, replaced)
assert shed == 0
assert stored == samples, "every accepted sample must be in the rescued file"
assert len(deleted) == 1 and f"rescued_to={path} " in deleted[0] + " "
assert len(replaced) == 1 and f"path={path} " in replaced[0] and f"rescued_to={rescued}" in replaced[0]
assert runs == 1
# The stranger's file is untouched.
other = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
assert other.execute("SELECT count(*) FROM sqlite_master").fetchone()[0] == 1
assert other.execute("SELECT text FROM notes").fetchall() == [("not yours",)]
assert other.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
PY
