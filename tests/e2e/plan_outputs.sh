#!/usr/bin/env bash
# accrue plan on the README's worked example (invented): the JSON numbers
# against SciPy's own frequency response of the same transfer function, the
# Bode SVG parsed as XML, the emitted config accepted by accrued --check-config,
# and bad input refused with an error that names the option.
set -euo pipefail
daemon=$2 client=$3
source "$(dirname "$0")/lib/harness.bash"
e2e_setup plan

example=(plan --sensor volt_seconds --r1 100k --c 1u --r2 1G --vos 0.5m --ib 20p --rail 12
  --adc-bits 16 --full-scale 10 --dead-time 1m --pedestal 2m --noise 100u --input 5m:50m --duration 3600)
"$client" --json "${example[@]}" --svg "$work/bode.svg" --emit-config "$work/plan.json" >"$work/plan.out"
"$client" "${example[@]}" >"$work/plan.txt"
grep -q "band_misses_signal" "$work/plan.txt" || { echo "text report lacks the band warning"; exit 1; }

# The emitted config must be one accrued accepts.
"$daemon" --check-config "$work/plan.json" || { echo "accrued rejected the emitted config:"; cat "$work/plan.json"; exit 1; }
grep -q "\"threshold_fraction\"" "$work/plan.json" || { echo "emitted config lacks the reset schedule"; exit 1; }

/usr/bin/python3 - "$work/plan.out" "$work/bode.svg" <<'PY'
import json, math, sys
import xml.etree.ElementTree as ET
import numpy as np
from scipy import signal, optimize

p = json.load(open(sys.argv[1]))
R1, C, R2 = 100e3, 1e-6, 1e9
# Reference: scipy.signal.freqs evaluates H(s) = -(R2/R1)/(R2*C*s + 1) on jw.
b, a = [-(R2 / R1)], [R2 * C, 1.0]
def H(f):
    _, h = signal.freqs(b, a, worN=[2 * math.pi * f])
    return h[0]
assert math.isclose(abs(H(1e-9)), p["dc_gain"], rel_tol=1e-6), p["dc_gain"]
assert math.isclose(20 * math.log10(abs(H(1e-9))), p["dc_gain_db"], abs_tol=1e-5)
# Corner: |H| down by sqrt(2) (3.0103 dB) from DC.
assert math.isclose(abs(H(p["corner_hz"])), p["dc_gain"] / math.sqrt(2), rel_tol=1e-9)
# 0 dB crossing: SciPy's root finder on |H| - 1.
f0 = optimize.brentq(lambda f: abs(H(f)) - 1.0, 1e-3, 1e3, xtol=1e-14, rtol=1e-14)
assert math.isclose(f0, p["unity_gain_hz"], rel_tol=1e-9), (f0, p["unity_gain_hz"])
assert math.isclose(p["unity_gain_approx_hz"], 1 / (2 * math.pi * R1 * C), rel_tol=1e-12)
# -20 dB/decade above the corner.
slope = 20 * math.log10(abs(H(100 * f0)) / abs(H(10 * f0)))
assert abs(slope + 20) < 1e-3, slope
# The 1 % band edge: vector error against the ideal -1/(j w R1 C) equals 1 %.
f1 = p["band_1pct_from_hz"]
ideal = -1 / (1j * 2 * math.pi * f1 * R1 * C)
assert math.isclose(abs(H(f1) / ideal - 1), 0.01, rel_tol=1e-6)
codes = {w["code"] for w in p["warnings"]}
assert "band_misses_signal" in codes and "r2_below_10_r1" not in codes, codes

svg = ET.parse(sys.argv[2]).getroot()
ns = {"s": "http://www.w3.org/2000/svg"}
assert svg.tag == "{http://www.w3.org/2000/svg}svg"
lines = svg.findall(".//s:polyline", ns)
assert len(lines) == 4, len(lines)  # practical and ideal, magnitude and phase
assert {l.get("class") for l in lines} == {"practical", "ideal"}
texts = " ".join(t.text or "" for t in svg.iter("{http://www.w3.org/2000/svg}text"))
assert "fc" in texts and "f0dB" in texts, texts
assert len(svg.findall(".//s:line[@class='marker']", ns)) == 4
# The magnitude curve falls from left to right (y grows downward in SVG).
pts = [tuple(map(float, xy.split(","))) for xy in lines[1].get("points").split()]
xs = [x for x, _ in pts]
assert xs == sorted(xs)
print(f"plan: dc {p['dc_gain_db']:.4f} dB, fc {p['corner_hz']:.6g} Hz, f0dB {p['unity_gain_hz']:.8g} Hz "
      f"(scipy {f0:.8g}), svg ok")
PY

# Bad input: exit 2 and name the option.
set +e
err=$("$client" plan --r1 10x --c 1n --input 1n 2>&1); rc=$?
set -e
[ "$rc" -eq 2 ] || { echo "bad --r1 exited $rc"; exit 1; }
grep -q -- "--r1" <<<"$err" || { echo "error does not name --r1: $err"; exit 1; }
set +e
"$client" plan --c 1n --input 1n >/dev/null 2>&1; rc=$?
set -e
[ "$rc" -eq 2 ] || { echo "missing --r1 exited $rc"; exit 1; }
# Units on the values, Ω for resistors.
"$client" --json plan --r1 100kΩ --c 4n7F --r2 1M2ohm --input 1n >"$work/units.json"
/usr/bin/python3 -c 'import json,sys; p=json.load(open(sys.argv[1])); import math; assert all(math.isclose(a, b, rel_tol=1e-12) for a, b in zip((p["r1_ohm"], p["c_farad"], p["r2_ohm"]), (1e5, 4.7e-9, 1.2e6))), p' "$work/units.json"
echo ok
