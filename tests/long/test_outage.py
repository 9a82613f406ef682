#!/usr/bin/python3
"""test_outage.py - RELIABILITY.md T11 (issue 7): the HTTP endpoint is
down for a simulated day (or three) while live packets keep coming; then
it comes back and the backlog must drain, without a restart, on an
accelerated clock.

Run (`make check-long` does, after `make all`):
    TIDEPOST=build/tidepost TP_FASTCLOCK=build/tools/tidepost-fastclock \\
        /usr/bin/python3 tests/long/test_outage.py
  TP_OUTAGE_HOURS=H    simulated outage length (default 24; 72 for T11)
  TP_FASTCLOCK_SCALE=N clock speed-up (default 500: 24 h in 173 real s)
  TP_SEED=S            replays the Retry-After values of a run
  TP_OUTAGE_SAMPLES=F  also writes the RSS/status samples to F (NDJSON)

The daemon is build/tools/tidepost-fastclock: the same objects as
build/tidepost with a test clock linked in its place, running N times real
time (tests/tools/tidepost-fastclock.c).  Every timer in it (backoff,
Retry-After, status, watchdog) and every wall time it writes (received,
ages) is on that clock; libcurl's transfer timeouts stay real.

Scenario, in simulated (clock) time:
  - 40 invented stations (numbers 101-140, names "ot101".."ot140"), each
    sending one quillet-v1 packet an hour (4 readings, the demo layout
    demo/layouts/quillet-v1.json), staggered: one packet every 90 s on
    the daemon's stdin.  Packets are made by `tidepost encode` from CSV
    rows invented here; their reading ids are checked against
    `tidepost decode` of the same bytes.
  - 1 h with the endpoint up (204), then H hours of 503 with a
    Retry-After picked at random from 60, 120, 300 and 450 s for each
    request (backoff_cap_s is 600, so none is clamped), then 204 again.
  - after the backlog is delivered, 1 h more of live packets; then input
    stops, the last readings go out and the daemon is stopped (SIGTERM).
A file output beside the HTTP one writes every reading as soon as it is
accepted (after the ring's fdatasync): it is the oracle of "accepted".

Checks: every packet fed was accepted (none refused), every accepted
reading reached the endpoint (none lost, none unexpected), duplicates
only under the same id with the same content, per-station order kept,
retries reused body and Idempotency-Key, nothing committed during the
outage and the backlog held back, the backlog drained fully with the same
process, each request during the outage came at least the Retry-After it
was given after the one before (and no later than the backoff cap: the
output never gave up), readings were accepted in every simulated hour of
the outage, RSS stayed flat (see RSS_BOUND_KIB) and the daemon used
less than half a core (no busy loop).  Prints: simulated
hours, real seconds, readings accepted/delivered/duplicated, requests
during the outage, backlog, time to drain (simulated and real), requests
and ages of live readings during the drain, CPU, peak RSS.

Timing.  The endpoint stamps a request (CLOCK_MONOTONIC, as the test
clock) before it answers, and the daemon starts its wait only when the
answer came, so a gap can be shorter than the Retry-After only by the
clock's millisecond rounding: RA_TOL_S.  Delays of a loaded machine only
make gaps longer; upper bounds allow LATE_REAL_S of real lateness.
Standard library only.
"""
import csv
import io
import json
import os
import random
import shutil
import signal
import subprocess
import sys
import tempfile
import threading
import time
import traceback

HERE = os.path.dirname(os.path.abspath(__file__))
REPO = os.path.dirname(os.path.dirname(HERE))
sys.path.insert(0, os.path.join(REPO, "tests", "integration"))

from httpserver import ScriptedServer  # noqa: E402

TIDEPOST = os.environ.get("TIDEPOST", "build/tidepost")
FASTCLOCK = os.environ.get("TP_FASTCLOCK") or os.path.join(
    os.path.dirname(TIDEPOST), "tools", "tidepost-fastclock")
LAYOUT = os.path.join(REPO, "demo", "layouts", "quillet-v1.json")

OUTAGE_H = float(os.environ.get("TP_OUTAGE_HOURS", "24"))
SCALE = int(os.environ.get("TP_FASTCLOCK_SCALE", "500"))
SEED = int(os.environ.get("TP_SEED", str(int(time.time()))))

STATIONS = list(range(101, 141))   # invented
PACKET_EVERY_S = 3600 / len(STATIONS)   # clock s between packets (all)
RECORD_S = 900                     # the layout's records.every_s
WARM_H = 1.0                       # endpoint up before the outage
TAIL_H = 1.0                       # live packets after the drain
DRAIN_LIMIT_H = 6.0                # the drain must end within this
RA_CHOICES = (60, 120, 300, 450)   # Retry-After values, seconds
BACKOFF_CAP_S = 600
RA_TOL_S = 1.0                     # clock s; see the docstring
LATE_REAL_S = 1.0                  # real s of lateness allowed (upper
                                   # bounds only)
SAMPLE_S = 0.2                     # RSS and status sampling, real s
# RSS.  The heap grows by about 150 KiB at each station's first reading
# (its QC and watchdog state; measured), and all 40 have reported within
# the first simulated hour, so the early sample is taken 10% into the
# outage.  From then on the daemon's memory is bounded by design (the
# backlog is in the ring file, the batch body is capped by batch_bytes,
# the id set has a fixed size): growth with time or backlog is a leak.
# Measured at 24 h: +260 KiB, the body buffer of the first full
# 500-reading batches in the drain.  1 MiB allows four times that and is
# half of what holding the day's backlog (~3800 readings, ~550 bytes
# each in the ring) in memory would add.
RSS_BOUND_KIB = 1024
# After the drain a live reading goes out at once (clock s; the larger of
# this and LATE_REAL_S of real time).
AGE_AFTER_S = 120
# Accelerated, the daemon's timers fire SCALE times as often: about 5% of
# a core at 500 x here.  Half a core means it spins.
CPU_SHARE_MAX = 0.5


def clock_s(real_s):
    """Real seconds -> seconds of the daemon's clock."""
    return real_s * SCALE


def real_s(clock_sec):
    return clock_sec / SCALE


class Failure(AssertionError):
    pass


def check(cond, what, detail=""):
    if not cond:
        raise Failure("%s%s" % (what, (": " + str(detail)[:1500])
                                if detail != "" else ""))


# ---- packets ----------------------------------------------------------


def packet_rows(i, t_base):
    """The 4 CSV rows of packet i (invented values, inside the layout's
    ranges) and its station, seq and packet time."""
    st = STATIONS[i % len(STATIONS)]
    seq = (i // len(STATIONS)) % 65536
    t = t_base + int(i * PACKET_EVERY_S)
    rows = []
    for k in range(4):
        n = i * 4 + k
        rows.append({"kind": 3, "station": st, "seq": seq,
                     "time": t + k * RECORD_S,
                     "battery": "%.3f" % (12.6 - (n % 500) * 0.001),
                     "logger_temp": 20 + n % 10, "logger_rh": 40 + n % 30,
                     "ph": "%.3f" % (7.9 + (n % 200) * 0.001),
                     "temperature": "%.2f" % (24 + (n % 300) * 0.01),
                     "conductivity": "%.3f" % (50 + (n % 400) * 0.005),
                     "oxygen": "%.1f" % (180 + (n % 600) * 0.1)})
    return rows, st, seq, t


def make_packets(n, t_base, workdir):
    """n COBS frames from `tidepost encode`, with the reading ids of
    each (checked against `tidepost decode`)."""
    out = io.StringIO()
    cols = ["kind", "station", "seq", "time", "battery", "logger_temp",
            "logger_rh", "ph", "temperature", "conductivity", "oxygen"]
    w = csv.DictWriter(out, fieldnames=cols, lineterminator="\n")
    w.writeheader()
    ids = []
    for i in range(n):
        rows, st, seq, t = packet_rows(i, t_base)
        w.writerows(rows)
        ids.append(["ot%d-%d-%d-%d" % (st, t, seq, k) for k in range(4)])
    p = subprocess.run([TIDEPOST, "encode", "-l", LAYOUT, "--framing",
                        "cobs", "-"], input=out.getvalue().encode(),
                       stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    check(p.returncode == 0, "encode failed", p.stderr.decode()[-500:])
    frames = [f + b"\0" for f in p.stdout.split(b"\0") if f]
    check(len(frames) == n, "encode: %d frames for %d packets"
          % (len(frames), n))
    path = os.path.join(workdir, "packets.cobs")
    with open(path, "wb") as f:
        f.write(p.stdout)
    return frames, ids, path


def decoded_ids(cfg_path, packets_path):
    p = subprocess.run([TIDEPOST, "decode", "-c", cfg_path, packets_path],
                       stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    check(p.returncode == 0, "decode failed", p.stderr.decode()[-500:])
    return [json.loads(line)["id"] for line in p.stdout.splitlines()
            if line.strip()]


# ---- the endpoint -----------------------------------------------------


class OutageServer(ScriptedServer):
    """httpserver.py's receiver with an outage switch: while .down, every
    request gets 503 with a random Retry-After (chosen here, so the
    choice is logged in the request's "response")."""

    def __init__(self, seed):
        super().__init__(default={"status": 204})
        self.down = False
        self.rnd = random.Random(seed)

    def _next_action(self, accept_level):
        if accept_level:
            return None
        with self.lock:
            if self.down:
                return {"status": 503,
                        "retry_after": str(self.rnd.choice(RA_CHOICES))}
        return {"status": 204}


# ---- the daemon and what we watch of it --------------------------------


def write_config(d, url):
    cfg = {
        "layouts": [LAYOUT],
        "stations": {str(s): {"name": "ot%d" % s, "expect_every_s": 3600}
                     for s in STATIONS},
        "state_dir": os.path.join(d, "state"),
        "inputs": [{"kind": "stdin", "framing": "cobs"}],
        "outputs": [
            {"kind": "http", "name": "shore", "url": url + "/ingest",
             "allow_plain_http": True, "timeout_s": 10,
             "connect_timeout_s": 5, "backoff_base_s": 1,
             "backoff_cap_s": BACKOFF_CAP_S},
            {"kind": "file", "name": "archive",
             "path": os.path.join(d, "accepted.ndjson")}],
    }
    path = os.path.join(d, "config.json")
    with open(path, "w") as f:
        json.dump(cfg, f, indent=1)
    os.makedirs(cfg["state_dir"])
    return path


class Archive:
    """The file output, read as it grows: accepted ids in order."""

    def __init__(self, path):
        self.path = path
        self.off = 0
        self.ids = []
        self.lines = 0

    def poll(self):
        try:
            with open(self.path, "rb") as f:
                f.seek(self.off)
                data = f.read()
        except FileNotFoundError:
            return self.ids
        end = data.rfind(b"\n") + 1
        for line in data[:end].splitlines():
            obj = json.loads(line)
            self.lines += 1
            if "id" in obj:
                self.ids.append(obj["id"])
        self.off += end
        return self.ids


def rss_kib(pid):
    """(VmRSS, RssAnon) of a process in KiB (/proc/PID/status)."""
    got = {}
    with open("/proc/%d/status" % pid) as f:
        for line in f:
            if line.startswith(("VmRSS:", "RssAnon:")):
                got[line.split(":")[0]] = int(line.split()[1])
    return got.get("VmRSS", 0), got.get("RssAnon", 0)


def cpu_s(pid):
    """utime + stime of a process, seconds (/proc/PID/stat)."""
    with open("/proc/%d/stat" % pid) as f:
        fields = f.read().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def read_status(path):
    try:
        with open(path) as f:
            return json.load(f)
    except (OSError, ValueError):
        return None   # between renames, or not yet written


class Monitor(threading.Thread):
    """Samples (real time, VmRSS KiB, status.json) every SAMPLE_S."""

    def __init__(self, pid, status_path):
        super().__init__(daemon=True)
        self.pid, self.status_path = pid, status_path
        self.samples = []
        self.stop_ev = threading.Event()
        self.start()

    def run(self):
        while not self.stop_ev.is_set():
            try:
                rss, anon = rss_kib(self.pid)
                cpu = cpu_s(self.pid)
            except OSError:
                return
            st = read_status(self.status_path)
            if st is not None:
                shore = [o for o in st["outputs"] if o["name"] == "shore"]
                self.samples.append({
                    "t": time.monotonic(), "rss": rss, "anon": anon,
                    "cpu": cpu,
                    "accepted": st["ingest"]["accepted"],
                    "refused": st["ingest"]["refused"] +
                    st["ring"]["refused"],
                    "backlog": shore[0]["backlog"] if shore else None,
                    "ring_used": st["ring"]["used_bytes"]})
            self.stop_ev.wait(SAMPLE_S)

    def stop(self):
        self.stop_ev.set()
        self.join(5)


class Feeder(threading.Thread):
    """Writes packet i to the daemon's stdin at t0 + i * PACKET_EVERY_S
    (clock time), records when, until stopped or out of packets."""

    def __init__(self, pipe, frames, t0):
        super().__init__(daemon=True)
        self.pipe, self.frames, self.t0 = pipe, frames, t0
        self.sent_at = []
        self.error = None
        self.stop_ev = threading.Event()
        self.start()

    def run(self):
        try:
            for i, fr in enumerate(self.frames):
                due = self.t0 + real_s(i * PACKET_EVERY_S)
                if self.stop_ev.wait(max(0.0, due - time.monotonic())):
                    return
                self.pipe.write(fr)   # one write < PIPE_BUF: whole frame
                self.pipe.flush()
                self.sent_at.append(time.monotonic())
        except OSError as e:
            self.error = e

    def stop(self):
        self.stop_ev.set()
        self.join(5)


def wait_until(t):
    time.sleep(max(0.0, t - time.monotonic()))


def wait_for(cond, timeout, what, proc):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if cond():
            return time.monotonic()
        check(proc.poll() is None, "daemon exited (%s) while waiting for %s"
              % (proc.returncode, what))
        time.sleep(0.05)
    raise Failure("timed out (%.0f real s) waiting for %s" % (timeout, what))


# ---- analysis ---------------------------------------------------------


def pct(xs, p):
    xs = sorted(xs)
    if not xs:
        return float("nan")
    return xs[min(len(xs) - 1, int(round(p / 100.0 * (len(xs) - 1))))]


def outage_gaps(reqs):
    """[(clock s between request k and k+1, Retry-After given to k)] for
    consecutive requests both answered 503."""
    out = []
    for a, b in zip(reqs, reqs[1:]):
        if a["response"].get("status") == 503 and \
                b["response"].get("status") == 503:
            out.append((clock_s(b["mono"] - a["mono"]),
                        int(a["response"]["retry_after"])))
    return out


def check_outage_requests(reqs, t_up):
    """Retry-After honoured, retries kept going; returns figures.  The
    outage's requests are those answered 503 (the endpoint picks the
    answer before it stamps the request, so a time window could catch
    one answered just before the switch)."""
    during = [r for r in reqs if r["response"].get("status") == 503]
    check(during, "no request during the outage")
    tol = RA_TOL_S
    gaps = outage_gaps(during)
    short = [(round(g, 1), ra) for g, ra in gaps if g < ra - tol]
    check(not short, "requests sooner than their Retry-After "
          "(gap s, Retry-After s)", short[:20])
    # The delay is max(Retry-After, full jitter up to the cap): never
    # more than the cap, so a longer gap is a stall or a give-up.
    hi = BACKOFF_CAP_S + max(60.0, clock_s(LATE_REAL_S))
    long_ = [round(g, 1) for g, _ in gaps if g > hi]
    check(not long_, "gaps longer than the backoff cap", long_[:20])
    check(clock_s(t_up - during[-1]["mono"]) <= hi,
          "no retry in the last %.0f s of the outage" % hi)
    keys = {r["headers"].get("idempotency-key") for r in during}
    return {"n": len(during), "gaps": gaps, "keys": len(keys),
            "min_margin": min((g - ra for g, ra in gaps), default=0.0),
            "tol": tol}


def check_accepting(samples, t_down, t_up, feeder, ids_by_packet,
                    accepted_at_up):
    """Readings were accepted in every clock hour of the outage (status
    samples), and every reading fed during it, up to LATE_REAL_S before
    the end, was accepted by the end (the file output).  Returns how
    many readings fed during the outage were accepted during it."""
    hour = real_s(3600)
    t = t_down
    while t + hour <= t_up:
        win = [s["accepted"] for s in samples if t <= s["t"] < t + hour]
        check(len(win) >= 2 and win[-1] > win[0],
              "no reading accepted in the outage hour starting %.1f h in"
              % (clock_s(t - t_down) / 3600.0), win[:3])
        t += hour
    acc = set(accepted_at_up)
    n = 0
    for i, t in enumerate(feeder.sent_at):
        if not t_down <= t < t_up:
            continue
        got = [rid for rid in ids_by_packet[i] if rid in acc]
        check(got or t > t_up - LATE_REAL_S, "a packet fed %.0f s before "
              "the outage ended was not accepted by then"
              % clock_s(t_up - t), ids_by_packet[i])
        n += len(got)
    return n


def check_rss(samples, t_down, t_up):
    """VmRSS from 10% into the outage to the end (drain included) stays
    within RSS_BOUND_KIB of its value then; RssAnon (the heap: where a
    leak would show) is reported beside it."""
    early_t = t_down + 0.1 * (t_up - t_down)
    after = [s for s in samples if s["t"] >= early_t]
    check(after, "no RSS sample after the early one")
    f = {"first": samples[0]["rss"], "early": after[0]["rss"],
         "late": max(s["rss"] for s in after),
         "peak": max(s["rss"] for s in samples),
         "anon_early": after[0]["anon"],
         "anon_late": max(s["anon"] for s in after)}
    check(f["late"] - f["early"] <= RSS_BOUND_KIB, "RSS grew %d KiB (bound "
          "%d) from %d KiB" % (f["late"] - f["early"], RSS_BOUND_KIB,
                               f["early"]))
    return f


def save_samples(samples, t_start, path):
    """TP_OUTAGE_SAMPLES=FILE: the samples as NDJSON, time in clock h."""
    with open(path, "w") as f:
        for s in samples:
            f.write(json.dumps(dict(s, t=round(clock_s(s["t"] - t_start)
                                                / 3600.0, 4))) + "\n")


def ages(xs):
    if not xs:
        return "none (no reading came in meanwhile)"
    return "p50 %.1f s, p99 %.1f s, max %.1f s (%d readings)" % (
        pct(xs, 50), pct(xs, 99), max(xs), len(xs))


def drain_figures(srv, backlog_ids, t_up, sent_at, ids_by_packet):
    """When the last reading held back by the outage arrived; requests
    and live-reading ages in the drain."""
    with srv.lock:
        reqs = list(srv.requests)
    left = set(backlog_ids)
    done_t = None
    for r in reqs:
        if r["mono"] < t_up or not r["committed"]:
            continue
        left.difference_update(r["ids"])
        if not left:
            done_t = r["mono"]
            break
    check(done_t is not None, "backlog not drained", sorted(left)[:10])
    first_ok = next(r["mono"] for r in reqs
                    if r["mono"] >= t_up and r["committed"])
    drain_reqs = [r for r in reqs if t_up <= r["mono"] <= done_t]
    # ages (clock s) of readings fed after the outage, at first delivery
    fed_t = {}
    for i, t in enumerate(sent_at):
        if t >= t_up:
            for rid in ids_by_packet[i]:
                fed_t[rid] = t
    first = {}
    for r in reqs:
        if r["committed"]:
            for rid in r["ids"]:
                first.setdefault(rid, r["mono"])
    in_drain = [clock_s(first[i] - t) for i, t in fed_t.items()
                if i in first and first[i] <= done_t]
    after = [clock_s(first[i] - t) for i, t in fed_t.items()
             if i in first and first[i] > done_t]
    return {"done_t": done_t, "first_ok": first_ok,
            "requests": len(drain_reqs), "age_drain": in_drain,
            "age_after": after}


# ---- the test ---------------------------------------------------------


def test_outage():
    check(os.access(FASTCLOCK, os.X_OK), "%s: not built (make all)"
          % FASTCLOCK)
    check(OUTAGE_H > 0 and SCALE >= 1, "TP_OUTAGE_HOURS and "
          "TP_FASTCLOCK_SCALE must be positive")
    d = tempfile.mkdtemp(prefix="tp-outage-")
    srv = OutageServer(SEED).start()
    proc = None
    mon = feeder = None
    ok = False
    try:
        cfg = write_config(d, srv.url)
        t_base = int(time.time())
        n_pk = int((WARM_H + OUTAGE_H + DRAIN_LIMIT_H + TAIL_H + 1) * 3600
                   / PACKET_EVERY_S)
        frames, ids_by_packet, pk_path = make_packets(n_pk, t_base, d)
        all_ids = [i for ids in ids_by_packet for i in ids]
        dec = decoded_ids(cfg, pk_path)
        check(sorted(dec) == sorted(all_ids), "ids of `tidepost decode` "
              "differ from the expected ones", (dec[:2], all_ids[:2]))

        log_path = os.path.join(d, "daemon.log")
        log = open(log_path, "wb")
        env = dict(os.environ, TP_FASTCLOCK_SCALE=str(SCALE))
        t_start = time.monotonic()
        proc = subprocess.Popen([FASTCLOCK, "run", "-c", cfg,
                                 "--foreground"], stdin=subprocess.PIPE,
                                stdout=log, stderr=log, env=env)

        def log_text():
            log.flush()
            with open(log_path, "rb") as f:
                return f.read().decode("utf-8", "replace")
        wait_for(lambda: "run: started" in log_text(), 30, "start", proc)
        archive = Archive(os.path.join(d, "accepted.ndjson"))
        status_path = os.path.join(d, "state", "status.json")
        mon = Monitor(proc.pid, status_path)
        t0 = time.monotonic()
        feeder = Feeder(proc.stdin, frames, t0)

        t_down = t0 + real_s(WARM_H * 3600)
        wait_until(t_down)
        with srv.lock:
            srv.down = True
        t_down = time.monotonic()
        print("     outage: %.0f h simulated at %d x, about %.0f real s "
              "(seed %d)" % (OUTAGE_H, SCALE, real_s(OUTAGE_H * 3600),
                             SEED), flush=True)
        wait_until(t_down + real_s(OUTAGE_H * 3600))
        archive.poll()
        delivered_before = srv.delivered_ids()
        with srv.lock:
            srv.down = False
        t_up = time.monotonic()
        accepted_at_up = list(archive.poll())
        backlog_ids = [i for i in accepted_at_up
                       if i not in delivered_before]
        check(proc.poll() is None, "daemon exited during the outage")

        limit = real_s(DRAIN_LIMIT_H * 3600)
        t_drained = wait_for(
            lambda: set(backlog_ids) <= srv.delivered_ids(), limit,
            "the backlog to drain", proc)
        wait_until(t_drained + real_s(TAIL_H * 3600))
        feeder.stop()
        check(feeder.error is None, "feeding stdin failed", feeder.error)
        check(len(feeder.sent_at) < len(frames), "ran out of packets")
        proc.stdin.close()
        n_fed = len(feeder.sent_at) * 4
        wait_for(lambda: len(archive.poll()) >= n_fed, 30,
                 "the last packets to be accepted", proc)
        wait_for(lambda: set(archive.poll()) <= srv.delivered_ids(), 60,
                 "the last readings to be delivered", proc)
        time.sleep(max(0.5, 3 * SAMPLE_S))
        mon.stop()
        check(proc.poll() is None, "daemon exited before SIGTERM")
        t_end = time.monotonic()
        proc.send_signal(signal.SIGTERM)
        rc = proc.wait(60)
        log.close()
        check(rc == 0, "daemon exit status %d after SIGTERM" % rc)

        # ---- checks on what happened ----
        accepted = archive.poll()
        fed_ids = [i for ids in ids_by_packet[:len(feeder.sent_at)]
                   for i in ids]
        check(len(accepted) == len(set(accepted)),
              "a reading was accepted twice")
        check(sorted(accepted) == sorted(fed_ids),
              "accepted readings differ from those fed",
              (len(accepted), len(fed_ids)))
        samples = mon.samples
        check(samples, "no status samples")
        check(max(s["refused"] for s in samples) == 0, "readings refused")
        with srv.lock:
            reqs = list(srv.requests)
        bad = [r.get("body_error") for r in reqs if r.get("body_error")]
        check(not bad, "request bodies the endpoint could not read", bad[:3])
        rep = srv.check_delivery(accepted)
        for k in ("lost", "phantom", "id_reuse", "id_changed", "order"):
            check(not rep[k], "delivery: %s" % k, rep[k])
        check(rep["unique"] == len(accepted), "delivered %d of %d"
              % (rep["unique"], len(accepted)))
        retry = srv.retry_consistency()
        check(not retry, "retries changed body or Idempotency-Key", retry)

        out = check_outage_requests(reqs, t_up)
        n_out = check_accepting(samples, t_down, t_up, feeder,
                                ids_by_packet, accepted_at_up)
        held = len(backlog_ids)
        check(held >= n_out, "backlog %d at the end of the outage, %d "
              "accepted during it" % (held, n_out))
        dr = drain_figures(srv, backlog_ids, t_up, feeder.sent_at,
                           ids_by_packet)
        check(dr["age_after"], "no live reading delivered after the drain")
        age_limit = max(AGE_AFTER_S, clock_s(LATE_REAL_S))
        check(max(dr["age_after"]) <= age_limit, "a live reading took "
              "%.0f s after the drain (limit %.0f s)"
              % (max(dr["age_after"]), age_limit))
        last = [s for s in samples if s["t"] >= t_end - 2 * SAMPLE_S - 0.5]
        check(last and last[-1]["backlog"] == 0,
              "status backlog at the end", last[-1:] or samples[-1:])
        if os.environ.get("TP_OUTAGE_SAMPLES"):
            save_samples(samples, t_start, os.environ["TP_OUTAGE_SAMPLES"])
        rss = check_rss(samples, t_down, t_up)
        ring_peak = max(s["ring_used"] for s in samples)

        sim_h = clock_s(t_end - t_start) / 3600.0
        print("     simulated %.1f h (outage %.1f h) in %.1f real s at "
              "%d x" % (sim_h, clock_s(t_up - t_down) / 3600.0,
                        t_end - t_start, SCALE))
        print("     readings: fed %d, accepted %d, delivered %d unique, "
              "%d deliveries, duplicates %d, refused 0, lost 0"
              % (len(fed_ids), len(accepted), rep["unique"],
                 rep["deliveries"], rep["deliveries"] - rep["unique"]))
        print("     outage: %d requests (all 503, %d Idempotency-Key%s), "
              "accepted %d readings meanwhile; backlog at recovery %d "
              "readings, ring %.1f MiB used at peak"
              % (out["n"], out["keys"], "" if out["keys"] == 1 else "s",
                 n_out, held, ring_peak / 1048576.0))
        print("     Retry-After: smallest gap minus Retry-After %+.1f s "
              "(tolerance %.1f s) over %d gaps; mean gap %.0f s"
              % (out["min_margin"], out["tol"], len(out["gaps"]),
                 sum(g for g, _ in out["gaps"]) / max(1, len(out["gaps"]))))
        print("     drain: first 2xx %.0f s after recovery (the pending "
              "retry), backlog delivered %.0f s (%.3f real s) after "
              "recovery in %d requests, %.3f real s from the first 2xx"
              % (clock_s(dr["first_ok"] - t_up),
                 clock_s(dr["done_t"] - t_up), dr["done_t"] - t_up,
                 dr["requests"], dr["done_t"] - dr["first_ok"]))
        print("     live readings' age at delivery: during the drain %s; "
              "after it %s" % (ages(dr["age_drain"]), ages(dr["age_after"])))
        cpu = (samples[-1]["cpu"] - samples[0]["cpu"]) / \
            max(1e-9, samples[-1]["t"] - samples[0]["t"])
        print("     daemon CPU: %.1f s in %.1f real s (%.0f%% of one core)"
              % (samples[-1]["cpu"] - samples[0]["cpu"],
                 samples[-1]["t"] - samples[0]["t"], 100.0 * cpu))
        print("     RSS: at start %d KiB, 10%% into the outage %d KiB, "
              "highest after that %d KiB (+%d, bound %d), peak %d KiB; "
              "RssAnon %d -> %d KiB"
              % (rss["first"], rss["early"], rss["late"],
                 rss["late"] - rss["early"], RSS_BOUND_KIB, rss["peak"],
                 rss["anon_early"], rss["anon_late"]))
        check(cpu <= CPU_SHARE_MAX, "daemon used %.0f%% of a core (a busy "
              "loop?)" % (100.0 * cpu))
        ok = True
    finally:
        if feeder is not None:
            feeder.stop()
        if mon is not None:
            mon.stop()
        if proc is not None and proc.poll() is None:
            proc.kill()
            proc.wait()
        srv.stop()
        if ok:
            shutil.rmtree(d, ignore_errors=True)
        else:
            print("     kept for inspection: %s" % d)


def main():
    t = time.monotonic()
    try:
        test_outage()
    except Failure as e:
        print("FAIL test_outage: %s" % e)
        return 1
    except Exception:
        print("FAIL test_outage")
        traceback.print_exc()
        return 1
    print("ok   test_outage (%.1f s)" % (time.monotonic() - t))
    return 0


if __name__ == "__main__":
    sys.exit(main())
