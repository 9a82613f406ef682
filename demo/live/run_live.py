#!/usr/bin/python3
"""run_live.py - the live part of the demo: the daemon doing its main job.

INVENTED DEMO SCENARIO: the stations (23 "qr-flat", 24 "qr-gate" on the
made-up Quillet Reef), their packets and values are all invented.

  station.py (TCP, COBS frames, 1 packet = 1 simulated hour every 0.15 s)
      -> tidepost run -c BUILD/demo/live/live.json --foreground
           -> http output -> receiver.py (127.0.0.1, stopped ~10 s, then
                             restarted on the same port: backlog drains)
           -> file output -> BUILD/demo/live/readings.ndjson
           -> alerts      -> receiver.py /alerts and alert-log.sh

Steps: cross-check the station's encoder with `tidepost encode`; start
the receiver and the station (ports chosen by the kernel); write the
config from the template demo/live/live.json and `tidepost check` it;
start the daemon; 3 s after it connects stop the receiver, 10 s later
start it again on the same port; wait for the station to finish (it goes
silent for 6 s on the way), then until every accepted reading has
reached the receiver; take `tidepost status`; SIGTERM the daemon; print
the summary and the status.  Ends by itself in about 35 s.

Exit status 0 only when: every reading the daemon accepted (file output)
reached the receiver (lost = 0), the file output holds exactly the
readings of the good packets the station wrote, duplicates at the
receiver carry the same content under the same id, the corrupted frame
gave no reading, the backlog of the outage drained, and the daemon
stopped with status 0 on SIGTERM, and `tidepost status` next to it
exited 0.  The watchdog's alerts are checked when the daemon sends
alerts at all (a daemon without them is reported, not failed): silent
raised and cleared for qr-flat, battery_forecast raised, its cut-off
time within 1 h and its slope within 10 % of the invented curve.

Usage: run_live.py [BUILD] [--forget-batch N]
  (default build; outputs in BUILD/demo/live).  --forget-batch N makes the
  first receiver drop the N-th batch after answering 204: a check of this
  script's loss detection, which must then exit 1.
"""

import json
import os
import shutil
import signal
import subprocess
import sys
import time
from datetime import datetime, timezone

HERE = os.path.dirname(os.path.abspath(__file__))
DEMO = os.path.dirname(HERE)
PY = sys.executable or "/usr/bin/python3"
sys.path.insert(0, HERE)

import receiver  # noqa: E402  (its summary figures)
import station  # noqa: E402  (the invented battery curve)

INTERVAL = 0.15      # real seconds per packet (= 1 simulated hour)
COUNT = 160          # qr-flat packets in the station's schedule
SECOND_EVERY = 25    # a qr-gate packet every this many
CORRUPT_AT = 42      # this qr-flat packet goes out with a bad CRC
SILENCE_AT, SILENCE_N = 110, 40   # packets lost on the radio (6 s)
OUTAGE_AT, OUTAGE_S = 3.0, 10.0   # receiver stopped, after connecting
DRAIN_TIMEOUT = 30.0
CUTOFF_V = 6.0       # stations.23.battery.cutoff_v in live.json
# The invented pack reaches the cut-off at this packet time (station.py:
# BATT0 - BATT_PER_H * hours); the battery_forecast alert must name a
# time within FORECAST_TOL_S of it and a slope within 10 % of the truth.
# The station stamps its one battery value on all four 15-minute records
# of a packet, so a fit over reading times sees the fall ~22 min late.
TRUE_CUTOFF_S = station.START + (station.BATT0 - CUTOFF_V) \
    / station.BATT_PER_H * 3600
TRUE_RATE = -station.BATT_PER_H * 24
FORECAST_TOL_S = 3600


def say(msg):
    print("live: " + msg, flush=True)


def read_ndjson(path):
    return receiver.read_ndjson(path)


def wait_for(cond, timeout, what):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        v = cond()
        if v:
            return v
        time.sleep(0.05)
    raise RuntimeError("timed out after %g s waiting for %s" % (timeout,
                                                                what))


class Proc:
    """A child process with its output in a log file."""

    def __init__(self, name, argv, log):
        self.name, self.log_path = name, log
        self.log = open(log, "ab")
        self.p = subprocess.Popen(argv, stdin=subprocess.DEVNULL,
                                  stdout=self.log, stderr=self.log)

    def stop(self, timeout=15):
        if self.p.poll() is None:
            self.p.send_signal(signal.SIGTERM)
        try:
            rc = self.p.wait(timeout)
        except subprocess.TimeoutExpired:
            self.p.kill()
            self.p.wait()
            rc = None
        self.log.close()
        return rc


class Live:
    def __init__(self, build, forget=0):
        self.build, self.forget = build, forget
        self.tp = os.path.join(build, "tidepost")
        self.out = os.path.abspath(os.path.join(build, "demo", "live"))
        self.p = {k: os.path.join(self.out, v) for k, v in {
            "config": "live.json", "station_log": "station.ndjson",
            "records": "received.ndjson", "alerts": "alerts-http.ndjson",
            "alerts_exec": "alerts-exec.ndjson", "port": "receiver.port",
            "file": "readings.ndjson", "daemon": "daemon.log",
            "receiver_out": "receiver.log", "station_out": "station.log",
            "status": "status.txt"}.items()}
        self.procs = []
        self.rx = None
        self.rx_port = None

    # -- pieces ---------------------------------------------------------
    def start_receiver(self, port=0):
        if os.path.exists(self.p["port"]):
            os.unlink(self.p["port"])
        self.rx = Proc("receiver", [
            PY, os.path.join(HERE, "receiver.py"), "serve",
            "--port", str(port), "--port-file", self.p["port"],
            "--records", self.p["records"], "--alerts", self.p["alerts"],
            "--forget", str(self.forget if port == 0 else 0)],
            self.p["receiver_out"])
        wait_for(lambda: os.path.exists(self.p["port"]) or
                 self.rx.p.poll() is not None, 10, "the receiver")
        if self.rx.p.poll() is not None:
            raise RuntimeError("receiver did not start (see %s)"
                               % self.p["receiver_out"])
        with open(self.p["port"]) as f:
            return int(f.read())

    def station_events(self, kind=None):
        ev = read_ndjson(self.p["station_log"])
        return [e for e in ev if kind is None or e["event"] == kind]

    def start_station(self):
        st = Proc("station", [
            PY, os.path.join(HERE, "station.py"),
            "--log", self.p["station_log"], "--interval", str(INTERVAL),
            "--count", str(COUNT), "--second-every", str(SECOND_EVERY),
            "--corrupt-at", str(CORRUPT_AT), "--silence-at", str(SILENCE_AT),
            "--silence-n", str(SILENCE_N)], self.p["station_out"])
        self.procs.append(st)
        ev = wait_for(lambda: self.station_events("listening") or
                      st.p.poll() is not None, 10, "the station")
        if st.p.poll() is not None:
            raise RuntimeError("station did not start (see %s)"
                               % self.p["station_out"])
        return st, ev[0]["port"]

    def write_config(self, station_port):
        with open(os.path.join(HERE, "live.json")) as f:
            text = f.read()

        def esc(s):
            return json.dumps(s)[1:-1]
        text = text.replace("@DEMO@", esc(DEMO)).replace("@OUT@",
                                                         esc(self.out))
        text = text.replace('"@STATION_PORT@"', str(station_port))
        text = text.replace("@RECEIVER_PORT@", str(self.rx_port))
        with open(self.p["config"], "w") as f:
            f.write(text)
        r = subprocess.run([self.tp, "check", "-c", self.p["config"]],
                           stdout=subprocess.PIPE, stderr=subprocess.STDOUT,
                           timeout=30)
        if r.returncode != 0:
            raise RuntimeError("tidepost check failed:\n"
                               + r.stdout.decode(errors="replace"))

    def status(self):
        r = subprocess.run([self.tp, "status", "-c", self.p["config"]],
                           stdout=subprocess.PIPE, stderr=subprocess.STDOUT,
                           timeout=30)
        text = r.stdout.decode(errors="replace")
        with open(self.p["status"], "w") as f:
            f.write(text)
        return r.returncode, text

    # -- the run ----------------------------------------------------------
    def run(self):
        shutil.rmtree(self.out, ignore_errors=True)
        os.makedirs(self.out)
        r = subprocess.run([PY, os.path.join(HERE, "station.py"),
                            "--selftest", self.tp,
                            os.path.join(DEMO, "layouts", "quillet-v1.json")],
                           stdout=subprocess.PIPE, stderr=subprocess.STDOUT,
                           timeout=60)
        sys.stdout.write("live: " + r.stdout.decode(errors="replace"))
        if r.returncode != 0:
            raise RuntimeError("station encoder self-test failed")
        self.rx_port = self.start_receiver()
        say("receiver on 127.0.0.1:%d" % self.rx_port)
        st, st_port = self.start_station()
        say("INVENTED station qr-flat listening on 127.0.0.1:%d "
            "(1 packet = 1 simulated hour every %.2f s)"
            % (st_port, INTERVAL))
        self.write_config(st_port)
        say("config %s: tidepost check ok" % self.p["config"])
        daemon = Proc("daemon", [self.tp, "run", "-c", self.p["config"],
                                 "--foreground"], self.p["daemon"])
        self.procs.append(daemon)
        t0 = wait_for(lambda: self.station_events("connected"), 15,
                      "the daemon to connect")[0]["wall"]
        say("daemon connected to the station; packets flowing")
        self.outage(t0)
        wait_for(lambda: self.station_events("done") or
                 st.p.poll() is not None, COUNT * INTERVAL + 30,
                 "the station to finish")
        if not self.station_events("done"):
            raise RuntimeError("station failed (see %s)"
                               % self.p["station_out"])
        say("station finished and closed the link")
        self.drain()
        self.wait_alerts()
        self.status_rc, self.status_text = self.status()
        say("tidepost status taken (exit %d); shown after the summary"
            % self.status_rc)
        rc = daemon.stop(30)
        self.procs.remove(daemon)
        say("daemon stopped on SIGTERM, exit status %s" % rc)
        self.daemon_rc = rc
        self.rx.stop()
        self.rx = None
        st.stop()
        self.procs.remove(st)
        return self.summary()

    def outage(self, t0):
        time.sleep(max(0.0, t0 + OUTAGE_AT - time.time()))
        self.rx.stop()
        self.outage_from = time.time()
        say("receiver STOPPED for %g s: the daemon keeps readings in its "
            "ring and backs off" % OUTAGE_S)
        time.sleep(OUTAGE_S)
        for _ in range(50):  # the port may take a moment to be free
            try:
                self.start_receiver(self.rx_port)
                break
            except RuntimeError:
                time.sleep(0.1)
        else:
            raise RuntimeError("could not restart the receiver on port %d"
                               % self.rx_port)
        self.outage_to = time.time()
        say("receiver RESTARTED on the same port: the backlog drains")
        time.sleep(2.5)
        for line in self.backlog_batches():
            print("      " + line, flush=True)

    def expected_ids(self):
        ids = []
        for e in self.station_events("packet"):
            if e["good"]:
                ids += e["ids"]
        return ids

    def drain(self):
        want = set(self.expected_ids())

        def done():
            got = {r["id"] for r in read_ndjson(self.p["records"])}
            return want <= got and len(self.file_ids()) >= len(want)
        try:
            wait_for(done, DRAIN_TIMEOUT, "delivery of every reading")
            say("every accepted reading delivered")
        except RuntimeError as e:
            say(str(e))

    def wait_alerts(self):
        """The watchdog's alerts of the story, when the daemon sends
        alerts at all (both targets; the webhook may still be retrying
        what it could not send during the outage)."""
        if not read_ndjson(self.p["alerts_exec"]):
            return
        try:
            wait_for(lambda: not self.missing_alerts(), 15,
                     "the expected alerts")
            # the webhook retries (2 s base, full jitter) what it could
            # not send while the receiver was down; not a failure if late
            wait_for(lambda: len(read_ndjson(self.p["alerts"])) >=
                     len(read_ndjson(self.p["alerts_exec"])), 10,
                     "the webhook to catch up")
        except RuntimeError as e:
            say(str(e))

    def missing_alerts(self):
        want = [("raised", "silent", "qr-flat"),
                ("cleared", "silent", "qr-flat"),
                ("raised", "battery_forecast", "qr-flat")]
        have = {(a.get("event"), a.get("condition"), a.get("station"))
                for a in read_ndjson(self.p["alerts_exec"])}
        return [w for w in want if w not in have]

    def check_forecast(self):
        """The first battery_forecast alert against the invented truth:
        (ok, text)."""
        fc = [a for a in read_ndjson(self.p["alerts_exec"])
              if a.get("condition") == "battery_forecast" and
              a.get("event") == "raised"]
        if not fc or not fc[0].get("forecast"):
            return False, "no battery_forecast alert with a forecast"
        a = fc[0]
        t = datetime.strptime(a["forecast"], "%Y-%m-%dT%H:%M:%SZ") \
            .replace(tzinfo=timezone.utc).timestamp()
        rate = a.get("rate_v_per_day")
        ok = abs(t - TRUE_CUTOFF_S) <= FORECAST_TOL_S and rate is not None \
            and abs(rate - TRUE_RATE) <= 0.1 * abs(TRUE_RATE)
        truth = datetime.fromtimestamp(TRUE_CUTOFF_S, timezone.utc) \
            .strftime("%Y-%m-%dT%H:%M:%SZ")
        return ok, ("battery forecast: cut-off %s at %.3f V/day; the "
                    "invented curve: %s at %.3f V/day (%+.0f min)"
                    % (a["forecast"], rate if rate is not None else
                       float("nan"), truth, TRUE_RATE,
                       (t - TRUE_CUTOFF_S) / 60))

    def file_ids(self):
        return [r["id"] for r in read_ndjson(self.p["file"])]

    # -- the summary --------------------------------------------------------
    def summary(self):
        ev = self.station_events("packet")
        good = [e for e in ev if e["good"]]
        expected = self.expected_ids()
        file_ids = self.file_ids()
        recs = read_ndjson(self.p["records"])
        fig = receiver.figures(recs, read_ndjson(self.p["station_log"]))
        got = {r["id"] for r in recs}
        lost = [i for i in file_ids if i not in got]
        bad = [i for e in ev if not e["good"] for i in e["ids"]]
        first = {}
        for r in recs:
            first.setdefault(r["id"], r["arrived"])
        wall = {i: e["wall"] for e in good for i in e["ids"]}
        backlog = [i for i in first if wall.get(i, 0) < self.outage_to and
                   first[i] >= self.outage_to]
        drained_s = max((first[i] for i in backlog), default=self.outage_to) \
            - self.outage_to
        in_outage = [i for i in wall
                     if self.outage_from <= wall[i] < self.outage_to]
        by_station = {}
        for e in ev:
            by_station[e["station"]] = by_station.get(e["station"], 0) + 1
        silence = self.station_events("silence")
        print()
        print("live summary (INVENTED data: made-up stations qr-flat and "
              "qr-gate, invented Quillet Reef)")
        print("  frames written by the station    %d (%s; 1 corrupted on "
              "purpose)" % (len(ev), ", ".join(
                  "%s %d" % kv for kv in sorted(by_station.items()))))
        if silence:
            print("  radio silence                    %d qr-flat packets "
                  "lost (%.1f s)" % (silence[0]["n"],
                                     silence[0]["n"] * INTERVAL))
        print("  readings expected (good packets) %d" % len(expected))
        print("  readings accepted (file output)  %d" % len(file_ids))
        print("  received by the receiver         %d, %d unique ids, %d "
              "duplicates (same id, same content)"
              % (fig["received"], fig["unique"], fig["duplicates"]))
        print("  lost                             %d" % len(lost))
        if fig["latency_p50"] is not None:
            print("  latency written -> received      p50 %.3f s, p99 %.3f s"
                  " (max %.3f s, the outage)" % (fig["latency_p50"],
                                                 fig["latency_p99"],
                                                 fig["latency_max"]))
        calm = [first[i] - wall[i] for i in first
                if i in wall and i not in backlog]
        if calm:
            print("  latency outside the outage       p50 %.3f s, p99 %.3f s"
                  % (receiver.percentile(calm, 50),
                     receiver.percentile(calm, 99)))
        print("  receiver outage                  %.1f s; %d readings "
              "written meanwhile; backlog of %d drained %.1f s after the "
              "restart" % (self.outage_to - self.outage_from,
                           len(in_outage), len(backlog), drained_s))
        for line in self.daemon_lines():
            print("  daemon: " + line)
        alerts_ok = self.print_alerts()
        problems = []
        if lost:
            problems.append("%d accepted readings never reached the "
                            "receiver" % len(lost))
        if sorted(file_ids) != sorted(expected):
            problems.append("file output differs from the good packets "
                            "(%d vs %d readings)" % (len(file_ids),
                                                     len(expected)))
        if len(set(file_ids)) != len(file_ids):
            problems.append("file output holds a reading twice")
        if fig["dup_conflicts"]:
            problems.append("duplicate ids with different content: %s"
                            % fig["dup_conflicts"][:3])
        if fig["unexpected"] or any(i in got for i in bad):
            problems.append("readings the station never sent (or of the "
                            "corrupted frame) arrived")
        if not in_outage or len(backlog) == 0:
            problems.append("no backlog was built up and drained")
        if self.daemon_rc != 0:
            problems.append("daemon exit status %s on SIGTERM"
                            % self.daemon_rc)
        if not alerts_ok:
            problems.append("alerts missing: %s" % self.missing_alerts())
        if self.status_rc != 0:
            problems.append("tidepost status exit %d next to the running "
                            "daemon" % self.status_rc)
        print("\nlive: tidepost status -c %s (taken before SIGTERM)\n%s"
              % (self.p["config"], self.status_text.rstrip()))
        print()
        for p in problems:
            print("live: FAILED: " + p)
        print("live: %s" % ("ok" if not problems else "FAILED"))
        return 1 if problems else 0

    def daemon_lines(self):
        """The daemon's own account: the rejected frame, its totals."""
        keep = []
        with open(self.p["daemon"], errors="replace") as f:
            for line in f:
                if "bad check" in line or "run: stopped:" in line:
                    keep.append(line.strip())
        return keep

    def backlog_batches(self):
        """The receiver's first lines after its restart."""
        with open(self.p["receiver_out"], errors="replace") as f:
            lines = f.read().split("receiver: stopped\n", 1)[-1]
        return [x for x in lines.splitlines() if "readings" in x][:4]

    def print_alerts(self):
        ex = read_ndjson(self.p["alerts_exec"])
        hooks = read_ndjson(self.p["alerts"])
        if not ex and not hooks:
            print("  alerts                           none: this daemon "
                  "sends no alerts yet (watchdog not in `run`)")
            return True
        print("  alerts (exec log %d; webhook %d, retried across the "
              "outage):" % (len(ex), len(hooks)))
        for a in ex:
            print("    %-8s %-17s %-8s %s"
                  % (a.get("event"), a.get("condition"),
                     a.get("station") or a.get("output") or "-",
                     a.get("message")))
        ok, text = self.check_forecast()
        print("  " + text)
        if not ok:
            print("live: FAILED: the battery forecast is off")
        return ok and not self.missing_alerts()

    def cleanup(self):
        for pr in self.procs + ([self.rx] if self.rx else []):
            if pr.p.poll() is None:
                pr.p.kill()
                pr.p.wait()


def main():
    args = sys.argv[1:]
    forget = 0
    if "--forget-batch" in args:
        i = args.index("--forget-batch")
        forget = int(args[i + 1])
        del args[i:i + 2]
    live = Live(args[0] if args else "build", forget)
    if not os.access(live.tp, os.X_OK):
        print("live: %s not built (run make)" % live.tp, file=sys.stderr)
        return 1
    print("live: INVENTED scenario - made-up stations qr-flat and qr-gate "
          "on the invented Quillet Reef; simulated time", flush=True)
    try:
        return live.run()
    except (RuntimeError, OSError, subprocess.SubprocessError) as e:
        print("live: FAILED: %s" % e, file=sys.stderr)
        for k in ("daemon", "station_out", "receiver_out"):
            path = live.p[k]
            if os.path.exists(path):
                with open(path, errors="replace") as f:
                    tail = f.readlines()[-15:]
                print("--- %s (last lines)\n%s" % (path, "".join(tail)),
                      file=sys.stderr)
        return 1
    finally:
        live.cleanup()


if __name__ == "__main__":
    sys.exit(main())
