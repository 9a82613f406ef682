#!/usr/bin/python3
"""test_killloop.py - RELIABILITY.md T5: the real daemon killed with
SIGKILL at random moments while it ingests and posts, restarted, again
and again; at the end no accepted reading is lost.

Run: TIDEPOST=build/tidepost /usr/bin/python3 tests/integration/test_killloop.py
     TP_KILL_ROUNDS=N (default 100), TP_SEED=S to replay a run.

A producer thread drops message files into the spool folder (written as
.NAME.tmp, then renamed) at about 40 files (160 readings) a second.  The
HTTP receiver (httpserver.py) answers 204 after a random 0-0.5 s delay.
Each round starts the daemon, kills it at a uniformly random moment 0-3 s
after the start (inside a pwrite, fdatasync, POST, cursor write or
rename, wherever it happens to be), and starts the next round.  At the
end the producer stops and one last daemon drains everything and stops
with SIGTERM.

"Accepted" = the file was moved to done/ (the daemon moves a file only
after the ring commit holding its readings returned).  Checks: every
reading of every accepted file reached the server (lost = 0), duplicates
only under the same id with the same content, no file left in the spool,
no temp files in the state folder, the last daemon's fd count small.
Reported: rounds, readings, lost, duplicates (and the most for one kill),
start-to-ready and ring recovery time p50/p99.  Note (RELIABILITY.md): a
kill -9 cannot catch a missing fsync; the ring crash simulator does.
Packets and stations are invented test data.
"""
import os
import random
import re
import signal
import sys
import threading
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

import test_run as tr  # noqa: E402
from httpserver import ScriptedServer  # noqa: E402

ROUNDS = int(os.environ.get("TP_KILL_ROUNDS", "100"))
SEED = int(os.environ.get("TP_SEED", str(int(time.time()))))
FILES_PER_S = 40


class SpoolProducer(threading.Thread):
    def __init__(self, spool):
        super().__init__(daemon=True)
        self.spool = spool
        self.ids = {}          # file name -> reading ids
        self.stop_ev = threading.Event()
        self.start()

    def run(self):
        seq = 0
        while not self.stop_ev.is_set():
            seq += 1
            pk, ids = tr.reef(seq)
            name = "m%06d.sbd" % seq
            tmp = os.path.join(self.spool, "." + name + ".tmp")
            with open(tmp, "wb") as f:
                f.write(pk)
                f.flush()
                os.fsync(f.fileno())
            self.ids[name] = ids
            os.rename(tmp, os.path.join(self.spool, name))
            time.sleep(1.0 / FILES_PER_S)

    def stop(self):
        self.stop_ev.set()
        self.join()


def pct(xs, p):
    xs = sorted(xs)
    if not xs:
        return float("nan")
    return xs[min(len(xs) - 1, int(round(p / 100.0 * (len(xs) - 1))))]


def wait_ready(d, t0, timeout=10):
    """Seconds from spawn to the daemon's "run: started" line, and the
    ring recovery time it logged (ms)."""
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        text = d.text()
        if "run: started" in text.rsplit("ring: ", 1)[-1]:
            m = re.findall(r"recovery (\d+) ms", text)
            return time.monotonic() - t0, int(m[-1]) if m else 0
        if d.p.poll() is not None:
            raise AssertionError("daemon exited %d:\n%s" %
                                 (d.p.returncode, text[-2000:]))
        time.sleep(0.002)
    raise AssertionError("daemon not ready in %d s" % timeout)


def test_kill_loop():
    rnd = random.Random(SEED)
    srv = ScriptedServer(default={"status": 204, "delay_s": [0, 0.5]})
    srv.start()
    s = tr.Setup([{"kind": "spool", "dir": "spool"}],
                 [tr.http_output(srv.url, batch=100)], ring_mb=4)
    spool = os.path.join(s.dir, "spool")
    os.makedirs(spool)
    prod = SpoolProducer(spool)
    ready, recov, dup_per_kill = [], [], []
    got = set()
    try:
        for r in range(ROUNDS):
            before = len(srv.deliveries)
            log = os.path.join(s.dir, "daemon.log")
            if os.path.exists(log):
                os.unlink(log)
            t0 = time.monotonic()
            d = tr.Daemon(s)
            rt, rc_ms = wait_ready(d, t0)
            ready.append(rt)
            recov.append(rc_ms)
            time.sleep(max(0.0, rnd.uniform(0, 3) - rt))
            d.p.send_signal(signal.SIGKILL)
            d.p.wait()
            d.log.close()
            with srv.lock:
                dels = srv.deliveries[before:]
            n_dup = 0
            for x in dels:
                n_dup += x[0] in got
                got.add(x[0])
            dup_per_kill.append(n_dup)
        prod.stop()
        d = tr.Daemon(s)
        done = os.path.join(spool, "done")
        tr.wait_for(lambda: not [n for n in os.listdir(spool)
                                 if n.endswith(".sbd")],
                    timeout=60, what="spool emptied")
        accepted = sorted(os.listdir(done))
        want = [i for n in accepted for i in prod.ids[n]]
        tr.wait_for(lambda: set(want) <= srv.delivered_ids(), timeout=60,
                    what="everything delivered")
        nfd = len(os.listdir("/proc/%d/fd" % d.p.pid))
        tr.eq(d.stop(), 0, "last stop")
        rep = srv.check_delivery(want)
        stray = [n for n in os.listdir(s.state) if n.endswith(".tmp")]
        print("     rounds %d, seed %d, files %d, readings %d, lost %d, "
              "duplicates %d (%.2f%%), most duplicates in one round %d"
              % (ROUNDS, SEED, len(accepted), len(want), len(rep["lost"]),
                 rep["deliveries"] - rep["unique"],
                 100.0 * (rep["deliveries"] - rep["unique"]) /
                 max(1, rep["unique"]), max(dup_per_kill or [0])))
        print("     start to ready p50 %.1f ms, p99 %.1f ms; ring recovery "
              "p50 %d ms, p99 %d ms; fds %d" %
              (1000 * pct(ready, 50), 1000 * pct(ready, 99),
               pct(recov, 50), pct(recov, 99), nfd))
        tr.eq(rep["lost"], [], "lost")
        tr.eq(rep["phantom"], [], "phantom readings")
        tr.eq(rep["id_reuse"], type(rep["id_reuse"])(), "id reuse")
        tr.eq(rep["id_changed"], type(rep["id_changed"])(), "id changed")
        tr.eq(len(accepted), len(prod.ids), "every file accepted")
        tr.eq(stray, [], "temp files")
        assert nfd < 24, "%d fds open" % nfd
    finally:
        prod.stop_ev.set()
        srv.stop()
        s.cleanup()


if __name__ == "__main__":
    tr.Runner().run([test_kill_loop])
