#!/usr/bin/python3
"""HTTP output (daemon/post.c) against a real local server.

Runs BUILD/tools/post_drive (one output over a real ring file, libcurl's
multi interface in the daemon's poll loop) against httpserver.py and
checks RELIABILITY.md T12 (status/transport classification, Retry-After),
T14 (stalls, trickle, endless body), T15 (commit-then-reset duplicates
keep id and Idempotency-Key) and the HTTP half of T22 (token handling,
plain http, redirects).  After every run the delivered set is compared
with what was put in the ring: nothing lost, duplicates only with the
same id, order per station kept (httpserver.check_delivery).

Readings are invented test data made by post_drive (see its header).
Run: TIDEPOST=BUILD/tidepost /usr/bin/python3 tests/integration/test_http.py
Prints "N passed, M failed" and per-test figures; exits 1 on a failure.
"""

import email.utils
import json
import os
import shutil
import socket
import subprocess
import sys
import tempfile
import time
import traceback

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
sys.path.insert(0, HERE)

import httpserver                   # noqa: E402

EXE = os.environ.get("TIDEPOST", os.path.join(ROOT, "build", "tidepost"))
BUILD = os.path.dirname(os.path.abspath(EXE))
DRIVE = os.path.join(BUILD, "tools", "post_drive")
LAYOUT = os.path.join(ROOT, "config", "layouts", "reef-v2.json")
TOKEN = "tpTEST-9f1c2e7a-SECRET-d00d"    # invented
TESTS = []
STDERRS = []        # every driver stderr, checked for the token at the end
TMP = tempfile.mkdtemp(prefix="test_http-")


def test(fn):
    TESTS.append(fn)
    return fn


def check(cond, msg):
    if not cond:
        raise AssertionError(msg)


def expected_ids(n, stations=2):
    """The ids post_drive gives readings 1..n (see post_drive.c)."""
    out = []
    for i in range(1, n + 1):
        k = (i - 1) % stations + 1
        s = (i - 1) // stations + 1
        out.append("st%d-%d-%d-0" % (k, 1796020500 + s * 900, s))
    return out


class Run:
    """A fresh folder with a config, a token file and a ring."""

    def __init__(self, name, **out):
        self.dir = os.path.join(TMP, name)
        os.makedirs(self.dir)
        self.token = os.path.join(self.dir, "token")
        with open(self.token, "w") as f:
            f.write(TOKEN + "\n")
        os.chmod(self.token, 0o600)
        o = {"kind": "http", "name": "dash", "url": "http://127.0.0.1:9/in",
             "allow_plain_http": True, "token_file": self.token,
             "batch": 100, "timeout_s": 5, "connect_timeout_s": 3,
             "backoff_base_s": 1, "backoff_cap_s": 600}
        o.update(out)
        for k in [k for k, v in o.items() if v is None]:
            del o[k]
        cfg = {"layouts": [LAYOUT], "state_dir": self.dir,
               "inputs": [{"kind": "stdin", "framing": "hex"}],
               "outputs": [o]}
        self.config = os.path.join(self.dir, "config.json")
        with open(self.config, "w") as f:
            json.dump(cfg, f)
        self.ring = os.path.join(self.dir, "ring")

    def args(self, url, fill, limit_s, extra):
        a = [DRIVE, "--config", self.config, "--ring", self.ring,
             "--fill", str(fill), "--limit-s", str(limit_s)]
        if url is not None:
            a += ["--url", url]
        return a + list(extra)

    def drive(self, url, fill=0, limit_s=30, extra=(), env=None):
        """Runs post_drive; (summary dict, exit code, seconds)."""
        t0 = time.monotonic()
        res = subprocess.run(self.args(url, fill, limit_s, extra),
                             capture_output=True, text=True,
                             timeout=limit_s + 150, env=env)
        dt = time.monotonic() - t0
        STDERRS.append(res.stderr)
        STDERRS.append(res.stdout)
        lines = res.stdout.strip().splitlines()
        check(lines, "post_drive printed nothing; stderr: %s"
              % res.stderr[-2000:])
        summ = json.loads(lines[-1])
        summ["_stderr"] = res.stderr
        return summ, res.returncode, dt

    def deadletters(self):
        p = os.path.join(self.dir, "deadletter-dash.ndjson")
        if not os.path.exists(p):
            return []
        with open(p) as f:
            return [json.loads(line)["id"] for line in f]


def server(**kw):
    """An unstarted server: use it in a with block (or call start())."""
    return httpserver.ScriptedServer(**kw)


def gaps(srv):
    """Seconds between successive requests (server's monotonic clock)."""
    m = [e["mono"] for e in srv.requests]
    return [round(b - a, 3) for a, b in zip(m, m[1:])]


def keys(srv):
    return [e["headers"].get("idempotency-key") for e in srv.requests]


def free_port():
    s = socket.socket()
    s.bind(("127.0.0.1", 0))
    p = s.getsockname()[1]
    s.close()
    return p


def delivered_ok(srv, n, summ, allow_missing=()):
    check(summ["error"] is None, "driver error: %s" % summ["error"])
    rep = srv.assert_delivery(expected_ids(n), allow_missing=allow_missing)
    check(summ["state"] == "drained", "state %s, want drained; last "
          "error %r" % (summ["state"], summ["last_error"]))
    check(summ["acked"] == n, "acked %s, want %d" % (summ["acked"], n))
    check(srv.retry_consistency() == [], "retry consistency: %s"
          % srv.retry_consistency())
    return rep


# ---------------------------------------------------------------------------
# 2xx, batching, connection reuse, headers

@test
def delivers_in_batches_over_one_connection():
    """250 readings, batch 100: 3 requests on one kept-alive connection,
    keys <output>-<first>-<last>, bearer token, empty Expect."""
    r = Run("ok")
    with server() as srv:
        summ, rc, dt = r.drive(srv.url + "/in", fill=250)
    rep = delivered_ok(srv, 250, summ)
    check(rc == 0, "exit %d" % rc)
    check(keys(srv) == ["dash-1-100", "dash-101-200", "dash-201-250"],
          "keys %s" % keys(srv))
    check(len({e["conn"] for e in srv.requests}) == 1,
          "connection not reused: %s" % [e["conn"] for e in srv.requests])
    h = srv.requests[0]["headers"]
    check(h.get("authorization") == "Bearer " + TOKEN, "authorization")
    check("expect" not in h, "Expect must not be sent: %s" % h)
    check(h.get("content-type") == "application/json", "content-type")
    body = json.loads(srv.requests[0]["body"])
    q = body["quantities"]
    check(set(q) == {"ph", "temperature", "battery"},
          "quantities %s" % sorted(q))
    check(q["ph"]["standard_name"] ==
          "sea_water_ph_reported_on_total_scale", "ph standard name")
    return "%d requests, %d unique, %.2f s" % (len(srv.requests),
                                               rep["unique"], dt)


@test
def many_batches_reuse_one_connection():
    """1000 readings in batches of 20: 50 requests, one connection."""
    r = Run("reuse", batch=20)
    with server() as srv:
        summ, rc, dt = r.drive(srv.url + "/in", fill=1000)
    delivered_ok(srv, 1000, summ)
    conns = {e["conn"] for e in srv.requests}
    check(len(srv.requests) == 50, "requests %d" % len(srv.requests))
    check(len(conns) == 1, "connections %s" % conns)
    return "50 requests on %d connection, %.2f s" % (len(conns), dt)


@test
def ndjson_rename_extra_headers():
    """ndjson body, rename, extra members and extra headers end to end;
    201 is success too."""
    r = Run("ndjson", format="ndjson", rename={"ph": "pH"},
            extra={"network": "invented-net"},
            headers={"X-Project": "reef-watch"})
    with server(default={"status": 201}) as srv:
        summ, rc, _ = r.drive(srv.url + "/in", fill=30)
    delivered_ok(srv, 30, summ)
    e = srv.requests[0]
    check(e["headers"]["content-type"] == "application/x-ndjson", "ctype")
    check(e["headers"].get("x-project") == "reef-watch", "header")
    lines = e["body"].splitlines()
    check(len(lines) == 30, "lines %d" % len(lines))
    one = json.loads(lines[0])
    check("pH" in one["values"] and "ph" not in one["values"] and
          "pH" in one["flags"], "rename: %s" % one["values"])
    check(one["network"] == "invented-net", "extra: %s" % one)
    return "30 readings as NDJSON"


@test
def single_format_one_per_request():
    r = Run("single", format="single")
    with server() as srv:
        summ, rc, _ = r.drive(srv.url + "/in", fill=5)
    delivered_ok(srv, 5, summ)
    check(keys(srv) == ["dash-%d-%d" % (i, i) for i in range(1, 6)],
          "keys %s" % keys(srv))
    check(json.loads(srv.requests[0]["body"])["id"] ==
          expected_ids(5)[0], "single body is the reading")
    return "5 requests"


@test
def kick_sends_later_readings():
    """Readings committed while running are sent after post_kick."""
    r = Run("kick")
    with server() as srv:
        summ, rc, _ = r.drive(srv.url + "/in", fill=10,
                              extra=["--more", "25", "--more-at-ms",
                                     "800"])
    delivered_ok(srv, 35, summ)
    check(len(srv.requests) == 2, "requests %d" % len(srv.requests))
    return "10 + 25 readings in 2 requests"


# ---------------------------------------------------------------------------
# Retries and Retry-After (T12)

def one_retry(name, act, lo, hi, **out):
    """act on the first request, then 204: one retry, gap in [lo, hi]."""
    r = Run(name, **out)
    with server(script=[act]) as srv:
        summ, rc, _ = r.drive(srv.url + "/in", fill=40)
    delivered_ok(srv, 40, summ)
    g = gaps(srv)
    check(len(srv.requests) == 2, "requests %d" % len(srv.requests))
    check(lo <= g[0] <= hi, "retry after %.3f s, want [%s, %s]"
          % (g[0], lo, hi))
    check(keys(srv)[0] == keys(srv)[1], "key changed on retry")
    check(srv.requests[0]["raw_body"] == srv.requests[1]["raw_body"],
          "body changed on retry")
    check(summ["retries"] == 1, "retries %s" % summ["retries"])
    return "retry after %.2f s" % g[0]


@test
def retry_after_seconds():
    """503 Retry-After: 2 -> max(2 s, jitter < 1 s) = 2 s."""
    return one_retry("ra-sec", {"status": 503, "retry_after": "2"},
                     1.95, 2.6)


@test
def retry_after_http_date():
    """An HTTP-date 3 s ahead (1 s resolution) -> about 2-3 s."""
    d = email.utils.formatdate(time.time() + 3, usegmt=True)
    return one_retry("ra-date", {"status": 503, "retry_after": d},
                     1.5, 3.7)


@test
def retry_after_past_date():
    """A date in the past (negative on libcurl 7.88) -> clamped to 1 s."""
    return one_retry("ra-past", {"status": 503, "retry_after":
                                 "Wed, 21 Oct 2015 07:28:00 GMT"},
                     0.95, 1.6)


@test
def retry_after_garbage():
    """Retry-After: soon-ish (unparseable, reported as 0) -> 1 s."""
    return one_retry("ra-garbage", {"status": 503,
                                    "retry_after": "soon-ish"}, 0.95, 1.6)


@test
def retry_after_huge_is_capped():
    """Retry-After: 10^9 with backoff_cap_s 3 -> 3 s, not 31 years."""
    return one_retry("ra-huge", {"status": 503,
                                 "retry_after": "1000000000"}, 2.95, 3.6,
                     backoff_cap_s=3)


@test
def too_many_requests_without_retry_after():
    """429 alone: full jitter, first retry in [0, 1 s)."""
    return one_retry("429", {"status": 429}, 0.0, 1.2)


@test
def server_error_then_ok():
    """500, 502, 504, 408, 425 then 200: retried with the same key."""
    acts = [{"status": s} for s in (500, 502, 504, 408, 425)]
    r = Run("5xx", backoff_cap_s=1)
    with server(script=acts, default={"status": 200}) as srv:
        summ, rc, _ = r.drive(srv.url + "/in", fill=20)
    delivered_ok(srv, 20, summ)
    check(len(set(keys(srv))) == 1 and len(srv.requests) == 6,
          "keys %s" % keys(srv))
    check(summ["retries"] == 5, "retries %s" % summ["retries"])
    return "6 requests, 1 key, backoff gaps %s" % gaps(srv)


@test
def backoff_grows_and_holds_cap():
    """8 failures with base 1 s, cap 2 s: every gap <= 2 s + epsilon."""
    r = Run("cap", backoff_cap_s=2)
    with server(script=[{"status": 503, "repeat": 8}]) as srv:
        summ, rc, _ = r.drive(srv.url + "/in", fill=10)
    delivered_ok(srv, 10, summ)
    g = gaps(srv)
    check(len(g) == 8 and max(g) <= 2.3, "gaps %s" % g)
    return "gaps %s (cap 2 s)" % g


# ---------------------------------------------------------------------------
# 413 split, dead letters, pause

@test
def too_large_splits_the_batch():
    """413 on 100 readings -> 50 + 50, then batches of 50."""
    r = Run("413")
    with server(script=[{"status": 413}]) as srv:
        summ, rc, _ = r.drive(srv.url + "/in", fill=200)
    delivered_ok(srv, 200, summ)
    k = keys(srv)
    check(k[:3] == ["dash-1-100", "dash-1-50", "dash-51-100"], "keys %s"
          % k)
    check(all(len(e["ids"]) <= 50 for e in srv.requests[1:]),
          "later batches must stay split")
    return "keys %s" % k


@test
def too_large_single_reading_is_dead_lettered():
    r = Run("413-one", format="single")
    with server(script=[{"status": 413}]) as srv:
        summ, rc, _ = r.drive(srv.url + "/in", fill=3)
    ids = expected_ids(3)
    srv.assert_delivery(ids, allow_missing=ids[:1])
    check(r.deadletters() == ids[:1], "dead letters %s" % r.deadletters())
    check(summ["deadlettered"] == 1 and summ["acked"] == 3, "summary")
    return "1 dead-lettered, 2 delivered"


@test
def bad_request_is_dead_lettered_and_later_batches_flow():
    """400 for the first batch: its 50 readings go to the dead-letter
    file (not dropped), an alert is raised, the rest is delivered."""
    r = Run("400", batch=50)
    with server(script=[{"status": 400}]) as srv:
        summ, rc, _ = r.drive(srv.url + "/in", fill=150)
    ids = expected_ids(150)
    srv.assert_delivery(ids, allow_missing=ids[:50])
    check(r.deadletters() == ids[:50], "dead letters: %d"
          % len(r.deadletters()))
    check(not (set(ids[:50]) & srv.delivered_ids()), "400 committed?")
    check(summ["state"] == "drained" and summ["acked"] == 150, "summary")
    check(summ["deadlettered"] == 50, "deadlettered %s"
          % summ["deadlettered"])
    check([a["condition"] for a in summ["alerts"]] == ["deadletter"],
          "alerts %s" % summ["alerts"])
    for code in (404, 409, 415, 422):
        r2 = Run("dl-%d" % code, batch=50)
        with server(script=[{"status": code}]) as srv2:
            s2, _, _ = r2.drive(srv2.url + "/in", fill=60)
        check(r2.deadletters() == expected_ids(60)[:50] and
              s2["acked"] == 60, "status %d not dead-lettered" % code)
    return "50 readings dead-lettered (400, also 404 409 415 422)"


@test
def unauthorized_pauses_then_recovers():
    """401: paused with an alert, buffering goes on; the slow retry
    (min(600 s, cap) = 2 s here) succeeds once the server accepts."""
    r = Run("401", backoff_cap_s=2)
    with server(script=[{"status": 401}]) as srv:
        summ, rc, _ = r.drive(srv.url + "/in", fill=30)
    delivered_ok(srv, 30, summ)
    conds = [a["condition"] for a in summ["alerts"]]
    check(conds == ["paused", "resumed"], "alerts %s" % conds)
    check(1.9 <= gaps(srv)[0] <= 2.6, "pause retry gap %s" % gaps(srv))
    return "paused %.2f s, then delivered" % gaps(srv)[0]


@test
def forbidden_keeps_paused_and_acks_nothing():
    r = Run("403", backoff_cap_s=600)
    with server(default={"status": 403}) as srv:
        summ, rc, dt = r.drive(srv.url + "/in", fill=30, limit_s=3)
    check(summ["state"] == "paused", "state %s" % summ["state"])
    check(summ["acked"] == 0 and summ["backlog"] == 30, "acked/backlog")
    check(len(srv.requests) == 1, "requests %d (slow retry is 10 min)"
          % len(srv.requests))
    check(srv.deliveries == [], "nothing committed")
    check(rc == 1, "exit %d" % rc)
    return "paused, 1 request in %.1f s, backlog 30" % dt


@test
def redirect_is_not_followed():
    """302 to another path: not followed (pause: the URL needs fixing)."""
    r = Run("302")
    srv = server(default={"status": 302}).start()
    srv.default = {"status": 302, "headers": {
        "Location": srv.url + "/elsewhere"}}
    try:
        summ, rc, _ = r.drive(srv.url + "/in", fill=5, limit_s=3)
    finally:
        srv.stop()
    paths = [e["path"] for e in srv.requests]
    check(paths == ["/in"], "paths %s" % paths)
    check(summ["state"] == "paused" and summ["acked"] == 0, "summary")
    return "1 request, no redirect followed"


# ---------------------------------------------------------------------------
# Transport failures (T12, T14, T15)

@test
def connection_refused_then_server_comes_up():
    """Nothing listens at first: retried with backoff (curl 7), then the
    server starts on that port and everything is delivered."""
    port = free_port()
    r = Run("refused", backoff_cap_s=1)
    p = subprocess.Popen(r.args("http://127.0.0.1:%d/in" % port, 40, 30,
                                ()), stdout=subprocess.PIPE,
                         stderr=subprocess.PIPE, text=True)
    time.sleep(2.5)
    srv = server(port=port).start()
    try:
        out, err = p.communicate(timeout=60)
    finally:
        srv.stop()
    STDERRS.extend([out, err])
    summ = json.loads(out.strip().splitlines()[-1])
    delivered_ok(srv, 40, summ)
    check("curl 7" in err or "connect" in err.lower(),
          "refusal not logged: %s" % err[-500:])
    return "delivered after the server came up"


def transport_fault(name, act, **out):
    r = Run(name, backoff_cap_s=1, **out)
    with server(script=[act]) as srv:
        summ, rc, _ = r.drive(srv.url + "/in", fill=30)
    rep = delivered_ok(srv, 30, summ)
    check(len(srv.requests) == 2, "requests %d" % len(srv.requests))
    check(keys(srv)[0] == keys(srv)[1], "key changed")
    return rep


@test
def reset_before_headers_is_retried():
    rep = transport_fault("rst", {"reset": "before_headers"})
    check(rep["duplicates"] == {}, "no duplicates expected")
    return "retried, no loss"


@test
def reset_mid_body_is_retried():
    """200 headers then RST: not sure it was read, so retried; the
    duplicates carry the same ids."""
    rep = transport_fault("rst-mid", {"reset": "mid_body"})
    return "%d duplicates (same ids)" % len(rep["duplicates"])


@test
def commit_then_reset_duplicates_keep_id_and_key():
    """T15: the server stores then resets; the retry carries the same
    body and Idempotency-Key, so the duplicates have the same ids."""
    rep = transport_fault("commit-rst", {"commit_then_reset": True})
    check(len(rep["duplicates"]) == 30, "duplicates %s"
          % len(rep["duplicates"]))
    rep2 = transport_fault("commit-500", {"commit_then_status": 500})
    check(len(rep2["duplicates"]) == 30, "duplicates after 500")
    return "30 duplicates each, ids and keys identical"


@test
def stall_ends_within_timeout():
    """The server never answers: the attempt ends at timeout_s (2 s)
    plus epsilon, then the retry succeeds."""
    r = Run("stall", timeout_s=2, connect_timeout_s=1,
            backoff_cap_s=1)
    with server(script=[{"stall_s": 30}]) as srv:
        summ, rc, dt = r.drive(srv.url + "/in", fill=20)
    delivered_ok(srv, 20, summ)
    g = gaps(srv)[0]
    # attempt (2 s) + backoff (< 1 s) + epsilon
    check(1.9 <= g <= 3.5, "second attempt %.2f s after the first" % g)
    check("curl 28" in summ["_stderr"], "timeout not logged")
    return "attempt ended, retry %.2f s after the first" % g


@test
def no_retry_scheduled_after_stop():
    """post_stop while a request is in flight: the request may finish
    (here it times out after the stop), but no retry is scheduled any
    more, so the output ends "stopped" with its backlog kept (found as
    a flaky "backoff" end of dns_failure_is_retried)."""
    r = Run("stopfly", timeout_s=2, connect_timeout_s=1, backoff_cap_s=1)
    with server(script=[{"stall_s": 30}]) as srv:
        summ, rc, dt = r.drive(srv.url + "/in", fill=5, limit_s=1)
    check(summ["state"] == "stopped", "state %s" % summ["state"])
    check(summ["acked"] == 0 and summ["backlog"] == 5,
          "acked %s backlog %s" % (summ["acked"], summ["backlog"]))
    check("curl 28" in summ["_stderr"], "the in-flight request did not "
          "end by its timeout")
    return "in flight at stop, ended by timeout, no retry armed"


@test
def trickle_ends_within_timeout():
    r = Run("trickle", timeout_s=2, connect_timeout_s=1,
            backoff_cap_s=1)
    with server(script=[{"trickle": 1}]) as srv:
        summ, rc, dt = r.drive(srv.url + "/in", fill=20)
    delivered_ok(srv, 20, summ)
    g = gaps(srv)[0]
    check(1.9 <= g <= 3.5, "second attempt %.2f s after the first" % g)
    return "trickle cut after %.2f s" % g


@test
def endless_body_is_capped():
    """200 with an endless body: the response is cut at 64 KiB and the
    batch counts as delivered (the status line said 2xx)."""
    r = Run("endless")
    with server(script=[{"endless_body": True}]) as srv:
        summ, rc, dt = r.drive(srv.url + "/in", fill=150)
        time.sleep(0.3)
    delivered_ok(srv, 150, summ)
    check(summ["retries"] == 0, "retries %s" % summ["retries"])
    check(dt < 10, "took %.1f s" % dt)
    sent = srv.requests[0].get("body_bytes_sent", 0)
    return "stopped reading; server pushed %d bytes before noticing" % sent


# ---------------------------------------------------------------------------
# Secrets and schemes (T22, HTTP part)

@test
def token_from_environment():
    r = Run("env", token_file=None, token_env="TP_HTTP_TEST_TOKEN")
    env = dict(os.environ, TP_HTTP_TEST_TOKEN=TOKEN)
    with server() as srv:
        summ, rc, _ = r.drive(srv.url + "/in", fill=5, env=env)
    delivered_ok(srv, 5, summ)
    check(srv.requests[0]["headers"]["authorization"] == "Bearer " + TOKEN,
          "authorization")
    return "bearer token from the environment"


@test
def token_file_permissions_enforced():
    r = Run("perm")
    os.chmod(r.token, 0o644)
    summ, rc, _ = r.drive("http://127.0.0.1:9/in", fill=1)
    check(rc == 2 and "group or others" in (summ["error"] or ""),
          "0644 token file accepted: %s" % summ["error"])
    os.chmod(r.token, 0o600)
    link = os.path.join(r.dir, "token-link")
    os.symlink(r.token, link)
    r2 = Run("perm-link", token_file=link)
    summ, rc, _ = r2.drive("http://127.0.0.1:9/in", fill=1)
    check(rc == 2 and "symbolic link" in (summ["error"] or ""),
          "symlinked token accepted: %s" % summ["error"])
    return "0644 and symlink refused"


@test
def plain_http_needs_allow_or_loopback():
    """http:// to a name that is not loopback is refused unless
    allow_plain_http; (https config, URL overridden)."""
    r = Run("plain", url="https://example.invalid/in",
            allow_plain_http=False)
    summ, rc, _ = r.drive("http://example.invalid/in", fill=1)
    check(rc == 2 and "not loopback" in (summ["error"] or ""),
          "plain http accepted: %s" % summ["error"])
    summ, rc, _ = r.drive("ftp://example.invalid/in", fill=0)
    check(rc == 2 and "not an https" in (summ["error"] or ""),
          "ftp accepted: %s" % summ["error"])
    with server() as srv:       # loopback http stays allowed
        summ, rc, _ = r.drive(srv.url + "/in", fill=0)
    check(summ["error"] is None, "loopback http refused: %s"
          % summ["error"])
    return "refused: http://example.invalid, ftp://"


@test
def dns_failure_is_retried():
    r = Run("dns", url="https://example.invalid/in",
            allow_plain_http=False, backoff_cap_s=1, connect_timeout_s=2)
    summ, rc, _ = r.drive("https://name.invalid/in?sig=QUERYSECRET",
                          fill=3, limit_s=3)
    # post_stop at the time limit: "stopped" with a backlog
    check(summ["state"] == "stopped" and summ["acked"] == 0 and
          summ["backlog"] == 3, "state %s" % summ["state"])
    check("curl 6" in summ["last_error"], "error %r" % summ["last_error"])
    check("QUERYSECRET" not in summ["_stderr"] + json.dumps(summ),
          "URL query leaked")
    return "retried %d times: %s" % (summ["retries"], summ["last_error"])


@test
def token_never_logged():
    """Last: the token appears in no driver stderr/stdout, no dead-letter
    file and no error text of any run above (at the default = most
    verbose log level)."""
    n = sum(s.count(TOKEN) for s in STDERRS)
    check(n == 0, "token found %d times in driver output" % n)
    hits = 0
    for d, _, files in os.walk(TMP):
        for f in files:
            if f.startswith("token") or f.startswith("ring"):
                continue
            with open(os.path.join(d, f), "rb") as fh:
                hits += fh.read().count(TOKEN.encode())
    check(hits == 0, "token found in %d files" % hits)
    return "0 occurrences in %d outputs" % len(STDERRS)


def main():
    if not os.path.exists(DRIVE):
        print("test_http: %s missing (make BUILD=... %s)" % (DRIVE, DRIVE))
        return 1
    passed = failed = 0
    t0 = time.monotonic()
    for fn in TESTS:
        t1 = time.monotonic()
        try:
            note = fn()
            passed += 1
            print("ok   %-52s %5.1f s  %s" % (fn.__name__,
                  time.monotonic() - t1, note or ""))
        except Exception:
            failed += 1
            print("FAIL %s" % fn.__name__)
            traceback.print_exc()
        sys.stdout.flush()
    print("test_http: %d passed, %d failed (%.1f s)"
          % (passed, failed, time.monotonic() - t0))
    if failed == 0:
        shutil.rmtree(TMP, ignore_errors=True)
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
