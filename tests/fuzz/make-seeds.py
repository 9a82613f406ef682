#!/usr/bin/python3
"""Write the seed corpora of the fuzz targets (tests/fuzz/corpus/<target>/).

Run from the repository root: /usr/bin/python3 tests/fuzz/make-seeds.py
The output is deterministic; the files are committed.  Seeds are small and
each one aims at a path of its target: the packet values are invented
(the demo's invented scenario).  Old seed files (seed-*) are replaced;
files libFuzzer added under other names are left alone.
"""

import binascii
import os
import struct

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "corpus")


def crc32c(data):
    """CRC-32/ISCSI (Castagnoli): reflected poly 0x82F63B78, init and
    xorout 0xFFFFFFFF; catalogue check 0xE3069283."""
    crc = 0xFFFFFFFF
    for b in data:
        crc ^= b
        for _ in range(8):
            crc = (crc >> 1) ^ (0x82F63B78 if crc & 1 else 0)
    return crc ^ 0xFFFFFFFF


assert crc32c(b"123456789") == 0xE3069283
assert binascii.crc_hqx(b"123456789", 0xFFFF) == 0x29B1  # IBM-3740


def bits_big(fields):
    """(value, width) pairs packed most-significant bit first."""
    acc, n = 0, 0
    for v, w in fields:
        acc = (acc << w) | (v & ((1 << w) - 1))
        n += w
    pad = -n % 8
    return (acc << pad).to_bytes((n + pad) // 8, "big")


def bits_little(fields):
    """(value, width) pairs packed least-significant bit first."""
    acc, n = 0, 0
    for v, w in fields:
        acc |= (v & ((1 << w) - 1)) << n
        n += w
    return acc.to_bytes((n + 7) // 8, "little")


def demo_packet(seq, ph=1550, temp=750, cond=56000, oxy=2050):
    """A quillet-v1 packet (42 bytes, valid CRC)."""
    head = struct.pack(">BHHIHbB", 3, 23, seq, 1930000000 + 3600 * seq,
                       12480, 31, 58)
    recs = bits_big([x for k in range(4) for x in
                     ((ph + k, 12), (temp - k, 12), (cond + k, 17),
                      (oxy + k, 12))])
    body = head + recs
    return body + struct.pack(">H", binascii.crc_hqx(body, 0xFFFF))


def count_packet(n):
    """Layout "count" of fuzz_decode.c (little-endian, CRC-32/ISCSI)."""
    head = struct.pack("<BHIIBh", 0x42, 7, 99, 16000000, n, 1240)
    recs = bits_little([x for k in range(n) for x in
                        ((10 * k, 10), (-900 + k, 13), (28000, 16), (0, 3),
                         (410, 10), (5100, 14))])
    body = head + recs
    return body + struct.pack("<I", crc32c(body))


def wide_packet():
    body = struct.pack(">BBIfd", 9, 4, 1930000000, 12.5, -3.25)
    body += (70000).to_bytes(3, "big") + (-1234 & 0xFFFFFF).to_bytes(3, "big")
    body += struct.pack(">Qq", 2 ** 63 + 5, -77) + bytes([0x85])
    return body + bytes([sum(body) & 0xFF])


def bare_packet():
    body = bytes([5, 120]) + bits_little(
        [x for k in range(3) for x in ((800 + k, 11), (-7 * k, 13),
                                       (k, 5))])
    x = 0
    for b in body[1:]:
        x ^= b
    return body + bytes([x])


def cobs(p):
    out, block = bytearray(), bytearray()
    for b in p:
        if b == 0:
            out += bytes([len(block) + 1]) + block
            block = bytearray()
        else:
            block.append(b)
            if len(block) == 254:
                out += b"\xff" + block
                block = bytearray()
    out += bytes([len(block) + 1]) + block
    return bytes(out) + b"\0"


def slip(p):
    return b"\xc0" + p.replace(b"\xdb", b"\xdb\xdd").replace(
        b"\xc0", b"\xdb\xdc") + b"\xc0"


def frame_seeds():
    p1, p2 = demo_packet(1), demo_packet(2)
    hdr = bytes([42, 1, 2, 3, 4])  # fixed:43 (1 + 42 % 64), chunk seed
    return {
        "cobs-two": hdr + cobs(p1) + cobs(p2),
        "cobs-zeros": hdr + cobs(bytes(10) + b"\x01\x00\x02") + cobs(b"\0"),
        "cobs-long-run": hdr + cobs(bytes(range(1, 256)) * 2),
        "cobs-broken": hdr + b"\x05\x01\x02\x00" + cobs(p1) + b"\xff\x00",
        "slip-two": hdr + slip(p1) + slip(b"\xc0\xdb\x00"),
        "slip-bad-escape": hdr + b"\xc0\x01\xdb\x07\x02\xc0" + slip(p2),
        "hex-lines": hdr + (p1.hex() + "\r\n" + p2.hex().upper() +
                            "\n 0a 0B\tff \n\n").encode(),
        "hex-odd": hdr + b"abc\nzz\n0102" + b"0" * 9000 + b"\n01\n",
        "fixed-42": bytes([41, 9, 9, 9, 9]) + p1 + p2 + p1[:5],
        "mixed": hdr + cobs(p1) + slip(p2) + b"0102\n" + bytes(range(256)),
        "tiny": bytes([0, 0, 0, 0, 0, 0]),
    }


def decode_seeds():
    d = demo_packet(7)
    return {
        "demo-valid": bytes([0]) + d,
        "demo-fix": bytes([4]) + d[:40],
        "demo-missing": bytes([0]) + demo_packet(8, 4095, 2047, 131071,
                                                 4095),
        "demo-range": bytes([0]) + demo_packet(9, 4000, 2046, 90000, 4090),
        "demo-badcrc": bytes([0]) + d[:-1] + bytes([d[-1] ^ 1]),
        "count-3": bytes([1]) + count_packet(3),
        "count-0": bytes([1]) + count_packet(0),
        "count-40": bytes([5]) + count_packet(40),
        "count-too-many": bytes([5]) + count_packet(2)[:11] + b"\xff" * 20,
        "wide": bytes([2]) + wide_packet(),
        "wide-fix-nan": bytes([6]) + wide_packet()[:6] + b"\x7f\xc0\0\0" +
        b"\xff" * 8 + wide_packet()[18:],
        "bare": bytes([3]) + bare_packet(),
        "bare-fix": bytes([7]) + bare_packet()[:-1] + b"\0",
        "short": bytes([0, 3, 0]),
    }


def config_seeds():
    base = os.path.join(os.path.dirname(ROOT), "..", "..", "demo")
    with open(os.path.join(base, "config.json"), "rb") as f:
        demo_cfg = f.read()
    return {
        "demo-config": demo_cfg,
        "minimal": b'{ "layouts": [ "layouts/quillet-v1.json" ] }\n',
        "comments": b'// c\n{ /* x */ "layouts": ["layouts/quillet-v1.json"]'
                    b', "stations": { "23": { "name": "qr-flat" } } }',
        "unknown-key": b'{ "layotus": [], "stations": {} }',
        "missing-layout": b'{ "layouts": [ "layouts/nope.json" ] }',
        "outputs": b'{ "layouts": ["layouts/quillet-v1.json"], "outputs": ['
                   b'{ "kind": "http", "name": "d", "url": '
                   b'"https://example.org/in", "batch": 100, '
                   b'"headers": { "X-A": "b" }, "rename": { "ph": "pH" } },'
                   b'{ "kind": "file", "path": "out.ndjson" } ],'
                   b'"inputs": [ { "kind": "serial", "device": "/dev/null",'
                   b'"baud": 9600, "framing": "fixed:42" },'
                   b'{ "kind": "tcp", "host": "127.0.0.1", "port": 4001 } ],'
                   b'"alerts": { "to": [ { "kind": "exec", "argv": '
                   b'["/bin/true", "x"] } ], "silent_after_s": 60 } }',
        "bad-syntax": b'{ "layouts": [ "a", ], "x": tru }',
        "deep": b"[" * 200 + b"]" * 200,
        "nul-in-string": b'{ "stations": { "1": { "name": "a\x00b" } } }',
        "bad-utf8": b'{ "stations": { "1": { "name": "\xc3\x28" } } }',
        "empty": b"",
    }


def write(target, seeds):
    d = os.path.join(ROOT, target)
    os.makedirs(d, exist_ok=True)
    for name in os.listdir(d):
        if name.startswith("seed-"):
            os.remove(os.path.join(d, name))
    for name, data in sorted(seeds.items()):
        with open(os.path.join(d, "seed-" + name), "wb") as f:
            f.write(data)
    print("make-seeds: %s: %d seeds" % (target, len(seeds)))


def main():
    write("fuzz_frame", frame_seeds())
    write("fuzz_decode", decode_seeds())
    write("fuzz_config", config_seeds())


if __name__ == "__main__":
    main()
