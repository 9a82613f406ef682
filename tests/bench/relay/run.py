#!/usr/bin/python3
"""Relay daemon benchmark (prints figures and ratios; not a pass/fail test).

Phases, all on 127.0.0.1, in one temp folder under BUILD/bench (on disk,
so the ring's fdatasync costs what it costs; removed at the end):

1. nginx from nginx.conf.in answers 204 to every POST (one worker, keep-
   alive, bodies read and discarded; stub_status counts the requests).
2. Backlog: 25,000 demo packets (tests/bench/mkarchive.py, invented
   values) = 100,000 readings go into the ring with `tidepost replay` and
   no daemon running (the ring is written directly; timed for information).
3. Drain: `tidepost run --once --foreground` with that ring and an http
   output to nginx (batch 500, the default) is timed from spawn to exit
   (0 = drained, and `tidepost ring` must show every reading acked):
   readings/s = readings / wall, start-up (ring open and its scan) and
   stop included; nginx's log of /drain gives the span from the first to
   the last request too.  Peak RSS is the daemon's VmHWM polled from /proc
   every 10 ms (the last value before it exits); RssAnon and RssFile show
   how much of it is the daemon's own memory and how much the shared
   libraries' pages (libcurl, OpenSSL, GnuTLS, ...).  Phases 2-3 run
   BENCH_REPEAT (3) times on fresh rings and the median is used: the
   2-core machine is shared, single runs vary by 50 %.
4. Python relay: pyrelay.py POSTs the same readings (NDJSON from
   `tidepost decode` of the same archive, read before the clock starts)
   one per request with urllib, on the first BENCH_PY_READINGS (5,000):
   one connection per request makes the whole set take minutes, and
   rates are what is compared (median of BENCH_REPEAT runs; the time is
   pyrelay's loop only, without its start-up and file read).
5. wrk -t1 -c4 POSTing a batch body of 500 readings (the ceiling for
   batched relaying; readings/s = 500 x requests/s) and one reading.  The
   body is {"readings": [...]} of the decoded readings; the daemon's also
   has a "quantities" member of a few hundred bytes (0.2 % more).
6. Latency: latency.py writes one packet (4 readings) every 100 ms into
   the daemon's tcp input (the probe listens, the daemon connects) for
   BENCH_LAT_S (20) s and receives the daemon's POSTs itself (Python
   http.server with keep-alive): latency = request received - packet
   written, for the first reading of each packet; p50 and p99.
7. Idle: a fresh daemon with a connected but silent tcp input and an http
   output to nginx with nothing to send; utime+stime (/proc/PID/stat,
   10 ms ticks) and on-CPU time (/proc/PID/schedstat, ns) over
   BENCH_IDLE_S (60) s after 2 s to settle.

Usage: run.py [BUILD]   env: BENCH_RELAY_READINGS (100000, a multiple of
4), BENCH_PY_READINGS, BENCH_LAT_S, BENCH_IDLE_S, BENCH_WRK_S (5),
BENCH_REPEAT (3), BENCH_KEEP=1 keeps the temp folder.  Exit 1 when a
phase fails (daemon not drained or crashed, a request count that does not
add up); targets missed are only marked in the table.
"""

import json
import os
import re
import resource
import shutil
import signal
import socket
import statistics
import subprocess
import sys
import tempfile
import time
import urllib.request

PY = "/usr/bin/python3"
HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(os.path.dirname(HERE)))
DEMO = os.path.join(ROOT, "demo")
BATCH = 500
LAT_RATE = 10.0
children = []   # every process started here, stopped at the end


def env_int(name, default):
    v = int(os.environ.get(name, default))
    if v <= 0:
        sys.exit("bench relay: %s must be > 0" % name)
    return v


def fail(msg):
    raise SystemExit("bench relay: " + msg)


def free_port():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def spawn(argv, **kw):
    p = subprocess.Popen(argv, **kw)
    children.append(p)
    return p


def stop_all():
    for p in children:
        if p.poll() is None:
            p.terminate()
    for p in children:
        try:
            p.wait(10)
        except subprocess.TimeoutExpired:
            p.kill()
            p.wait()


# ---- nginx -----------------------------------------------------------

def nginx_bin():
    found = shutil.which("nginx") or shutil.which("nginx",
                                                  path="/usr/sbin:/sbin")
    if not found:
        fail("nginx not found (tests/bench/relay/run.sh installs it)")
    return found


def nginx_start(tmp, port):
    d = os.path.join(tmp, "nginx")
    os.makedirs(d)
    text = open(os.path.join(HERE, "nginx.conf.in")).read()
    user = "user root;" if os.geteuid() == 0 else ""
    text = text.replace("@USER@", user).replace("@DIR@", d) \
        .replace("@PORT@", str(port))
    conf = os.path.join(d, "nginx.conf")
    with open(conf, "w") as f:
        f.write(text)
    err = open(os.path.join(d, "stderr.log"), "wb")
    p = spawn([nginx_bin(), "-p", d + "/", "-e", d + "/error.log",
               "-c", conf], stdout=err, stderr=err)
    for _ in range(200):
        if p.poll() is not None:
            fail("nginx exited %d: %s" % (p.returncode, open(
                os.path.join(d, "error.log")).read()[-500:]))
        try:
            nginx_requests(port)
            return p
        except OSError:
            time.sleep(0.05)
    fail("nginx did not answer on port %d" % port)


def nginx_requests(port):
    """nginx's request counter (this request included)."""
    url = "http://127.0.0.1:%d/bench-status" % port
    with urllib.request.urlopen(url, timeout=5) as r:
        text = r.read().decode()
    return int(text.splitlines()[2].split()[2])


# ---- tidepost --------------------------------------------------------

def demo_stations():
    """The stations of demo/config.json (its comments are whole lines)."""
    text = open(os.path.join(DEMO, "config.json")).read()
    return json.loads(re.sub(r"(?m)^\s*//.*$", "", text))["stations"]


def write_config(path, state, inputs, outputs, ring_mb):
    cfg = {"layouts": [os.path.join(DEMO, "layouts", "quillet-v1.json")],
           "stations": demo_stations(), "state_dir": state,
           "ring": {"size_mb": ring_mb}, "inputs": inputs,
           "outputs": outputs}
    with open(path, "w") as f:
        json.dump(cfg, f, indent=1)
    return path


def http_out(url, **kw):
    o = {"kind": "http", "name": "bench", "url": url, "batch": BATCH,
         "allow_plain_http": True}
    o.update(kw)
    return o


def tp(build, *args, **kw):
    r = subprocess.run([os.path.join(build, "tidepost")] + list(args),
                       capture_output=True, text=True, **kw)
    return r


def proc_status(pid, key):
    try:
        with open("/proc/%d/status" % pid) as f:
            for line in f:
                if line.startswith(key + ":"):
                    return int(line.split()[1])
    except (OSError, ValueError):
        pass
    return None


def cpu_of(pid):
    """(utime+stime in s, on-CPU ns from schedstat, voluntary switches)"""
    with open("/proc/%d/stat" % pid) as f:
        fields = f.read().rsplit(")", 1)[1].split()
    ticks = int(fields[11]) + int(fields[12])
    with open("/proc/%d/schedstat" % pid) as f:
        ns = int(f.read().split()[0])
    sw = proc_status(pid, "voluntary_ctxt_switches")
    return ticks / os.sysconf("SC_CLK_TCK"), ns, sw


def daemon(build, cfg, log, once=False):
    argv = [os.path.join(build, "tidepost"), "run", "-c", cfg,
            "--foreground"] + (["--once"] if once else [])
    return spawn(argv, stdin=subprocess.DEVNULL,
                 stdout=subprocess.DEVNULL, stderr=open(log, "wb"))


def stop_daemon(p, log):
    p.send_signal(signal.SIGTERM)
    rc = p.wait(90)
    if rc != 0:
        fail("daemon exit %d after SIGTERM; see %s" % (rc, log))


# ---- phases ----------------------------------------------------------

def make_data(build, tmp, n_pk):
    arch = os.path.join(tmp, "archive.cobs")
    subprocess.run([PY, os.path.join(ROOT, "tests", "bench", "mkarchive.py"),
                    "-n", str(n_pk), "-o", arch], check=True)
    cfg = write_config(os.path.join(tmp, "decode.json"),
                       os.path.join(tmp, "state-decode"),
                       [{"kind": "stdin"}], [], 1)
    nd = os.path.join(tmp, "readings.ndjson")
    with open(nd, "w") as f:
        rc = subprocess.run([os.path.join(build, "tidepost"), "decode",
                             "-c", cfg, "--framing", "cobs", arch],
                            stdout=f, stderr=subprocess.DEVNULL).returncode
    lines = sum(1 for _ in open(nd))
    if rc != 0 or lines != 4 * n_pk:
        fail("decode: exit %d, %d readings of %d" % (rc, lines, 4 * n_pk))
    return arch, nd


def fill_ring(build, cfg, arch, n):
    t0 = time.perf_counter()
    r = tp(build, "replay", "-c", cfg, arch)
    wall = time.perf_counter() - t0
    if r.returncode != 0 or (" %d readings queued" % n) not in r.stderr:
        fail("replay: exit %d: %s" % (r.returncode, r.stderr.strip()))
    return wall


def timed_run(p):
    """Wall time of p from now to its exit, its last VmHWM, the peak
    RssAnon and RssFile seen (KiB; sampled every 10 ms after exec) and
    its user+system CPU seconds (wait4).  Sets p.returncode."""
    t0 = time.perf_counter()
    exe, mem = False, {"VmHWM": 0, "RssAnon": 0, "RssFile": 0}
    while True:
        pid, status, ru = os.wait4(p.pid, os.WNOHANG)
        if pid:
            break
        if not exe:     # after exec only (before, it is this Python)
            try:
                if os.readlink("/proc/%d/exe" % p.pid).endswith(
                        "/tidepost"):
                    exe = True
            except OSError:
                pass
        if exe:
            for k in mem:
                mem[k] = max(mem[k], proc_status(p.pid, k) or 0)
        time.sleep(0.01)
    wall = time.perf_counter() - t0
    p.returncode = os.waitstatus_to_exitcode(status)
    return wall, mem, ru.ru_utime + ru.ru_stime


def log_lines(path):
    try:
        with open(path) as f:
            return sum(1 for _ in f)
    except OSError:
        return 0


def log_span(path, skip):
    """Seconds from the first to the last request in nginx's stamp log,
    after its first `skip` lines."""
    with open(path) as f:
        ts = [float(line.split()[0]) for line in f.readlines()[skip:]]
    return max(ts) - min(ts) if len(ts) > 1 else 0.0


def drain(build, tmp, arch, n, port, k):
    """Fill a fresh ring with replay, then time one --once drain."""
    url = "http://127.0.0.1:%d/drain" % port
    cfg = write_config(os.path.join(tmp, "drain-%d.json" % k),
                       os.path.join(tmp, "state-drain-%d" % k),
                       [{"kind": "stdin"}], [http_out(url)],
                       max(16, n * 700 // 1000000 + 8))
    fill = fill_ring(build, cfg, arch, n)
    access = os.path.join(tmp, "nginx", "access-drain.log")
    before, skip = nginx_requests(port), log_lines(access)
    log = os.path.join(tmp, "drain-%d.log" % k)
    wall, mem, cpu = timed_run(daemon(build, cfg, log, once=True))
    rc = children[-1].returncode
    reqs = nginx_requests(port) - before - 1
    outs = json.loads(tp(build, "ring", "-c", cfg, "--json").stdout)
    outs = outs.get("outputs", [])
    want = -(-n // BATCH)
    if rc != 0 or len(outs) != 1 or outs[0].get("acked") != n or \
            outs[0].get("unsent") != 0 or reqs < want:
        fail("drain: exit %d, %d requests (>= %d wanted), ring outputs "
             "%s; see %s" % (rc, reqs, want, json.dumps(outs), log))
    return {"fill_s": fill, "wall": wall, "cpu": cpu,
            "span": log_span(access, skip), "hwm": mem["VmHWM"],
            "anon": mem["RssAnon"], "file": mem["RssFile"], "requests": reqs}


def drains(build, tmp, arch, n, port, reps):
    """reps drains; the one of median wall time, with every wall time and
    the highest memory figures of all."""
    runs = sorted((drain(build, tmp, arch, n, port, k) for k in range(reps)),
                  key=lambda d: d["wall"])
    med = dict(runs[len(runs) // 2])
    med["walls"] = [d["wall"] for d in runs]
    for key in ("hwm", "anon", "file"):
        med[key] = max(d[key] for d in runs)
    return med


def children_cpu():
    ru = resource.getrusage(resource.RUSAGE_CHILDREN)
    return ru.ru_utime + ru.ru_stime


def pyrelay(nd, n, port):
    """(loop seconds, CPU seconds of the whole process) of one run."""
    before, cpu0 = nginx_requests(port), children_cpu()
    r = subprocess.run([PY, os.path.join(HERE, "pyrelay.py"),
                        "http://127.0.0.1:%d/ingest" % port, nd, str(n)],
                       capture_output=True, text=True)
    cpu = children_cpu() - cpu0
    reqs = nginx_requests(port) - before - 1
    if r.returncode != 0:
        fail("pyrelay.py: " + r.stderr.strip()[-500:])
    posted, secs = r.stdout.split()
    if int(posted) != n or reqs != n:
        fail("pyrelay.py: %s posted, nginx saw %d, %d wanted"
             % (posted, reqs, n))
    return float(secs), cpu


def pyrelays(nd, n, port, reps):
    """(loop seconds, CPU seconds) of reps runs, sorted by time (the
    median is used)."""
    return sorted(pyrelay(nd, n, port) for _ in range(reps))


def wrk(tmp, nd, port, secs):
    with open(nd) as f:
        lines = [next(f).strip() for _ in range(BATCH)]
    bodies = {"batch": '{"readings":[' + ",".join(lines) + "]}",
              "one": lines[0]}
    out = {}
    for name, body in bodies.items():
        path = os.path.join(tmp, "wrk-%s.json" % name)
        with open(path, "w") as f:
            f.write(body)
        r = subprocess.run(
            ["wrk", "-t1", "-c4", "-d%ds" % secs, "-s",
             os.path.join(HERE, "post.lua"),
             "http://127.0.0.1:%d/ingest" % port],
            capture_output=True, text=True,
            env=dict(os.environ, BENCH_BODY=path))
        m = re.search(r"Requests/sec:\s*([0-9.]+)", r.stdout)
        if r.returncode != 0 or not m or "Non-2xx" in r.stdout:
            fail("wrk (%s): %s %s" % (name, r.stdout, r.stderr))
        out[name] = (float(m.group(1)), len(body))
    return out


def pct(xs, q):
    """Nearest-rank percentile (q in 0..100)."""
    s = sorted(xs)
    k = max(0, min(len(s) - 1, int(-(-q * len(s) // 100)) - 1))
    return s[k]


def latency(build, tmp, arch, nd, secs):
    count = int(LAT_RATE * secs)
    frames = os.path.join(tmp, "lat.cobs")
    data = open(arch, "rb").read().split(b"\0")[:count]
    with open(frames, "wb") as f:
        f.write(b"".join(x + b"\0" for x in data))
    pport, hport = free_port(), free_port()
    probe = spawn([PY, os.path.join(HERE, "latency.py"), str(pport),
                   str(hport), frames, nd, str(LAT_RATE), str(count)],
                  stdout=subprocess.PIPE, text=True)
    if probe.stdout.readline().strip() != "ready":
        fail("latency.py did not start")
    cfg = write_config(os.path.join(tmp, "lat.json"),
                       os.path.join(tmp, "state-lat"),
                       [{"kind": "tcp", "host": "127.0.0.1", "port": pport}],
                       [http_out("http://127.0.0.1:%d/ingest" % hport)], 4)
    log = os.path.join(tmp, "lat.log")
    d = daemon(build, cfg, log)
    line = probe.stdout.readline()
    probe.wait(30)
    hwm = proc_status(d.pid, "VmHWM") or 0
    stop_daemon(d, log)
    if not line:
        fail("latency.py gave no result; see %s" % log)
    res = json.loads(line)
    if res["arrived"] != res["sent"]:
        fail("latency: %d of %d packets arrived; see %s"
             % (res["arrived"], res["sent"], log))
    res["hwm"] = hwm
    return res


def accept_and_hold(lsock):
    lsock.settimeout(30)
    conn, _ = lsock.accept()
    return conn


def idle(build, tmp, port, secs):
    lsock = socket.socket()
    lsock.bind(("127.0.0.1", 0))
    lsock.listen(1)
    cfg = write_config(os.path.join(tmp, "idle.json"),
                       os.path.join(tmp, "state-idle"),
                       [{"kind": "tcp", "host": "127.0.0.1",
                         "port": lsock.getsockname()[1]}],
                       [http_out("http://127.0.0.1:%d/ingest" % port)], 4)
    log = os.path.join(tmp, "idle.log")
    d = daemon(build, cfg, log)
    conn = accept_and_hold(lsock)
    time.sleep(2)
    u0, ns0, sw0 = cpu_of(d.pid)
    time.sleep(secs)
    u1, ns1, sw1 = cpu_of(d.pid)
    rss = proc_status(d.pid, "VmRSS")
    stop_daemon(d, log)
    conn.close()
    lsock.close()
    return {"cpu": u1 - u0, "sched": (ns1 - ns0) / 1e9,
            "wakeups": sw1 - sw0, "secs": secs, "rss": rss}


# ---- report ----------------------------------------------------------

def row(name, value, target="", ok=None):
    mark = "" if ok is None else ("  ok" if ok else "  MISSED")
    print("  %-40s %-30s %s%s" % (name, value, target, mark))


def report(n, pyn, dr, py, wk, lat, idl):
    tp_rate = n / dr["wall"]
    py_s, py_cpu = py[len(py) // 2]
    py_rate = pyn / py_s
    ceil = wk["batch"][0] * BATCH
    lms = lat["lat_ms"]
    p50, p99 = pct(lms, 50), pct(lms, 99)
    rss_mb = dr["hwm"] * 1024 / 1e6
    per_min = idl["cpu"] * 60 / idl["secs"]
    print("bench relay: %d readings (%d demo packets) to nginx answering "
          "204 on 127.0.0.1" % (n, n // 4))
    row("ring filled by replay (no daemon)", "%.2f s  %.0f readings/s"
        % (dr["fill_s"], n / dr["fill_s"]))
    row("tidepost drain, batch %d, --once" % BATCH, "%.2f s  %.0f readings/s"
        % (dr["wall"], tp_rate), "(median of %d: %s s)" % (
            len(dr["walls"]), ", ".join("%.2f" % w for w in dr["walls"])))
    row("  requests nginx took", "%d (%.0f readings each)"
        % (dr["requests"], n / dr["requests"]))
    row("  first to last request", "%.2f s (start-up and stop: %.2f s)"
        % (dr["span"], dr["wall"] - dr["span"]))
    row("  daemon CPU, user+system", "%.2f s" % dr["cpu"])
    row("python relay, urllib, 1 POST/reading", "%.2f s  %.0f readings/s"
        % (py_s, py_rate), "(first %d readings; median of %d: %s s)" % (
            pyn, len(py), ", ".join("%.2f" % w for w, _ in py)))
    row("tidepost / python", "%.0fx" % (tp_rate / py_rate), ">= 100x",
        tp_rate / py_rate >= 100)
    row("  per CPU second (tidepost / python)", "%.0f / %.0f = %.0fx" % (
        n / dr["cpu"], pyn / py_cpu, (n / dr["cpu"]) / (pyn / py_cpu)),
        "(less load-dependent)")
    row("wrk -t1 -c4, batch body (%d B)" % wk["batch"][1],
        "%.0f req/s = %.0f readings/s" % (wk["batch"][0], ceil), "ceiling")
    row("wrk -t1 -c4, one reading (%d B)" % wk["one"][1],
        "%.0f req/s" % wk["one"][0])
    row("tidepost / wrk ceiling", "%.2f" % (tp_rate / ceil))
    row("latency p50 / p99, 10 packets/s", "%.1f / %.1f ms" % (p50, p99),
        "p99 <= 50 ms", p99 <= 50)
    row("  packets, requests, readings/request", "%d, %d, %.1f mean"
        % (len(lms), lat["requests"],
           statistics.mean(lat["per_request"])))
    row("  max latency", "%.1f ms" % max(lms))
    row("peak RSS of the daemon (drain, VmHWM)", "%.2f MB (%.2f MiB)"
        % (rss_mb, dr["hwm"] / 1024), "<= 8 MB", rss_mb <= 8)
    row("  of it: anon / file-backed (peaks)", "%.2f / %.2f MB"
        % (dr["anon"] * 1024 / 1e6, dr["file"] * 1024 / 1e6))
    row("peak RSS (latency run, VmHWM)", "%.2f MB" % (lat["hwm"] * 1024 / 1e6))
    row("idle CPU, utime+stime over %d s" % idl["secs"],
        "%.2f s (%.2f s/min)" % (idl["cpu"], per_min), "<= 0.05 s/min",
        per_min <= 0.05)
    row("  on-CPU (schedstat), wake-ups", "%.4f s, %d voluntary switches"
        % (idl["sched"], idl["wakeups"]))
    row("  idle RSS (VmRSS)", "%.2f MB" % (idl["rss"] * 1024 / 1e6))


def main():
    build = os.path.abspath(sys.argv[1] if len(sys.argv) > 1 else "build")
    n = env_int("BENCH_RELAY_READINGS", 100000)
    if n % 4:
        fail("BENCH_RELAY_READINGS must be a multiple of 4")
    pyn = min(env_int("BENCH_PY_READINGS", 5000), n)
    lat_s = env_int("BENCH_LAT_S", 20)
    idle_s = env_int("BENCH_IDLE_S", 60)
    wrk_s = env_int("BENCH_WRK_S", 5)
    reps = env_int("BENCH_REPEAT", 3)
    if not os.access(os.path.join(build, "tidepost"), os.X_OK):
        fail("%s/tidepost not built (run make)" % build)
    os.makedirs(os.path.join(build, "bench"), exist_ok=True)
    tmp = tempfile.mkdtemp(prefix="relay-", dir=os.path.join(build, "bench"))
    signal.signal(signal.SIGTERM, lambda *a: sys.exit(1))
    try:
        port = free_port()
        nginx_start(tmp, port)
        arch, nd = make_data(build, tmp, n // 4)
        dr = drains(build, tmp, arch, n, port, reps)
        py = pyrelays(nd, pyn, port, reps)
        wk = wrk(tmp, nd, port, wrk_s)
        lat = latency(build, tmp, arch, nd, lat_s)
        idl = idle(build, tmp, port, idle_s)
        report(n, pyn, dr, py, wk, lat, idl)
    finally:
        stop_all()
        if os.environ.get("BENCH_KEEP") == "1":
            print("bench relay: kept %s" % tmp)
        else:
            shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
