#!/usr/bin/python3
"""Latency probe of the relay benchmark: a packet producer and an HTTP
receiver in one process, so both timestamps come from one clock
(time.perf_counter, monotonic).

* producer: listens on 127.0.0.1:PORT (the daemon's `tcp` input connects
  to it), waits for the connection, lets it settle, then writes one COBS
  frame every 1/RATE s on an absolute schedule (no drift) and notes the
  time just before each write;
* receiver: http.server with HTTP/1.1 keep-alive on 127.0.0.1:HTTP_PORT;
  for each POST it reads the whole body, notes the time, answers 204, and
  looks up the reading ids of the batch.

Latency of a packet = arrival of the request that carries its first
reading - write time of the packet.  The ids of the first readings come
from IDS (NDJSON of the same packets from `tidepost decode`, 4 readings a
packet, in order).

Usage: latency.py PORT HTTP_PORT FRAMES IDS RATE COUNT
Prints "ready" once both sockets listen, then at the end one JSON object:
{"sent", "arrived", "lat_ms": [...], "requests", "per_request": [...]}.
"""

import http.server
import json
import socket
import sys
import threading
import time

SETTLE_S = 1.0   # after the daemon connects, before the first packet
TAIL_S = 3.0     # wait for late arrivals after the last packet


class Probe:
    def __init__(self, first_ids):
        self.first = first_ids      # reading id -> packet index
        self.arrival = {}           # packet index -> perf_counter
        self.per_request = []       # readings in each request
        self.lock = threading.Lock()
        self.done = threading.Event()


def handler_for(probe):
    class Receiver(http.server.BaseHTTPRequestHandler):
        protocol_version = "HTTP/1.1"

        def do_POST(self):
            n = int(self.headers.get("Content-Length", "-1"))
            if n < 0:
                self.send_error(411)
                return
            body = self.rfile.read(n)
            now = time.perf_counter()
            self.send_response(204)
            self.end_headers()
            readings = json.loads(body)["readings"]
            with probe.lock:
                probe.per_request.append(len(readings))
                for r in readings:
                    k = probe.first.get(r.get("id"))
                    if k is not None and k not in probe.arrival:
                        probe.arrival[k] = now
                if len(probe.arrival) == len(probe.first):
                    probe.done.set()

        def log_message(self, fmt, *args):
            pass

    return Receiver


def read_frames(path):
    data = open(path, "rb").read()
    return [f + b"\0" for f in data.split(b"\0") if f]


def read_first_ids(path, count):
    ids = {}
    with open(path, encoding="utf-8") as f:
        for i, line in enumerate(f):
            if i % 4 == 0 and i // 4 < count:
                ids[json.loads(line)["id"]] = i // 4
    return ids


def produce(lsock, frames, rate, count):
    lsock.settimeout(30)
    conn, _ = lsock.accept()
    conn.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
    time.sleep(SETTLE_S)
    written = []
    t0 = time.perf_counter()
    for k in range(count):
        delay = t0 + k / rate - time.perf_counter()
        if delay > 0:
            time.sleep(delay)
        written.append(time.perf_counter())
        conn.sendall(frames[k])
    return conn, written


def main():
    if len(sys.argv) != 7:
        sys.exit("usage: latency.py PORT HTTP_PORT FRAMES IDS RATE COUNT")
    port, hport = int(sys.argv[1]), int(sys.argv[2])
    rate, count = float(sys.argv[5]), int(sys.argv[6])
    frames = read_frames(sys.argv[3])
    if len(frames) < count:
        sys.exit("latency.py: %d frames, %d wanted" % (len(frames), count))
    probe = Probe(read_first_ids(sys.argv[4], count))
    srv = http.server.ThreadingHTTPServer(("127.0.0.1", hport),
                                          handler_for(probe))
    srv.daemon_threads = True
    threading.Thread(target=srv.serve_forever, daemon=True).start()
    lsock = socket.socket()
    lsock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    lsock.bind(("127.0.0.1", port))
    lsock.listen(1)
    print("ready", flush=True)
    conn, written = produce(lsock, frames, rate, count)
    probe.done.wait(TAIL_S)
    with probe.lock:
        lat = [(probe.arrival[k] - written[k]) * 1000.0
               for k in range(count) if k in probe.arrival]
        out = {"sent": count, "arrived": len(lat), "lat_ms": lat,
               "requests": len(probe.per_request),
               "per_request": probe.per_request}
    print(json.dumps(out), flush=True)
    conn.close()
    srv.shutdown()


if __name__ == "__main__":
    main()
