#!/usr/bin/env bash
# accrue plot on a recorded run of the invented demo scenario (cut to one hour
# of board time): the SVG must be well-formed XML that draws the API's window
# (plot_check.py, with Python's xml.etree), and headless Chromium must render
# it to a PNG with the two series' colours on it. Skips (77) only when no
# Chromium is installed (scripts/bootstrap.sh installs Debian's).
set -euo pipefail
sim=$1 daemon=$2 client=$3
here=$(cd "$(dirname "$0")" && pwd)
browser=$(command -v chromium || command -v chromium-browser || true)
[ -n "$browser" ] || { echo "chromium is not installed: skipping (scripts/bootstrap.sh installs it)"; exit 77; }
source "$(dirname "$0")/lib/harness.bash"
e2e_setup plot

"$sim" --set duration_s=3600 --set beam.stop_s=3500 --set zero_window_s=20 --set seed=3 \
  --truth "$work/truth.json" --link "$work/board" >"$work/sim.out" 2>"$work/sim.err" &
pids+=($!)
e2e_wait_link "$work/board"
e2e_start_daemon
"$client" --socket "$work/s.sock" wait --timeout 120 >/dev/null

"$client" --socket "$work/s.sock" plot --points 800 --title 'Faraday cup, invented <demo> & test' --output "$work/plot.svg"
# Chromium wants a writable profile; --no-sandbox because tests may run as root.
timeout 120 "$browser" --headless --no-sandbox --disable-gpu --hide-scrollbars --user-data-dir="$work/profile" \
  --window-size=960,720 --screenshot="$work/plot.png" "file://$work/plot.svg" >"$work/chromium.log" 2>&1 ||
  { echo "chromium failed:"; tail -5 "$work/chromium.log"; exit 1; }
/usr/bin/python3 "$here/plot_check.py" --socket "$work/s.sock" --svg "$work/plot.svg" --png "$work/plot.png"
