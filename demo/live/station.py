#!/usr/bin/python3
"""station.py - an INVENTED station for the live demo (standard library).

INVENTED DEMO SCENARIO: station 23 "qr-flat" on the made-up Quillet Reef
flat, a week after the offline demo's three weeks (from 2031-03-24), and a
second invented station, 24 "qr-gate", at the made-up channel mouth.  No
real station, place, instrument or measurement is described; every number
is invented.

What it does: listens on a local TCP port, as a serial-to-network bridge
next to a logger would, and once the daemon's tcp input has connected,
writes COBS-framed packets of the demo layout (demo/layouts/quillet-v1.json,
42 bytes, four 15-minute records a packet) at an accelerated rate: one
packet is one simulated hour and is written every --interval seconds of
real time.  Packet times advance in simulated time.

The station's own encoder (struct + a bit writer + CRC-16/IBM-3740 + COBS)
stands in for the logger firmware; --selftest compares it byte for byte
with `tidepost encode` on the same rows, so the firmware model and the
project's encoder cannot drift apart unnoticed.

Its life (the schedule run_live.py asserts on), by packet number p:
- p = 0 .. count-1, one an interval; seq counts at the station.
- every --second-every packets (from p = 5), also one packet of qr-gate.
- packet --corrupt-at goes out with one byte flipped: a bad CRC, which
  the daemon must reject (its readings are not "sent").
- from --silence-at, --silence-n packets are lost on the radio (not
  written at all; simulated time and seq keep counting), so the station
  is silent for silence_n x interval seconds and then resumes.
- the battery of qr-flat is an invented failing pack: no charging, from
  10.9 V falling 0.03 V per simulated hour towards the 6 V cut-off, so
  a battery forecast has a clear trend to find.
After the last packet it closes the link and exits.

The log (--log, NDJSON, one object a line, flushed as written):
  {"event": "listening", "port": N}
  {"event": "connected", "wall": T}
  {"event": "packet", "p": P, "station": NAME, "seq": S, "time": UNIX,
   "wall": T, "ids": [...], "good": true|false}
  {"event": "silence", "from_p": P, "n": N, "wall": T}
  {"event": "done", "wall": T, "packets": N}
wall is time.time() just after the frame was written to the socket; ids
are the reading ids the daemon will give the packet's records (WIRE.md:
station-packettime-seq-record).

Usage: station.py [--port 0] --log FILE [options]
       station.py --selftest TIDEPOST LAYOUT
"""

import argparse
import json
import math
import os
import random
import socket
import struct
import subprocess
import sys
import tempfile
import time
from datetime import datetime, timezone

START = int(datetime(2031, 3, 24, tzinfo=timezone.utc).timestamp())
KIND = 3
RECORD_S = 900
STATIONS = {23: "qr-flat", 24: "qr-gate"}  # invented, as in live.json
SEED = 20310324
BATT0, BATT_PER_H = 10.9, 0.03  # invented failing pack, V and V/h
M2_H = 12.4206  # principal lunar semidiurnal period, hours [from memory]

# Record fields of quillet-v1: name, bits, signed, scale, offset, missing.
RECORD_FIELDS = (
    ("ph", 12, False, 0.001, 6.5, 4095),
    ("temperature", 12, True, 0.01, 20.0, 2047),
    ("conductivity", 17, False, 0.001, 0.0, 131071),
    ("oxygen", 12, False, 0.1, 0.0, 4095),
)
COLUMNS = ["kind", "station", "seq", "time", "battery", "logger_temp",
           "logger_rh", "ph", "temperature", "conductivity", "oxygen"]


# ---- the encoder (the logger firmware, modelled) ------------------------

def crc16_ibm3740(data):
    """CRC-16/IBM-3740: poly 0x1021, init 0xFFFF, no reflection, xorout 0
    (Greg Cook's CRC catalogue; check value of "123456789" is 0x29B1)."""
    crc = 0xFFFF
    for b in data:
        crc ^= b << 8
        for _ in range(8):
            crc = ((crc << 1) ^ 0x1021) if crc & 0x8000 else crc << 1
            crc &= 0xFFFF
    return crc


def cobs(data):
    """COBS (Cheshire & Baker 1999) of data, with the 0x00 delimiter."""
    out, block = bytearray(), bytearray()
    for b in data:
        if b == 0:
            out += bytes([len(block) + 1]) + block
            block = bytearray()
        else:
            block.append(b)
            if len(block) == 254:
                out += b"\xff" + block
                block = bytearray()
    out += bytes([len(block) + 1]) + block
    return bytes(out) + b"\x00"


def raw_value(v, bits, signed, scale, offset, missing):
    """Field value -> raw integer (two's complement when signed)."""
    if v is None:
        return missing
    r = int(round((v - offset) / scale))
    if signed:
        lo, hi = -(1 << (bits - 1)), (1 << (bits - 1)) - 1
        r = max(lo, min(hi, r))
        return r & ((1 << bits) - 1)
    return max(0, min((1 << bits) - 1, r))


def packet(station, seq, t, batt, ltemp, lrh, records):
    """One 42-byte quillet-v1 packet: 13-byte big-endian header, 4 records
    of 53 bits MSB first, 4 zero bits, CRC of bytes 0..39 big-endian."""
    head = struct.pack(">BHHIHbB", KIND, station, seq, t,
                       int(round(batt / 0.001)), ltemp, lrh)
    acc, nbits = 0, 0
    for rec in records:
        for name, bits, signed, scale, offset, missing in RECORD_FIELDS:
            acc = (acc << bits) | raw_value(rec[name], bits, signed,
                                             scale, offset, missing)
            nbits += bits
    acc <<= 320 - 104 - nbits  # spare bits up to byte 40 are zero
    body = head + acc.to_bytes(27, "big")
    return body + struct.pack(">H", crc16_ibm3740(body))


# ---- the invented values ---------------------------------------------------

def record_values(rng, hours, gate):
    """Invented reef-flat values at `hours` since START; the gate station
    sits in deeper, better-mixed water: smaller swings."""
    hod = (hours + 0.0) % 24
    tide = math.cos(2 * math.pi * (hours - 1.7) / M2_H)
    bio = -math.cos(2 * math.pi * (hod - 4) / 24) * (0.4 if gate else 0.9)
    temp = 27.3 + 0.7 * max(0.0, math.sin(math.pi * (hod - 6) / 12)) \
        - 0.4 * tide + rng.gauss(0, 0.03)
    return {
        "ph": round(8.04 + 0.09 * bio + rng.gauss(0, 0.004), 3),
        "temperature": round(temp, 2),
        "conductivity": round(53.4 + 0.45 * tide + rng.gauss(0, 0.02), 3),
        "oxygen": round(205 + 50 * bio + rng.gauss(0, 2.5), 1),
    }


def rows_of(rng, number, p):
    """The four CSV-style rows of station `number`'s packet p."""
    gate = number == 24
    hours0 = p
    batt = 12.4 - 0.002 * p if gate else BATT0 - BATT_PER_H * p
    batt = round(batt + rng.gauss(0, 0.004), 3)
    hod = p % 24
    sun = max(0.0, math.sin(math.pi * (hod - 6) / 12))
    ltemp = int(round(29 + 7 * sun))
    lrh = int(round(63 - 12 * sun))
    t0 = START + p * 3600
    out = []
    for j in range(4):
        r = {"kind": KIND, "station": number, "seq": p % 65536,
             "time": t0 + j * RECORD_S, "battery": batt,
             "logger_temp": ltemp, "logger_rh": lrh}
        r.update(record_values(rng, hours0 + j / 4, gate))
        out.append(r)
    return out


def encode_rows(rows):
    r0 = rows[0]
    return packet(r0["station"], r0["seq"], r0["time"], r0["battery"],
                  r0["logger_temp"], r0["logger_rh"], rows)


def reading_ids(rows):
    """The ids the daemon gives these readings (WIRE.md: station name,
    packet time, seq, record index)."""
    r0 = rows[0]
    name = STATIONS.get(r0["station"], str(r0["station"]))
    return ["%s-%d-%d-%d" % (name, r0["time"], r0["seq"], k)
            for k in range(len(rows))]


# ---- the schedule ----------------------------------------------------------

def schedule(a):
    """Every frame the station will try to write, in order: dicts with
    p, number, rows, frame, good, lost (lost: not written, radio down)."""
    rng = random.Random(SEED)
    out = []
    for p in range(a.count):
        rows = rows_of(rng, 23, p)
        pk = encode_rows(rows)
        good = p != a.corrupt_at
        if not good:
            pk = pk[:20] + bytes([pk[20] ^ 0x5A]) + pk[21:]
        lost = a.silence_at <= p < a.silence_at + a.silence_n
        out.append({"p": p, "number": 23, "rows": rows, "frame": cobs(pk),
                    "good": good, "lost": lost})
        if a.second_every and p >= 5 and (p - 5) % a.second_every == 0:
            rows2 = rows_of(rng, 24, p)
            out.append({"p": p, "number": 24, "rows": rows2,
                        "frame": cobs(encode_rows(rows2)), "good": True,
                        "lost": lost})
    return out


class Log:
    def __init__(self, path):
        self.f = open(path, "a")

    def write(self, **obj):
        self.f.write(json.dumps(obj, sort_keys=True) + "\n")
        self.f.flush()


def serve(a):
    log = Log(a.log)
    ls = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
    ls.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    ls.bind(("127.0.0.1", a.port))
    ls.listen(1)
    port = ls.getsockname()[1]
    print("station: INVENTED station qr-flat (and qr-gate) listening on "
          "127.0.0.1:%d" % port, flush=True)
    log.write(event="listening", port=port)
    ls.settimeout(a.connect_timeout)
    try:
        conn, _ = ls.accept()
    except socket.timeout:
        print("station: nobody connected within %g s" % a.connect_timeout,
              file=sys.stderr)
        return 1
    conn.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
    log.write(event="connected", wall=time.time())
    plan = schedule(a)
    t_next = time.monotonic()
    silent_logged = False
    written = 0
    for item in plan:
        if item["number"] == 23:
            t_next += a.interval
            delay = t_next - time.monotonic()
            if delay > 0:
                time.sleep(delay)
        if item["lost"]:
            if not silent_logged:
                log.write(event="silence", from_p=item["p"], n=a.silence_n,
                          wall=time.time())
                print("station: radio silent for %d packets (%.1f s)"
                      % (a.silence_n, a.silence_n * a.interval), flush=True)
                silent_logged = True
            continue
        conn.sendall(item["frame"])
        written += 1
        r0 = item["rows"][0]
        log.write(event="packet", p=item["p"], station=STATIONS[r0["station"]],
                  seq=r0["seq"], time=r0["time"], wall=time.time(),
                  ids=reading_ids(item["rows"]), good=item["good"])
    log.write(event="done", wall=time.time(), packets=written)
    print("station: done, %d frames written; closing the link" % written,
          flush=True)
    conn.shutdown(socket.SHUT_WR)
    conn.close()
    ls.close()
    return 0


# ---- cross-check with `tidepost encode` ------------------------------------

def selftest(tidepost, layout):
    """Encode a few packets (both stations, one with a missing value and
    one with a negative temperature offset) with this encoder and with
    `tidepost encode`; every byte must agree."""
    rng = random.Random(SEED)
    rows = rows_of(rng, 23, 0) + rows_of(rng, 24, 7) + rows_of(rng, 23, 41)
    rows[5]["ph"] = None
    rows[9]["temperature"] = 7.25  # below the field's offset of 20 degC
    mine = b"".join(cobs(encode_rows(rows[i:i + 4]))
                    for i in range(0, len(rows), 4))
    with tempfile.NamedTemporaryFile("w", suffix=".csv", delete=False) as f:
        f.write(",".join(COLUMNS) + "\n")
        for r in rows:
            cells = []
            for c in COLUMNS:
                v = r[c]
                if c == "time":
                    v = datetime.fromtimestamp(v, timezone.utc) \
                        .strftime("%Y-%m-%dT%H:%M:%SZ")
                cells.append("" if v is None else str(v))
            f.write(",".join(cells) + "\n")
        path = f.name
    try:
        p = subprocess.run([tidepost, "encode", "-l", layout, "--framing",
                            "cobs", path], stdout=subprocess.PIPE,
                           stderr=subprocess.PIPE, timeout=30)
    finally:
        os.unlink(path)
    if p.returncode != 0:
        print("station: selftest: tidepost encode failed: %s"
              % p.stderr.decode(errors="replace"), file=sys.stderr)
        return 1
    if p.stdout != mine:
        print("station: selftest: encoders disagree\n  station:  %s\n"
              "  tidepost: %s" % (mine.hex(), p.stdout.hex()),
              file=sys.stderr)
        return 1
    assert crc16_ibm3740(b"123456789") == 0x29B1
    print("station: selftest: %d packets byte-identical to tidepost encode"
          % (len(rows) // 4))
    return 0


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--selftest", nargs=2, metavar=("TIDEPOST", "LAYOUT"))
    ap.add_argument("--port", type=int, default=0)
    ap.add_argument("--log")
    ap.add_argument("--interval", type=float, default=0.15)
    ap.add_argument("--count", type=int, default=160)
    ap.add_argument("--second-every", type=int, default=25)
    ap.add_argument("--corrupt-at", type=int, default=42)
    ap.add_argument("--silence-at", type=int, default=110)
    ap.add_argument("--silence-n", type=int, default=40)
    ap.add_argument("--connect-timeout", type=float, default=30)
    a = ap.parse_args()
    if a.selftest:
        return selftest(*a.selftest)
    if not a.log:
        ap.error("--log is required")
    return serve(a)


if __name__ == "__main__":
    sys.exit(main())
