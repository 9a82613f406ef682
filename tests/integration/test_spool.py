#!/usr/bin/python3
"""test_spool.py - the spool input of the real daemon against hostile
folders (RELIABILITY.md T20), and a full ring leaving files in place.

Run (as root for the device node row): TIDEPOST=build/tidepost
/usr/bin/python3 tests/integration/test_spool.py

Planted entries: a symlink to /etc/shadow, a FIFO, a character device, a
hard link to a file outside the folder, a 2 GB (sparse) file, a half
written .tmp file, a dotfile, names with a newline, an escape sequence and
255 bytes, a file that does not decode.  Only the good message files may
be read; nothing outside the folder is read; no hang; the bad entries stay
and are logged with escaped names; the undecodable and the huge file go
to rejected/ with a reason.  Packets and stations are invented test data.
"""
import json
import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

import test_decode as td  # noqa: E402
import test_run as tr  # noqa: E402
from httpserver import ScriptedServer  # noqa: E402


def spool_setup(outputs=None, ring_mb=1):
    s = tr.Setup([{"kind": "spool", "dir": "spool", "pattern": "*.sbd"}],
                 outputs or [], ring_mb=ring_mb)
    s.spool = os.path.join(s.dir, "spool")
    os.makedirs(s.spool)
    if outputs is None:
        s.outputs = [tr.file_output(s.out_path)]
        s.write()
    return s


def put(path, data):
    with open(path, "wb") as f:
        f.write(data)


def test_hostile_entries():
    s = spool_setup()
    sp = lambda n: os.path.join(s.spool, n)  # noqa: E731
    try:
        good = {}
        for i in range(1, 4):
            pk, ids = tr.reef(i)
            put(sp("m%d.sbd" % i), pk)
            good["m%d.sbd" % i] = ids
        bad = tr.reef(9)[0][:-1] + b"\x00"       # CRC broken
        put(sp("crc.sbd"), bad)
        os.symlink("/etc/shadow", sp("shadow.sbd"))
        os.mkfifo(sp("pipe.sbd"))
        if os.geteuid() == 0:
            os.mknod(sp("dev.sbd"), 0o600 | 0o020000, os.makedev(1, 3))
        foreign = os.path.join(s.dir, "foreign.bin")
        put(foreign, tr.reef(20)[0])
        os.link(foreign, sp("hard.sbd"))
        with open(sp("huge.sbd"), "wb") as f:
            f.truncate(2 * 1024 ** 3)
        half = open(sp("half.sbd.tmp"), "wb")
        half.write(tr.reef(30)[0][:10])
        half.flush()
        put(sp(".dot.sbd"), tr.reef(31)[0])
        odd = ["new\nline.sbd", "esc\x1b[0m.sbd", "a" * 251 + ".sbd"]
        for n in odd:
            put(os.fsencode(sp(n)), tr.reef(40)[0])
        d = tr.Daemon(s)
        done = os.path.join(s.spool, "done")
        rej = os.path.join(s.spool, "rejected")
        tr.wait_for(lambda: os.path.isdir(done) and
                    sorted(os.listdir(done)) == sorted(good),
                    what="good files in done/")
        tr.wait_for(lambda: os.path.exists(os.path.join(rej, "huge.sbd")),
                    what="huge file rejected")
        ids = [i for n in sorted(good) for i in good[n]]
        tr.wait_for(lambda: len(tr.read_ids(s.out_path)) == 12,
                    what="readings")
        tr.eq(sorted(tr.read_ids(s.out_path)), sorted(ids), "readings")
        reason = open(os.path.join(rej, "crc.sbd.reason")).read()
        assert "bad check" in reason, reason
        reason = open(os.path.join(rej, "huge.sbd.reason")).read()
        assert "larger" in reason, reason
        stay = ["shadow.sbd", "pipe.sbd", "hard.sbd", "half.sbd.tmp",
                ".dot.sbd"] + odd
        left = set(os.listdir(s.spool))
        for n in stay:
            assert n in left, "%r was moved" % n
        assert os.path.islink(sp("shadow.sbd"))
        # a file written as .tmp and renamed in while running is taken
        half.write(tr.reef(30)[0][10:])
        half.close()
        os.rename(sp("half.sbd.tmp"), sp("half.sbd"))
        tr.wait_for(lambda: os.path.exists(os.path.join(done, "half.sbd")),
                    what="renamed file taken")
        log = d.text()
        tr.eq(d.stop(), 0, "stop")
        assert "new\\x0aline.sbd" in log and "esc\\x1b[0m.sbd" in log, log
        assert "a symbolic link" in log and "a FIFO" in log, log
        assert "has other hard links" in log, log
        for line in log.splitlines():
            assert "\x1b" not in line, "raw escape in the log: %r" % line
        st = tr.ring_state(s)
        tr.eq(st["newest_seq"], 16, "nothing else entered the ring")
    finally:
        s.cleanup()


def test_full_ring_leaves_files():
    """The HTTP output answers 503: nothing is acknowledged, the 1 MiB ring
    fills, the rest of the files stay in the folder (--once exits 3).
    With the server answering again, a second --once takes the rest and
    every reading of every file is delivered once the ring has room."""
    srv = ScriptedServer(default={"status": 503}).start()
    s = spool_setup([tr.http_output(srv.url)])
    try:
        ids = []
        for i in range(1, 1201):
            pk, i4 = tr.reef(i)
            put(os.path.join(s.spool, "f%04d.sbd" % i), pk)
            ids += i4
        rc, _, err = tr.run(["run", "-c", s.cfg_path, "-f", "--once"],
                            timeout=120)
        tr.eq(rc, 3, "exit with a full ring: " + err[-2000:])
        left = [n for n in os.listdir(s.spool) if n.endswith(".sbd")]
        done = os.listdir(os.path.join(s.spool, "done"))
        st = tr.ring_state(s)
        print("     ring full: %d readings kept, %d files done, %d left" %
              (st["records"], len(done), len(left)))
        assert left, "the ring never filled"
        tr.eq(len(left) + len(done), 1200, "files")
        assert st["records"] >= 4 * len(done), st
        assert "refused" in err and "the ring is full" in err, err[-2000:]
        srv.default = {"status": 204}
        rc, _, err = tr.run(["run", "-c", s.cfg_path, "-f", "--once"],
                            timeout=120)
        tr.eq(rc, 0, "second run: " + err[-2000:])
        tr.eq([n for n in os.listdir(s.spool) if n.endswith(".sbd")], [],
              "files left")
        # spool files are taken in directory order, not by name: the
        # per-station order check does not apply here
        rep = srv.check_delivery(ids)
        for k in ("lost", "phantom", "id_reuse", "id_changed"):
            tr.eq(rep[k], type(rep[k])(), k)
        tr.eq(rep["unique"], 4800, "readings delivered")
    finally:
        srv.stop()
        s.cleanup()


if __name__ == "__main__":
    tr.Runner().run([test_hostile_entries, test_full_ring_leaves_files])
