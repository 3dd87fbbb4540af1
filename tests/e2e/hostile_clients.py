"""200 hostile connections against a running accrued while it ingests, then
--max-clients slow clients at once (half silent, half dribbling an unfinished
line): the idle and line timeouts free their slots for an honest client.

Kinds, in turn: a slowloris (a request dribbled a byte at a time, never
finished), a 10 MB line, random bytes, deeply nested JSON, huge numbers, and
pipelined unknown methods from a client that never reads. At most --concurrent
at a time, each bounded in time. Meanwhile an honest client asks for status.
Checks: the daemon stays up and answers; its resident memory (VmRSS from
/proc) stays within --rss-bound-mb of where it started; ingest sheds nothing
(writer shed counters 0, no sample-index gaps) and keeps counting samples.
Prints the figures for docs/reliability.md.
"""
import argparse
import json
import os
import random
import socket
import sys
import threading
import time

ap = argparse.ArgumentParser()
ap.add_argument("--socket", required=True)
ap.add_argument("--pid", type=int, required=True)
ap.add_argument("--connections", type=int, default=200)
ap.add_argument("--concurrent", type=int, default=40)
# The bound: what the daemon's limits allow the clients to hold at once,
# concurrent x (outgoing buffer + longest request), plus 16 MiB for SQLite's
# page caches (2 MiB per connection by default) and the allocator's slack.
ap.add_argument("--rss-bound-mb", type=float, default=40 * (0.25 + 0.0625) + 16)
ap.add_argument("--kinds", default="", help="comma-separated subset of kinds, for diagnosis")
# The daemon's api_max_clients, api_idle_timeout_s and api_line_timeout_s, for the case at the limit.
ap.add_argument("--max-clients", type=int, default=64)
ap.add_argument("--idle-timeout", type=float, default=2.0)
ap.add_argument("--line-timeout", type=float, default=2.0)
args = ap.parse_args()
rng = random.Random(20261202)  # seeded: the same attack every run


def rss_kb():
    with open(f"/proc/{args.pid}/status") as f:
        for line in f:
            if line.startswith("VmRSS:"):
                return int(line.split()[1])
    raise RuntimeError("no VmRSS")


def connect(timeout=5.0):
    s = socket.socket(socket.AF_UNIX, socket.SOCK_STREAM)
    s.settimeout(timeout)
    s.connect(args.socket)
    return s


def call(method, params=None):
    s = connect()
    req = {"jsonrpc": "2.0", "id": 1, "method": method}
    if params is not None:
        req["params"] = params
    s.sendall((json.dumps(req) + "\n").encode())
    buf = b""
    while not buf.endswith(b"\n"):
        chunk = s.recv(1 << 16)
        if not chunk:
            break
        buf += chunk
    s.close()
    return json.loads(buf)


def drain(s, seconds):
    """Reads what the daemon says for up to `seconds`; returns the bytes."""
    end = time.monotonic() + seconds
    got = b""
    s.settimeout(0.2)
    while time.monotonic() < end:
        try:
            chunk = s.recv(1 << 16)
        except socket.timeout:
            continue
        except OSError:
            break
        if not chunk:
            break
        got += chunk
    return got


outcomes = {}
lock = threading.Lock()


def note(kind, what):
    with lock:
        outcomes.setdefault(kind, {}).setdefault(what, 0)
        outcomes[kind][what] += 1


def slowloris(i):
    s = connect()
    text = b'{"jsonrpc":"2.0","id":%d,"method":"status","params":{"pad":"' % i
    try:
        for b in text + b"x" * 40:
            s.send(bytes([b]))
            time.sleep(0.05)
        note("slowloris", "held 2+ s, never finished")
    except OSError:
        note("slowloris", "closed by the daemon")
    s.close()


def huge_line(i):
    s = connect()
    chunk = b"a" * (1 << 16)
    sent = 0
    try:
        while sent < 10 * (1 << 20):
            s.sendall(chunk)
            sent += len(chunk)
        s.sendall(b"\n")
        reply = drain(s, 1.0)
        note("10MB line", "error reply" if b'"error"' in reply else "no reply")
    except OSError:
        note("10MB line", f"cut off after {sent >> 10} KiB")
    s.close()


def random_bytes(i):
    s = connect()
    data = bytes(rng.getrandbits(8) for _ in range(64 << 10))
    try:
        s.sendall(data + b"\n")
        reply = drain(s, 0.5)
        note("random bytes", "error replies" if b'"error"' in reply else "closed or silent")
    except OSError:
        note("random bytes", "cut off")
    s.close()


def nested(i):
    s = connect()
    depth = 50000 if i % 2 else 1000
    line = b"[" * depth + b"]" * depth if i % 4 < 2 else b'{"a":' * depth + b"1" + b"}" * depth
    try:
        s.sendall(line + b"\n")
        reply = drain(s, 0.5)
        note("nested JSON", "error reply" if b'"error"' in reply else "no reply")
    except OSError:
        note("nested JSON", "cut off")
    s.close()


def huge_numbers(i):
    s = connect()
    lines = [
        b'{"jsonrpc":"2.0","id":1e400,"method":"window","params":{"channel":0,"max_points":1e308}}',
        b'{"jsonrpc":"2.0","id":2,"method":"window","params":{"channel":99999999999999999999999999999,"from":-1e999}}',
        b'{"jsonrpc":"2.0","id":3,"method":"segments","params":{"channel":0,"limit":18446744073709551616}}',
        b'{"jsonrpc":"2.0","id":4,"method":"events","params":{"limit":-9223372036854775809}}',
        b'{"jsonrpc":"2.0","id":' + b"9" * 5000 + b',"method":"totals"}',
    ]
    try:
        s.sendall(b"\n".join(lines) + b"\n")
        reply = drain(s, 0.5)
        note("huge numbers", f"{reply.count(b'jsonrpc')} replies to {len(lines)}")
    except OSError:
        note("huge numbers", "cut off")
    s.close()


def unknown_methods(i):
    s = connect()
    try:
        for n in range(5000):  # pipelined, never reading: the outgoing buffer fills
            s.sendall(b'{"jsonrpc":"2.0","id":%d,"method":"no_such_method_%d"}\n' % (n, n))
        note("unknown methods", "5000 sent, not read")
    except OSError:
        note("unknown methods", "cut off while sending (not reading)")
    time.sleep(0.2)
    s.close()


kinds = [slowloris, huge_line, random_bytes, nested, huge_numbers, unknown_methods]
if args.kinds:
    kinds = [k for k in kinds if k.__name__ in args.kinds.split(",")]

for _ in range(200):  # samples flow before the attack starts
    before = call("status")["result"]
    if before["ingest"]["samples"] > 0:
        break
    time.sleep(0.05)
rss0 = rss_kb()
rss_peak = rss0
samples0 = before["ingest"]["samples"]
sem = threading.Semaphore(args.concurrent)
errors = []


def run(i):
    try:
        kinds[i % len(kinds)](i)
    except Exception as e:  # a client-side failure to connect is a daemon failure
        errors.append(f"{kinds[i % len(kinds)].__name__} #{i}: {e!r}")
    finally:
        sem.release()


def attack(first, count):
    """Runs connections first..first+count-1; returns (answered honest calls, peak VmRSS kB)."""
    peak, honest = rss_kb(), 0
    threads = []
    for i in range(first, first + count):
        sem.acquire()
        t = threading.Thread(target=run, args=(i,))
        t.start()
        threads.append(t)
        if i % 10 == 0:
            peak = max(peak, rss_kb())
            honest += "result" in call("status")
    while any(t.is_alive() for t in threads):
        peak = max(peak, rss_kb())
        time.sleep(0.1)
    for t in threads:
        t.join()
    return honest, peak


# Rounds of 100 of the same mix: memory that is bounded stops growing after the first.
started = time.monotonic()
honest_ok, peaks = 0, []
for first in range(0, args.connections, 100):
    h, p = attack(first, min(100, args.connections - first))
    honest_ok += h
    peaks.append(p)
rss_peak = max(peaks)
elapsed = time.monotonic() - started
time.sleep(0.5)  # let the writer commit what ingest holds
after = call("status")["result"]
rss1 = rss_kb()
rss_peak = max(rss_peak, rss1)

print(f"{args.connections} hostile connections in {elapsed:.1f} s (at most {args.concurrent} at once)")
for kind, what in outcomes.items():
    print(f"  {kind}: " + ", ".join(f"{n} {w}" for w, n in what.items()))
print(f"  honest status calls answered during the attack: {honest_ok}")
print(f"  VmRSS: {rss0 / 1024:.1f} MiB before; peak per round of 100: "
      + ", ".join(f"{p / 1024:.1f}" for p in peaks) + f" MiB; {rss1 / 1024:.1f} MiB after")
w = after["writer"]
ing = after["ingest"]
print(f"  ingest: {ing['samples'] - samples0} samples during the attack, gaps {ing['gaps']}, "
      f"raw_blocks_shed {w['raw_blocks_shed']}, series_points_shed {w['series_points_shed']}, "
      f"api cut_off {after.get('api', {}).get('cut_off')}")



def at_the_limit():
    """Fills every slot with slow clients; returns (figures, failures)."""
    fails = []
    for _ in range(200):  # only this status call connected: the attack's clients are gone
        api0 = call("status")["result"]["api"]
        if api0["clients"] == 1:
            break
        time.sleep(0.05)
    n_silent = args.max_clients // 2
    n_slow = args.max_clients - n_silent
    silent = [connect() for _ in range(n_silent)]
    slow = [connect() for _ in range(n_slow)]
    for i, s in enumerate(slow):
        s.sendall(b'{"jsonrpc":"2.0","id":%d,"method":"status"' % i)
    # The limit is reached: one more is refused with -32005.
    probe = connect()
    refused = b"-32005" in drain(probe, 1.0)
    probe.close()
    if not refused:
        fails.append("the connection beyond the limit was not refused (the limit was not reached)")
    open_socks = {s: b"" for s in silent + slow}
    slow_set = set(slow)
    generous = 20 * max(args.idle_timeout, args.line_timeout) + 10
    end = time.monotonic() + generous
    honest_tries, honest_answered = 0, False
    while time.monotonic() < end and (open_socks or not honest_answered):
        for s in list(open_socks):
            try:
                s.settimeout(0.001)
                try:
                    chunk = s.recv(4096)
                    if not chunk:
                        raise ConnectionResetError
                    open_socks[s] += chunk
                except socket.timeout:
                    pass
                if s in slow_set:
                    s.send(b" ")  # one byte of the unfinished line at a time
            except OSError:
                who = "dribbling" if s in slow_set else "silent"
                note("at the limit", f"{who} closed by the daemon" + (" (told why)" if b"-32006" in open_socks[s] else ""))
                s.close()
                del open_socks[s]
        if not honest_answered:
            honest_tries += 1
            try:
                honest_answered = "result" in call("status")
            except (OSError, ValueError):  # refused at the limit: closed before or after the error line
                pass
        time.sleep(0.25)
    for s in open_socks:
        s.close()
    api1 = call("status")["result"]["api"]
    idle = api1["closed_idle"] - api0["closed_idle"]
    line = api1["closed_unfinished_line"] - api0["closed_unfinished_line"]
    figures = (f"  at the limit: {n_silent} silent + {n_slow} dribbling clients held all {args.max_clients} slots; "
               f"{len(open_socks)} still open after {generous:.0f} s; the honest client "
               + (f"answered on try {honest_tries}" if honest_answered else "never answered")
               + f"; closed_idle +{idle}, closed_unfinished_line +{line}")
    if not honest_answered:
        fails.append("at the limit the honest client was never served")
    if open_socks:
        fails.append(f"{len(open_socks)} slow clients never closed")
    if idle != n_silent or line != n_slow:
        fails.append(f"closed_idle +{idle} (expected {n_silent}), closed_unfinished_line +{line} (expected {n_slow})")
    return figures, fails


limit_figures, limit_fails = at_the_limit()
print(limit_figures)
for kind, what in outcomes.items():
    if kind == "at the limit":
        print(f"  {kind}: " + ", ".join(f"{n} {w}" for w, n in what.items()))

failed = list(errors) + limit_fails
if honest_ok < args.connections // 10:
    failed.append(f"honest client answered {honest_ok} times")
# Under AddressSanitizer freed memory sits in its quarantine (hundreds of MiB by
# design), so VmRSS says nothing about the daemon's own bounds there; every
# other check of this test still holds and runs.
under_asan = "ASAN_OPTIONS" in os.environ
if under_asan:
    print(f"  VmRSS bound not judged under AddressSanitizer (grew {(rss_peak - rss0) / 1024:.1f} MiB)")
if not under_asan and (rss_peak - rss0) / 1024 > args.rss_bound_mb:
    failed.append(f"VmRSS grew {(rss_peak - rss0) / 1024:.1f} MiB, bound {args.rss_bound_mb}")
if w["raw_blocks_shed"] or w["series_points_shed"]:
    failed.append("the writer shed data")
if ing["gaps"] != before["ingest"]["gaps"] or ing["missing_samples"] != before["ingest"]["missing_samples"]:
    failed.append("ingest saw sample-index gaps")
if ing["samples"] <= samples0:
    failed.append("ingest stopped counting samples")
if failed:
    print("FAILED: " + "; ".join(failed))
    sys.exit(1)
