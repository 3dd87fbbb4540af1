#!/usr/bin/env bash
# Every hex frame example in protocol/PROTOCOL.md carries the CRC that an
# independent implementation computes: zlib's crc32 is CRC-32/ISO-HDLC (same
# catalogue parameters), over bytes 2..5+N, sent little-endian. Checksummed
# text-line examples are checked the same way.
set -euo pipefail
doc="$(cd "$(dirname "$0")/../.." && pwd)/protocol/PROTOCOL.md"
/usr/bin/python3 - "$doc" <<'PY'
import re, sys, zlib
text = open(sys.argv[1]).read()
frames = re.findall(r"```frame (\S+)\n(.*?)```", text, re.S)
assert len(frames) >= 6, f"only {len(frames)} frame examples"
for name, body in frames:
    b = bytes(int(t, 16) for t in body.split())
    n = b[4] | b[5] << 8
    assert len(b) == 6 + n + 4, f"{name}: length {len(b)} != 10 + {n}"
    want = zlib.crc32(b[2:6 + n])
    got = int.from_bytes(b[6 + n:], "little")
    assert got == want, f"{name}: CRC {got:08X}, zlib says {want:08X}"
    print(f"{name}: {n}-byte payload, CRC {got:08X} ok")
lines = re.findall(r"```lines \S+\n(.*?)```", text, re.S)
checked = 0
for body in lines:
    for line in body.splitlines():
        m = re.match(r"(.*) \*([0-9A-Fa-f]{8})$", line)
        if m:
            assert zlib.crc32(m.group(1).encode()) == int(m.group(2), 16), line
            checked += 1
assert checked >= 1
print(f"{checked} checksummed line(s) ok")
PY
