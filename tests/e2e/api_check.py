"""Checks for tests/e2e/api.sh against a running accrued (see docs/api.md).

Runs with /usr/bin/python3 (standard library only). Each check prints one
line; any failure raises and the script exits non-zero.
"""
import argparse, json, math, os, random, socket, sqlite3, stat, subprocess, threading, time

ap = argparse.ArgumentParser()
for a in ("socket", "tcp-port", "token-file", "docs", "database", "truth", "client", "work"):
    ap.add_argument("--" + a, required=True)
args = ap.parse_args()


class Conn:
    """One JSON-RPC connection; notifications are kept aside while waiting for replies."""

    def __init__(self, tcp=False, rcvbuf=None):
        if tcp:
            self.s = socket.create_connection(("127.0.0.1", int(args.tcp_port)))
        else:
            self.s = socket.socket(socket.AF_UNIX)
            if rcvbuf:
                self.s.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, rcvbuf)
            self.s.connect(args.socket)
        self.s.settimeout(30)
        self.f = self.s.makefile("rb")
        self.notes = []
        self.next_id = 1000

    def send_raw(self, data: bytes):
        self.s.sendall(data)

    def line(self):
        raw = self.f.readline()
        if not raw:
            return None
        return json.loads(raw)

    def reply(self):
        while True:
            m = self.line()
            if m is None or "id" in m or "method" not in m:
                return m
            self.notes.append(m)

    def call(self, method, params=None, id_=None):
        if id_ is None:
            self.next_id += 1
            id_ = self.next_id
        req = {"jsonrpc": "2.0", "id": id_, "method": method}
        if params is not None:
            req["params"] = params
        self.send_raw((json.dumps(req) + "\n").encode())
        return self.reply()

    def close(self):
        # The file object holds the socket open: close both, or the daemon never sees the end.
        self.f.close()
        self.s.close()


def ok(cond, what):
    if not cond:
        raise AssertionError(what)


def result(reply, what):
    ok(reply is not None and "result" in reply, f"{what}: expected a result, got {reply}")
    return reply["result"]


def wait_for(pred, what, timeout=60):
    t0 = time.time()
    while time.time() - t0 < timeout:
        if pred():
            return
        time.sleep(0.05)
    raise AssertionError("timed out waiting for " + what)


main = Conn()


def status():
    return result(main.call("status"), "status")


# The socket's mode: 0660 (docs/api.md, Transport).
mode = stat.S_IMODE(os.stat(args.socket).st_mode)
ok(mode == 0o660, f"socket mode {oct(mode)} is not 0660")
print("socket mode 0660: ok")

# Wait until some data is committed and a reset has happened, so every documented reply has data.
wait_for(lambda: status()["writer"]["committed_last_index"].get("0", 0) >= 600000, "600 s of committed data")
wait_for(lambda: len(result(main.call("segments", {"limit": 3}), "segments")["segments"]) >= 3, "three segments")

# 1. Every documented example: same result/error, same shape (keys and JSON types).
def kind(v):
    if isinstance(v, bool):
        return "bool"
    if isinstance(v, (int, float)):
        return "number"
    return type(v).__name__


def same_shape(doc, got, path="$"):
    if doc is None:
        return  # null in the docs: the value may be absent data or anything
    ok(got is not None or doc is None, f"{path}: documented {kind(doc)}, got null")
    ok(kind(doc) == kind(got), f"{path}: documented {kind(doc)}, got {kind(got)}")
    if isinstance(doc, dict):
        for k, v in doc.items():
            ok(k in got, f"{path}.{k}: documented but missing")
            same_shape(v, got[k], f"{path}.{k}")
    elif isinstance(doc, list) and doc:
        ok(len(got) > 0, f"{path}: documented a non-empty list, got an empty one")
        same_shape(doc[0], got[0], f"{path}[0]")


examples = []
lines = open(args.docs, encoding="utf-8").read().splitlines()
for i, l in enumerate(lines):
    if l.startswith("--> "):
        ok(i + 1 < len(lines) and lines[i + 1].startswith("<-- "), f"docs line {i+1}: request without reply")
        examples.append((json.loads(l[4:]), json.loads(lines[i + 1][4:])))
ok(len(examples) >= 15, f"only {len(examples)} examples found in docs/api.md")
documented = {req["method"] for req, _ in examples}
for m in ("status", "channels", "window", "segments", "events", "totals", "runs", "calibration", "reset_now",
          "zero_start", "zero_stop", "quiet_mark", "subscribe", "unsubscribe", "authenticate"):
    ok(m in documented, f"method {m} has no example in docs/api.md")
doc_conn = Conn()
last_sub = None
for req, want in examples:
    if req["method"] == "calibration_new" and "result" in want:
        continue  # a new calibration closes the run: tests/e2e/calibration_new.sh runs this one
    if req["method"] == "unsubscribe" and last_sub is not None:
        req["params"]["subscription"] = last_sub
    got = doc_conn.call(req["method"], req.get("params"), req["id"])
    ok(got is not None and got.get("id") == req["id"], f"{req['method']}: reply id {got}")
    if "error" in want:
        ok("error" in got and got["error"]["code"] == want["error"]["code"], f"{req['method']}: {got}")
    else:
        ok("result" in got, f"{req['method']}: expected a result, got {got}")
        same_shape(want["result"], got["result"], req["method"])
    if req["method"] in ("reset_now", "zero_start", "zero_stop"):
        # The reply waits for the board: the simulator acknowledges these commands (docs/api.md).
        r = got["result"]
        ok(r["acknowledged"] is True and r["sent"] is True and isinstance(r["request_id"], int) and r["attempts"] >= 1,
           f"{req['method']}: not acknowledged: {got}")
    if req["method"] == "subscribe":
        last_sub = got["result"]["subscription"]
doc_conn.close()
print(f"documented examples: {len(examples)} requests, {len(documented)} methods, all replies of the documented shape")

# 1b. A board command's reply waits for the ack: in a batch (answered whole), and for a client that
# stops sending right after asking (it still gets its reply). zero_stop: the simulator always acks it.
b = Conn()
b.send_raw(b'[{"jsonrpc":"2.0","id":"z","method":"zero_stop"},{"jsonrpc":"2.0","id":"s","method":"totals"}]\n')
arr = json.loads(b.f.readline())
ok(isinstance(arr, list) and [x.get("id") for x in arr] == ["z", "s"], f"batch with zero_stop: {arr}")
ok(arr[0]["result"]["acknowledged"] is True and "result" in arr[1], f"batch with zero_stop: {arr}")
b.send_raw(b'{"jsonrpc":"2.0","id":"h","method":"zero_stop"}\n')
b.s.shutdown(socket.SHUT_WR)
r = b.line()
ok(r is not None and r.get("id") == "h" and r["result"]["acknowledged"] is True, f"zero_stop after half-close: {r}")
ok(b.line() is None, "the daemon closes once the awaited reply is written")
b.close()
print("board commands: a batch waits for the ack, a half-closed client still gets its acknowledged reply")

# 2. Malformed input of every kind, each followed by a good request on the same connection.
bad = Conn()
cases = [
    (b'{"jsonrpc":"2.0","id":1,"method":"status"\n', -32700, "truncated JSON"),
    (b'{"jsonrpc":"2.0","id":1,"method":"st\xc3\x28tus"}\n', -32700, "invalid UTF-8"),
    (b'{"jsonrpc":"2.0","id":1,"method":"st\xed\xa0\x80"}\n', -32700, "UTF-8 surrogate"),
    (b'[1,2]\n', -32600, "batch of non-objects"),
    (b'"status"\n', -32600, "not an object"),
    (b'{"id":1,"method":"status"}\n', -32600, "no jsonrpc member"),
    (b'{"jsonrpc":"2.0","id":1,"method":7}\n', -32600, "method not a string"),
    (b'{"jsonrpc":"2.0","id":{"a":1},"method":"status"}\n', -32600, "id an object"),
    (b'{"jsonrpc":"2.0","id":1,"method":"no_such_method"}\n', -32601, "unknown method"),
    (b'{"jsonrpc":"2.0","id":1,"method":"window","params":{"channel":"zero"}}\n', -32602, "channel of the wrong type"),
    (b'{"jsonrpc":"2.0","id":1,"method":"window","params":{"max_points":0}}\n', -32602, "max_points out of range"),
    (b'{"jsonrpc":"2.0","id":1,"method":"window","params":{"from":"yesterday"}}\n', -32602, "from not a time"),
    (b'{"jsonrpc":"2.0","id":1,"method":"window","params":{"continuation":"w1.forged"}}\n', -32602, "forged continuation"),
    (b'{"jsonrpc":"2.0","id":1,"method":"events","params":{"kind":5}}\n', -32602, "kind of the wrong type"),
    (b'{"jsonrpc":"2.0","id":1,"method":"status","params":{"verbose":true}}\n', -32602, "unknown parameter"),
    (b'{"jsonrpc":"2.0","id":1,"method":"window","params":{"run_id":999}}\n', -32602, "no such run"),
    (b'{"jsonrpc":"2.0","id":1,"method":"status","params":"x"}\n', -32600, "params a string"),
    (b'{"jsonrpc":"2.0","id":1,"method":"status","params":{"pad":"' + b"x" * 70000 + b'"}}\n', -32600, "line over 64 KiB"),
]
for data, code, what in cases:
    bad.send_raw(data)
    r = bad.reply()
    if isinstance(r, list):
        r = r[0]
    ok(r is not None and "error" in r and r["error"]["code"] == code, f"{what}: expected {code}, got {r}")
    after = bad.call("totals")
    ok(after is not None and "result" in after, f"after {what}: the connection did not carry on: {after}")
bad.close()
print(f"malformed input: {len(cases)} kinds, each got its error and the next request worked")

# 3. TCP: refuses a missing or a wrong token, accepts the right one.
token = open(args.token_file).read().strip()
t = Conn(tcp=True)
r = t.call("status")
ok(r["error"]["code"] == -32002, f"TCP without a token: {r}")
ok(t.line() is None, "TCP without a token: the connection should close")
t = Conn(tcp=True)
r = t.call("authenticate", {"token": token[:-1] + ("0" if token[-1] != "0" else "1")})
ok(r["error"]["code"] == -32002, f"TCP with a wrong token: {r}")
ok(t.line() is None, "TCP with a wrong token: the connection should close")
t = Conn(tcp=True)
ok(result(t.call("authenticate", {"token": token}), "authenticate")["authenticated"] is True, "right token")
ok("writer" in result(t.call("status"), "status over TCP"), "status over TCP")
t.close()
print("TCP: missing and wrong tokens refused and disconnected, the right token served")

# 4. Load while the simulator streams: 64 clients query committed windows; a slow
# subscriber is cut off; a reading subscriber keeps its stream.
# A series point is committed once its whole interval has arrived, so a point
# that starts shortly before the committed index may still be in flight: query
# only up to one series interval (1 s) before it, where every point is final.
run_period = result(Conn().call("runs"), "runs")["runs"][-1]["sample_period_s"]
committed = status()["writer"]["committed_last_index"]["0"] - int(round(1.0 / run_period))
ok(status()["run"] is not None, "the run should still be streaming during the load test")
good = Conn()
result(good.call("subscribe", {"topics": ["values"]}), "subscribe")
good_times = []
stop = threading.Event()


def read_good():
    try:
        while not stop.is_set():
            m = good.line()
            if m is None:
                return
            if m.get("method") == "values":
                good_times.append(time.time())
    except (OSError, ValueError):
        return  # closed under us at the end of the check


gt = threading.Thread(target=read_good)
gt.start()
slow = Conn(rcvbuf=4096)
for _ in range(64):
    result(slow.call("subscribe", {}), "slow subscribe")
limit_reply = slow.call("subscribe", {})
ok("error" in limit_reply and limit_reply["error"]["code"] == -32602, f"65th subscription: {limit_reply}")

slow_lines = []


def read_slow_late():
    # Stops reading long enough to be cut off, then drains within the daemon's grace period.
    time.sleep(1.5)
    slow.s.settimeout(30)
    while True:
        m = slow.line()
        if m is None:
            return
        slow_lines.append(m)


slow_reader = threading.Thread(target=read_slow_late)
slow_reader.start()
queries = [(f, tt, mp) for f, tt, mp in [(0, committed, 1000), (0, committed, 37), (12345, committed // 2, 1000),
                                          (committed // 3, committed, 250), (0, committed, 100000)]]
replies = []
errors = []
lock = threading.Lock()


def load_client(k):
    rng = random.Random(k)
    try:
        c = Conn()
        t_end = time.time() + 3.0
        n = 0
        while time.time() < t_end:
            f, tt, mp = rng.choice(queries)
            r = result(c.call("window", {"from": f, "to": tt, "max_points": mp}), "window under load")
            n += 1
            with lock:
                replies.append(((f, tt, mp), r))
        c.close()
    except Exception as e:  # noqa: BLE001 - reported below
        with lock:
            errors.append(f"client {k}: {e!r}")


threads = [threading.Thread(target=load_client, args=(k,)) for k in range(64)]
for th in threads:
    th.start()
for th in threads:
    th.join()
ok(not errors, "load errors: " + "; ".join(errors[:3]))
wait_for(lambda: status()["api"]["cut_off"] >= 1, "the slow subscriber to be cut off", 30)
cut_at = time.time()
n_before = len([x for x in good_times if x <= cut_at])
wait_for(lambda: len(good_times) > n_before + 3, "values to keep coming to the reading subscriber", 10)
# The slow subscriber, reading at last, finds after its backlog the cut_off notice and then the end.
slow_reader.join(30)
ok(slow_lines and slow_lines[-1].get("method") == "cut_off" and slow_lines[-1]["params"]["code"] == -32003,
   f"slow subscriber's last line {slow_lines[-1:] }")
stop.set()
good.close()
gt.join()
print(f"load: 64 clients, {len(replies)} window replies in 3 s while streaming; slow subscriber cut off with -32003, "
      f"the reading one kept receiving values ({len(good_times)} notifications)")

# 5. Client count limit: with 80 allowed, the 81st connection is refused with -32005.
wait_for(lambda: status()["api"]["clients"] == 1, "load clients to close")
held = [Conn() for _ in range(79)]
for h in held:
    result(h.call("totals"), "held client")
extra = Conn()
r = extra.line()
ok(r is not None and r["error"]["code"] == -32005, f"81st client: {r}")
for h in held:
    h.close()
print("client limit: the 81st client got -32005")

# 6. Ingest lost nothing, and every reply under load equals SQLite's own answer on the final file.
main.s.settimeout(120)


def run1_done():
    runs = result(main.call("runs"), "runs")["runs"]
    return runs and runs[0]["ended_utc"] is not None  # the run's end is committed after its data


# The run's end, not the daemon's idleness: the daemon reopens the same pseudo-terminal path after
# the simulator exits, and on a shared machine another process may own that path by then.
wait_for(run1_done, "run 1 to end and be committed", 40)
st = status()
truth = json.load(open(args.truth))
ok(st["writer"]["raw_blocks_shed"] == 0 and st["writer"]["series_points_shed"] == 0, f"shed: {st['writer']}")
# Gaps and decoder errors are judged on run 1 in the store: the live counters may already include
# whatever the daemon read after reopening the pseudo-terminal path (see above).
db = sqlite3.connect(f"file:{args.database}?mode=ro", uri=True)
stored = db.execute("SELECT SUM(samples) FROM series_point WHERE run_id = 1 AND channel = 0").fetchone()[0]
ok(stored == truth["samples"], f"stored samples {stored} != simulator's {truth['samples']}")
gaps = db.execute("SELECT COUNT(*) FROM event WHERE run_id = 1 AND kind = 'sample_gap'").fetchone()[0]
ok(gaps == 0, f"run 1 has {gaps} sample gaps")


WIDTHS_S = (2, 5, 10, 20, 30, 60, 120, 300, 600, 1200, 1800, 3600, 7200, 14400, 21600, 43200, 86400)


def reference(f, tt, mp):
    # The buckets described in docs/api.md, computed by SQLite and Python from the
    # series points themselves (the daemon reads the coarsest rollup tier no wider
    # than a bucket; a bucket holds the tier rows that start in it).
    period = db.execute("SELECT sample_period_s FROM run WHERE run_id = 1").fetchone()[0]
    ends = db.execute("SELECT MIN(first_index), MAX(first_index) FROM series_point"
                      " WHERE run_id = 1 AND channel = 0 AND first_index BETWEEN ? AND ?", (f, tt)).fetchone()
    lo, hi = ends
    stride = db.execute("SELECT samples FROM series_point WHERE run_id = 1 AND channel = 0 AND first_index = ?",
                        (lo,)).fetchone()[0]
    span = hi - lo + 1
    bucket = max(stride, -(-span // mp))
    if hi // bucket - lo // bucket + 1 > mp:
        bucket = max(stride, -(-span // (mp - 1)) if mp > 1 else hi + 1)
    tier = stride
    for width_s in WIDTHS_S:
        w = max(1, round(width_s / period))
        if stride < w <= bucket and w % stride == 0:
            tier = w
    begin, end = lo // bucket * bucket, hi // bucket * bucket + bucket - 1
    # Each series point joins the bucket of the tier row it belongs to: the row
    # starts at the first point of its tier bucket.
    rows = db.execute("SELECT MIN(first_index) OVER (PARTITION BY first_index / ?), first_index, samples, min_v,"
                      " max_v, mean_v, last_v, total, total_u FROM series_point WHERE run_id = 1 AND channel = 0"
                      " ORDER BY first_index", (tier,)).fetchall()
    rows = [r for r in rows if begin <= r[0] <= end]
    prev = db.execute("SELECT total FROM series_point WHERE run_id = 1 AND channel = 0 AND first_index < ?"
                      " ORDER BY first_index DESC LIMIT 1", (rows[0][0],)).fetchone()
    before = prev[0] if prev else rows[0][7]
    out = {}
    for r in rows:
        b = r[0] // bucket
        p = out.setdefault(b, {"index": b * bucket, "samples": 0, "min_v": r[3], "max_v": r[4], "w": 0.0})
        p["samples"] += r[2]
        p["min_v"] = min(p["min_v"], r[3])
        p["max_v"] = max(p["max_v"], r[4])
        p["w"] += r[5] * r[2]
        p["last_v"], p["total"], p["total_u"] = r[6], r[7], r[8]
    pts = []
    for b in sorted(out):
        p = out[b]
        p["mean_v"] = p.pop("w") / p["samples"]
        p["delta"] = p["total"] - before
        before = p["total"]
        pts.append(p)
    return pts[:5000], bucket, tier


def decode_block(data, channels, count):
    # storage/block_codec.hpp, encoding 2: per channel the difference from the
    # previous code of that channel, zigzag-mapped, as unsigned LEB128 varints.
    out, pos = [], 0
    for k in range(count):
        z, shift = 0, 0
        while True:
            b = data[pos]
            pos += 1
            z |= (b & 0x7F) << shift
            shift += 7
            if not b & 0x80:
                break
        d = (z >> 1) ^ -(z & 1)
        out.append((out[k - channels] if k >= channels else 0) + d)
    return out


def raw_reference(f, tt, mp):
    # docs/api.md, below the series interval: buckets of the raw samples in
    # f..tt, volts from the codes through the series points' calibration,
    # totals interpolated between the series points' totals (each at its
    # point's last sample), flat outside them.
    blk = db.execute("SELECT first_index, samples FROM raw_block WHERE run_id = 1 AND first_index <= ?"
                     " ORDER BY first_index DESC LIMIT 1", (f,)).fetchone()
    if blk and blk[0] + blk[1] > f:
        lo = f
    else:
        lo = db.execute("SELECT MIN(first_index) FROM raw_block WHERE run_id = 1 AND first_index > ? AND first_index <= ?",
                        (f, tt)).fetchone()[0]
    blk = db.execute("SELECT first_index, samples FROM raw_block WHERE run_id = 1 AND first_index <= ?"
                     " ORDER BY first_index DESC LIMIT 1", (tt,)).fetchone()
    hi = min(tt, blk[0] + blk[1] - 1)
    span = hi - lo + 1
    bucket = -(-span // mp)
    if hi // bucket - lo // bucket + 1 > mp:
        bucket = -(-span // (mp - 1)) if mp > 1 else hi + 1
    # Points on the first page: every bucket from lo to hi has samples here
    # (the run has no gaps), at most 5000 a page. Decoding them all in Python
    # would take long: the first 40 buckets are recomputed.
    count = min(hi // bucket, lo // bucket + 5000 - 1) - lo // bucket + 1
    end = min(hi, (lo // bucket + 40) * bucket - 1)
    stride = db.execute("SELECT samples FROM series_point WHERE run_id = 1 AND channel = 0 ORDER BY first_index LIMIT 1").fetchone()[0]
    series = db.execute("SELECT first_index + samples - 1, total, total_u, calibration_id FROM series_point"
                        " WHERE run_id = 1 AND channel = 0 AND derivation = 1 AND first_index BETWEEN ? AND ?"
                        " ORDER BY first_index", (max(0, lo - 2 * stride), end + stride)).fetchall()
    cal_id = [c for e, _, _, c in series if e - stride + 1 <= lo][-1:] or [series[0][3]]
    adc = json.loads(db.execute("SELECT definition FROM calibration WHERE calibration_id = ?", cal_id).fetchone()[0])["adc"]
    volts_per_code = adc["full_scale_v"] / 2 ** (adc["bits"] - 1 if adc["bipolar"] else adc["bits"]) / adc["gain"]

    def total_at(i):
        if i <= series[0][0]:
            return series[0][1], series[0][2]
        for (e0, t0, u0, _), (e1, t1, u1, _) in zip(series, series[1:]):
            if e0 <= i < e1:
                w = (i - e0) / (e1 - e0)
                return t0 + w * (t1 - t0), u0 + w * (u1 - u0)
        return series[-1][1], series[-1][2]

    out = {}
    first_block = db.execute("SELECT MAX(first_index) FROM raw_block WHERE run_id = 1 AND first_index <= ?", (lo,)).fetchone()[0]
    for first, channels, samples, encoding, data in db.execute(
            "SELECT first_index, channel_count, samples, encoding, data FROM raw_block WHERE run_id = 1"
            " AND first_index BETWEEN ? AND ? ORDER BY first_index", (first_block, end)):
        ok(encoding == 2, f"raw block at {first}: encoding {encoding}")
        codes = decode_block(data, channels, channels * samples)
        for k in range(samples):
            i = first + k
            if i < lo or i > end:
                continue
            v = (codes[k * channels] - adc["zero_code"]) * volts_per_code
            p = out.setdefault(i // bucket, {"index": i // bucket * bucket, "samples": 0, "min_v": v, "max_v": v, "w": 0.0})
            p["samples"] += 1
            p["min_v"], p["max_v"] = min(p["min_v"], v), max(p["max_v"], v)
            p["w"] += v
            p["last_v"], p["last"] = v, i
    before = total_at(lo - 1)[0]
    pts = []
    for b in sorted(out):
        p = out[b]
        p["mean_v"] = p.pop("w") / p["samples"]
        p["total"], p["total_u"] = total_at(p.pop("last"))
        p["delta"] = p["total"] - before
        before = p["total"]
        pts.append(p)
    return pts, bucket, count


refs = {q: reference(*q) for q in queries}
raw_refs = {}
for q, r in replies:
    if r["total_interpolated"]:
        # Finer than the series points: made from the raw blocks.
        if q not in raw_refs:
            raw_refs[q] = raw_reference(*q)
        want, bucket, count = raw_refs[q]
        got = r["points"]
        ok(r["bucket_samples"] == bucket and bucket < 1000, f"{q}: raw bucket_samples {r['bucket_samples']} != {bucket}")
        ok(len(got) == count, f"{q}: {len(got)} points from raw blocks, expected {count}")
        for g, w in zip(got, want):
            for k in ("index", "samples"):
                ok(g[k] == w[k], f"{q}: {k} {g[k]} != {w[k]}")
            for k in ("min_v", "max_v", "mean_v", "last_v", "total", "total_u", "delta"):
                ok(math.isclose(g[k], w[k], rel_tol=1e-9, abs_tol=1e-18), f"{q} index {g['index']}: {k} {g[k]} != {w[k]}")
        continue
    want, bucket, tier = refs[q]
    got = r["points"]
    ok(r["bucket_samples"] == bucket, f"{q}: bucket_samples {r['bucket_samples']} != {bucket}")
    # Buckets whose rows may reach past `to` (a tier row starts in a bucket and
    # runs up to one tier width on) may have grown, or a last one appeared, after
    # the reply while the simulator streamed: those must only start where the
    # reference's do.
    settled = [w for w in want if w["index"] + bucket + tier - 1 <= q[1]] if len(want) < 5000 else want
    ok(len(settled) <= len(got) <= len(want) and len(want) - len(settled) <= 2,
       f"{q}: {len(got)} points, SQLite reference has {len(want)} ({len(settled)} settled)")
    for n, (g, w) in enumerate(zip(got, want)):
        if n >= len(settled):
            ok(g["index"] == w["index"], f"{q}: unsettled bucket at {g['index']} != {w['index']}")
            continue
        for k in ("index", "samples"):
            ok(g[k] == w[k], f"{q}: {k} {g[k]} != {w[k]}")
        for k in ("min_v", "max_v", "mean_v", "last_v", "total", "total_u", "delta"):
            ok(math.isclose(g[k], w[k], rel_tol=1e-9, abs_tol=1e-18), f"{q} index {g['index']}: {k} {g[k]} != {w[k]}")
print(f"ingest: zero shed, zero gaps, {stored} samples stored = simulator's; all {len(replies)} replies "
      f"match SQLite's reading of the file ({len(raw_refs)} of the {len(queries)} queries finer than the series "
      "points, from the raw blocks, checked against a Python decoding of them)")

# 7. Continuation: a window of more than 5000 points comes in pages that join up exactly.
# As many points as series points: one bucket each (more would be finer, from the raw blocks).
rows = db.execute("SELECT first_index, total FROM series_point WHERE run_id=1 AND channel=0 ORDER BY first_index").fetchall()
pages = [result(main.call("window", {"run_id": 1, "max_points": len(rows), "select": "total"}), "page 1")]
while pages[-1]["continuation"]:
    pages.append(result(main.call("window", {"continuation": pages[-1]["continuation"]}), "next page"))
joined = [p for pg in pages for p in pg["points"]]
ok(len(pages) == 2 and len(pages[0]["points"]) == 5000, f"pages {[len(p['points']) for p in pages]}")
idx = [p["index"] for p in joined]
ok(idx == sorted(set(idx)), "continued pages overlap or go backwards")
ok([(p["index"], p["total"]) for p in joined] == rows, f"{len(joined)} joined points differ from the {len(rows)} stored")
print(f"continuation: {len(pages)} pages, {len(joined)} points, no overlap")
