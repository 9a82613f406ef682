#!/usr/bin/python3
"""HTTPS output: TLS verification (RELIABILITY.md T22, TLS half).

A local HTTPS server (httpserver.py --tls) with certificates from
tlsca.py.  The output trusts only its configured ca_file: the good
certificate (IP and DNS names) is accepted; wrong host, self-signed,
signed by another CA, expired, and the good one without ca_file (the
system store does not hold the test CA) are refused: the output pauses
with an alert, nothing is acked and nothing reaches the server.  A CA
file that is not a certificate is a configuration problem (paused too).

Readings are invented test data made by tests/tools/post_drive.
Run: TIDEPOST=BUILD/tidepost /usr/bin/python3 tests/integration/test_tls.py
"""

import os
import shutil
import sys
import time
import traceback

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

import httpserver                   # noqa: E402
import tlsca                        # noqa: E402
import test_http as th              # noqa: E402  (Run, checks, ids)

TESTS = []
CERTS = None


def test(fn):
    TESTS.append(fn)
    return fn


def tls_server(kind):
    cert, key = CERTS["certs"][kind]
    return httpserver.ScriptedServer(tls=(cert, key))


def deliver(name, kind, host="127.0.0.1", ca=True):
    r = th.Run(name, url="https://example.invalid/in",
               allow_plain_http=False,
               ca_file=CERTS["ca"] if ca is True else ca,
               backoff_cap_s=600)
    with tls_server(kind) as srv:
        summ, rc, dt = r.drive("https://%s:%d/in" % (host, srv.port),
                               fill=40, limit_s=4)
    return r, srv, summ


def refused(name, kind, **kw):
    r, srv, summ = deliver(name, kind, **kw)
    th.check(summ["error"] is None, "set-up error %s" % summ["error"])
    th.check(summ["state"] == "paused", "state %s (%s)"
             % (summ["state"], summ["last_error"]))
    th.check(summ["acked"] == 0 and summ["backlog"] == 40,
             "acked %s" % summ["acked"])
    th.check(srv.requests == [] and srv.deliveries == [],
             "a request got through")
    th.check([a["condition"] for a in summ["alerts"]] == ["paused"],
             "alerts %s" % summ["alerts"])
    return summ["last_error"][:90]


@test
def trusted_ca_file_delivers():
    r, srv, summ = deliver("tls-good", "good")
    th.delivered_ok(srv, 40, summ)
    th.check(srv.requests[0]["headers"]["authorization"] ==
             "Bearer " + th.TOKEN, "token over TLS")
    r2, srv2, summ2 = deliver("tls-good-dns", "good", host="localhost")
    th.delivered_ok(srv2, 40, summ2)
    return "delivered via 127.0.0.1 and localhost"


@test
def wrong_host_refused():
    return refused("tls-wronghost", "wronghost")


@test
def self_signed_refused():
    return refused("tls-self", "selfsigned")


@test
def other_ca_refused():
    return refused("tls-untrusted", "untrusted")


@test
def expired_refused():
    if "expired" not in CERTS["certs"]:
        return "skipped: %s" % CERTS["skipped"].get("expired")
    return refused("tls-expired", "expired")


@test
def system_store_does_not_trust_test_ca():
    return refused("tls-noca", "good", ca=None)


@test
def bad_ca_file_is_a_config_problem():
    bad = os.path.join(th.TMP, "not-a-cert.pem")
    with open(bad, "w") as f:
        f.write("this is not a certificate\n")
    return refused("tls-badca", "good", ca=bad)


def main():
    global CERTS
    if not os.path.exists(th.DRIVE):
        print("test_tls: %s missing" % th.DRIVE)
        return 1
    CERTS = tlsca.make_certs(os.path.join(th.TMP, "certs"))
    passed = failed = 0
    t0 = time.monotonic()
    for fn in TESTS:
        t1 = time.monotonic()
        try:
            note = fn()
            passed += 1
            print("ok   %-40s %5.1f s  %s" % (fn.__name__,
                  time.monotonic() - t1, note or ""))
        except Exception:
            failed += 1
            print("FAIL %s" % fn.__name__)
            traceback.print_exc()
        sys.stdout.flush()
    n = sum(s.count(th.TOKEN) for s in th.STDERRS)
    if n:
        failed += 1
        print("FAIL token appeared %d times in driver output" % n)
    print("test_tls: %d passed, %d failed (%.1f s)"
          % (passed, failed, time.monotonic() - t0))
    if failed == 0:
        shutil.rmtree(th.TMP, ignore_errors=True)
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
