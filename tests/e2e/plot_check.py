"""Checks for tests/e2e/plot_render.sh: accrue plot's SVG against the API, and Chromium's PNG of it.

Runs with /usr/bin/python3 (standard library only). The SVG is parsed with
xml.etree (a parse error fails the test); the PNG is decoded here by the
PNG specification (W3C PNG, 2nd edition: chunks, zlib stream, the five
filter types) and its pixels counted.
"""
import argparse, json, socket, struct, xml.etree.ElementTree as ET, zlib

ap = argparse.ArgumentParser()
for a in ("socket", "svg", "png"):
    ap.add_argument("--" + a, required=True)
args = ap.parse_args()
NS = {"s": "http://www.w3.org/2000/svg"}


def ok(cond, what):
    if not cond:
        raise AssertionError(what)


def call(method, params=None):
    s = socket.socket(socket.AF_UNIX)
    s.connect(args.socket)
    s.sendall((json.dumps({"jsonrpc": "2.0", "id": 1, "method": method, "params": params or {}}) + "\n").encode())
    f = s.makefile("rb")
    reply = json.loads(f.readline())
    f.close()
    s.close()
    ok("result" in reply, f"{method}: {reply}")
    return reply["result"]


window = call("window", {"max_points": 800, "select": "all"})
points = window["points"]
resets = call("events", {"kind": "board_reset_begin", "run_id": window["run_id"], "limit": 10000})["events"]

# 1. Well-formed XML (ET.parse raises otherwise) with what a reader needs.
root = ET.parse(args.svg).getroot()
ok(root.tag == "{http://www.w3.org/2000/svg}svg", f"root element {root.tag}")
title = root.find("s:title", NS).text
ok(title == "Faraday cup, invented <demo> & test", f"title {title!r}")
texts = ["".join(t.itertext()) for t in root.iter("{http://www.w3.org/2000/svg}text")]
for want in ("running total (nC)", "rate (pC/s)", "time (UTC, from "):
    ok(any(t.startswith(want) for t in texts), f"no axis label {want!r} among {texts[:12]}")
ok("Faraday cup, invented <demo> & test" in texts, "the title is not drawn")

# 2. The series are the API's window: one vertex per point, the total's peak where the data peaks.
panels = {g.get("id"): g for g in root.iter("{http://www.w3.org/2000/svg}g") if g.get("id")}
ok({"total", "rate"} <= set(panels), f"panels {set(panels)}")
def vertices(panel):
    line = panels[panel].find("s:polyline[@class='series']", NS)
    return [tuple(map(float, p.split(","))) for p in line.get("points").split()]
total_xy, rate_xy = vertices("total"), vertices("rate")
ok(len(total_xy) == len(points) == len(rate_xy), f"{len(total_xy)} vertices for {len(points)} points")
ok(all(a[0] < b[0] for a, b in zip(total_xy, total_xy[1:])), "time does not run left to right")
top = min(range(len(total_xy)), key=lambda i: total_xy[i][1])  # SVG y grows downwards
peak = max(p["total"] for p in points)
ok(points[top]["total"] >= peak - 1e-3 * abs(peak), f"the drawn peak is point {top}, not the data's peak")
fastest = min(range(len(rate_xy)), key=lambda i: rate_xy[i][1])
rates = [p["rate"] for p in points]
# Vertices are written to 0.1 px of a 230 px panel: ties within that resolution are the same height.
ok(points[fastest]["rate"] >= max(rates) - 2e-3 * (max(rates) - min(rates)), "the rate panel's highest vertex is not the top rate")
marks = panels["total"].findall("s:line[@class='reset']", NS)
lo_i, hi_i = points[0]["index"], points[-1]["index"] + points[-1]["samples"]
inside = [e for e in resets if lo_i <= e["sample_index"] <= hi_i]
ok(len(marks) == len(inside) > 10, f"{len(marks)} reset markers for {len(inside)} resets in the window")
ok(len(panels["total"].findall("s:rect[@class='zero-window']", NS)) >= 1, "no zero window shaded")
print(f"SVG: well-formed, {len(total_xy)} points, {len(marks)} reset markers, axis labels with units: ok")

# 3. The PNG Chromium rendered: decode it and look at the pixels.
data = open(args.png, "rb").read()
ok(data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG file")
pos, idat, ihdr = 8, b"", None
while pos < len(data):
    length, ctype = struct.unpack(">I4s", data[pos:pos + 8])
    body = data[pos + 8:pos + 8 + length]
    ok(zlib.crc32(ctype + body) == struct.unpack(">I", data[pos + 8 + length:pos + 12 + length])[0], f"bad CRC in {ctype}")
    if ctype == b"IHDR":
        ihdr = struct.unpack(">IIBBBBB", body)
    elif ctype == b"IDAT":
        idat += body
    pos += 12 + length
width, height, depth, colour, _, _, interlace = ihdr
ok(depth == 8 and colour in (2, 6) and interlace == 0, f"PNG layout {ihdr} not handled here")
bpp = 3 if colour == 2 else 4
raw = zlib.decompress(idat)
stride = width * bpp
rows, prev = [], bytearray(stride)
for y in range(height):
    ftype, line = raw[y * (stride + 1)], bytearray(raw[y * (stride + 1) + 1:(y + 1) * (stride + 1)])
    if ftype == 1:
        for i in range(bpp, stride):
            line[i] = (line[i] + line[i - bpp]) & 0xFF
    elif ftype == 2:
        line = bytearray((a + b) & 0xFF for a, b in zip(line, prev))
    elif ftype == 3:
        for i in range(stride):
            left = line[i - bpp] if i >= bpp else 0
            line[i] = (line[i] + ((left + prev[i]) >> 1)) & 0xFF
    elif ftype == 4:
        for i in range(stride):
            a = line[i - bpp] if i >= bpp else 0
            b, c = prev[i], prev[i - bpp] if i >= bpp else 0
            p = a + b - c
            pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
            line[i] = (line[i] + (a if pa <= pb and pa <= pc else b if pb <= pc else c)) & 0xFF
    else:
        ok(ftype == 0, f"unknown PNG filter {ftype}")
    rows.append(line)
    prev = line
non_white = red = blue = 0
for line in rows:
    for i in range(0, stride, bpp):
        r, g, b = line[i], line[i + 1], line[i + 2]
        if r < 235 or g < 235 or b < 235:
            non_white += 1
        if abs(r - 0xCC) < 40 and g < 50 and abs(b - 0x33) < 50:
            red += 1  # the total's colour, #c03
        if r < 40 and abs(g - 0x55) < 40 and abs(b - 0xAA) < 40:
            blue += 1  # the rate's colour, #05a
share = non_white / (width * height)
ok(0.02 < share < 0.7, f"{share:.1%} of the picture is not white")
ok(red > 300 and blue > 300, f"series colours barely present: {red} red, {blue} blue pixels")
print(f"PNG {width}x{height}: {share:.1%} drawn, {red} pixels of the total's colour, {blue} of the rate's: ok")
