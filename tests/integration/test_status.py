#!/usr/bin/python3
"""test_status.py - `tidepost status` against a running, a stopped, a dead
and a never-started daemon, the --json form, and the metrics file.

Run: TIDEPOST=build/tidepost /usr/bin/python3 tests/integration/test_status.py

The daemon here is BUILD/tools/status_drive (the real watchdog and status
writer in the real poll loop, fed a readings file) started with argv[0]
"tidepost", or `tidepost run` itself when STATUS_WITH_RUN=1.  Stations,
readings and voltages are invented test data.  Standard library only.
"""
import datetime
import json
import os
import re
import shutil
import signal
import subprocess
import sys
import tempfile
import time
import traceback

TIDEPOST = os.environ.get("TIDEPOST", "build/tidepost")
TOOLS = os.path.join(os.path.dirname(TIDEPOST), "tools")
DRIVE = os.path.join(TOOLS, "status_drive")
TMP = None


def rfc3339(t):
    return datetime.datetime.fromtimestamp(
        t, datetime.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def write_config(d, every_s=1):
    cfg = {
        "layouts": [{"name": "a", "fields": [
            {"name": "ph", "type": "u8"},
            {"name": "battery", "type": "u16"}]}],
        "stations": {
            "7": {"name": "rf2", "title": "Reef flat, south channel",
                  "expect_every_s": 900,
                  "battery": {"field": "battery", "warn_v": 10.5,
                              "cutoff_v": 6.0, "median_n": 3}},
            "8": {"name": "rf3"}},
        "outputs": [{"kind": "file", "name": "archive",
                     "path": os.path.join(d, "archive.ndjson")}],
        "state_dir": d,
        "status": {"path": os.path.join(d, "status.json"),
                   "metrics_path": os.path.join(d, "metrics.prom"),
                   "every_s": every_s},
    }
    path = os.path.join(d, "tidepost.json")
    with open(path, "w") as f:
        json.dump(cfg, f)
    return path


def write_readings(d, n=6, battery=10.2):
    """rf2, one reading per 15 min ending now; battery low on purpose."""
    now = int(time.time())
    path = os.path.join(d, "readings.ndjson")
    with open(path, "w") as f:
        for i in range(n):
            t = now - (n - 1 - i) * 900
            f.write(json.dumps({
                "id": "rf2-%d-%d-0" % (t, i), "station": "rf2", "seq": i,
                "layout": "a", "time": rfc3339(t), "received": rfc3339(t),
                "values": {"ph": 8.01, "battery": battery},
                "flags": {"ph": 1, "battery": 1}}) + "\n")
    return path


def status(cfg, *more):
    p = subprocess.run([TIDEPOST, "status", "-c", cfg] + list(more),
                       capture_output=True, timeout=20)
    return p.returncode, p.stdout.decode(), p.stderr.decode()


def status_json(cfg):
    rc, out, err = status(cfg, "--json")
    return rc, json.loads(out)


class Daemon:
    """status_drive started as "tidepost"."""

    def __init__(self, cfg, readings=None):
        args = ["tidepost", "-c", cfg] + (["-r", readings] if readings
                                          else [])
        self.p = subprocess.Popen(args, executable=DRIVE,
                                  stdout=subprocess.PIPE,
                                  stderr=subprocess.PIPE)
        line = self.p.stdout.readline().decode().strip()
        assert line == "ready", "driver did not start: %r %r" % (
            line, self.p.stderr.read()[:2000])

    def stop(self, sig=signal.SIGTERM):
        self.p.send_signal(sig)
        self.p.wait(10)
        self.p.stdout.close()
        self.p.stderr.close()


def fresh():
    d = tempfile.mkdtemp(prefix="st-", dir=TMP)
    return d, write_config(d)


def check(cond, what):
    if not cond:
        raise AssertionError(what)


# ---- tests ----------------------------------------------------------------

def test_never_started():
    d, cfg = fresh()
    rc, out, err = status(cfg)
    check(rc == 1, "exit 1 when never started, got %d" % rc)
    check("tidepost: absent" in out, out)
    check("has not run with this config" in out, out)
    rc, j = status_json(cfg)
    check(rc == 1 and j["running"] is False and j["verdict"] == "absent",
          j)
    check(j["status"] is None, j)


def test_running():
    d, cfg = fresh()
    dm = Daemon(cfg, write_readings(d))
    try:
        rc, out, err = status(cfg)
        check(rc == 0, "exit 0 while running, got %d: %s %s" % (rc, out,
                                                                 err))
        check(out.startswith("tidepost: running (pid %d" % dm.p.pid), out)
        check(re.search(r"^rf2\s+\d{4}-\d\d-\d\dT", out, re.M), out)
        check("ph=8.01 [1]" in out and "battery=10.2 [1]" in out, out)
        check("battery_low" in out, "open alert listed: " + out)
        check(re.search(r"^archive\s+file", out, re.M), out)
        rc, j = status_json(cfg)
        check(rc == 0 and j["running"] and j["verdict"] == "running", j)
        st = j["status"]
        check(st["pid"] == dm.p.pid, st["pid"])
        rf2 = [s for s in st["stations"] if s["name"] == "rf2"][0]
        check(rf2["values"]["battery"] == 10.2, rf2)
        check(rf2["flags"]["ph"] == 1, rf2)
        check(abs(rf2["battery"]["now_v"] - 10.2) < 1e-9, rf2)
        check(rf2["title"] == "Reef flat, south channel", rf2)
        rf3 = [s for s in st["stations"] if s["name"] == "rf3"][0]
        check(rf3["last_time"] is None, rf3)
        conds = sorted(a["condition"] for a in st["alerts"])
        check(conds == ["battery_low"], conds)
        check(st["alerts"][0]["station"] == "rf2", st["alerts"])
        # rewritten every every_s (1 s): written moves on
        w0 = st["written_s"]
        time.sleep(2.2)
        _, j2 = status_json(cfg)
        check(j2["status"]["written_s"] > w0, "file rewritten")
    finally:
        dm.stop()


METRIC = re.compile(r'^[a-zA-Z_:][a-zA-Z0-9_:]*(\{([a-zA-Z_][a-zA-Z0-9_]*='
                    r'"(\\.|[^"\\])*",?)*\})? -?[0-9.e+-]+(\s\d+)?$')


def test_metrics_file():
    """Prometheus text exposition 0.0.4: # HELP / # TYPE before a
    family's samples, each family once, samples well formed."""
    d, cfg = fresh()
    dm = Daemon(cfg, write_readings(d))
    try:
        time.sleep(1.5)
        with open(os.path.join(d, "metrics.prom")) as f:
            text = f.read()
    finally:
        dm.stop()
    typed, seen = set(), {}
    for line in text.splitlines():
        if line.startswith("# TYPE "):
            name = line.split()[2]
            check(name not in typed, "family typed twice: " + name)
            typed.add(name)
        elif line.startswith("# HELP "):
            continue
        else:
            check(METRIC.match(line), "bad sample line: %r" % line)
            name = re.split(r"[{ ]", line, maxsplit=1)[0]
            check(name in typed, "sample before its TYPE: " + name)
            seen[line.split(" ")[0]] = float(line.split(" ")[1])
    age = seen.get('tidepost_station_last_reading_age_seconds'
                   '{station="rf2"}')
    check(age is not None and 0 <= age < 30, "age of rf2: %r" % age)
    check(seen.get('tidepost_station_battery_volts{station="rf2"}') ==
          10.2, seen)
    check(seen.get('tidepost_alerts_open{condition="battery_low"}') == 1,
          seen)
    check(seen.get("tidepost_up") == 1, seen)
    check('tidepost_station_last_reading_age_seconds{station="rf3"}'
          not in seen, "no age for a station never heard")


def test_stopped():
    d, cfg = fresh()
    dm = Daemon(cfg, write_readings(d))
    dm.stop(signal.SIGTERM)
    rc, out, err = status(cfg)
    check(rc == 1, "exit 1 when stopped, got %d" % rc)
    check("tidepost: stopped" in out and "the daemon stopped at" in out,
          out)
    check("battery_low" in out, "last figures still shown: " + out)
    rc, j = status_json(cfg)
    check(j["verdict"] == "stopped" and j["status"]["state"] == "stopped",
          j)
    with open(os.path.join(d, "metrics.prom")) as f:
        check("tidepost_up 0" in f.read(), "metrics say down")


def test_dead():
    d, cfg = fresh()
    dm = Daemon(cfg, write_readings(d))
    dm.stop(signal.SIGKILL)
    rc, out, err = status(cfg)
    check(rc == 1, "exit 1 when dead, got %d" % rc)
    check("tidepost: dead" in out and "is gone" in out, out)
    rc, j = status_json(cfg)
    check(j["verdict"] == "dead" and j["running"] is False, j)


def forge(d, pid, proc_start, written_s):
    doc = {"tidepost_status": 1, "pid": pid, "proc_start": proc_start,
           "started": rfc3339(written_s), "written": rfc3339(written_s),
           "written_s": written_s, "every_s": 1, "state": "running",
           "stations": [], "outputs": [], "alerts": []}
    with open(os.path.join(d, "status.json"), "w") as f:
        json.dump(doc, f)


def proc_start(pid):
    with open("/proc/%d/stat" % pid) as f:
        return int(f.read().rsplit(")", 1)[1].split()[19])


def test_stale_and_replaced():
    """A live "tidepost" whose file stopped moving: stale.  A live pid
    that is another program, or another process start: replaced."""
    d, cfg = fresh()
    sl = subprocess.Popen(["tidepost", "60"], executable="/bin/sleep")
    try:
        forge(d, sl.pid, proc_start(sl.pid), int(time.time()) - 100)
        rc, j = status_json(cfg)
        check(rc == 1 and j["verdict"] == "stale", j)
        forge(d, sl.pid, proc_start(sl.pid), int(time.time()))
        rc, j = status_json(cfg)
        check(rc == 0 and j["verdict"] == "running", j)
        forge(d, sl.pid, proc_start(sl.pid) + 1, int(time.time()))
        rc, j = status_json(cfg)
        check(j["verdict"] == "replaced", j)
        forge(d, os.getpid(), proc_start(os.getpid()), int(time.time()))
        rc, j = status_json(cfg)
        check(j["verdict"] == "replaced", "python is not tidepost: %r" % j)
    finally:
        sl.kill()
        sl.wait()


def test_unreadable():
    d, cfg = fresh()
    with open(os.path.join(d, "status.json"), "w") as f:
        f.write('{"half a file')
    rc, out, err = status(cfg)
    check(rc == 1 and "unreadable" in out, out)
    rc, j = status_json(cfg)
    check(j["verdict"] == "unreadable" and j["status"] is None, j)


def test_usage():
    p = subprocess.run([TIDEPOST, "status"], capture_output=True)
    check(p.returncode == 2 and b"-c CONFIG" in p.stderr, p.stderr)
    p = subprocess.run([TIDEPOST, "status", "-c", "/nonexistent.json"],
                       capture_output=True)
    check(p.returncode == 2, p.returncode)
    p = subprocess.run([TIDEPOST, "help", "status"], capture_output=True)
    check(p.returncode == 0 and b"--json" in p.stdout, p.stdout)


def main():
    global TMP
    TMP = tempfile.mkdtemp(prefix="tp-status-")
    tests = [test_never_started, test_running, test_metrics_file,
             test_stopped, test_dead, test_stale_and_replaced,
             test_unreadable, test_usage]
    passed = failed = 0
    try:
        for t in tests:
            try:
                t()
                passed += 1
                print("ok   %s" % t.__name__)
            except Exception:
                failed += 1
                print("FAIL %s" % t.__name__)
                traceback.print_exc()
    finally:
        shutil.rmtree(TMP, ignore_errors=True)
    print("%d passed, %d failed" % (passed, failed))
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()
