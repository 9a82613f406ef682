#!/usr/bin/python3
"""Write a COBS archive of demo packets (layout demo/layouts/quillet-v1.json)
for the benchmark, fast: struct + int bit packing, CRC-16/IBM-3740 from
binascii.crc_hqx (poly 0x1021, init 0xFFFF, no reflection, no xorout: the
catalogue's CRC-16/IBM-3740, check 0x29B1), COBS by splitting at zeros
(every packet is under 254 bytes, so no run needs a 0xFF block).

The values are invented (part of the invented demo scenario) but plausible,
drawn once for 4096 record blocks and reused; every packet has its own seq,
time and CRC.

Usage: mkarchive.py -n PACKETS -o FILE [--prefix N PREFIX_FILE]
"""

import argparse
import binascii
import math
import random
import struct

KIND, STATION = 3, 23
T0 = 631152000  # 1990-01-01T00:00:00Z: 1e6 hourly packets fit in u32
HEADER = struct.Struct(">BHHIHbB")  # 13 bytes
REC_BITS = (12, 12, 17, 12)


def record_raw(rng, k):
    """Raw values of one invented record: ph, temperature, cond, oxygen."""
    day = math.sin(2 * math.pi * (k % 96) / 96)
    ph = round((8.05 + 0.09 * day + rng.gauss(0, 0.005) - 6.5) / 0.001)
    t = round((27.5 + 0.8 * day + rng.gauss(0, 0.05) - 20) / 0.01)
    c = round((56.0 + 0.6 * day + rng.gauss(0, 0.05)) / 0.001)
    o = round((205 + 50 * day + rng.gauss(0, 2)) / 0.1)
    return ph, t & 0xFFF, c, o


def record_blocks(rng, n):
    """n byte strings of 4 packed records plus 4 zero pad bits (27 B)."""
    out = []
    for i in range(n):
        acc = 0
        for j in range(4):
            for v, w in zip(record_raw(rng, i * 4 + j), REC_BITS):
                acc = (acc << w) | v
        out.append((acc << 4).to_bytes(27, "big"))
    return out


def packet(seq, time_s, batt_mv, ltemp, lrh, block):
    body = HEADER.pack(KIND, STATION, seq & 0xFFFF, time_s, batt_mv,
                       ltemp, lrh) + block
    return body + struct.pack(">H", binascii.crc_hqx(body, 0xFFFF))


def cobs(pkt):
    """COBS (Cheshire & Baker 1999) of a packet shorter than 254 bytes,
    with the 0x00 delimiter."""
    return b"".join(bytes((len(s) + 1,)) + s for s in pkt.split(b"\0")) \
        + b"\0"


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("-n", type=int, required=True)
    ap.add_argument("-o", required=True)
    ap.add_argument("--prefix", nargs=2, metavar=("N", "FILE"))
    args = ap.parse_args()
    rng = random.Random(1990)
    blocks = record_blocks(rng, 4096)
    pre_n = int(args.prefix[0]) if args.prefix else -1
    pre = open(args.prefix[1], "wb") if args.prefix else None
    with open(args.o, "wb") as f:
        chunk = []
        for i in range(args.n):
            batt = 12600 - (i % 20000) // 4
            fr = cobs(packet(i, T0 + 3600 * i, batt, 25 + i % 13,
                             50 + i % 30, blocks[i % 4096]))
            chunk.append(fr)
            if pre is not None and i < pre_n:
                pre.write(fr)
            if len(chunk) == 65536:
                f.write(b"".join(chunk))
                chunk = []
        f.write(b"".join(chunk))
    if pre is not None:
        pre.close()


if __name__ == "__main__":
    main()
