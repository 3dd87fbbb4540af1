#!/usr/bin/python3
"""Window-query latency against a running accrued (a benchmark, not a test).

For each span, asks `window` for 1000 points (select "all") at seeded random
positions inside the stored run and times each request from the first byte
sent to the reply's last byte received (the client's JSON parsing is not
counted). Prints one JSON object: per span the p50 and p99 in ms, the number
of queries, and the points each reply carried.

usage: window_latency.py SOCKET RUN_SAMPLES SAMPLE_PERIOD_S [QUERIES_PER_SPAN]
"""
import json
import random
import socket
import sys
import time

SPANS_S = {"1 min": 60, "1 h": 3600, "1 day": 86400, "7 days": 7 * 86400}


def percentile(values, p):
    """Nearest-rank percentile (the textbook definition, no interpolation)."""
    ordered = sorted(values)
    rank = max(1, -(-len(ordered) * p // 100))  # ceil(n * p / 100)
    return ordered[int(rank) - 1]


def main():
    path, run_samples, period_s = sys.argv[1], int(sys.argv[2]), float(sys.argv[3])
    queries = int(sys.argv[4]) if len(sys.argv) > 4 else 200
    rng = random.Random(20261202)
    sock = socket.socket(socket.AF_UNIX, socket.SOCK_STREAM)
    sock.connect(path)
    reader = sock.makefile("rb")
    results = {}
    request_id = 0
    for name, span_s in SPANS_S.items():
        span = int(span_s / period_s)
        if span > run_samples:
            continue
        latencies_ms, points = [], []
        for i in range(queries + 5):  # the first five warm the page cache and are not counted
            start = rng.randrange(0, run_samples - span + 1)
            request_id += 1
            line = json.dumps({"jsonrpc": "2.0", "id": request_id, "method": "window",
                               "params": {"channel": 0, "from": start, "to": start + span - 1,
                                          "max_points": 1000, "select": "all"}}) + "\n"
            t0 = time.perf_counter()
            sock.sendall(line.encode())
            reply = reader.readline()
            t1 = time.perf_counter()
            result = json.loads(reply)
            if "result" not in result:
                raise SystemExit(f"window failed: {reply[:300]!r}")
            if i >= 5:
                latencies_ms.append((t1 - t0) * 1e3)
                points.append(len(result["result"]["points"]))
        results[name] = {"span_s": span_s, "queries": len(latencies_ms),
                         "p50_ms": percentile(latencies_ms, 50), "p99_ms": percentile(latencies_ms, 99),
                         "points_min": min(points), "points_max": max(points)}
    print(json.dumps(results))


if __name__ == "__main__":
    main()
