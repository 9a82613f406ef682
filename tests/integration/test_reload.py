#!/usr/bin/python3
"""test_reload.py - SIGHUP: a good new config is applied (a new output
appears and gets new readings, the input is rebuilt); a bad one is
reported with its place and the running config keeps working.

Run: TIDEPOST=build/tidepost /usr/bin/python3 tests/integration/test_reload.py

Packets and stations are invented test data.
"""
import json
import os
import signal
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

import test_run as tr  # noqa: E402


def send(prod, seqs):
    data, ids = tr.cobs_stream(seqs)
    prod.send(data)
    return ids


def test_reload_good_then_bad():
    prod = tr.Producer(b"")
    s = tr.Setup([{"kind": "tcp", "host": "127.0.0.1", "port": prod.port,
                   "reconnect_s": 1}], [])
    out_b = os.path.join(s.dir, "b.ndjson")
    try:
        s.outputs = [tr.file_output(s.out_path, "a")]
        s.write()
        d = tr.Daemon(s)
        tr.wait_for(lambda: prod.conns, what="connection")
        ids1 = send(prod, range(1, 6))
        tr.wait_for(lambda: len(tr.read_ids(s.out_path)) == 20, what="a")
        # a good config: a second output, the input kept
        s.outputs = [tr.file_output(s.out_path, "a"),
                     tr.file_output(out_b, "b")]
        s.write()
        n_conn = len(prod.conns)
        d.p.send_signal(signal.SIGHUP)
        tr.wait_for(lambda: "reload: " in d.text() and "applied" in d.text(),
                    what="reload applied")
        tr.wait_for(lambda: len(prod.conns) > n_conn, what="reconnect")
        time.sleep(0.2)
        ids2 = send(prod, range(6, 11))
        tr.wait_for(lambda: len(tr.read_ids(out_b)) == 20, what="b")
        tr.eq(tr.read_ids(out_b), ids2, "new output gets new readings")
        tr.wait_for(lambda: len(tr.read_ids(s.out_path)) == 40, what="a")
        tr.eq(tr.read_ids(s.out_path), ids1 + ids2, "a")
        # a bad config: reported with its place, the old one runs on
        good = open(s.cfg_path).read()
        bad = good.replace('"reconnect_s": 1', '"reconnect_s": "soon"')
        assert bad != good
        s.write(bad)
        d.p.send_signal(signal.SIGHUP)
        tr.wait_for(lambda: "not applied" in d.text(), what="refusal")
        log = d.text()
        line = [l for l in log.splitlines() if "reconnect_s" in l]
        assert line and "config.json:" in line[0], log[-2000:]
        pos = line[0].split("config.json:")[1].split(":")
        assert pos[0].isdigit() and pos[1].isdigit(), line[0]
        assert d.p.poll() is None, "the daemon stopped"
        ids3 = send(prod, range(11, 14))
        tr.wait_for(lambda: len(tr.read_ids(out_b)) == 32, what="b again")
        tr.eq(tr.read_ids(out_b), ids2 + ids3, "still running the old")
        # a ring size change needs a restart: said so, the rest applied
        s.write(good.replace('"size_mb": 1', '"size_mb": 2'))
        d.p.send_signal(signal.SIGHUP)
        tr.wait_for(lambda: "needs" in d.text() or "stays until a restart"
                    in d.text(), what="ring warning")
        tr.eq(d.stop(), 0, "stop")
        st = tr.ring_state(s)
        tr.eq(st["size_bytes"], 1024 * 1024, "ring size unchanged")
        tr.eq(sorted(o["name"] for o in st["outputs"]), ["a", "b"],
              "cursors")
    finally:
        prod.close()
        s.cleanup()


def test_reload_during_backlog():
    """SIGHUP while an HTTP output is failing: the reload does not wait
    past the in-flight request and the output's backlog survives it."""
    from httpserver import ScriptedServer
    srv = ScriptedServer(default={"status": 503}).start()
    s = tr.Setup([{"kind": "stdin"}], [tr.http_output(srv.url)])
    try:
        data, ids = tr.cobs_stream(range(1, 6))
        r, w = os.pipe()
        d = tr.Daemon(s, stdin=r)
        os.close(r)
        os.write(w, data)
        os.close(w)
        tr.wait_for(lambda: srv.requests, what="first attempt")
        t0 = time.monotonic()
        d.p.send_signal(signal.SIGHUP)
        tr.wait_for(lambda: "applied" in d.text(), what="reload")
        took = time.monotonic() - t0
        assert took < 7, "reload took %.1f s" % took
        srv.default = {"status": 204}
        tr.wait_for(lambda: set(ids) <= srv.delivered_ids(), what="backlog")
        tr.eq(d.stop(), 0, "stop")
        srv.assert_delivery(ids)
    finally:
        srv.stop()
        s.cleanup()


if __name__ == "__main__":
    tr.Runner().run([test_reload_good_then_bad, test_reload_during_backlog])
