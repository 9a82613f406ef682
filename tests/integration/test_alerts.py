#!/usr/bin/python3
"""test_alerts.py - alert delivery end to end (RELIABILITY.md test T21):
the exec target without a shell, its environment, fds, time limit and rate
limit; the webhook's JSON, token, retries, and that a down or stalling
webhook never holds up the poll loop that takes in readings.

Run: TIDEPOST=build/tidepost /usr/bin/python3 tests/integration/test_alerts.py

Delivery is driven by BUILD/tools/alert_drive (daemon/alert.c in the real
poll loop, config from a real config file).  The exec target is
tests/tools/alert_record.sh, which records its argv, environment and fds
byte for byte.  The webhook receiver is tests/integration/httpserver.py.
Hostile strings follow T21 and SEI CERT ENV33-C; everything else is
invented test data.  Standard library only.
"""
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
import traceback

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
import httpserver  # noqa: E402

TIDEPOST = os.environ.get("TIDEPOST", "build/tidepost")
DRIVE = os.path.join(os.path.dirname(TIDEPOST), "tools", "alert_drive")
RECORDER = os.path.abspath(os.path.join(HERE, "..", "tools",
                                        "alert_record.sh"))
TEXT_MAX = 4096   # ALERT_TEXT_MAX (daemon/alert.h)
TMP = None

LAYOUTS = [{"name": "a", "fields": [{"name": "battery", "type": "u16"}]}]


def check(cond, what):
    if not cond:
        raise AssertionError(what)


def setup_dir():
    d = tempfile.mkdtemp(prefix="al-", dir=TMP)
    os.mkdir(os.path.join(d, "rec"))
    return d


def write_config(d, to, **alerts):
    cfg = {"layouts": LAYOUTS, "state_dir": d,
           "alerts": dict({"to": to}, **alerts)}
    path = os.path.join(d, "tidepost.json")
    with open(path, "w") as f:
        json.dump(cfg, f)
    return path


def drive(cfg, *args, env=None, pass_fds=(), timeout=60):
    p = subprocess.run([DRIVE, "-c", cfg] + list(args),
                       capture_output=True, timeout=timeout, env=env,
                       pass_fds=pass_fds)
    check(p.returncode == 0, "alert_drive failed: %r" % p.stderr[-2000:])
    return json.loads(p.stdout.decode().strip().splitlines()[-1]), \
        p.stderr.decode(errors="replace")


def records(rec):
    """{pid: {"argv": [...], "env": {...}, "fds": [(fd, target)]}}"""
    out = {}
    for name in os.listdir(rec):
        pid, kind = name.split(".")
        r = out.setdefault(int(pid), {})
        with open(os.path.join(rec, name), "rb") as f:
            data = f.read()
        if kind == "argv":
            r["argv"] = [a.decode() for a in data.split(b"\0")[:-1]]
        elif kind == "env":
            r["env"] = dict(kv.decode().split("=", 1)
                            for kv in data.split(b"\0")[:-1])
        elif kind == "fds":
            r["fds"] = [(int(ln.split(" ", 1)[0]), ln.split(" ", 1)[1])
                        for ln in data.decode().splitlines()]
        else:
            r[kind] = True
    return out


# ---- exec ------------------------------------------------------------------

def payloads(canary):
    return [
        ("separator", "rf2; touch %s" % canary),
        ("substitution", "$(touch %s)" % canary),
        ("backticks", "`touch %s`" % canary),
        ("newline", "rf2\ntouch %s\n" % canary),
        ("rm", "; rm -rf /tmp/x"),
        ("quotes", "'\"; touch %s; echo \"'" % canary),
        ("100 KB", "A" * 100 * 1024 + "; touch %s" % canary),
    ]


def test_exec_no_shell():
    d = setup_dir()
    rec = os.path.join(d, "rec")
    canary = os.path.join(d, "canary")
    cfg = write_config(d, [{"kind": "exec", "argv": [RECORDER, rec]}],
                       exec_per_min=600)
    env = dict(os.environ, TIDEPOST_SECRET_TOKEN="s3cret-token",
               PATH="/tmp/evil:/usr/bin:/bin")
    # a daemon fd without O_CLOEXEC: the child must not inherit it
    leak = os.open(os.path.join(d, "leak-me"), os.O_WRONLY | os.O_CREAT)
    os.set_inheritable(leak, True)
    try:
        for why, bad in payloads(canary):
            shutil.rmtree(rec)
            os.mkdir(rec)
            st, err = drive(cfg, "-s", bad, "-m", bad, "-f", bad, env=env,
                            pass_fds=(leak,))
            check(st["spawned"] == 1 and st["sent"] == 1, (why, st))
            (r,) = records(rec).values()
            check(r.get("done"), why)
            # argv: exactly the configured strings plus the JSON
            check(r["argv"][1:3] == [RECORDER, rec], (why, r["argv"][:3]))
            check(len(r["argv"]) == 4, (why, len(r["argv"])))
            ev = json.loads(r["argv"][3])
            want = bad.encode()[:TEXT_MAX].decode(errors="ignore")
            check(ev["station"] == want and ev["message"] == want, why)
            check(r["env"]["TIDEPOST_STATION"] == want, why)
            # environment: fixed PATH, our variables only, no secret
            check(r["env"]["PATH"] == "/usr/bin:/bin", r["env"]["PATH"])
            check(all(k == "PATH" or k.startswith("TIDEPOST_")
                      for k in r["env"]), sorted(r["env"]))
            check("TIDEPOST_SECRET_TOKEN" not in r["env"], why)
            check(not any("s3cret" in v for v in r["env"].values()), why)
            check(r["env"]["TIDEPOST_CONDITION"] == "battery_low", why)
            # fds: 0-2, plus the shell's own (its script, a stdin copy)
            for fd, target in r["fds"]:
                check("leak-me" not in target, (why, fd, target))
                check(fd <= 2 or target in (RECORDER, "/dev/null"),
                      (why, fd, target))
            check(not os.path.exists(canary), "canary made: " + why)
            check("s3cret" not in err, "token in the log")
    finally:
        os.close(leak)
    check(not os.path.exists(canary), "canary")


def test_exec_timeout_kills_group():
    d = setup_dir()
    rec = os.path.join(d, "rec")
    cfg = write_config(d, [{"kind": "exec", "argv": [RECORDER, rec, "hang"],
                            "timeout_s": 1}])
    st, err = drive(cfg)
    check(st["killed"] == 1 and st["failed"] == 1, st)
    check(1000 <= st["elapsed_ms"] < 3500, st)
    check("killed after 1 s" in err, err)
    (pid,) = records(rec).keys()
    time.sleep(0.2)
    # the shell and its sleep child are both gone (the group was killed)
    left = []
    for p in os.listdir("/proc"):
        if not p.isdigit():
            continue
        try:
            with open("/proc/%s/stat" % p) as f:
                fields = f.read().rsplit(")", 1)[1].split()
        except OSError:
            continue
        if int(fields[2]) == pid and fields[0] != "Z":
            left.append(p)
    check(not left, "processes of the killed group remain: %r" % left)


def test_exec_rate_limit():
    d = setup_dir()
    rec = os.path.join(d, "rec")
    cfg = write_config(d, [{"kind": "exec", "argv": [RECORDER, rec]}],
                       exec_per_min=5)
    st, err = drive(cfg, "-n", "40", "-t", "3")
    check(st["events"] == 40, st)
    check(st["spawned"] == 5 and st["busy"], st)
    check(len(records(rec)) == 5, "five ran")


# ---- webhook ----------------------------------------------------------------

def token_file(d):
    path = os.path.join(d, "token")
    with open(path, "w") as f:
        f.write("alert-t0ken\n")
    os.chmod(path, 0o600)
    return path


def test_webhook_json():
    d = setup_dir()
    with httpserver.ScriptedServer(default={"status": 204}) as srv:
        cfg = write_config(d, [{"kind": "http", "url": srv.url + "/alerts",
                                "allow_plain_http": True,
                                "token_file": token_file(d)}])
        st, err = drive(cfg, "-s", "rf2")
        reqs = list(srv.requests)
    check(st["sent"] == 1 and st["failed"] == 0, st)
    check(len(reqs) == 1, reqs)
    r = reqs[0]
    check(r["method"] == "POST" and r["path"] == "/alerts", r)
    h = r["headers"]
    check(h["content-type"] == "application/json", h)
    check(h["authorization"] == "Bearer alert-t0ken", h)
    check(h["idempotency-key"].startswith("battery_low-drive-0-raised-"), h)
    ev = json.loads(r["body"])
    for k in ("condition", "station", "severity", "since", "value",
              "threshold", "message", "id", "event", "time"):
        check(k in ev, "member %s missing: %r" % (k, ev))
    check(ev["condition"] == "battery_low" and ev["station"] == "rf2", ev)
    check(ev["value"] == 10.31 and ev["threshold"] == 10.5, ev)
    check(ev["output"] is None and ev["event"] == "raised", ev)
    check("alert-t0ken" not in err, "token in the log")


def test_webhook_retry_same_key():
    d = setup_dir()
    with httpserver.ScriptedServer(script=[{"status": 503}],
                                   default={"status": 204}) as srv:
        cfg = write_config(d, [{"kind": "http", "url": srv.url + "/a",
                                 "allow_plain_http": True}])
        st, err = drive(cfg, "-t", "20")
        reqs = list(srv.requests)
    check(st["sent"] == 1, st)
    check(len(reqs) == 2, len(reqs))
    check(reqs[0]["headers"]["idempotency-key"] ==
          reqs[1]["headers"]["idempotency-key"], "same key on retry")
    check(reqs[0]["body"] == reqs[1]["body"], "same body on retry")
    check("HTTP 503" in err, err)


def test_webhook_4xx_dropped():
    d = setup_dir()
    with httpserver.ScriptedServer(default={"status": 400}) as srv:
        cfg = write_config(d, [{"kind": "http", "url": srv.url + "/a",
                                 "allow_plain_http": True}])
        st, err = drive(cfg, "-t", "10")
        n = len(srv.requests)
    check(st["failed"] == 1 and n == 1, (st, n))


def test_stalling_webhook_never_blocks():
    """A receiver that takes the request and never answers: the loop
    keeps running (a 10 ms timer fires on time) until the attempt times
    out; readings would be taken in meanwhile."""
    d = setup_dir()
    with httpserver.ScriptedServer(script=[{"stall_s": 30}],
                                   default={"status": 204}) as srv:
        cfg = write_config(d, [{"kind": "http", "url": srv.url + "/a",
                                "allow_plain_http": True, "timeout_s": 2}])
        st, err = drive(cfg, "-t", "15")
    check(st["sent"] == 1, st)
    check(st["elapsed_ms"] >= 2000, st)
    check(st["max_late_ms"] < 150, "loop held up %d ms" % st["max_late_ms"])


def test_down_webhook_never_blocks():
    d = setup_dir()
    # a port nobody listens on (9, discard): refused at once, retried
    cfg = write_config(d, [{"kind": "http", "url": "http://127.0.0.1:9/a",
                            "allow_plain_http": True, "timeout_s": 2}])
    st, err = drive(cfg, "-n", "5", "-t", "3")
    check(st["busy"] and st["sent"] == 0, st)
    check(st["max_late_ms"] < 150, "loop held up %d ms" % st["max_late_ms"])
    check("retry in" in err, err)


def test_bad_targets_refused():
    d = setup_dir()
    # (the loader refuses plain http without allow_plain_http; the alert
    # module refuses other schemes again, see test_alert.c)
    cfg = write_config(d, [{"kind": "http",
                            "url": "http://alerts.example.org/a"}])
    p = subprocess.run([DRIVE, "-c", cfg], capture_output=True)
    check(p.returncode == 2 and b"alerts.to[0].url" in p.stderr, p.stderr)
    cfg = write_config(d, [{"kind": "exec", "argv": ["notify-team"]}])
    p = subprocess.run([TIDEPOST, "check", "-c", cfg], capture_output=True)
    check(p.returncode == 1 and b"absolute" in p.stderr, p.stderr)


# ---- through the daemon -------------------------------------------------------

def test_daemon_end_to_end():
    """`tidepost run`: readings from stdin raise battery_low once (exec
    and webhook both told), `status` shows it; a stalling webhook does
    not hold up readings; after SIGTERM and a restart the alert is still
    open and is not raised again."""
    import test_run as tr
    srv = httpserver.ScriptedServer(default={"status": 204}).start()
    out = tempfile.mkdtemp(prefix="rec-", dir=TMP)
    s = tr.Setup([{"kind": "stdin", "framing": "cobs"}], [], extra={
        "stations": {"7": {"name": "rf2", "clock_limit_s": 0,
                           "battery": {"field": "battery", "warn_v": 13.0,
                                       "cutoff_v": 6.0, "median_n": 1}},
                     "3": {"name": "b3"}},
        "alerts": {"to": [{"kind": "exec", "argv": [RECORDER, out]},
                          {"kind": "http", "url": srv.url + "/alerts",
                           "allow_plain_http": True, "timeout_s": 2}]},
        "status": {"every_s": 1}})
    s.outputs = [tr.file_output(s.out_path)]
    s.write()
    t0 = int(time.time()) - 3 * 3600

    def packets(seqs):
        data, ids = b"", []
        for q in seqs:
            pk, i = tr.reef(q, 7, t0=t0)
            data += tr.td.cobs(pk)
            ids += i
        return data, ids

    def raised():
        return [r for r in records(out).values()
                if r.get("env", {}).get("TIDEPOST_EVENT") == "raised"]

    d = tr.Daemon(s, stdin=subprocess.PIPE)
    try:
        data, ids = packets([1, 2])
        d.p.stdin.write(data)
        d.p.stdin.flush()
        tr.wait_for(lambda: len(raised()) == 1, what="exec alert")
        tr.wait_for(lambda: len(srv.requests) == 1, what="webhook")
        ev = json.loads(srv.requests[0]["body"])
        check(ev["condition"] == "battery_low" and ev["station"] == "rf2",
              ev)
        check(abs(ev["value"] - 12.0) < 0.1 and ev["threshold"] == 13.0,
              ev)
        def status_with_alert():
            rc, o, e = tr.run(["status", "-c", s.cfg_path, "--json"])
            j = json.loads(o)
            check(rc == 0 and j["running"], (rc, o, e))
            return j if j["status"]["alerts"] else None
        # written within STATUS_SOON_MS of the change
        j = tr.wait_for(status_with_alert, timeout=3, what="status")
        conds = [a["condition"] for a in j["status"]["alerts"]]
        check(conds == ["battery_low"], conds)
        rf2 = [x for x in j["status"]["stations"] if x["name"] == "rf2"][0]
        check(abs(rf2["battery"]["now_v"] - 12.0) < 0.1, rf2)
        # the webhook stalls; readings keep flowing to the file output
        srv.default = {"stall_s": 20}
        tr.wait_for(lambda: len(tr.read_ids(s.out_path)) == 8,
                    what="first readings")
        data, ids2 = packets([3, 4, 5, 6])
        t = time.monotonic()
        d.p.stdin.write(data)
        d.p.stdin.flush()
        tr.wait_for(lambda: len(tr.read_ids(s.out_path)) == 24, timeout=5,
                    what="readings while the webhook stalls")
        check(time.monotonic() - t < 2.0, "readings were held up")
        srv.default = {"status": 204}
    finally:
        d.stop()
    try:
        rc, o, e = tr.run(["status", "-c", s.cfg_path])
        check(rc == 1 and "tidepost: stopped" in o and "battery_low" in o,
              o)
        d = tr.Daemon(s, stdin=subprocess.PIPE)
        data, _ = packets([7])
        d.p.stdin.write(data)
        d.p.stdin.flush()
        tr.wait_for(lambda: len(tr.read_ids(s.out_path)) == 28,
                    what="readings after the restart")
        time.sleep(0.5)
        check(len(raised()) == 1, "not raised again after a restart")
        rc, o, e = tr.run(["status", "-c", s.cfg_path, "--json"])
        j = json.loads(o)
        check([a["condition"] for a in j["status"]["alerts"]] ==
              ["battery_low"], j["status"]["alerts"])
        d.stop()
    finally:
        srv.stop()
        s.cleanup()


def main():
    global TMP
    TMP = tempfile.mkdtemp(prefix="tp-alerts-")
    tests = [test_exec_no_shell, test_exec_timeout_kills_group,
             test_exec_rate_limit, test_webhook_json,
             test_webhook_retry_same_key, test_webhook_4xx_dropped,
             test_stalling_webhook_never_blocks,
             test_down_webhook_never_blocks, test_bad_targets_refused,
             test_daemon_end_to_end]
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
