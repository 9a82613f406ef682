#!/usr/bin/python3
"""A straightforward Python relay, the baseline of the relay benchmark.

Written the way a practitioner would write a first relay: read readings
(NDJSON, one per line, as `tidepost decode` prints them), and POST each one
as JSON with urllib.request, one request per reading.  urllib opens a new
connection for every request (it sends `Connection: close`); a non-2xx
answer stops the run.  There is no ring, no fsync and no retry: it only
relays, so the comparison flatters it.

Usage: pyrelay.py URL FILE [N]     relay the first N readings (default all)
Prints one line: "<readings posted> <seconds>" (the loop only, after the
file is read).
"""

import itertools
import json
import sys
import time
import urllib.request


def post(url, reading):
    body = json.dumps(reading).encode("utf-8")
    req = urllib.request.Request(
        url, data=body, method="POST",
        headers={"Content-Type": "application/json"})
    with urllib.request.urlopen(req, timeout=10) as resp:
        if resp.status // 100 != 2:
            raise RuntimeError("POST %s: HTTP %d" % (url, resp.status))


def main():
    if len(sys.argv) not in (3, 4):
        sys.exit("usage: pyrelay.py URL FILE [N]")
    url, path = sys.argv[1], sys.argv[2]
    limit = int(sys.argv[3]) if len(sys.argv) == 4 else None
    with open(path, encoding="utf-8") as f:
        lines = [line.rstrip("\n") for line in itertools.islice(f, limit)]
    t0 = time.perf_counter()
    n = 0
    for line in lines:
        if line:
            post(url, json.loads(line))
            n += 1
    print("%d %.4f" % (n, time.perf_counter() - t0))


if __name__ == "__main__":
    main()
