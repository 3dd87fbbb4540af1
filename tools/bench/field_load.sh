#!/usr/bin/env bash
# Field load (a benchmark, not a test): an invented 4-channel board at 10 kS/s
# per channel, the default scenario's front end on every channel.
#   1. Paced at real time for $ACCRUE_BENCH_FIELD_PACED_S seconds (default 60):
#      the daemon's CPU share of one core and its wake-ups per second
#      (voluntary context switches from /proc/PID/status, per wall second).
#      0 skips this part (its figures are then null).
#   2. Unpaced for $ACCRUE_BENCH_FIELD_HOURS simulated hours (default 24): the
#      daemon's resident memory (VmRSS) sampled against board time, reported
#      at hour 1 and at the end, and CPU per simulated hour. Beside each RSS
#      sample the writer's queued_bytes (from status), so a memory peak can be
#      told apart as the writer's queue or something else; also the kernel's
#      peak (VmHWM) and the writer's own queued_bytes_peak, which see between
#      samples. $ACCRUE_BENCH_FIELD_LOG, when set, keeps the samples there
#      ("samples rss_kib queued_bytes" a line).
# usage: field_load.sh SIM DAEMON CLIENT WORKDIR   (prints one JSON object)
set -euo pipefail
sim=$1 daemon=$2 client=$3 work=$4
paced_s=${ACCRUE_BENCH_FIELD_PACED_S:-60}
hours=${ACCRUE_BENCH_FIELD_HOURS:-24}
board=(--set channel_count=4 --set sample_period_s=1e-4 --set samples_per_block=250)
tck=$(getconf CLK_TCK)
cpu_ticks() { awk '{print $14 + $15}' "/proc/$1/stat"; }
vol_switches() { awk '/^voluntary_ctxt_switches/ {print $2}' "/proc/$1/status"; }
rss_kib() { awk '/^VmRSS/ {print $2}' "/proc/$1/status"; }
hwm_kib() { awk '/^VmHWM/ {print $2}' "/proc/$1/status"; }
samples() { "$client" --socket "$work/field.sock" --json status |
  /usr/bin/python3 -c 'import json,sys; print(json.load(sys.stdin)["ingest"]["samples"])'; }
# "samples queued_bytes" from one status call.
samples_queued() { "$client" --socket "$work/field.sock" --json status |
  /usr/bin/python3 -c 'import json,sys; j=json.load(sys.stdin); print(j["ingest"]["samples"], j["writer"]["queued_bytes"])'; }

start() {  # $1 = duration_s, $2 = speed
  rm -f "$work/board" "$work"/field.*
  "$sim" "${board[@]}" --set duration_s="$1" --set beam.stop_s="$(( $1 - 60 ))" --speed "$2" \
    --truth "$work/field.truth" --link "$work/board" >/dev/null 2>&1 &
  sim_pid=$!
  for _ in $(seq 200); do [ -L "$work/board" ] && break; sleep 0.05; done
  "$daemon" --device "$work/board" --database "$work/field.db" --socket "$work/field.sock" 2>/dev/null &
  d_pid=$!
  for _ in $(seq 200); do [ -S "$work/field.sock" ] && break; sleep 0.05; done
}
stop() { kill -TERM "$d_pid" "$sim_pid" 2>/dev/null || true; wait "$d_pid" 2>/dev/null || true; wait "$sim_pid" 2>/dev/null || true; }

# 1. Real time. Skip the first 5 s (start-up, zero window fit).
c0=0 c1=0 v0=0 v1=0 t0=0 t1=0 paced_rss=0
if [ "$paced_s" -gt 0 ]; then
  start "$(( paced_s + 120 ))" 1
  sleep 5
  c0=$(cpu_ticks "$d_pid") v0=$(vol_switches "$d_pid") t0=$(date +%s.%N)
  sleep "$paced_s"
  c1=$(cpu_ticks "$d_pid") v1=$(vol_switches "$d_pid") t1=$(date +%s.%N)
  paced_rss=$(rss_kib "$d_pid")
  stop
fi

# 2. Simulated hours as fast as the daemon takes them; RSS against board time.
start "$(( hours * 3600 ))" 0
per_hour=$(( 4 * 10000 * 3600 ))
: >"$work/field.rss"
uc0=$(cpu_ticks "$d_pid")
while kill -0 "$sim_pid" 2>/dev/null; do
  nq=$(samples_queued 2>/dev/null || echo "0 0")
  read -r n q <<<"$nq"
  echo "$n $(rss_kib "$d_pid") $q" >>"$work/field.rss"
  sleep 1
done
"$client" --socket "$work/field.sock" wait --timeout 600 >/dev/null || true
uc1=$(cpu_ticks "$d_pid")
read -r n q <<<"$(samples_queued)"
echo "$n $(rss_kib "$d_pid") $q" >>"$work/field.rss"
hwm=$(hwm_kib "$d_pid")
read -r shed queued_peak < <("$client" --socket "$work/field.sock" --json status |
  /usr/bin/python3 -c 'import json,sys; w=json.load(sys.stdin)["writer"]; print(w["raw_blocks_shed"] + w["series_points_shed"], w.get("queued_bytes_peak", -1))')
stop
[ -n "${ACCRUE_BENCH_FIELD_LOG:-}" ] && cp "$work/field.rss" "$ACCRUE_BENCH_FIELD_LOG"

/usr/bin/python3 - "$work/field.rss" "$per_hour" "$hours" "$c0" "$c1" "$v0" "$v1" "$t0" "$t1" "$tck" \
  "$paced_rss" "$uc0" "$uc1" "$shed" "$hwm" "$queued_peak" <<'PY'
import json, sys
rss_file, per_hour, hours = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
c0, c1, v0, v1, t0, t1, tck = map(float, sys.argv[4:11])
paced_rss, uc0, uc1, shed = float(sys.argv[11]), float(sys.argv[12]), float(sys.argv[13]), int(sys.argv[14])
hwm_kib, queued_peak = int(sys.argv[15]), int(sys.argv[16])
rows = [tuple(map(int, l.split())) for l in open(rss_file) if len(l.split()) == 3]
after_h1 = [r for n, r, q in rows if n >= per_hour]
peak = max(rows, key=lambda row: row[1])  # the RSS sample at its highest, with the queue then
mib = 1 << 20
paced = t1 > t0
print(json.dumps({
    "paced_wall_s": t1 - t0 if paced else None,
    "paced_cpu_percent_of_one_core": 100.0 * (c1 - c0) / tck / (t1 - t0) if paced else None,
    "paced_wakeups_per_s": (v1 - v0) / (t1 - t0) if paced else None,
    "paced_rss_mib": paced_rss / 1024 if paced else None,
    "hours": hours,
    "rss_mib_at_hour_1": (after_h1[0] if after_h1 else rows[-1][1]) / 1024,
    "rss_mib_at_end": rows[-1][1] / 1024,
    "rss_mib_max_after_hour_1": (max(after_h1) if after_h1 else rows[-1][1]) / 1024,
    "rss_mib_max_sampled": peak[1] / 1024,
    "queued_mib_at_rss_max": peak[2] / mib,
    "queued_mib_max_sampled": max(q for n, r, q in rows) / mib,
    "rss_hwm_mib": hwm_kib / 1024,
    "queued_peak_mib": queued_peak / mib if queued_peak >= 0 else None,
    "rss_queued_samples": len(rows),
    "cpu_s_per_simulated_hour": (uc1 - uc0) / tck / hours,
    "shed": shed,
}))
PY
