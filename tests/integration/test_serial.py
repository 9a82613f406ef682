#!/usr/bin/python3
"""test_serial.py - the serial input of the real daemon through the real
libserialport, on a pty dressed up as /dev/ttyS0 (ptyrun.py; needs root,
skipped with a message otherwise).  RELIABILITY.md T18.

Run: TIDEPOST=build/tidepost /usr/bin/python3 tests/integration/test_serial.py

Packets with garbage and a cut-off frame between them are decoded (the
framer resyncs; only the damaged frames are lost); the adapter is pulled
out: the loss is logged once, the daemon does not spin while the device
is away (CPU time and wake-ups measured over 3 s), and when it is plugged
back in the daemon reopens it and reads again.  Packets and stations are
invented test data.
"""
import os
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

import test_decode as td  # noqa: E402
import test_run as tr  # noqa: E402
import ptyrun  # noqa: E402


def serial_setup():
    s = tr.Setup([{"kind": "serial", "device": "/dev/ttyS0", "baud": 9600,
                   "framing": "cobs", "reconnect_s": 1}], [])
    s.outputs = [tr.file_output(s.out_path)]
    s.write()
    return s


def test_serial_unplug_replug():
    s = serial_setup()
    try:
        with ptyrun.PtyDevice() as dev:
            d = tr.Daemon(s, popen=dev.spawn)
            tr.wait_for(lambda: "run: started" in d.text(), what="start")
            time.sleep(0.3)
            data, ids = tr.cobs_stream(range(1, 6))
            noise = b"\x07\x41\x42\x00" + td.cobs(tr.reef(99)[0])[:9]
            dev.write(noise + b"\x00" + data, baud=115200)
            tr.wait_for(lambda: len(tr.read_ids(s.out_path)) == 20,
                        what="readings over the pty")
            tr.eq(tr.read_ids(s.out_path), ids, "readings")
            t_unplug = time.monotonic()
            dev.unplug()
            tr.wait_for(lambda: "device lost" in d.text(), what="loss")
            time.sleep(0.5)
            t0, c0 = tr.cpu_ticks(d.p.pid), tr.ctx_switches(d.p.pid)
            time.sleep(3.0)
            t1, c1 = tr.cpu_ticks(d.p.pid), tr.ctx_switches(d.p.pid)
            cpu = 100.0 * (t1 - t0) / os.sysconf("SC_CLK_TCK") / 3.0
            dev.replug()
            t_plug = time.monotonic()
            tr.wait_for(lambda: "open again" in d.text(), timeout=20,
                        what="reopen")
            back = time.monotonic() - t_plug
            more, ids2 = tr.cobs_stream(range(6, 9))
            time.sleep(0.2)
            dev.write(more, baud=9600)
            tr.wait_for(lambda: len(tr.read_ids(s.out_path)) == 32,
                        what="readings after the replug")
            log = d.text()
            tr.eq(d.stop(), 0, "stop")
            print("     absent %.1f s: cpu %.2f%%, %d wake-ups in 3 s; "
                  "reopened %.2f s after the replug" %
                  (t_plug - t_unplug, cpu, c1 - c0, back))
            assert cpu < 5.0, "CPU %.2f%% while the device is gone" % cpu
            assert c1 - c0 <= 10, "%d wake-ups in 3 s" % (c1 - c0)
            tr.eq(log.count("device lost"), 1, "loss logged once")
            tr.eq(tr.read_ids(s.out_path), ids + ids2, "all readings")
    finally:
        s.cleanup()


if __name__ == "__main__":
    try:
        probe = ptyrun.PtyDevice()
        probe.start()
        probe.close()
    except (ptyrun.PtyUnavailable, OSError) as e:
        print("skipped: %s" % e)
        print("0 passed, 0 failed")
        sys.exit(0)
    tr.Runner().run([test_serial_unplug_replug])
