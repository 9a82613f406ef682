#!/usr/bin/python3
"""test_run.py - `tidepost run`, `ring` and `replay` as real processes.

Run: TIDEPOST=build/tidepost /usr/bin/python3 tests/integration/test_run.py

stdin and tcp inputs into a file output and an HTTP output (httpserver.py),
--once exit codes, SIGTERM with the cursor durable, a restart that resumes
the backlog without new input and without loss, the daemon idle (CPU time
and context switches over a few seconds), `ring` next to a running daemon,
and `replay` directly and handed to a running daemon.

The first half holds helpers the other daemon tests import (test_spool,
test_serial, test_killloop, test_reload).  Packets come from the
independent Python model in test_decode.py; stations and values are
invented test data.  Standard library only.
"""
import json
import os
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import threading
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

import test_decode as td  # noqa: E402
from httpserver import ScriptedServer  # noqa: E402

TIDEPOST = os.environ.get("TIDEPOST", "build/tidepost")

# ---- helpers shared by the daemon tests -----------------------------------


def reef(seq, station=7, t0=1796020500):
    """A reef-v2 packet (4 readings) and the ids of its readings."""
    recs = [(1500 + (seq * 7 + k) % 900, (seq * 13 + k) % 2000)
            for k in range(4)]
    t = t0 + 3600 * seq
    pk = td.reef_packet(station, seq % 65536, t, 12000 + seq % 3000, recs)
    name = {7: "rf2", 3: "b3"}.get(station, str(station))
    ids = ["%s-%d-%d-%d" % (name, t, seq % 65536, k) for k in range(4)]
    return pk, ids


class Setup:
    """A folder with layouts, a config and a state folder."""

    def __init__(self, inputs, outputs, extra=None, ring_mb=1):
        self.dir = tempfile.mkdtemp(prefix="tp-run-")
        td.write_setup(self.dir)
        self.cfg_path = os.path.join(self.dir, "config.json")
        self.state = os.path.join(self.dir, "state")
        self.out_path = os.path.join(self.dir, "out.ndjson")
        self.inputs, self.outputs = inputs, outputs
        self.extra = extra or {}
        self.ring_mb = ring_mb
        self.write()

    def write(self, text=None):
        """The config from the attributes, or the given text."""
        base = {"layouts": ["reef-v2.json", "buoy-v1.json"],
                "stations": {"7": {"name": "rf2"}, "3": {"name": "b3"}},
                "state_dir": self.state,
                "ring": {"size_mb": self.ring_mb},
                "inputs": self.inputs, "outputs": self.outputs}
        base.update(self.extra)
        with open(self.cfg_path, "w") as f:
            f.write(text if text is not None else json.dumps(base, indent=1))

    def cleanup(self):
        shutil.rmtree(self.dir, ignore_errors=True)


def file_output(path, name="archive"):
    return {"kind": "file", "name": name, "path": path}


def http_output(url, name="dash", **kw):
    o = {"kind": "http", "name": name, "url": url, "timeout_s": 5,
         "connect_timeout_s": 2, "backoff_base_s": 1, "backoff_cap_s": 2,
         "allow_plain_http": True}
    o.update(kw)
    return o


def run(args, stdin=b"", timeout=60, env=None):
    p = subprocess.run([TIDEPOST] + args, input=stdin, stdout=subprocess.PIPE,
                       stderr=subprocess.PIPE, timeout=timeout, env=env)
    return p.returncode, p.stdout.decode(), p.stderr.decode("utf-8", "replace")


class Daemon:
    """`tidepost run -c CFG --foreground` in the background."""

    def __init__(self, setup, args=(), stdin=subprocess.DEVNULL, popen=None):
        self.log_path = os.path.join(setup.dir, "daemon.log")
        self.log = open(self.log_path, "ab")
        argv = [TIDEPOST, "run", "-c", setup.cfg_path, "--foreground"]
        argv += list(args)
        if popen is not None:
            self.p = popen(argv, stdin=stdin, stdout=self.log,
                           stderr=self.log)
        else:
            self.p = subprocess.Popen(argv, stdin=stdin, stdout=self.log,
                                      stderr=self.log)

    def text(self):
        self.log.flush()
        with open(self.log_path, "rb") as f:
            return f.read().decode("utf-8", "replace")

    def stop(self, sig=signal.SIGTERM, timeout=30):
        if self.p.poll() is None:
            self.p.send_signal(sig)
        try:
            rc = self.p.wait(timeout)
        except subprocess.TimeoutExpired:
            self.p.kill()
            rc = self.p.wait()
            raise AssertionError("daemon did not stop within %d s" % timeout)
        self.log.close()
        return rc

    def kill(self):
        if self.p.poll() is None:
            self.p.kill()
        self.p.wait()
        self.log.close()


def wait_for(cond, timeout=20, step=0.05, what="condition"):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        v = cond()
        if v:
            return v
        time.sleep(step)
    raise AssertionError("timed out waiting for %s" % what)


def read_ids(path):
    """Reading ids in the NDJSON file (every line must be whole JSON)."""
    if not os.path.exists(path):
        return []
    with open(path) as f:
        return [json.loads(line)["id"] for line in f]


def ring_state(setup):
    rc, out, err = run(["ring", "-c", setup.cfg_path, "--json"])
    if rc != 0:
        raise AssertionError("ring: exit %d: %s" % (rc, err))
    return json.loads(out)


def cpu_ticks(pid):
    """utime + stime of a process, in clock ticks (/proc/PID/stat)."""
    with open("/proc/%d/stat" % pid) as f:
        fields = f.read().rsplit(")", 1)[1].split()
    return int(fields[11]) + int(fields[12])


def ctx_switches(pid):
    with open("/proc/%d/status" % pid) as f:
        for line in f:
            if line.startswith("voluntary_ctxt_switches"):
                return int(line.split()[1])
    return 0


class Producer(threading.Thread):
    """A TCP server that streams the given bytes to whoever connects."""

    def __init__(self, data=b""):
        super().__init__(daemon=True)
        self.ls = socket.create_server(("127.0.0.1", 0))
        self.port = self.ls.getsockname()[1]
        self.data = data
        self.conns = []
        self.start()

    def run(self):
        while True:
            try:
                c, _ = self.ls.accept()
            except OSError:
                return
            self.conns.append(c)
            if self.data:
                c.sendall(self.data)

    def send(self, data):
        for c in list(self.conns):
            try:
                c.sendall(data)
            except OSError:
                pass

    def close(self):
        self.ls.close()
        for c in self.conns:
            c.close()


class Runner:
    def __init__(self):
        self.passed = 0
        self.failed = 0

    def run(self, tests):
        for t in tests:
            t0 = time.monotonic()
            try:
                t()
                self.passed += 1
                print("ok   %s (%.1f s)" % (t.__name__,
                                            time.monotonic() - t0))
            except Exception:
                self.failed += 1
                print("FAIL %s" % t.__name__)
                import traceback
                traceback.print_exc()
            sys.stdout.flush()
        print("%d passed, %d failed" % (self.passed, self.failed))
        sys.exit(1 if self.failed else 0)


def eq(got, want, what=""):
    if got != want:
        raise AssertionError("%s: got %r, want %r" % (what, got, want))


def cobs_stream(seqs, station=7):
    data, ids = b"", []
    for s in seqs:
        pk, i = reef(s, station)
        data += td.cobs(pk)
        ids += i
    return data, ids

# ---- the tests -------------------------------------------------------------


def test_stdin_file_once():
    """stdin -> file output with --once: every reading, exit 0; run again:
    the same packets are known duplicates, nothing appended."""
    s = Setup([{"kind": "stdin", "framing": "cobs"}],
              [file_output(os.path.join("/tmp", "x"))])
    try:
        s.outputs = [file_output(s.out_path)]
        s.write()
        data, ids = cobs_stream(range(1, 21))
        data += b"\x05garbage\x00" + td.cobs(b"\x02\x00\x07")  # bad frames
        rc, _, err = run(["run", "-c", s.cfg_path, "--foreground",
                          "--once"], stdin=data)
        eq(rc, 0, "exit status: " + err)
        eq(read_ids(s.out_path), ids, "file output")
        rc, _, err = run(["run", "-c", s.cfg_path, "--foreground",
                          "--once"], stdin=data)
        eq(rc, 0, "second exit status")
        eq(len(read_ids(s.out_path)), 80, "no duplicates appended")
        assert "80 duplicates" in err, err
        st = ring_state(s)
        eq(st["outputs"][0]["acked"], 80, "cursor")
        eq(os.stat(s.out_path).st_mode & 0o777, 0o640, "file mode")
    finally:
        s.cleanup()


def test_http_once_and_exit_codes():
    """stdin -> HTTP output: --once exits 0 once delivered; with the
    server answering 503 the output is backing off: exit 3, and a later
    --once with the server good delivers the backlog without new input."""
    srv = ScriptedServer(default={"status": 204}).start()
    s = Setup([{"kind": "stdin"}], [http_output(srv.url + "/in")])
    try:
        data, ids = cobs_stream(range(1, 11))
        rc, _, err = run(["run", "-c", s.cfg_path, "-f", "--once"],
                         stdin=data)
        eq(rc, 0, "exit status: " + err)
        srv.assert_delivery(ids)
        srv.default = {"status": 503}
        more, ids2 = cobs_stream(range(11, 16))
        rc, _, err = run(["run", "-c", s.cfg_path, "-f", "--once"],
                         stdin=more)
        eq(rc, 3, "exit status with the server failing: " + err)
        srv.default = {"status": 200}
        rc, _, err = run(["run", "-c", s.cfg_path, "-f", "--once"])
        eq(rc, 0, "backlog run: " + err)
        srv.assert_delivery(ids + ids2)
    finally:
        srv.stop()
        s.cleanup()


def test_tcp_sigterm_cursor_durable_restart():
    """tcp -> file + HTTP while running; SIGTERM exits 0 with both
    cursors at the newest reading (durable: read back by `ring`); a
    restart with the server down, more input, SIGTERM, then a restart with
    it up delivers the backlog without new input and nothing is lost."""
    srv = ScriptedServer(default={"status": 204}).start()
    data, ids = cobs_stream(range(1, 31))
    prod = Producer(data)
    s = Setup([{"kind": "tcp", "host": "127.0.0.1", "port": prod.port,
                "reconnect_s": 1}],
              [http_output(srv.url), file_output("/tmp/placeholder")])
    try:
        s.outputs[1] = file_output(s.out_path)
        s.write()
        d = Daemon(s)
        wait_for(lambda: len(read_ids(s.out_path)) == 120, what="file")
        wait_for(lambda: len(srv.delivered_ids()) == 120, what="http")
        eq(d.stop(), 0, "SIGTERM exit")
        st = ring_state(s)
        eq([o["acked"] for o in st["outputs"]], [120, 120], "cursors")
        eq(st["in_use"], False, "lock released")
        srv.default = {"status": 503}
        prod.data = b""
        d = Daemon(s)
        more, ids2 = cobs_stream(range(31, 41))
        wait_for(lambda: prod.conns, what="reconnect")
        time.sleep(0.3)
        prod.send(more)
        wait_for(lambda: len(read_ids(s.out_path)) == 160, what="file 2")
        eq(d.stop(), 0, "SIGTERM with a backlog")
        srv.default = {"status": 204}
        d = Daemon(s)
        wait_for(lambda: len(srv.delivered_ids()) == 160, what="backlog")
        eq(d.stop(), 0, "third stop")
        srv.assert_delivery(ids + ids2)
        eq(read_ids(s.out_path), ids + ids2, "file output")
    finally:
        prod.close()
        srv.stop()
        s.cleanup()


def test_idle_sleeps_in_poll():
    """Idle (tcp connected, spool watched, outputs drained) the daemon
    sleeps in poll: over 3 s, CPU time under 1% and hardly any wake-ups
    (voluntary context switches)."""
    prod = Producer(b"")
    s = Setup([{"kind": "tcp", "host": "127.0.0.1", "port": prod.port},
               {"kind": "spool", "dir": "spool"}],
              [file_output("/tmp/placeholder")])
    try:
        os.makedirs(os.path.join(s.dir, "spool"))
        s.outputs = [file_output(s.out_path)]
        s.write()
        d = Daemon(s)
        wait_for(lambda: prod.conns, what="connection")
        time.sleep(1.0)
        t0, c0 = cpu_ticks(d.p.pid), ctx_switches(d.p.pid)
        time.sleep(3.0)
        t1, c1 = cpu_ticks(d.p.pid), ctx_switches(d.p.pid)
        hz = os.sysconf("SC_CLK_TCK")
        cpu = 100.0 * (t1 - t0) / hz / 3.0
        print("     idle: cpu %.2f%% over 3 s, %d wake-ups" % (cpu, c1 - c0))
        assert cpu < 1.0, "idle CPU %.2f%%" % cpu
        assert c1 - c0 <= 2, "%d wake-ups while idle" % (c1 - c0)
        eq(d.stop(), 0, "stop")
    finally:
        prod.close()
        s.cleanup()


def test_ring_command_next_to_daemon():
    """`ring --verify` while the daemon runs: exit 0, says in use, the
    header generation does not move (nothing written), the daemon keeps
    working afterwards."""
    prod = Producer(b"")
    s = Setup([{"kind": "tcp", "host": "127.0.0.1", "port": prod.port}],
              [])
    try:
        d = Daemon(s)
        data, ids = cobs_stream(range(1, 6))
        wait_for(lambda: prod.conns, what="connection")
        prod.send(data)
        wait_for(lambda: ring_state(s)["newest_seq"] == 20, what="ring")
        rc, out, err = run(["ring", "-c", s.cfg_path, "--verify", "--json"])
        eq(rc, 0, "ring --verify: " + err)
        st = json.loads(out)
        eq(st["in_use"], True, "in use")
        eq(st["verify"]["problems"], 0, "problems")
        eq(st["records"], 20, "records (no output: all kept)")
        gen = st["generation"]
        eq(ring_state(s)["generation"], gen, "generation unchanged")
        more, _ = cobs_stream(range(6, 8))
        prod.send(more)
        wait_for(lambda: ring_state(s)["newest_seq"] == 28, what="more")
        rc, out, _ = run(["ring", "-c", s.cfg_path])
        eq(rc, 0, "text form")
        assert "in use by a running daemon" in out, out
        eq(d.stop(), 0, "stop")
    finally:
        prod.close()
        s.cleanup()


def test_replay_direct_and_handed_over():
    """replay with no daemon: queued in the ring, delivered by --once, a
    second replay finds every reading accepted before.  replay while the
    daemon runs: handed over through state/replay, delivered, the folder
    emptied."""
    srv = ScriptedServer(default={"status": 204}).start()
    s = Setup([], [http_output(srv.url)])
    try:
        arch = os.path.join(s.dir, "archive.cobs")
        data, ids = cobs_stream(range(100, 110))
        open(arch, "wb").write(data)
        os.utime(arch, (1796100000, 1796100000))
        rc, _, err = run(["replay", "-c", s.cfg_path, arch])
        eq(rc, 0, "replay: " + err)
        assert "40 readings queued" in err, err
        rc, _, err = run(["run", "-c", s.cfg_path, "-f", "--once"])
        eq(rc, 0, "deliver: " + err)
        srv.assert_delivery(ids)
        got = [d[3] for d in srv.deliveries]
        eq(got[0]["received"], td.rfc3339(1796100000), "received = mtime")
        rc, _, err = run(["replay", "-c", s.cfg_path, arch])
        assert "0 readings queued, 40 already accepted" in err, err
        d = Daemon(s)
        wait_for(lambda: ring_state(s)["in_use"], what="daemon up")
        msg = os.path.join(s.dir, "late.sbd")
        pk, ids2 = reef(500)
        open(msg, "wb").write(pk)
        rc, _, err = run(["replay", "-c", s.cfg_path, msg])
        eq(rc, 0, "handed over: " + err)
        assert "handed to the daemon" in err, err
        wait_for(lambda: set(ids2) <= srv.delivered_ids(), what="handoff")
        left = [n for n in os.listdir(os.path.join(s.state, "replay"))
                if n != "rejected"]
        eq(left, [], "replay folder emptied")
        eq(d.stop(), 0, "stop")
        srv.assert_delivery(ids + ids2)
    finally:
        srv.stop()
        s.cleanup()


def test_bad_config_and_usage():
    """Start-up errors exit 2 with the problem's place; usage errors 2."""
    s = Setup([{"kind": "stdin"}], [])
    try:
        s.write('{ "layouts": [ "reef-v2.json" ], "inputs": [ { "kind": '
                '"stdin", "framing": "zigzag" } ] }')
        rc, _, err = run(["run", "-c", s.cfg_path, "-f"])
        eq(rc, 2, "bad config")
        assert "config.json:1:" in err and "framing" in err, err
        rc, _, err = run(["run", "-f"])
        eq(rc, 2, "no -c")
        rc, _, err = run(["run", "-c", s.cfg_path, "--bogus"])
        eq(rc, 2, "bad option")
    finally:
        s.cleanup()


def test_journal_prefixes():
    """Under a service manager (JOURNAL_STREAM set) --foreground lines
    carry syslog priority prefixes; without it they do not."""
    s = Setup([{"kind": "stdin"}], [])
    try:
        env = dict(os.environ, JOURNAL_STREAM="8:1234")
        rc, _, err = run(["run", "-c", s.cfg_path, "-f", "--once"],
                         env=env)
        eq(rc, 0, "exit")
        lines = [l for l in err.splitlines() if l]
        assert lines and all(l[:3] in ("<3>", "<4>", "<6>") for l in lines), \
            err
        env.pop("JOURNAL_STREAM")
        env.pop("INVOCATION_ID", None)
        rc, _, err = run(["run", "-c", s.cfg_path, "-f", "--once"],
                         env=env)
        assert not err.startswith("<"), err
    finally:
        s.cleanup()


if __name__ == "__main__":
    Runner().run([test_stdin_file_once, test_http_once_and_exit_codes,
                  test_tcp_sigterm_cursor_durable_restart,
                  test_idle_sleeps_in_poll, test_ring_command_next_to_daemon,
                  test_replay_direct_and_handed_over,
                  test_bad_config_and_usage, test_journal_prefixes])
