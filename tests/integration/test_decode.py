#!/usr/bin/python3
"""test_decode.py - `tidepost decode` against packets built here.

Run: TIDEPOST=build/tidepost /usr/bin/python3 tests/integration/test_decode.py

The first half is an independent Python model of the wire format, written from LAYOUT.md and
the standards it names, not from the C code: a CRC-16/IBM-3740 checked
against the CRC RevEng catalogue, an MSB-first bit writer, COBS (Cheshire &
Baker 1999), SLIP (RFC 1055) and hex framing, and packet builders for two
invented layouts (test data, invented).  Also a tiny test runner.
test_encode.py imports this half.  The second half runs the real binary
and checks every value, flag, id, time and station name it writes, the
counts and -v offsets of rejected packets, exit codes, and that memory
stays flat on a large archive.

Standard library only; run by /usr/bin/python3.
"""
import datetime
import json
import os
import struct
import subprocess
import sys
import traceback

TIDEPOST = os.environ.get("TIDEPOST", "build/tidepost")

# ---- checks --------------------------------------------------------------


def crc16_ibm3740(data):
    """CRC-16/IBM-3740: width 16, poly 0x1021, init 0xffff, refin false,
    refout false, xorout 0 (CRC RevEng catalogue); bitwise, no table."""
    reg = 0xFFFF
    for b in data:
        reg ^= b << 8
        for _ in range(8):
            if reg & 0x8000:
                reg = ((reg << 1) ^ 0x1021) & 0xFFFF
            else:
                reg = (reg << 1) & 0xFFFF
    return reg


# The catalogue's check value: CRC of the ASCII bytes "123456789".
assert crc16_ibm3740(b"123456789") == 0x29B1, "CRC-16/IBM-3740 model wrong"


def sum8(data):
    return sum(data) & 0xFF


# ---- bits and framing ------------------------------------------------------


class Bits:
    """Bits written most-significant first (LAYOUT.md: byte_order big)."""

    def __init__(self):
        self.bits = []

    def put(self, value, n):
        value &= (1 << n) - 1
        for i in range(n - 1, -1, -1):
            self.bits.append((value >> i) & 1)

    def data(self):
        bits = self.bits + [0] * (-len(self.bits) % 8)
        out = bytearray()
        for i in range(0, len(bits), 8):
            byte = 0
            for b in bits[i:i + 8]:
                byte = (byte << 1) | b
            out.append(byte)
        return bytes(out)


def cobs(data):
    """COBS (Cheshire & Baker 1999) with its 0x00 delimiter."""
    out = bytearray()
    block = bytearray()
    for b in data:
        if b == 0:
            out.append(len(block) + 1)
            out += block
            block = bytearray()
            continue
        block.append(b)
        if len(block) == 254:
            out.append(255)
            out += block
            block = bytearray()
    out.append(len(block) + 1)
    out += block
    return bytes(out) + b"\x00"


def slip(data):
    """RFC 1055: END 0xC0, ESC 0xDB, ESC_END 0xDC, ESC_ESC 0xDD."""
    out = bytearray()
    for b in data:
        if b == 0xC0:
            out += b"\xdb\xdc"
        elif b == 0xDB:
            out += b"\xdb\xdd"
        else:
            out.append(b)
    return bytes(out) + b"\xc0"


def hexline(data):
    return data.hex().encode() + b"\n"


FRAMERS = {"cobs": cobs, "slip": slip, "hex": hexline}

# ---- the invented layouts ------------------------------------------------

REEF = {
    "name": "reef-v2",
    "byte_order": "big",
    "match": [{"at": 0, "type": "u8", "is": 2}],
    "check": {"crc": "CRC-16/IBM-3740", "at": -2},
    "fields": [
        {"name": "kind", "type": "u8"},
        {"name": "station", "type": "u16", "role": "station"},
        {"name": "seq", "type": "u16", "role": "seq"},
        {"name": "time", "type": "u32", "role": "time",
         "epoch": "1970-01-01T00:00:00Z"},
        {"name": "battery", "type": "u16", "scale": 0.001, "unit": "V",
         "range": [0, 16]},
    ],
    "records": {
        "count": 4, "every_s": 900,
        "fields": [
            {"name": "ph", "bits": 12, "scale": 0.001, "offset": 6.5,
             "missing": 4095,
             "standard_name": "sea_water_ph_reported_on_total_scale",
             "unit": "1", "range": [6.5, 9.0]},
            {"name": "temperature", "bits": 12, "signed": True,
             "scale": 0.01, "offset": 20,
             "standard_name": "sea_water_temperature", "unit": "degC",
             "range": [-2, 40]},
        ],
    },
}

BUOY_EPOCH = 1577836800  # 2020-01-01T00:00:00Z (Python datetime)

BUOY = {
    "name": "buoy-v1",
    "byte_order": "little",
    "match": [{"at": 0, "type": "u8", "is": 5}],
    "check": {"crc": "sum8", "at": -1},
    "fields": [
        {"name": "kind", "type": "u8"},
        {"name": "station", "type": "u8", "role": "station"},
        {"name": "time", "type": "u32", "role": "time", "unit": "min",
         "epoch": "2020-01-01T00:00:00Z"},
        {"name": "conductivity", "type": "f32", "unit": "mS/cm"},
        {"name": "depth", "type": "i16", "scale": 0.01, "unit": "m"},
        {"name": "pressure", "type": "f64", "unit": "dbar"},
    ],
}


def reef_packet(station, seq, t, battery_raw, recs, kind=2):
    """recs: 4 (ph_raw, temperature_raw) pairs."""
    b = Bits()
    b.put(kind, 8)
    b.put(station, 16)
    b.put(seq, 16)
    b.put(t, 32)
    b.put(battery_raw, 16)
    for ph, temp in recs:
        b.put(ph, 12)
        b.put(temp, 12)
    body = b.data()
    return body + struct.pack(">H", crc16_ibm3740(body))


def reef_readings(station_name, seq, t, battery_raw, recs):
    """What decode must write for a reef packet: value texts and flags."""
    out = []
    battery = battery_raw * 0.001
    for k, (ph_raw, temp_raw) in enumerate(recs):
        if temp_raw >= 2048:
            temp_raw -= 4096
        ph = 6.5 + ph_raw * 0.001
        temp = 20 + temp_raw * 0.01
        values = {"kind": "2", "battery": "%.3f" % battery,
                  "ph": None if ph_raw == 4095 else "%.3f" % ph,
                  "temperature": "%.2f" % temp}
        flags = {"kind": 1, "battery": 1 if 0 <= battery <= 16 else 4,
                 "ph": 9 if ph_raw == 4095 else
                 (1 if 6.5 <= ph <= 9.0 else 4),
                 "temperature": 1 if -2 <= temp <= 40 else 4}
        out.append({"id": "%s-%d-%d-%d" % (station_name, t, seq, k),
                    "station": station_name, "seq": seq,
                    "layout": "reef-v2", "time": rfc3339(t + 900 * k),
                    "values": values, "flags": flags})
    return out


def buoy_packet(station, minutes, cond, depth_raw, pressure):
    body = struct.pack("<BBIfhd", 5, station, minutes, cond, depth_raw,
                       pressure)
    return body + bytes([sum8(body)])


def f32(x):
    return struct.unpack("<f", struct.pack("<f", x))[0]


def buoy_readings(station_name, minutes, cond, depth_raw, pressure):
    t = BUOY_EPOCH + 60 * minutes
    return [{"id": "%s-%d-0-0" % (station_name, t), "station": station_name,
             "seq": None, "layout": "buoy-v1", "time": rfc3339(t),
             "values": {"kind": "5", "conductivity": "%.9g" % f32(cond),
                        "depth": "%.2f" % (depth_raw * 0.01),
                        "pressure": repr(pressure)},
             "flags": {"kind": 1, "conductivity": 1, "depth": 1,
                       "pressure": 1}}]


def rfc3339(t):
    return datetime.datetime.fromtimestamp(
        t, datetime.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def write_setup(d, stations=None):
    """Layout files and a config in folder d; returns the config path."""
    with open(os.path.join(d, "reef-v2.json"), "w") as f:
        json.dump(REEF, f, indent=1)
    with open(os.path.join(d, "buoy-v1.json"), "w") as f:
        json.dump(BUOY, f, indent=1)
    cfg = {"layouts": ["reef-v2.json", "buoy-v1.json"],
           "stations": stations or {"7": {"name": "rf2"},
                                    "3": {"name": "b3"}}}
    path = os.path.join(d, "config.json")
    with open(path, "w") as f:
        json.dump(cfg, f, indent=1)
    return path


def run(args, stdin=b""):
    p = subprocess.run([TIDEPOST] + args, input=stdin,
                       stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                       timeout=120)
    return p.returncode, p.stdout, p.stderr.decode("utf-8", "replace")


def parse_ndjson(out):
    """Readings with number literals kept as text (to check formatting)."""
    lines = out.decode().splitlines()
    return [json.loads(l, parse_float=str, parse_int=str) for l in lines]


def normalise(r):
    """A parsed reading in the shape the builders above produce."""
    r = dict(r)
    r.pop("received", None)
    if r["seq"] is not None:
        r["seq"] = int(r["seq"])
    r["flags"] = {k: int(v) for k, v in r["flags"].items()}
    return r

# ---- runner --------------------------------------------------------------


class Runner:
    def __init__(self):
        self.passed = 0
        self.failed = 0

    def run(self, tests):
        for t in tests:
            try:
                t()
                self.passed += 1
                print("ok   %s" % t.__name__)
            except Exception:
                self.failed += 1
                print("FAIL %s" % t.__name__)
                traceback.print_exc()
        print("%d passed, %d failed" % (self.passed, self.failed))
        sys.exit(1 if self.failed else 0)


def eq(got, want, what=""):
    if got != want:
        raise AssertionError("%s: got %r, want %r" % (what, got, want))

# ---- the tests -------------------------------------------------------------

import resource  # noqa: E402
import shutil  # noqa: E402
import tempfile  # noqa: E402
import csv as csvmod  # noqa: E402
import io  # noqa: E402
import re  # noqa: E402
import time as timemod  # noqa: E402

TMP = None
CFG = None
RECEIVED = "2026-12-01T00:00:00Z"

# Invented station data: (station, seq, time, battery raw, 4 records).
REEF_CASES = [
    (7, 118, 1796020500, 12480, [(1512, 741), (1500, 745), (4095, 0),
                                  (2400, 0xF00)]),
    (7, 119, 1796024100, 16500, [(0, 2047), (2500, 2048), (1, 0xFFF),
                                  (2501, 2200)]),
    (12, 5, 1796030000, 0, [(2000, 100)] * 4),
]
BUOY_CASES = [
    (3, 3600000, 53.71, -250, 1013.25),
    (3, 3600015, 0.1, 32767, 0.1 + 0.2),
    (9, 0, -1.5e-7, -32768, 1e300),
]


def names(n):
    return {7: "rf2", 3: "b3"}.get(n, str(n))


def all_packets():
    pk = [reef_packet(s, q, t, b, r) for s, q, t, b, r in REEF_CASES]
    pk += [buoy_packet(*c) for c in BUOY_CASES]
    return pk


def all_expected():
    want = []
    for s, q, t, b, r in REEF_CASES:
        want += reef_readings(names(s), q, t, b, r)
    for s, m, c, d, p in BUOY_CASES:
        want += buoy_readings(names(s), m, c, d, p)
    return want


def write(name, data):
    path = os.path.join(TMP, name)
    with open(path, "wb") as f:
        f.write(data)
    return path


def test_ndjson_values():
    """Every value text, flag, id, time and station of 18 readings."""
    path = write("cap.cobs", b"".join(cobs(p) for p in all_packets()))
    rc, out, err = run(["decode", "-c", CFG, "--received", RECEIVED, path])
    eq(rc, 0, "exit status")
    got = parse_ndjson(out)
    want = all_expected()
    eq(len(got), len(want), "readings")
    for g, w in zip(got, want):
        eq(list(g.keys()), ["id", "station", "seq", "layout", "time",
                            "received", "values", "flags"], "key order")
        eq(g["received"], RECEIVED, "received")
        eq(list(g["values"].keys()), list(w["values"].keys()), "value order")
        eq(normalise(g), w, "reading " + w["id"])
    eq(err.count("decode: station 12: not in the config"), 1, "12 logged")
    eq(err.count("decode: station 9: not in the config"), 1, "9 logged")
    assert "decode: 6 frames, 15 readings, 0 bad checks, 0 unknown " \
        "layouts, 0 broken frames, 0 undecodable" in err, err


def test_numbers_read_back():
    """Parsed as floats, numbers equal the Python model to the last bit
    of their printed precision (f64 exactly, f32 as a float)."""
    path = write("cap2.cobs", b"".join(cobs(p) for p in all_packets()))
    rc, out, err = run(["decode", "-c", CFG, path])
    rows = [json.loads(l) for l in out.decode().splitlines()]
    buoy = [r for r in rows if r["layout"] == "buoy-v1"]
    for r, (s, m, c, d, p) in zip(buoy, BUOY_CASES):
        eq(r["values"]["pressure"], p, "f64 exact")
        eq(f32(r["values"]["conductivity"]), f32(c), "f32 round trip")


def test_framings_agree():
    """slip, hex, fixed:N and whole files give the readings cobs gives."""
    reef = [reef_packet(s, q, t, b, r) for s, q, t, b, r in REEF_CASES]
    want = []
    for s, q, t, b, r in REEF_CASES:
        want += reef_readings(names(s), q, t, b, r)
    for name, fr in FRAMERS.items():
        path = write("cap." + name, b"".join(fr(p) for p in reef))
        rc, out, err = run(["decode", "-c", CFG, "--framing", name, path])
        eq(rc, 0, name)
        eq([normalise(r) for r in parse_ndjson(out)], want, name)
    path = write("cap.fixed", b"".join(reef))
    rc, out, err = run(["decode", "-c", CFG, "--framing",
                        "fixed:%d" % len(reef[0]), path])
    eq([normalise(r) for r in parse_ndjson(out)], want, "fixed")
    # *.sbd / *.bin default to whole (one message per file)
    files = [write("msg%d.%s" % (i, "sbd" if i % 2 else "BIN"), p)
             for i, p in enumerate(reef)]
    rc, out, err = run(["decode", "-c", CFG] + files)
    eq(rc, 0, "whole")
    eq([normalise(r) for r in parse_ndjson(out)], want, "whole")


def test_csv():
    """RFC 4180 with CRLF; columns are the union of value names in order
    of first appearance; empty cells for absent columns and null."""
    path = write("cap3.cobs", b"".join(cobs(p) for p in all_packets()))
    rc, out, err = run(["decode", "-c", CFG, "--format", "csv", path])
    eq(rc, 0, "exit")
    text = out.decode()
    assert text.endswith("\r\n") and "\n" not in text.replace("\r\n", ""), \
        "CRLF line ends"
    rows = list(csvmod.reader(io.StringIO(text, newline="")))
    cols = ["kind", "battery", "ph", "temperature", "conductivity",
            "depth", "pressure"]
    head = ["id", "station", "time", "seq"]
    for c in cols:
        head += [c, c + "_flag"]
    eq(rows[0], head, "header")
    want = all_expected()
    eq(len(rows) - 1, len(want), "rows")
    for row, w in zip(rows[1:], want):
        eq(row[:4], [w["id"], w["station"], w["time"],
                     "" if w["seq"] is None else str(w["seq"])], "lead")
        for i, c in enumerate(cols):
            v, f = row[4 + 2 * i], row[5 + 2 * i]
            if c not in w["values"]:
                eq((v, f), ("", ""), c + " absent")
            elif w["values"][c] is None:
                eq((v, f), ("", "9"), c + " null")
            else:
                eq((v, f), (w["values"][c], str(w["flags"][c])), c)


def reject_stream():
    """good, bad check, unknown layout, broken frame, short packet, good:
    the stream and the offset each frame starts at."""
    good = reef_packet(*REEF_CASES[0])
    bad = bytearray(reef_packet(*REEF_CASES[1]))
    bad[-1] ^= 0x01
    unknown = reef_packet(*REEF_CASES[1], kind=9)
    short = bytes([2, 0, 7]) + struct.pack(
        ">H", crc16_ibm3740(bytes([2, 0, 7])))
    broken = b"\x05\x01\x02\x00"  # code 5 wants 4 bytes, 2 come
    parts = [cobs(good), cobs(bytes(bad)), cobs(unknown), broken,
             cobs(short), cobs(good)]
    offsets, at = [], 0
    for p in parts:
        offsets.append(at)
        at += len(p)
    return b"".join(parts), offsets


def test_rejects_counted_and_located():
    data, off = reject_stream()
    path = write("rejects.cobs", data)
    rc, out, err = run(["decode", "-v", "-c", CFG, path])
    eq(rc, 0, "exit (some packets decoded)")
    eq(len(out.decode().splitlines()), 8, "two good packets")
    for line in ["decode: %s: offset %d: bad check (CRC-16/IBM-3740)" %
                 (path, off[1]),
                 "decode: %s: offset %d: unknown layout (%d bytes)" %
                 (path, off[2], 25),
                 "decode: %s: offset %d: broken frame" % (path, off[3]),
                 "decode: %s: offset %d: undecodable as reef-v2:" %
                 (path, off[4])]:
        assert line in err, "missing %r in:\n%s" % (line, err)
    assert "decode: 5 frames, 8 readings, 1 bad check, 1 unknown layout, " \
        "1 broken frame, 1 undecodable" in err, err
    rc, out, err2 = run(["decode", "-c", CFG, path])
    assert "offset" not in err2, "without -v no per-packet lines"


def test_exit_codes():
    data, off = reject_stream()
    bad_only = data[len(cobs(reef_packet(*REEF_CASES[0]))):]
    bad_only = bad_only[:-len(cobs(reef_packet(*REEF_CASES[0])))]
    eq(run(["decode", "-c", CFG, write("bad.cobs", bad_only)])[0], 1,
       "no valid packet")
    eq(run(["decode", "-c", CFG, write("empty.cobs", b"")])[0], 1, "empty")
    eq(run(["decode", "-c", CFG, "--bogus"])[0], 2, "unknown option")
    eq(run(["decode", "-c", CFG, "--framing", "zigzag"])[0], 2, "framing")
    eq(run(["decode", "-c", CFG, "--format", "xml"])[0], 2, "format")
    eq(run(["decode", "-c", CFG, "--received", "yesterday"])[0], 2, "time")
    eq(run(["decode"])[0], 2, "no layouts")
    eq(run(["decode", "-c", CFG, "-l", os.path.join(TMP, "reef-v2.json")]
           )[0], 2, "-c with -l")
    rc, out, err = run(["decode", "-c", CFG, os.path.join(TMP, "nope.bin")])
    eq(rc, 2, "missing file")
    assert "nope.bin" in err and "No such file" in err, err
    broken_cfg = write("broken.json", b'{"layouts": ["missing.json"],'
                       b' "stashuns": {}}')
    rc, out, err = run(["decode", "-c", broken_cfg])
    eq(rc, 2, "bad config")
    assert "broken.json" in err, err
    rc, out, err = run(["decode", "--help"])
    eq(rc, 0, "--help")
    assert "usage: tidepost decode" in out.decode()


def test_layout_files_only():
    """-l: station numbers as text, nothing logged about them."""
    path = write("l.cobs", b"".join(cobs(p) for p in all_packets()))
    rc, out, err = run(["decode", "-l", os.path.join(TMP, "reef-v2.json"),
                        "-l", os.path.join(TMP, "buoy-v1.json"), path])
    eq(rc, 0, "exit")
    got = parse_ndjson(out)
    eq([g["station"] for g in got], ["7"] * 8 + ["12"] * 4 + ["3", "3", "9"],
       "stations")
    eq(got[0]["id"], "7-1796020500-118-0", "id")
    assert "not in the config" not in err, err


def test_received_time():
    """received: the file's modification time; stdin: now."""
    path = write("m.sbd", reef_packet(*REEF_CASES[0]))
    os.utime(path, (1796030000, 1796030000))
    rc, out, err = run(["decode", "-c", CFG, path])
    eq(parse_ndjson(out)[0]["received"], rfc3339(1796030000), "mtime")
    before = int(timemod.time())
    rc, out, err = run(["decode", "-c", CFG, "-"],
                       stdin=cobs(reef_packet(*REEF_CASES[0])))
    after = int(timemod.time())
    got = parse_ndjson(out)[0]["received"]
    assert rfc3339(before) <= got <= rfc3339(after), got
    rc, out, err = run(["decode", "-c", CFG, "--received", "1796030001",
                        path])
    eq(parse_ndjson(out)[0]["received"], rfc3339(1796030001), "unix s")


def peak_rss_kb(args):
    """Peak RSS of one run of the binary, measured by a fresh Python
    whose only child it is (RUSAGE_CHILDREN)."""
    code = ("import resource,subprocess,sys\n"
            "p=subprocess.run(sys.argv[1:],stdout=subprocess.DEVNULL,"
            "stderr=subprocess.PIPE)\n"
            "sys.stderr.write(p.stderr.decode())\n"
            "print(p.returncode, resource.getrusage("
            "resource.RUSAGE_CHILDREN).ru_maxrss)\n")
    p = subprocess.run([sys.executable, "-c", code, TIDEPOST] + args,
                       stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                       timeout=300)
    rc, kb = p.stdout.split()
    return int(rc), int(kb), p.stderr.decode()


def test_memory_stays_flat():
    """200000 packets (4.4 MB) decode in the memory of 10 packets."""
    one = cobs(buoy_packet(3, 3600000, 53.71, -250, 1013.25))
    small = write("small.cobs", one * 10)
    big = write("big.cobs", one * 200000)
    rc, kb_small, err = peak_rss_kb(["decode", "-c", CFG, small])
    eq(rc, 0, "small")
    rc, kb_big, err = peak_rss_kb(["decode", "-c", CFG, "--format", "csv",
                                   big])
    eq(rc, 0, "big")
    assert "decode: 200000 frames, 200000 readings," in err, err
    assert kb_big < kb_small + 2048, (kb_small, kb_big)
    if not os.environ.get("TIDEPOST_EMULATOR"):  # qemu counts its own RSS
        assert kb_big < 16384, kb_big


def test_command_line():
    """--help, --version, help COMMAND, check, unknown commands."""
    rc, out, err = run(["--help"])
    eq(rc, 0, "--help")
    for cmd in ["run", "decode", "encode", "replay", "status", "ring",
                "check"]:
        assert re.search(r"^  %s +\S" % cmd, out.decode(), re.M), cmd
    rc, out, err = run(["--version"])
    eq((rc, out), (0, b"tidepost 0.1.0\n"), "--version")
    for cmd in ["decode", "encode", "check"]:
        rc, out, err = run(["help", cmd])
        eq(rc, 0, "help " + cmd)
        assert out.decode().startswith("usage: tidepost " + cmd), out
    eq(run(["help", "frobnicate"])[0], 2, "help of an unknown command")
    rc, out, err = run(["frobnicate"])
    eq(rc, 2, "unknown command")
    assert "unknown command 'frobnicate'" in err, err
    eq(run([])[0], 2, "no command")
    # a config without inputs or outputs cannot be run: refused at once
    rc, out, err = run(["run", "-c", CFG, "--once"])
    assert rc != 0, (rc, err)
    assert "input" in err or "output" in err, err
    rc, out, err = run(["check", "-c", CFG])
    eq((rc, out.decode()), (0, "check: %s: ok: 2 layouts, 2 stations, "
                            "0 inputs, 0 outputs\n" % CFG), "check ok")
    bad = write("bad-config.json", b'{"layouts": ["reef-v2.json"], '
                b'"stations": {"7": {"nmae": "x"}}}')
    rc, out, err = run(["check", "-c", bad])
    eq(rc, 1, "check finds problems")
    assert "bad-config.json:1:" in err and "nmae" in err, err
    eq(run(["check"])[0], 2, "check without -c")
    eq(run(["check", "-c", CFG, "extra"])[0], 2, "check with an operand")
    rc, out, err = run(["decode", "-c"])
    eq(rc, 2, "-c without a value")
    assert "option -c needs a value" in err, err


def main():
    global TMP, CFG
    TMP = tempfile.mkdtemp(prefix="tp-decode-")
    try:
        CFG = write_setup(TMP)
        Runner().run([test_ndjson_values, test_numbers_read_back,
                      test_framings_agree, test_csv,
                      test_rejects_counted_and_located, test_exit_codes,
                      test_layout_files_only, test_received_time,
                      test_memory_stays_flat, test_command_line])
    finally:
        shutil.rmtree(TMP, ignore_errors=True)


if __name__ == "__main__":
    main()
