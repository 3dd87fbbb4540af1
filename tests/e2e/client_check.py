"""Checks for tests/e2e/client_commands.sh: the accrue client against a running accrued.

Runs with /usr/bin/python3 (standard library only). The API is asked directly
over the socket for the reference answers; the client's --json output must be
the same JSON, its tables must show the same rows, and its CSV export, read
back with Python's csv module, must hold the API window's values exactly.
"""
import argparse, csv, datetime, io, json, re, socket, sqlite3, subprocess, time

ap = argparse.ArgumentParser()
for a in ("socket", "client", "work"):
    ap.add_argument("--" + a, required=True)
args = ap.parse_args()


def ok(cond, what):
    if not cond:
        raise AssertionError(what)


class Conn:
    def __init__(self):
        self.s = socket.socket(socket.AF_UNIX)
        self.s.connect(args.socket)
        self.s.settimeout(30)
        self.f = self.s.makefile("rb")
        self.next_id = 1

    def call(self, method, params=None):
        self.next_id += 1
        req = {"jsonrpc": "2.0", "id": self.next_id, "method": method}
        if params is not None:
            req["params"] = params
        self.s.sendall((json.dumps(req) + "\n").encode())
        while True:
            m = json.loads(self.f.readline())
            if m.get("id") == self.next_id:
                ok("result" in m, f"{method}: {m}")
                return m["result"]


api = Conn()


def client(*argv, rc=0, timeout=60):
    p = subprocess.run([args.client, "--socket", args.socket, *argv], capture_output=True, timeout=timeout)
    ok(p.returncode == rc, f"accrue {' '.join(argv)}: exit {p.returncode}, expected {rc}; stderr {p.stderr[-400:]!r}")
    return p.stdout.decode("utf-8"), p.stderr.decode("utf-8")


def client_json(*argv):
    out, _ = client("--json", *argv)
    return json.loads(out)


def wait_for(pred, what, timeout=60):
    t0 = time.time()
    while time.time() - t0 < timeout:
        if pred():
            return
        time.sleep(0.05)
    raise AssertionError("timed out waiting for " + what)


def committed():
    return api.call("status")["writer"]["committed_last_index"].get("0", 0)


wait_for(lambda: committed() >= 120000, "120 s of committed data")
status = api.call("status")
run_id = status["run"]["run_id"]

# tail during the stream: --json lines are the notifications themselves.
out, _ = client("tail", "--json", "--count", "8", timeout=30)
notes = [json.loads(l) for l in out.splitlines()]
ok(len(notes) == 8, f"tail --count 8 printed {len(notes)} lines")
values = [n["params"] for n in notes if n["method"] == "values"]
ok(len(values) >= 4, f"only {len(values)} values notifications among {[n['method'] for n in notes]}")
for n in notes:
    ok(n["jsonrpc"] == "2.0" and "id" not in n and n["method"] in ("values", "event"), f"not a notification: {n}")
for v in values:
    ok(v["run_id"] == run_id, f"values for run {v['run_id']}, the active run is {run_id}")
    ch = v["channels"][0]
    ok(ch["channel"] == 0 and ch["unit"] == "C" and ch["quantity"] == "charge", f"values channel: {ch}")
    ok(ch["last_index"] < v["next_index"], f"last_index {ch['last_index']} not before next_index {v['next_index']}")
ok(all(a["next_index"] < b["next_index"] for a, b in zip(values, values[1:])),
   "values' next_index does not grow: " + str([v["next_index"] for v in values]))
tail_last = values[-1]["channels"][0]
print(f"tail --json: {len(notes)} notifications, next_index {values[0]['next_index']}..{values[-1]['next_index']}: ok")

out, _ = client("tail", "--topics", "values", "--channel", "0", "--count", "3", timeout=30)
lines = out.splitlines()
ok(lines[0].startswith("subscription ") and "values" in lines[0], f"tail header: {lines[0]!r}")
ok(len(lines) == 4 and all(" ch 0 " in l and "charge" in l and "C " in l for l in lines[1:]), f"tail lines: {lines}")
print("tail (table): ok")
client("tail", "--topics", "nothing", "--count", "1", rc=1)
out, _ = client("tail", "--topics", "events", "--seconds", "0.3", timeout=30)
print("tail --seconds ends by itself: ok")

# Control while the run is active.
# The daemon answers only once the simulator has acknowledged the command (docs/api.md, reset_now).
out, _ = client("reset")
ok(re.fullmatch(r"reset now: acknowledged by the board \(request \d+\)\n", out) is not None, f"reset: {out!r}")
r = client_json("zero", "start")
ok(r["sent"] is True and r["acknowledged"] is True and isinstance(r["request_id"], int) and r["attempts"] >= 1,
   f"zero start --json: {r}")
out, _ = client("zero", "stop")
ok(out.startswith("zero window stop: acknowledged by the board (request "), f"zero stop: {out!r}")
client("zero", "sideways", rc=2)
q_from, q_to = committed() - 30000, committed() - 20000
out, _ = client("quiet", "--from", str(q_from), "--to", str(q_to), "--note", 'shutter "A", closed')
ok(out.splitlines() == [f"quiet window recorded: sample index {q_from} to {q_to}",
                        "the live baseline cannot use it: the interval is already processed (the event keeps it)"],
   f"quiet (past): {out!r}")
# The beam stops at 5900 s (see client_commands.sh): mark 5920..5990 s quiet ahead of time; the
# live chain must fit exactly that interval as a baseline, and find the same drift as the zero windows.
F_FROM, F_TO = 5920000, 5990000
r = client_json("quiet", "--channel", "0", "--from", str(F_FROM), "--to", str(F_TO), "--note", "beam off")
ok(r == {"recorded": True, "from_index": F_FROM, "to_index": F_TO, "baseline_from_index": F_FROM}, f"quiet (ahead): {r}")
client("quiet", "--from", "5", rc=2)
print("control (reset, zero start/stop, quiet): ok")

client("wait", "--timeout", "120", timeout=150)
print("run ended")

# Events the control commands left.
ev = api.call("events", {"kind": ["reset_commanded", "zero_relay_commanded", "quiet_window"], "run_id": run_id})["events"]
commanded = [e["detail"].split(" request_id=")[0] for e in ev if "reason=command" in e["detail"]]
ok(commanded == ["reset reason=command", "zero_relay_on reason=command", "zero_relay_off reason=command"],
   f"operator command events: {ev}")
quiet = [json.loads(e["detail"]) for e in ev if e["kind"] == "quiet_window"]
ok(quiet == [{"from_index": q_from, "to_index": q_to, "note": 'shutter "A", closed'},
             {"from_index": F_FROM, "to_index": F_TO, "note": "beam off"}], f"quiet_window events: {quiet}")
db = sqlite3.connect(f"file:{args.work}/a.db?mode=ro", uri=True)
fits = db.execute("SELECT first_index, last_index, slope_v_per_s FROM baseline WHERE run_id = ? AND channel = 0"
                  " ORDER BY ordinal", (run_id,)).fetchall()
quiet_fit = [f for f in fits if f[0] == F_FROM]
ok(len(quiet_fit) == 1 and quiet_fit[0][1] == F_TO, f"no baseline fitted on [{F_FROM}, {F_TO}]: {fits}")
zero_slopes = sorted(f[2] for f in fits if f[0] != F_FROM)
ok(len(zero_slopes) >= 1, f"no zero-window baseline: {fits}")
median = zero_slopes[len(zero_slopes) // 2]
ok(abs(quiet_fit[0][2] - median) <= 0.05 * abs(median), f"quiet-window drift {quiet_fit[0][2]} vs zero windows' {median}")
print(f"quiet window ahead of time fitted as a baseline: drift {quiet_fit[0][2]:.6g} V/s, zero windows {median:.6g} V/s: ok")

# Every read subcommand's --json is the API's reply.
pairs = [
    (("channels",), "channels", None),
    (("calibration", "--channel", "0"), "calibration", {"channel": 0}),
    (("segments", "--limit", "3"), "segments", {"limit": 3}),
    (("segments", "--after", "2", "--limit", "2"), "segments", {"after": 2, "limit": 2}),
    (("events", "--kind", "board_reset_begin", "--kind", "board_reset_end", "--limit", "5"), "events",
     {"kind": ["board_reset_begin", "board_reset_end"], "limit": 5}),
    (("totals",), "totals", None),
    (("runs",), "runs", None),
    (("window", "--points", "50", "--select", "rate"), "window", {"max_points": 50, "select": "rate"}),
]
for argv, method, params in pairs:
    got = client_json(*argv)
    want = api.call(method, params)
    ok(got == want, f"accrue --json {' '.join(argv)} differs from the API's {method} reply")
print(f"--json of {len(pairs)} subcommands equals the API's replies: ok")

# The tables show the API's rows.
segs = api.call("segments", {"limit": 4})
out, _ = client("segments", "--limit", "4")
rows = [l for l in out.splitlines() if re.match(r"^\d+ ", l)]
ok([int(l.split()[0]) for l in rows] == [s["ordinal"] for s in segs["segments"]], f"segments table: {out}")
ok(all(l.split()[1] == s["start_utc"] for l, s in zip(rows, segs["segments"])), "segments table: start times")
ok(f"(more: add --after {segs['next_after']})" in out, "segments table: continuation hint")
evs = api.call("events", {"kind": "board_reset_begin", "limit": 3})["events"]
out, _ = client("events", "--kind", "board_reset_begin", "--limit", "3")
rows = [l.split() for l in out.splitlines()[1:] if l and l[0].isdigit()]
ok([(int(r[0]), r[2], int(r[4])) for r in rows] == [(e["event_id"], e["kind"], e["sample_index"]) for e in evs],
   f"events table: {out}")
out, _ = client("channels")
ok("charge" in out and "C 1 nF, R1 1 Gohm, R2 none" in out and "24-bit" in out, f"channels table: {out}")
out, _ = client("calibration")
ok(re.search(r"^1 +0 +\S+Z +charge +C +-1e-09", out, re.M) is not None, f"calibration table: {out}")
_, err = client("segments", "--run", "999", rc=1)
ok("no such run 999" in err, f"segments --run 999: {err!r}")
client("segments", "--limit", "many", rc=2)
client("events", "--frobnicate", rc=2)
print("tables and errors: ok")

# export: RFC 4180 CSV (CRLF, quoting), UTC RFC 3339 times, units in the header, the API's values.
COLUMNS = {"index (sample)": "index", "samples": "samples", "mean (V)": "mean_v", "min (V)": "min_v",
           "max (V)": "max_v", "last (V)": "last_v", "delta (C)": "delta", "total (C)": "total",
           "total_u (C)": "total_u", "rate (C/s)": "rate"}
# RFC 3339 (section 5.6): the fraction is optional; storage::rfc3339_utc leaves out ".000".
UTC = re.compile(r"^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(\.\d{3})?Z$")


def api_window(params):
    page = api.call("window", params)
    points = list(page["points"])
    pages = 1
    while page["continuation"] is not None:
        page = api.call("window", {"continuation": page["continuation"]})
        points += page["points"]
        pages += 1
    return points, pages


def utc_seconds(text):
    fmt = "%Y-%m-%dT%H:%M:%S.%fZ" if "." in text else "%Y-%m-%dT%H:%M:%SZ"
    return datetime.datetime.strptime(text, fmt).replace(tzinfo=datetime.timezone.utc).timestamp()


def check_export(argv, params, min_pages=1):
    path = f"{args.work}/export.csv"
    client("export", *argv, "--output", path)
    raw = open(path, "rb").read()
    # RFC 4180 section 2 rule 1: every record ends in CRLF; no bare LF or CR.
    ok(raw.endswith(b"\r\n"), "CSV does not end in CRLF")
    ok(raw.count(b"\n") == raw.count(b"\r\n") == raw.count(b"\r"), "CSV has a line end other than CRLF")
    rows = list(csv.reader(io.StringIO(raw.decode("utf-8"), newline=""), strict=True))
    header, body = rows[0], rows[1:]
    ok(header[0] == "utc (RFC 3339)", f"CSV header: {header}")
    points, pages = api_window(params)
    ok(pages >= min_pages, f"the API window took {pages} pages, the test wants at least {min_pages}")
    ok(len(body) == len(points) and len(points) > 0, f"CSV has {len(body)} rows, the API window {len(points)} points")
    period = api.call("runs")["runs"][-1]["sample_period_s"]
    t0, i0 = utc_seconds(points[0]["utc"]), points[0]["index"]
    for row, p in zip(body, points):
        ok(len(row) == len(header), f"CSV row has {len(row)} fields, header {len(header)}")
        ok(UTC.match(row[0]) and row[0] == p["utc"], f"CSV utc {row[0]!r} vs API {p['utc']!r}")
        # Times follow the board's timebase: one sample period per index (to the millisecond printed).
        ok(abs(utc_seconds(row[0]) - t0 - (p["index"] - i0) * period) <= 0.0015, f"utc {row[0]} off the timebase")
        for name, value in zip(header[1:], row[1:]):
            field = COLUMNS[name]
            ok(float(value) == p[field], f"CSV {name} {value} vs API {p[field]!r}")
        if "rate (C/s)" in header:
            rate = float(row[header.index("rate (C/s)")])
            want = float(row[header.index("delta (C)")]) / (int(row[header.index("samples")]) * period)
            ok(abs(rate - want) <= 1e-12 * abs(want) + 1e-30, f"rate {rate} is not delta/(samples*period) {want}")
    return header, body


header, body = check_export(["--points", "300"], {"max_points": 300, "select": "all"})
ok(header[1:] == list(COLUMNS), f"CSV header {header}")
print(f"export, whole run, {len(body)} rows: ok")
start = utc_seconds(api.call("window", {"max_points": 1})["points"][0]["utc"])
t_from = datetime.datetime.fromtimestamp(start + 600, datetime.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
t_to = datetime.datetime.fromtimestamp(start + 1800, datetime.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
_, body = check_export(["--from", t_from, "--to", t_to, "--points", "100"],
                       {"from": t_from, "to": t_to, "max_points": 100, "select": "all"})
# Buckets are aligned to multiples of their size and come whole (docs/api.md):
# the first starts at `from` or up to one bucket before it.
bucket_s = (int(body[1][1]) - int(body[0][1])) * api.call("runs")["runs"][-1]["sample_period_s"]
ok(-bucket_s - 1.0 <= utc_seconds(body[0][0]) - (start + 600) <= 1.0,
   f"window from {t_from} starts at {body[0][0]} (buckets of {bucket_s} s)")
print(f"export, {t_from} to {t_to}, {len(body)} rows: ok")
_, body = check_export(["--points", "6000"], {"max_points": 6000, "select": "all"}, min_pages=2)
print(f"export across continuation pages, {len(body)} rows: ok")
header, _ = check_export(["--select", "total", "--points", "40"], {"select": "total", "max_points": 40})
ok(header == ["utc (RFC 3339)", "index (sample)", "samples", "total (C)", "total_u (C)"], f"--select total header {header}")
out, _ = client("export", "--points", "3")
ok(out.count("\r\n") == 4, f"export to stdout: {out!r}")
print("export --select, to stdout: ok")

# The last live value tail saw agrees with the committed series around its index (the live
# value is the open segment ended at its last sample; series points end at their buckets).
L = tail_last["last_index"]
near, _ = api_window({"from": max(0, L - 3000), "to": L + 3000, "max_points": 100000, "select": "total"})
totals = [p["total"] for p in near]
lo, hi = min(totals), max(totals)
tol = 0.02 * max(abs(lo), abs(hi)) + 10 * tail_last["std_uncertainty"]
ok(lo - tol <= tail_last["total"] <= hi + tol, f"tail total {tail_last['total']} at {L} outside series {lo}..{hi}")
print("tail's live total agrees with the stored series: ok")
