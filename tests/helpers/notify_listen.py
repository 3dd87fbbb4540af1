#!/usr/bin/python3
# A stand-in for systemd's notify socket: binds an AF_UNIX datagram socket at
# argv[1] and appends every message it receives to argv[2], one line per
# field, each line prefixed with a receive sequence number. Runs until killed.
import os, socket, sys

path, out = sys.argv[1], sys.argv[2]
s = socket.socket(socket.AF_UNIX, socket.SOCK_DGRAM)
s.bind(path)
n = 0
with open(out, "a", buffering=1) as f:
    while True:
        data = s.recv(65536)
        n += 1
        for field in data.decode("utf-8", "replace").split("\n"):
            if field:
                f.write(f"{n} {field}\n")
