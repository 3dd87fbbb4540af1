#!/usr/bin/env bash
# Benchmarks, one command: builds Release with the benchmarks, then measures
# (1) the chain kernel beside a plain decode-and-sum loop (Google Benchmark),
# (2) end to end through a pseudo-terminal into SQLite at a paced 1 M samples/s
#     for 60 s, with the daemon's CPU per million samples and bytes per sample,
# (3) the same stream into a naive Python logger (a row per sample), as ratios,
# (4) 1000-point window queries over 1 min .. 7 days of a 7-day 1 kS/s store,
# (5) a field load of 4 channels at 10 kS/s (tools/bench/field_load.sh),
# and writes tools/bench/RESULTS.md. Not a test: figures depend on the machine.
# Knobs (environment; defaults in brackets): ACCRUE_BENCH_BUILD_DIR [build-bench],
# ACCRUE_BENCH_SECONDS [60] and ACCRUE_BENCH_RATE [1000000] for the paced end-to-end run,
# ACCRUE_BENCH_FAST_SAMPLES [28800000] for the unpaced one, ACCRUE_BENCH_NAIVE_SAMPLES [600000],
# ACCRUE_BENCH_WINDOW_DAYS [7] and ACCRUE_BENCH_WINDOW_QUERIES [200] per span,
# ACCRUE_BENCH_FIELD_PACED_S [60] and ACCRUE_BENCH_FIELD_HOURS [24] (field_load.sh).
# With the defaults on a quiet 2-core machine: about 40 min (the 7-day window store
# ~10 min, the 24-hour field load ~25 min unpaced).
set -euo pipefail
top=$(cd "$(dirname "$0")/../.." && pwd)
"$top/scripts/bootstrap.sh"
build="${ACCRUE_BENCH_BUILD_DIR:-$top/build-bench}"
cmake -S "$top" -B "$build" -DCMAKE_BUILD_TYPE=Release -DACCRUE_BUILD_BENCH=ON -DACCRUE_BUILD_TESTS=OFF >/dev/null
cmake --build "$build" -j"$(nproc)" >/dev/null
sim="$build/tools/accrue-sim/accrue-sim"; daemon="$build/daemon/accrued"; client="$build/tools/accrue/accrue"
work=$(mktemp -d /tmp/accrue-bench.XXXXXX)
trap 'kill $(jobs -p) 2>/dev/null || true; rm -rf "$work"' EXIT
seconds=${ACCRUE_BENCH_SECONDS:-60}
rate=${ACCRUE_BENCH_RATE:-1000000}

"$build/tools/bench/accrue-bench-chain" --benchmark_format=json >"$work/kernel.json" 2>/dev/null

run_daemon() {  # $1 = samples, $2 = speed (0 = unpaced), $3 = perf output (optional); prints "wall_s cpu_s db_bytes shed"
  local samples=$1 speed=$2 profile=${3:-}
  rm -f "$work"/e2e.* "$work/board"
  "$sim" --set duration_s="$(( samples / 1000 ))" --set beam.stop_s="$(( samples / 1000 - 60 ))" \
    --set samples_per_block=1000 --speed "$speed" --truth "$work/e2e.truth" --link "$work/board" >/dev/null 2>&1 &
  local sim_pid=$!
  for _ in $(seq 200); do [ -L "$work/board" ] && break; sleep 0.05; done
  local t0; t0=$(date +%s.%N)
  "$daemon" --device "$work/board" --database "$work/e2e.db" --socket "$work/e2e.sock" 2>/dev/null &
  local d_pid=$!
  for _ in $(seq 200); do [ -S "$work/e2e.sock" ] && break; sleep 0.05; done
  local perf_pid=""
  if [ -n "$profile" ] && command -v perf >/dev/null; then
    perf record -F 499 -g -p "$d_pid" -o "$profile" >/dev/null 2>&1 &
    perf_pid=$!
  fi
  "$client" --socket "$work/e2e.sock" wait --timeout 900 >/dev/null
  if [ -n "$perf_pid" ]; then kill -INT "$perf_pid"; wait "$perf_pid" || true; fi
  local t1; t1=$(date +%s.%N)
  local ticks; ticks=$(awk '{print $14 + $15}' "/proc/$d_pid/stat")
  local shed; shed=$("$client" --socket "$work/e2e.sock" --json status | /usr/bin/python3 -c 'import json,sys; w=json.load(sys.stdin)["writer"]; print(w["raw_blocks_shed"] + w["series_points_shed"])')
  kill -TERM "$d_pid"; wait "$d_pid" || true; wait "$sim_pid" || true
  local bytes; bytes=$(( $(stat -c %s "$work/e2e.db") + $(stat -c %s "$work/e2e.db-wal" 2>/dev/null || echo 0) ))
  echo "$(echo "$t1 - $t0" | bc) $(echo "scale=3; $ticks / $(getconf CLK_TCK)" | bc) $bytes $shed"
}

paced_samples=$(( seconds * rate ))
read -r p_wall p_cpu p_bytes p_shed < <(run_daemon "$paced_samples" "$(( rate / 1000 ))")
fast_samples=${ACCRUE_BENCH_FAST_SAMPLES:-28800000}
read -r f_wall f_cpu f_bytes f_shed < <(run_daemon "$fast_samples" 0 "$work/perf.data")
# Where the daemon's time goes in the unpaced run: self time by shared object and symbol.
: >"$work/profile.txt"
if [ -s "$work/perf.data" ]; then
  perf report -i "$work/perf.data" --no-children --sort dso,sym --stdio --percent-limit 1.5 2>/dev/null |
    grep -E '^ +[0-9.]+%' | head -25 | sed -E 's/ +$//' >"$work/profile.txt" || true
fi

naive_samples=${ACCRUE_BENCH_NAIVE_SAMPLES:-600000}
rm -f "$work/board" "$work/naive.db"*
"$sim" --set duration_s="$(( naive_samples / 1000 ))" --set samples_per_block=1000 --truth "$work/naive.truth" \
  --link "$work/board" >/dev/null 2>&1 &
for _ in $(seq 200); do [ -L "$work/board" ] && break; sleep 0.05; done
read -r n_seen n_wall < <("$top/tools/bench/naive_logger.py" "$work/board" "$work/naive.db" "$naive_samples")
wait || true
n_bytes=$(( $(stat -c %s "$work/naive.db") + $(stat -c %s "$work/naive.db-wal" 2>/dev/null || echo 0) ))
# The same samples as CSV (RFC 4180 lines "index,counts" + CRLF), for the bytes-per-sample comparison.
csv_per_sample=$(sqlite3 -readonly "$work/naive.db" "SELECT 1.0 * SUM(length(idx) + length(code) + 3) / COUNT(*) FROM sample")

# (4) Window queries: a store of window_days at 1 kS/s of the default scenario
# (250-sample blocks, so it also gives the default bytes per raw sample) built through the real
# path (simulator -> pty -> daemon -> writer), then 1000-point windows over
# 1 min, 1 h, 1 day and 7 days at seeded random positions.
window_days=${ACCRUE_BENCH_WINDOW_DAYS:-7}
window_queries=${ACCRUE_BENCH_WINDOW_QUERIES:-200}
rm -f "$work/board" "$work"/win.*
win_s=$(( window_days * 86400 ))
"$sim" --set duration_s="$win_s" --set beam.stop_s="$(( win_s - 60 ))" \
  --truth "$work/win.truth" --link "$work/board" >/dev/null 2>&1 &
for _ in $(seq 200); do [ -L "$work/board" ] && break; sleep 0.05; done
"$daemon" --device "$work/board" --database "$work/win.db" --socket "$work/win.sock" 2>/dev/null &
win_pid=$!
for _ in $(seq 200); do [ -S "$work/win.sock" ] && break; sleep 0.05; done
"$client" --socket "$work/win.sock" wait --timeout 3600 >/dev/null
"$top/tools/bench/window_latency.py" "$work/win.sock" "$(( win_s * 1000 ))" 0.001 "$window_queries" >"$work/window.json"
kill -TERM "$win_pid"; wait "$win_pid" || true; wait || true
win_bytes=$(( $(stat -c %s "$work/win.db") + $(stat -c %s "$work/win.db-wal" 2>/dev/null || echo 0) ))
# Pages of the raw blocks alone (table and its key index), from SQLite's dbstat table.
win_raw_bytes=$(sqlite3 -readonly "$work/win.db" \
  "SELECT SUM(pgsize) FROM dbstat WHERE name IN ('raw_block', 'sqlite_autoindex_raw_block_1')")

# (5) Field load: 4 channels at 10 kS/s, paced for a minute, then simulated hours unpaced.
"$top/tools/bench/field_load.sh" "$sim" "$daemon" "$client" "$work" >"$work/field.json"

machine="$(uname -m), $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | xargs), $(date -u +%Y-%m-%d)"
/usr/bin/python3 - "$work/kernel.json" "$top/tools/bench/RESULTS.md" "$machine" \
  "$paced_samples" "$p_wall" "$p_cpu" "$p_bytes" "$p_shed" "$fast_samples" "$f_wall" "$f_cpu" "$f_bytes" "$f_shed" \
  "$n_seen" "$n_wall" "$n_bytes" "$work/window.json" "$win_s" "$win_bytes" "$csv_per_sample" "$win_raw_bytes" "$work/profile.txt" "$work/field.json" <<'PY'
import json, os, sys
k = json.load(open(sys.argv[1]))["benchmarks"]
def med(name):
    for b in k:
        if b["name"].startswith(name) and b.get("aggregate_name") == "median":
            return b["items_per_second"]
(out, machine, ps, pw, pc, pb, pshed, fs, fw, fc, fb, fshed, ns, nw, nb, wjson, ws, wb, csv, wraw, prof, fjson) = sys.argv[2:]
field = json.load(open(fjson))
win = json.load(open(wjson))
ws, wb = float(ws), float(wb)
ps, pw, pc, pb, fs, fw, fc, fb, ns, nw, nb = map(float, (ps, pw, pc, pb, fs, fw, fc, fb, ns, nw, nb))
chain, plain = med("BM_decode_and_chain"), med("BM_decode_and_sum")
acc_rate, naive_rate = fs / fw, ns / nw
lines = [
 "# accrue benchmark results", "",
 f"Machine: {machine}. Produced by `tools/bench/run.sh`; medians of 5 repetitions for the kernel.", "",
 "| figure | value | target |", "|---|---|---|",
 f"| chain kernel (decode + counts→volts + baseline + integrate, one 24-bit channel) | {chain/1e6:.1f} M samples/s | ≥ 20 M samples/s |",
 f"| plain decode-and-sum of the same frames (limit, same run) | {plain/1e6:.1f} M samples/s | — |",
 f"| kernel time ÷ plain loop time | {plain/chain:.2f}× | ≤ 3× |",
 f"| end to end, paced at {ps/pw/1e6:.2f} M samples/s for {pw:.0f} s | shed {pshed} | 0 shed |",
 f"| daemon CPU per million samples (paced run) | {pc/ps*1e6:.3f} s | — |",
 f"| end to end, unpaced ({fs/1e6:.1f} M samples) | {fs/fw/1e6:.2f} M samples/s, shed {fshed} | ≥ 1 M samples/s |",
 f"| daemon CPU per million samples (unpaced) | {fc/fs*1e6:.3f} s | — |",
 f"| store size per sample, raw + derived (unpaced run) | {fb/fs:.2f} bytes | ≤ 2.0 bytes (raw) |",
 f"| naive Python logger (row per sample, commit per frame) | {naive_rate/1e3:.1f} k samples/s, {nb/ns:.1f} bytes/sample | — |",
 f"| accrue ÷ naive throughput | {acc_rate/naive_rate:.0f}× | — |",
 f"| naive ÷ accrue bytes per sample | {(nb/ns)/(fb/fs):.1f}× | — |",
 f"| the same samples as 4-byte integers / as CSV lines (index,counts) | 4.00 / {float(csv):.2f} bytes/sample | — |",
 f"| store of {ws/86400:.0f} days at 1 kS/s, default scenario (250-sample blocks): raw blocks alone | {float(wraw)/(ws*1000):.2f} bytes/sample | ≤ 2.0 bytes |",
 f"| the same store, whole file (raw + series + rollups + segments + events) | {wb/(ws*1000):.2f} bytes/sample | — |",
]
for name, r in win.items():
    lines.append(f"| window of 1000 points over {name}: p50 / p99 ({r['queries']} queries, {r['points_min']}..{r['points_max']} points) "
                 f"| {r['p50_ms']:.2f} / {r['p99_ms']:.2f} ms | ≤ 5 / ≤ 20 ms |")
if "7 days" in win and "1 min" in win:
    lines.append(f"| window p50, 7 days ÷ 1 min | {win['7 days']['p50_ms']/win['1 min']['p50_ms']:.2f}× | ≤ 3× |")
f = field
lines += [
 f"| field load, 4 ch × 10 kS/s paced at real time for {f['paced_wall_s']:.0f} s: daemon CPU | {f['paced_cpu_percent_of_one_core']:.2f} % of one core | ≤ 1 % |",
 f"| field load: daemon wake-ups (voluntary context switches) | {f['paced_wakeups_per_s']:.1f} per s | — |",
 f"| field load unpaced, {f['hours']} simulated h: CPU per simulated hour | {f['cpu_s_per_simulated_hour']:.1f} s ({f['cpu_s_per_simulated_hour']/36:.2f} % of one core at real time) | ≤ 1 % |",
 f"| field load: resident memory at hour 1 / at the end / highest after hour 1 | {f['rss_mib_at_hour_1']:.1f} / {f['rss_mib_at_end']:.1f} / {f['rss_mib_max_after_hour_1']:.1f} MiB (paced: {f['paced_rss_mib']:.1f} MiB), shed {f['shed']} | ≤ 30 MB, flat |",
]
lines.append("")
profile = open(prof).read().rstrip()
if profile:
    lines += ["## Profile of the unpaced end-to-end run (perf, daemon only, self time)", "", "```text", profile, "```", ""]
reading = os.path.join(os.path.dirname(out), "READING.md")
if os.path.exists(reading):
    lines.append(open(reading).read().rstrip())
open(out, "w").write("\n".join(lines) + "\n")
print("\n".join(lines))
PY
