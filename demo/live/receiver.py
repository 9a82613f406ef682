#!/usr/bin/python3
"""receiver.py - a small local receiver for the live demo (standard
library http.server).  The data it receives is INVENTED (demo station).

serve: listens on 127.0.0.1 (port 0 by default; prints the port and
writes it to --port-file), accepts
  POST /ingest  application/json {"readings": [...], ...} (any path but
                /alerts is taken as readings)
  POST /alerts  one alert event (a JSON object)
prints one short line per request, answers 204, and appends what it got to
--records (NDJSON: one line per reading: id, station, time, arrived, and
a digest of the reading's JSON so duplicates can be compared) and
--alerts (one line per alert event, with the time it arrived).  Each
request's lines are written and flushed before the answer, so whatever
the daemon sees acknowledged is on record; a receiver stopped between the
two gets the same batch again: a duplicate with the same id, which the
summary allows.

--forget N (for checking the demo itself): the N-th readings request is
answered 204 but not recorded, as a receiver that loses data would; the
live demo must then fail with lost > 0.

summary: reads --records, --alerts and the station's log (--station-log)
and prints received readings, unique ids, duplicates, latency (packet
written at the station -> request received here) p50 / p99, and alerts.

Usage: receiver.py serve --records F --alerts F [--port N] [--port-file F]
                         [--forget N]
       receiver.py summary --records F --station-log F [--alerts F]
"""

import argparse
import hashlib
import http.server
import json
import os
import signal
import sys
import threading
import time


class Handler(http.server.BaseHTTPRequestHandler):
    server_version = "demo-receiver/1"

    def log_message(self, fmt, *args):  # one line per batch instead
        pass

    def do_POST(self):
        n = int(self.headers.get("Content-Length") or 0)
        body = self.rfile.read(n)
        arrived = time.time()
        try:
            doc = json.loads(body)
        except ValueError:
            self.answer(400)
            print("receiver: %s: not JSON (%d bytes)" % (self.path, n),
                  flush=True)
            return
        if self.path.rstrip("/").endswith("/alerts"):
            self.server.keep_alert(doc, arrived)
        else:
            self.server.keep_batch(doc, arrived,
                                   self.headers.get("Idempotency-Key"))
        self.answer(204)

    def answer(self, code):
        self.send_response(code)
        self.send_header("Content-Length", "0")
        self.end_headers()


class Server(http.server.ThreadingHTTPServer):
    daemon_threads = True
    allow_reuse_address = True

    def __init__(self, addr, records, alerts, forget=0):
        super().__init__(addr, Handler)
        self.lock = threading.Lock()
        self.forget, self.batches = forget, 0
        self.records = open(records, "a")
        self.alerts = open(alerts, "a")

    def keep_batch(self, doc, arrived, key):
        rs = doc.get("readings", []) if isinstance(doc, dict) else []
        lines = []
        for r in rs:
            text = json.dumps(r, sort_keys=True)
            lines.append(json.dumps({
                "id": r.get("id"), "station": r.get("station"),
                "time": r.get("time"), "arrived": arrived, "key": key,
                "digest": hashlib.sha256(text.encode()).hexdigest()[:16]}))
        with self.lock:
            self.batches += 1
            if self.batches == self.forget:
                print("receiver: FORGETTING this batch on purpose (--forget)",
                      flush=True)
                return
            self.records.write("".join(x + "\n" for x in lines))
            self.records.flush()
        by = {}
        for r in rs:
            by.setdefault(r.get("station"), []).append(r.get("time"))
        for st, times in by.items():
            ts = sorted(t for t in times if t)
            print("receiver: %-8s %3d readings %s .. %s"
                  % (st, len(times), ts[0] if ts else "-",
                     ts[-1] if ts else "-"), flush=True)

    def keep_alert(self, doc, arrived):
        with self.lock:
            self.alerts.write(json.dumps({"arrived": arrived,
                                          "alert": doc}) + "\n")
            self.alerts.flush()
        print("receiver: ALERT %s %s %s: %s"
              % (doc.get("event"), doc.get("condition"),
                 doc.get("station") or doc.get("output") or "-",
                 doc.get("message")), flush=True)


def serve(a):
    srv = Server(("127.0.0.1", a.port), a.records, a.alerts, a.forget)
    port = srv.server_address[1]
    if a.port_file:
        tmp = a.port_file + ".tmp"
        with open(tmp, "w") as f:
            f.write("%d\n" % port)
        os.replace(tmp, a.port_file)
    print("receiver: listening on 127.0.0.1:%d" % port, flush=True)

    def stop(signum, frame):
        threading.Thread(target=srv.shutdown, daemon=True).start()
    signal.signal(signal.SIGTERM, stop)
    signal.signal(signal.SIGINT, stop)
    srv.serve_forever(poll_interval=0.1)
    srv.server_close()
    print("receiver: stopped", flush=True)
    return 0


# ---- the summary -------------------------------------------------------

def read_ndjson(path):
    out = []
    if path and os.path.exists(path):
        with open(path) as f:
            for line in f:
                if line.strip():
                    out.append(json.loads(line))
    return out


def percentile(xs, q):
    """Nearest-rank percentile (q in 0..100) of a non-empty list."""
    s = sorted(xs)
    k = max(0, min(len(s) - 1, int(-(-q * len(s) // 100)) - 1))
    return s[k]


def figures(records, station_log):
    """The summary as a dict (run_live.py asserts on it)."""
    written = {}
    for e in station_log:
        if e.get("event") == "packet" and e.get("good"):
            for rid in e["ids"]:
                written[rid] = e["wall"]
    first, digests, dup_conflict = {}, {}, []
    for r in records:
        rid = r["id"]
        if rid in digests and digests[rid] != r["digest"]:
            dup_conflict.append(rid)
        digests.setdefault(rid, r["digest"])
        first.setdefault(rid, r["arrived"])
    lat = [first[i] - written[i] for i in first if i in written]
    return {
        "received": len(records), "unique": len(first),
        "duplicates": len(records) - len(first),
        "dup_conflicts": dup_conflict,
        "unexpected": sorted(i for i in first if i not in written),
        "latency_p50": percentile(lat, 50) if lat else None,
        "latency_p99": percentile(lat, 99) if lat else None,
        "latency_max": max(lat) if lat else None,
    }


def summary(a):
    f = figures(read_ndjson(a.records), read_ndjson(a.station_log))
    print("receiver: %d readings received, %d unique ids, %d duplicates"
          " (same id, same content)" % (f["received"], f["unique"],
                                        f["duplicates"]))
    if f["latency_p50"] is not None:
        print("receiver: latency packet written -> received: p50 %.3f s,"
              " p99 %.3f s, max %.3f s" % (f["latency_p50"],
                                          f["latency_p99"],
                                          f["latency_max"]))
    for al in read_ndjson(a.alerts):
        d = al["alert"]
        print("receiver: alert %-8s %-16s %s" % (d.get("event"),
              d.get("condition"), d.get("message")))
    if a.json:
        print(json.dumps(f, sort_keys=True))
    return 1 if f["dup_conflicts"] or f["unexpected"] else 0


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    sub = ap.add_subparsers(dest="cmd", required=True)
    s = sub.add_parser("serve")
    s.add_argument("--port", type=int, default=0)
    s.add_argument("--port-file")
    s.add_argument("--records", required=True)
    s.add_argument("--alerts", required=True)
    s.add_argument("--forget", type=int, default=0)
    m = sub.add_parser("summary")
    m.add_argument("--records", required=True)
    m.add_argument("--station-log", required=True)
    m.add_argument("--alerts")
    m.add_argument("--json", action="store_true")
    a = ap.parse_args()
    return serve(a) if a.cmd == "serve" else summary(a)


if __name__ == "__main__":
    sys.exit(main())
