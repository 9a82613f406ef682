#!/usr/bin/python3
"""A straightforward Python decoder of the demo layout (quillet-v1), the
way a practitioner would write one for a single packet format: read the
archive, split at 0x00, COBS-decode, check the CRC, struct.unpack the
header, shift the record bits out of one big int, json.dumps per reading.
It is the benchmark's point of comparison for `tidepost decode` and it
writes the same NDJSON shape (WIRE.md).  Part of the invented demo
scenario: the station and its data are made up.

Usage: pydecode.py [--limit PACKETS] ARCHIVE > readings.ndjson
"""

import argparse
import binascii
import json
import os
import struct
import sys
import time

HEADER = struct.Struct(">BHHIHbB")
STATIONS = {23: "qr-flat"}
RANGES = {"battery": (0, 16), "logger_temp": (-20, 70),
          "logger_rh": (0, 100), "ph": (6.5, 9.0),
          "temperature": (-2, 40), "conductivity": (0, 82),
          "oxygen": (0, 400)}


def cobs_decode(frame):
    out = bytearray()
    i, n = 0, len(frame)
    while i < n:
        code = frame[i]
        if code == 0 or i + code > n:
            return None
        out += frame[i + 1:i + code]
        i += code
        if code < 0xFF and i < n:
            out.append(0)
    return bytes(out)


def flag(name, v):
    if v is None:
        return 9
    if name not in RANGES:  # no range in the layout: passes
        return 1
    lo, hi = RANGES[name]
    return 1 if lo <= v <= hi else 4


def readings(pkt, received):
    kind, st, seq, t, batt, ltemp, lrh = HEADER.unpack_from(pkt)
    name = STATIONS.get(st, str(st))
    bits = int.from_bytes(pkt[13:40], "big") >> 4
    head = {"kind": kind, "battery": round(batt * 0.001, 3),
            "logger_temp": ltemp, "logger_rh": lrh}
    for k in range(4):
        rec = (bits >> (53 * (3 - k))) & ((1 << 53) - 1)
        ph = rec >> 41
        tr = (rec >> 29) & 0xFFF
        cond = (rec >> 12) & 0x1FFFF
        oxy = rec & 0xFFF
        if tr >= 0x800:
            tr -= 0x1000
        vals = dict(head)
        vals["ph"] = None if ph == 4095 else round(ph * 0.001 + 6.5, 3)
        vals["temperature"] = None if tr == 2047 else round(
            tr * 0.01 + 20, 2)
        vals["conductivity"] = None if cond == 131071 else round(
            cond * 0.001, 3)
        vals["oxygen"] = None if oxy == 4095 else round(oxy * 0.1, 1)
        rt = t + 900 * k
        yield {"id": "%s-%d-%d-%d" % (name, t, seq, k), "station": name,
               "seq": seq, "layout": "quillet-v1",
               "time": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime(rt)),
               "received": received, "values": vals,
               "flags": {n: flag(n, v) for n, v in vals.items()}}


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--limit", type=int, default=0)
    ap.add_argument("archive")
    args = ap.parse_args()
    with open(args.archive, "rb") as f:
        data = f.read()
    # received: the archive's modification time, as tidepost decode does
    received = time.strftime("%Y-%m-%dT%H:%M:%SZ",
                             time.gmtime(os.stat(args.archive).st_mtime))
    out = sys.stdout
    n = broken = bad = 0
    for frame in data.split(b"\0"):
        if not frame:
            continue
        if args.limit and n >= args.limit:
            break
        n += 1
        pkt = cobs_decode(frame)
        if pkt is None or len(pkt) != 42 or pkt[0] != 3:
            broken += 1
            continue
        if binascii.crc_hqx(pkt[:40], 0xFFFF) != \
                struct.unpack_from(">H", pkt, 40)[0]:
            bad += 1
            continue
        for r in readings(pkt, received):
            out.write(json.dumps(r) + "\n")
    print("pydecode: %d frames, %d broken, %d bad checks" % (n, broken, bad),
          file=sys.stderr)


if __name__ == "__main__":
    main()
