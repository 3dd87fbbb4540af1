#!/usr/bin/python3
"""The peer a lab would otherwise write: read the board's byte stream, check
each frame's CRC, and insert one row per sample with Python's standard sqlite3
module, committing once per frame. No drift removal, no reset stitching.
Used only by tools/bench/run.sh, for comparison."""
import sqlite3, struct, sys, time, zlib

def main(device, db_path, expected_samples):
    con = sqlite3.connect(db_path)
    con.execute("PRAGMA journal_mode=WAL")
    con.execute("CREATE TABLE IF NOT EXISTS sample (idx INTEGER PRIMARY KEY, code INTEGER, status INTEGER)")
    buf = bytearray()
    seen = 0
    t0 = time.monotonic()
    with open(device, "rb", buffering=0) as f:
        while seen < expected_samples:
            chunk = f.read(65536)
            if not chunk:
                break
            buf += chunk
            while True:
                at = buf.find(b"\xac\xc5")
                if at < 0:
                    del buf[:-1]
                    break
                if at:
                    del buf[:at]
                if len(buf) < 6:
                    break
                n = buf[4] | (buf[5] << 8)
                if len(buf) < 10 + n:
                    break
                frame = bytes(buf[:10 + n]); del buf[:10 + n]
                if zlib.crc32(frame[2:6 + n]) != struct.unpack_from("<I", frame, 6 + n)[0]:
                    continue
                if frame[3] != 0x02:
                    continue
                first, channels, status, count = struct.unpack_from("<QBBH", frame, 6)
                rows = []
                p = 18
                for k in range(count * channels):
                    v = frame[p] | (frame[p + 1] << 8) | (frame[p + 2] << 16)
                    if v & 0x800000:
                        v -= 1 << 24
                    rows.append((first + k, v, status))
                    p += 3
                con.executemany("INSERT OR REPLACE INTO sample VALUES (?,?,?)", rows)
                con.commit()
                seen += len(rows)
    elapsed = time.monotonic() - t0
    print(f"{seen} {elapsed:.3f}")

if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2], int(sys.argv[3]))
