#!/usr/bin/env bash
# A live run recorded with --record, replayed with --replay into a second
# store, gives the same stored totals, segments and series, bit for bit.
set -euo pipefail
sim=$1 daemon=$2 client=$3
source "$(dirname "$0")/lib/harness.bash"
e2e_setup replay
"$sim" --set duration_s=600 --set beam.stop_s=560 --set beam.current_a=5e-10 --set seed=5 --truth "$work/truth.json" \
  --link "$work/board" >/dev/null 2>&1 &
pids+=($!)
e2e_wait_link "$work/board"
"$daemon" --device "$work/board" --database "$work/live.db" --socket "$work/s.sock" --record "$work/run.capture" \
  2>"$work/live.err" &
live=$!
pids+=($live)
e2e_wait_socket "$work/s.sock"
"$client" --socket "$work/s.sock" wait --timeout 120 >/dev/null
kill -TERM "$live"; wait "$live"
"$daemon" --replay "$work/run.capture" --database "$work/replay.db" 2>"$work/replay.err"
q() { sqlite3 -readonly "$1" "$2"; }
for sql in \
  "SELECT total, std_uncertainty, segments, last_index FROM total_checkpoint ORDER BY channel" \
  "SELECT ordinal, first_index, last_index, quantity, total_after FROM segment ORDER BY ordinal" \
  "SELECT COUNT(*), SUM(total), SUM(mean_v) FROM series_point" \
  "SELECT COUNT(*), SUM(length(data)) FROM raw_block"; do
  a=$(q "$work/live.db" "$sql"); b=$(q "$work/replay.db" "$sql")
  [ -n "$a" ] || { echo "live store has nothing for: $sql"; exit 1; }
  if [ "$a" != "$b" ]; then echo "differs: $sql"; echo "live:   $a" | head -3; echo "replay: $b" | head -3; exit 1; fi
done
segments=$(q "$work/replay.db" "SELECT COUNT(*) FROM segment")
[ "$segments" -ge 3 ] || { echo "expected resets in the scenario, got $segments segments"; exit 1; }
# A capture cut short (power cut while recording) still replays what it holds.
head -c $(( $(stat -c %s "$work/run.capture") / 2 )) "$work/run.capture" >"$work/half.capture"
"$daemon" --replay "$work/half.capture" --database "$work/half.db" 2>"$work/half.err"
grep -q "cut short" "$work/half.err"
# Not a capture: a clear error, non-zero exit.
echo "nonsense" >"$work/bad.capture"
if "$daemon" --replay "$work/bad.capture" --database "$work/bad.db" 2>"$work/bad.err"; then exit 1; fi
grep -q "not an accrue capture" "$work/bad.err"
echo "capture and replay agree: $(q "$work/replay.db" "SELECT total FROM total_checkpoint") C over $segments segments"
